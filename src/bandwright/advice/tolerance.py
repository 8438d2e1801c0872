"""Advice for a yield below its target: the tighter resistors and/or capacitors that would
reach it, found by running the Monte Carlo again with the same boards' deviations."""

from __future__ import annotations

from dataclasses import replace
from typing import Callable

from bandwright.analysis.montecarlo import Offer, YieldResult, monte_carlo
from bandwright.chain.graph import Chain
from bandwright.inputs.requirement import Requirement
from bandwright.parts.tolerance import DEFAULT_TOLERANCE_PCT, dielectric
from bandwright.parts.notation import format_sig

__all__ = ["tighter_offer", "plan_yield", "RESISTOR_STEPS_PCT", "CAPACITOR_STEPS_PCT"]

#: Tighter tolerances offered, loosest first, and the series each customarily goes with
#: (common practice; ``parts.tolerance``).
RESISTOR_STEPS_PCT = (20.0, 10.0, 5.0, 2.0, 1.0, 0.5, 0.25, 0.1)
CAPACITOR_STEPS_PCT = (20.0, 10.0, 5.0, 2.0, 1.0)
# Tolerance -> the series customarily sold at it (E6 rather than E3 at 20 %: later wins).
_GRADE = {pct: name for name, pct in DEFAULT_TOLERANCE_PCT.items()}

Progress = Callable[[int, int], None]


def _resistors(pct: float) -> str:
    g = _GRADE.get(pct)
    return f"resistors {pct:g} %" + (f" (the grade {g} values are customarily sold at)"
                                      if g else "")


def _capacitors(pct: float, chain: Chain) -> str:
    # A capacitor's grade is a matter of its dielectric, not of an E-series: name the kinds
    # the chain's capacitors are (parts.tolerance.dielectric) so the buyer knows what to ask for.
    kinds = sorted({dielectric(e.value) for st in chain.stages for e in st.elements
                    if e.kind == "C" and e.value > 0})
    return f"capacitors {pct:g} %" + (f" ({' and '.join(kinds)})" if kinds else "")


def _fmt_yield(y: float, ci: tuple[float, float]) -> str:
    return f"{100 * y:.1f} % (95 % interval {100 * ci[0]:.1f}–{100 * ci[1]:.1f} %)"


def tighter_offer(chain: Chain, requirement: Requirement, result: YieldResult, *,
                  progress: Progress | None = None) -> Offer | None:
    """Tighter resistors and/or capacitors that bring the yield up to `min_yield`.

    Parameters
    ----------
    chain : Chain
    requirement : Requirement
    result : YieldResult
        The run at the requirement's tolerances.
    progress : callable, optional

    Returns
    -------
    Offer or None
        None when the yield already meets the target, or the nominal chain fails (no
        tolerance helps then).

    Notes
    -----
    First the tightest steps of both (``RESISTOR_STEPS_PCT``, ``CAPACITOR_STEPS_PCT``):
    if even they miss the target, the offer says so. Otherwise greedy over the steps: each
    step tightens the class (resistors or capacitors) whose parts explain more of the
    failures (sum of first-order indices of the current run), or the other class when one
    has no tighter step, and re-runs the Monte Carlo on the same chain with the same seed
    (common random numbers: only the scale of each deviation changes, so the comparison is
    not blurred by new draws). It stops at the first run that meets the target. The parts
    keep their values: a tighter grade of the same series value (E96 values are E192
    values; E12 capacitors come in every grade).
    """
    if result.meets_target or not result.nominal_passes:
        return None
    sp = result.spreads

    def run(r_pct: float, c_pct: float) -> YieldResult:
        trial = replace(sp, resistor_pct=r_pct, capacitor_pct=c_pct, resistor_source="offer",
                        capacitor_source="offer")
        return monte_carlo(chain, requirement, spreads=trial, samples=result.samples,
                           seed=result.seed, envelope_hz=result.freq_hz, progress=progress,
                           with_sensitivities=False)

    # The tightest parts first: when even they miss the target, say so after one run.
    r_min = min(sp.resistor_pct, RESISTOR_STEPS_PCT[-1])
    c_min = min(sp.capacitor_pct, CAPACITOR_STEPS_PCT[-1])
    best = run(r_min, c_min)
    if not best.meets_target:
        return Offer(resistor_pct=r_min, capacitor_pct=c_min,
                     yield_fraction=best.yield_fraction, interval=best.interval, reaches=False,
                     message=f"even {_resistors(r_min)} and {_capacitors(c_min, chain)} "
                             f"give only {_fmt_yield(best.yield_fraction, best.interval)}: "
                             f"the chain itself is too sensitive or too close to the mask "
                             f"(nominal margin {format_sig(result.nominal_margin_db, 3)} dB; see the parts "
                             f"that decide it)")
    r, c = sp.resistor_pct, sp.capacitor_pct
    current = result
    while True:
        r_next = next((x for x in RESISTOR_STEPS_PCT if x < r - 1e-12), None)
        c_next = next((x for x in CAPACITOR_STEPS_PCT if x < c - 1e-12), None)
        if r_next is None and c_next is None:
            current = best
            break
        share_r = sum(d.index for d in current.drivers if d.part.startswith("R"))
        share_c = sum(d.index for d in current.drivers if d.part.startswith("C"))
        if c_next is None or (r_next is not None and share_r >= share_c):
            r = r_next
        else:
            c = c_next
        current = run(r, c) if (r, c) != (r_min, c_min) else best
        if current.meets_target:
            break
    return Offer(resistor_pct=r, capacitor_pct=c, yield_fraction=current.yield_fraction,
                 interval=current.interval, reaches=True,
                 message=f"{_resistors(r)} and {_capacitors(c, chain)} give "
                         f"{_fmt_yield(current.yield_fraction, current.interval)}")


def plan_yield(chain: Chain, requirement: Requirement, *, progress: Progress | None = None
               ) -> YieldResult:
    """The yield the planner reports.

    Parameters
    ----------
    chain : Chain
    requirement : Requirement
    progress : callable(done, total), optional

    Returns
    -------
    YieldResult
        ``monte_carlo`` at the requirement's tolerances, its `offer` set by
        ``tighter_offer`` when the yield is below `tolerance.min_yield`.
    """
    result = monte_carlo(chain, requirement, progress=progress)
    offer = tighter_offer(chain, requirement, result, progress=progress)
    return result if offer is None else replace(result, offer=offer)
