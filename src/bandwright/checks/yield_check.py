"""The `yield` check: the Monte Carlo share of built chains that meet the requirement."""

from __future__ import annotations

import math

from bandwright.analysis.montecarlo import YieldResult
from bandwright.checks.base import Check

__all__ = ["yield_checks"]


def _pct(x: float) -> str:
    return f"{100 * x:.1f} %"


def yield_checks(result: YieldResult) -> list[Check]:
    """One chain-wide check: pass when the yield reaches `tolerance.min_yield`.

    Parameters
    ----------
    result : YieldResult
        From ``advice.tolerance.plan_yield`` (its `offer` is quoted when the yield
        falls short).

    Returns
    -------
    list of Check
        One record, id "yield", value and limit as shares (0 to 1).
    """
    sp = result.spreads
    lo, hi = result.interval
    ok = result.meets_target
    parts = (f"R ±{sp.resistor_pct:g} % ({sp.resistor_source}), C ±{sp.capacitor_pct:g} % "
             f"({sp.capacitor_source}), GBW ±{sp.gbw_spread_pct:g} %, {sp.distribution}")
    msg = (f"{_pct(result.yield_fraction)} of {result.samples} boards are stable and "
           f"meet the mask and headroom (95 % interval {_pct(lo)}–{_pct(hi)}; target {_pct(result.min_yield)}); "
           f"{parts}; seed {result.seed}")
    if ok and lo < result.min_yield:
        msg += "; the interval reaches below the target: more samples would settle it"
    if not ok:
        fails = ", ".join(f"{k} {v}" for k, v in result.fail_counts.items() if v)
        margin = result.nominal_margin_db
        msg += f"; failing: {fails or 'none'}; " + (
            f"nominal margin {margin:.3g} dB" if math.isfinite(margin)
            else "the nominal board is unstable")
        if result.drivers:
            msg += "; decided most by " + ", ".join(
                f"{d.part} of stage {d.stage} ({100 * d.index:.0f} %)" for d in result.drivers[:3])
        if not result.nominal_passes:
            msg += "; the chain fails with nominal parts already: tighter parts cannot help"
        elif result.offer is not None:
            prefix = "tighter parts: " if result.offer.reaches else ""
            msg += "; " + prefix + result.offer.message
    return [Check(id="yield", status="pass" if ok else "fail", value=result.yield_fraction,
                  limit=result.min_yield, unit="share", message=msg)]
