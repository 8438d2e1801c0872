"""Monte Carlo yield of a built chain (see ``run`` for how the pieces fit together).

| module | holds |
| --- | --- |
| ``sampling`` | the spreads as numbers, the randomised quantities of a chain, the boards drawn |
| ``kernel`` | a batch of boards' stage polynomials; |H(jw)|^2 along the chain |
| ``verdicts`` | per board: mask, headroom, and the worst excess in dB |
| ``drivers`` | which parts decide a failure (first-order indices) |
| ``run`` | ``monte_carlo``: the run over every chunk, its ``YieldResult`` and interval |
| ``tuned`` | the tuned mode: every board trimmed by a tuning plan, then judged |

What tighter parts would give is advice: ``bandwright.advice.tolerance``.
"""

from __future__ import annotations

from bandwright.analysis.montecarlo.drivers import Driver
from bandwright.analysis.montecarlo.run import (ENVELOPE_PERCENTILES, Offer, YieldResult,
                                                monte_carlo, wilson_interval)
from bandwright.analysis.montecarlo.sampling import (CHUNK_SAMPLES, SampleColumn, Spreads,
                                                     resolve_spreads, sample_columns,
                                                     sample_values)

__all__ = ["Spreads", "SampleColumn", "Driver", "Offer", "YieldResult", "resolve_spreads",
           "sample_columns", "sample_values", "monte_carlo", "wilson_interval",
           "CHUNK_SAMPLES", "ENVELOPE_PERCENTILES"]
