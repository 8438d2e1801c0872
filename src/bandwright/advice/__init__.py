"""What would work instead, attached to the failing checks of a plan.

| module | answers |
| --- | --- |
| ``order`` | a stopband that needs an order above the largest: which order, what fits |
| ``gain`` | a chain that clips: the largest gain that fits, planned again to make sure |
| ``tolerance`` | a yield below target: the tighter parts that reach it |

A section no topology builds with the op-amp given is answered in ``planner._nearest_fix``
with a faster op-amp class.
"""

from __future__ import annotations

from bandwright.advice.gain import with_gain_advice
from bandwright.advice.order import (MAX_BUILT_ORDER, frequency_of_omega, omega_for_loss,
                                     order_beyond_reach, prototype_loss_db)
from bandwright.advice.tolerance import plan_yield, tighter_offer

__all__ = ["MAX_BUILT_ORDER", "prototype_loss_db", "omega_for_loss", "frequency_of_omega",
           "order_beyond_reach", "with_gain_advice", "tighter_offer", "plan_yield"]
