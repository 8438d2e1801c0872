"""The `stability` check: every stage's poles in the left half-plane, and what an unstable
chain does to the other checks.

A chain whose stage has a right-half-plane pole oscillates (or runs to a rail) whatever its
|H(jw)| looks like: its steady-state response, node levels and noise are figures of a circuit
that does not exist. The check leads the report, and the checks built on those figures are
marked as not meaningful.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from bandwright.analysis import Analyses
from bandwright.analysis.stability import StagePoles
from bandwright.checks.base import Check
from bandwright.parts.notation import format_hz, format_sig

__all__ = ["stability_checks", "unstable_message", "void_if_unstable", "STEADY_STATE_IDS"]

#: Checks whose figures come from the steady-state response: not meaningful when unstable.
STEADY_STATE_IDS = ("mask", "headroom", "slew", "noise")


def _pole_text(p: complex) -> str:
    f_hz = abs(p) / (2 * math.pi)
    if abs(p.imag) > 1e-9 * abs(p):
        q = -abs(p) / (2 * p.real) if p.real != 0 else math.inf
        return f"pair at {format_hz(f_hz, significant=3)}, Q {format_sig(q, 3)}"
    return f"real pole at {'+' if p.real >= 0 else '−'}{format_hz(f_hz, significant=3)}"


def unstable_message(sp: StagePoles) -> str:
    """The right-half-plane poles of an unstable stage in words (pairs once each)."""
    rhp = sp.unstable_poles
    shown = [p for p in rhp if p.imag >= 0]
    growth = max(float(np.max(rhp.real)), 0.0) if rhp.size else 0.0
    return (f"{rhp.size} pole{'s' if rhp.size != 1 else ''} in the right half-plane ("
            + "; ".join(_pole_text(complex(p)) for p in shown)
            + f"; fastest growth e^({format_sig(growth)}·t/s))")


def stability_checks(an: Analyses) -> list[Check]:
    """One chain-wide check: pass when every stage's poles lie in the open left half-plane.

    Parameters
    ----------
    an : Analyses
        Its `stability` holds each stage's poles (roots of its denominator) and the
        Routh–Hurwitz verdict on the same polynomial.

    Returns
    -------
    list of Check
        One record, id "stability", value the number of right-half-plane poles, limit 0.
    """
    bad = [sp for sp in an.stability if not sp.stable]
    if not bad:
        return [Check(id="stability", status="pass", value=0.0, limit=0.0, unit="poles",
                      message="every stage's poles lie in the left half-plane")]
    n = sum(sp.unstable_poles.size for sp in bad)
    text = "; ".join(f"stage {sp.position}: {unstable_message(sp)}" for sp in bad)
    return [Check(id="stability", status="fail", value=float(n), limit=0.0, unit="poles",
                  stage=bad[0].position if len(bad) == 1 else None,
                  message=f"the chain is unstable — it oscillates or runs to a rail: {text}")]


def void_if_unstable(checks: list[Check], an: Analyses) -> list[Check]:
    """`checks` with every steady-state check (`STEADY_STATE_IDS`) failed as not meaningful
    when the chain is unstable; unchanged otherwise."""
    if an.stable:
        return checks
    return [replace(c, status="fail", message="not meaningful for an unstable chain (its "
                    "steady-state figures describe no real circuit): " + c.message)
            if c.id in STEADY_STATE_IDS else c for c in checks]
