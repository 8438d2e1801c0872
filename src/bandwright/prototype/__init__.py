"""Lowpass prototypes (Butterworth, Chebyshev I) and the order a mask needs."""

from bandwright.prototype.poles import (
    Prototype,
    butterworth_poles,
    chebyshev_poles,
    prototype,
    prototype_response,
)
from bandwright.prototype.order import (
    bandpass_omega,
    minimum_order,
    order_for_point,
)

__all__ = [
    "Prototype",
    "butterworth_poles",
    "chebyshev_poles",
    "prototype",
    "prototype_response",
    "bandpass_omega",
    "minimum_order",
    "order_for_point",
]
