"""Checks of the DC operating point: every op-amp input needs a DC return path, and on a
single supply its common-mode level must stay inside the op-amp's input range."""

from __future__ import annotations

from bandwright.analysis import Analyses
from bandwright.checks.base import Check
from bandwright.parts.notation import format_si, format_sig

__all__ = ["dc_return_checks", "input_range_checks"]


def dc_return_checks(an: Analyses) -> list[Check]:
    """One failing `dc_return` check per op-amp input with no DC path to a source, an
    op-amp output or the reference: its bias current has nowhere to flow, so its operating
    point is set by leakage, not by the circuit (Franco 2015, §5.2 [mem])."""
    if an.bias is None:
        return []
    out = []
    for f in an.bias.floating:
        stage = f.stage if isinstance(f.stage, int) else None
        out.append(Check(
            id="dc_return", status="fail", value=None, limit=None, unit="", stage=stage,
            net=f.net,
            message=f"{f.opamp}: input net {f.net} has no DC path to a source, an op-amp "
                    f"output or the reference (only capacitors reach it): its bias point is "
                    f"undefined; add a resistor to the reference"))
    return out


def input_range_checks(an: Analyses) -> list[Check]:
    """One `input_range` check per op-amp on a single supply: its + input's bias ± worst-case
    peak against the class's common-mode range (Franco 2015, §5.3 [mem])."""
    out = []
    for lv in an.inputs:
        lo, hi = lv.dc_v - lv.peak_vpk, lv.dc_v + lv.peak_vpk
        who = "the reference follower" if lv.stage == "reference" else f"{lv.opamp}"
        reach = (f"{format_si(lv.cm_to_rail_v, 'V', significant=4)} from each rail" if lv.cm_to_rail_v >= 0 else
                 f"{format_si(-lv.cm_to_rail_v, 'V', significant=4)} beyond each rail")
        msg = (f"{who}: + input ({lv.net}) spans {format_sig(lo, 3)} … {format_si(hi, 'V')} (bias "
               f"{format_si(lv.dc_v, 'V')} "
               f"± {format_si(lv.peak_vpk, 'Vpk')}); its inputs work from "
               f"{format_si(lv.low_v, 'V')} to "
               f"{format_si(lv.high_v, 'V')} ({reach})")
        if not lv.fits:
            msg += ("; a rail-to-rail input class, a reference (or source DC level) further "
                    "from the rail, or less signal at that input")
        margin = min(lv.high_v - hi, lo - lv.low_v)
        out.append(Check(
            id="input_range", status="pass" if lv.fits else "fail", value=margin, limit=0.0,
            unit="V", stage=lv.stage if isinstance(lv.stage, int) else None, net=lv.net,
            message=msg))
    return out
