"""Checks of the DC operating point: every op-amp input needs a DC return path."""

from __future__ import annotations

from bandwright.analysis import Analyses
from bandwright.checks.base import Check

__all__ = ["dc_return_checks"]


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
