"""The `yield` check: the Monte Carlo share of built chains that meet the requirement."""

from __future__ import annotations

import math

from bandwright.analysis.montecarlo import YieldResult
from bandwright.checks.base import Check
from bandwright.parts.notation import format_fixed, format_sig

__all__ = ["yield_checks"]


def _pct(x: float) -> str:
    return f"{format_fixed(100 * x, 1)} %"


def yield_checks(result: YieldResult, *, tuning=None) -> list[Check]:
    """One chain-wide check: pass when the yield reaches `tolerance.min_yield`.

    Parameters
    ----------
    result : YieldResult
        From ``advice.tolerance.plan_yield`` (its `offer` is quoted when the yield
        falls short).
    tuning : TuningResult, optional
        When the chain has a tuning plan (``analysis.montecarlo.tuned``), the check judges
        the yield after tuning and says so.

    Returns
    -------
    list of Check
        One record, id "yield", value and limit as shares (0 to 1).
    """
    if tuning is not None:
        return [_tuned_check(result, tuning)]
    sp = result.spreads
    lo, hi = result.interval
    ok = result.meets_target
    parts = (f"R ±{format_sig(sp.resistor_pct)} % ({sp.resistor_source}), C "
             f"±{format_sig(sp.capacitor_pct)} % "
             f"({sp.capacitor_source}), GBW ±{format_sig(sp.gbw_spread_pct)} %, {sp.distribution}")
    msg = (f"{_pct(result.yield_fraction)} of {result.samples} boards are stable and "
           f"meet the mask and headroom (95 % interval {_pct(lo)}–{_pct(hi)}; target "
           f"{_pct(result.min_yield)}); "
           f"{parts}; seed {result.seed}")
    if ok and lo < result.min_yield:
        msg += "; the interval reaches below the target: more samples would settle it"
    if not ok:
        fails = ", ".join(f"{k} {v}" for k, v in result.fail_counts.items() if v)
        margin = result.nominal_margin_db
        msg += f"; failing: {fails or 'none'}; " + (
            f"nominal margin {format_sig(margin, 3)} dB" if math.isfinite(margin)
            else "the nominal board is unstable")
        if result.drivers:
            msg += "; decided most by " + ", ".join(
                f"{d.part} of stage {d.stage} ({format_fixed(100 * d.index, 0)} %)" for d in result.drivers[:3])
        if not result.nominal_passes:
            msg += "; the chain fails with nominal parts already: tighter parts cannot help"
        elif result.offer is not None:
            prefix = "tighter parts: " if result.offer.reaches else ""
            msg += "; " + prefix + result.offer.message
    return [Check(id="yield", status="pass" if ok else "fail", value=result.yield_fraction,
                  limit=result.min_yield, unit="share", message=msg)]


def _tuned_check(result: YieldResult, tuning) -> Check:
    t = tuning.tuned
    lo, hi = t.interval
    ok = t.yield_fraction >= result.min_yield
    sp = result.spreads
    n_trim = len(tuning.plan.steps)
    msg = (f"after tuning ({n_trim} trimmer{'s' if n_trim != 1 else ''}, the procedure below): "
           f"{_pct(t.yield_fraction)} of {t.samples} boards are stable and meet the mask and "
           f"headroom (95 % interval {_pct(lo)}–{_pct(hi)}; target {_pct(result.min_yield)}); "
           f"untrimmed {_pct(tuning.yield_untrimmed)}; R ±{format_sig(sp.resistor_pct)} %, C "
           f"±{format_sig(sp.capacitor_pct)} %, GBW ±{format_sig(sp.gbw_spread_pct)} %, "
           f"{sp.distribution}; seed {t.seed}; trimmed because {tuning.reason}")
    if t.unrescued:
        short = ", ".join(f"{k} {v}" for k, v in t.out_of_range.items() if v)
        fails = ", ".join(f"{k} {v}" for k, v in t.fail_counts.items() if v)
        msg += (f"; {t.unrescued} boards fail after tuning ({fails or 'none'}); "
                f"{t.beyond_range} ran out of trimmer travel" + (f" ({short})" if short else ""))
        if tuning.plan.untrimmable:
            msg += ("; no part sets " + "; ".join(tuning.plan.untrimmable)
                    + " without undoing a figure already set: that spread stays")
    return Check(id="yield", status="pass" if ok else "fail", value=t.yield_fraction,
                 limit=result.min_yield, unit="share", message=msg)
