"""Checks of the time domain: `onset` per op-amp output net, `time` per `[time]` limit."""

from __future__ import annotations

import math

from bandwright.analysis import Analyses
from bandwright.checks.base import Check
from bandwright.inputs.requirement import Requirement
from bandwright.parts.notation import format_hz, format_si, format_sig

__all__ = ["onset_checks", "time_checks"]


def _ms(t_s: float) -> str:
    return "never" if not math.isfinite(t_s) else format_si(t_s, "s")


def _advice(net: str, first: bool, event: str) -> str:
    if event == "dc_step":
        return ("a highpass (AC coupling) ahead of the chain, or less gain ahead of this node, "
                "keeps the step out")
    ahead = "ahead of the chain" if first else f"ahead of {net}"
    return (f"a highpass or lower gain {ahead}, or a different order of sections (the "
            f"sharpest section later), keeps the tones' switch-on edge below the swing")


def onset_checks(an: Analyses) -> list[Check]:
    """One check per op-amp output net: the peak when the signals start, against the swing.

    A net that leaves its swing when the tones start recovers on its own: a warning, with
    the recovery time. A DC step the requirement names (``input.dc_step_v``) that drives a
    net out of its swing fails: it is an event the chain was asked to ride through.
    """
    if an.time is None:
        return []
    out = []
    first = an.time.onset[0].net if an.time.onset else None
    for o in an.time.onset:
        what = "a DC step" if o.event == "dc_step" else "the tones and signal starting"
        if o.peak_vpk <= o.limit_vpk:
            status, msg = "pass", (f"{what} at worst phase peaks at {format_si(o.peak_vpk, 'Vpk')} "
                                   f"(steady {format_si(o.steady_vpk, 'Vpk')})")
        else:
            status = "fail" if o.event == "dc_step" or not math.isfinite(o.recovery_s) else "warn"
            msg = (f"{what} at worst phase drives it to {format_si(o.peak_vpk, 'Vpk')}, beyond its "
                   f"{format_si(o.limit_vpk, 'Vpk')} swing, at {_ms(o.at_s)}; back inside after "
                   f"{_ms(o.recovery_s)}; {_advice(o.net, o.net == first, o.event)}")
        out.append(Check(id="onset", status=status, value=o.peak_vpk, limit=o.limit_vpk,
                         unit="Vpk", stage=o.stage, net=o.net, message=msg))
    return out


def time_checks(an: Analyses, requirement: Requirement) -> list[Check]:
    """One `time` check per limit of `[time]`, against the chain output's figures."""
    lim = requirement.time
    if not lim.any:
        return []
    tf = an.time
    if tf is None:
        return [Check(id="time", status="fail", value=None, limit=None, unit="",
                      message="the chain's output is unstable: no time-domain figure exists")]
    worst_rise = max(tf.bursts, key=lambda b: (b.rise_s if math.isfinite(b.rise_s) else math.inf))
    worst_ring = max(tf.bursts, key=lambda b: b.ringing_s)
    worst_over = max(tf.bursts, key=lambda b: b.overshoot_pct)
    rows = [
        (lim.max_rise_s, worst_rise.rise_s, "s",
         f"envelope rise 10-90 % of a burst at {format_hz(worst_rise.freq_hz)}"),
        (lim.max_delay_spread_s, tf.delay_spread_s, "s",
         f"group delay spread across the band ({format_si(tf.delay_min_s, 's')} to "
         f"{format_si(tf.delay_max_s, 's')})"),
        (lim.max_ringing_s, worst_ring.ringing_s, "s",
         f"ringing to 1 % after a burst at {format_hz(worst_ring.freq_hz)}"),
        (lim.max_overshoot_pct, worst_over.overshoot_pct, "%",
         f"envelope overshoot of a burst at {format_hz(worst_over.freq_hz)}"),
        (lim.max_settling_s, tf.settling_s, "s", "step response settling to 1 %"),
    ]
    out = []
    for limit, value, unit, what in rows:
        if limit is None:
            continue
        ok = math.isfinite(value) and value <= limit
        shown = (format_si(value, "s", significant=4) if unit == "s" else
                 f"{format_sig(value, 4)} %") \
            if math.isfinite(value) else "not reached"
        bound = format_si(limit, "s", significant=4) if unit == "s" else \
            f"{format_sig(limit, 4)} %"
        out.append(Check(id="time", status="pass" if ok else "fail", value=value, limit=limit,
                         unit=unit, message=f"{what}: {shown} against {bound}"))
    return out
