"""Advice for a chain that clips: node peaks scale with the chain's gain, so the largest gain
that fits is about the asked gain plus the worst headroom margin — planned again to make
sure."""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any, Callable

from bandwright.inputs.requirement import Requirement
from bandwright.parts.notation import format_fixed, format_si, format_sig

__all__ = ["with_gain_advice", "advise_on_headroom"]

# The gain advice plans at most this many times; below the least gain a requirement may
# ask (passband.gain_db >= -60 dB) it stops.
_GAIN_TRIES = 3
_MIN_GAIN_DB = -60.0


def with_gain_advice(design, req: Requirement, rebuild: Callable[[Requirement], Any]):
    """`design` with the largest gain that fits added to its worst failing headroom check,
    found by planning again at that gain.

    Parameters
    ----------
    design : planner.Design
        A built design; returned unchanged when nothing clips.
    req : Requirement
    rebuild : callable(Requirement) -> planner.Design
        Builds the same candidate (family, path) for a requirement that differs only in
        ``passband.gain_db``.

    Returns
    -------
    planner.Design

    Notes
    -----
    Every node peak (in-band signal and tones alike) is proportional to the chain's gain
    while the sections and their order stay as they are (equal-maxima scaling, Schaumann &
    Van Valkenburg 2001, ch. 6 [mem]), so gain_db + the worst margin is the first guess. A
    lower gain may change the topologies the planner picks, so the guess is planned and
    lowered by the new worst margin until a plan fits (at most `_GAIN_TRIES` plans): the
    gain the message names is one the planner has built without clipping.
    """
    if design.analyses is None:
        return design
    nodes = design.analyses.nodes
    clipping = [n for n in nodes if math.isfinite(n.margin_db) and n.margin_db < 0]
    if not clipping:
        return design
    worst = min(clipping, key=lambda n: n.margin_db)
    pb, inp = req.passband, req.input
    tones = " and the tones" if inp.tones else ""
    gain_db = math.floor((pb.gain_db + worst.margin_db) * 10) / 10
    found = None
    for _ in range(_GAIN_TRIES):
        if gain_db < _MIN_GAIN_DB:
            break
        trial = rebuild(replace(req, passband=replace(pb, gain_db=gain_db)))
        if trial.analyses is None:
            break
        margin = trial.analyses.worst_margin_db
        if margin >= 0:
            found = (gain_db, margin)
            break
        gain_db = math.floor((gain_db + margin) * 10) / 10 - 0.1
    if found is None:
        advice = (f"; no gain down to {format_fixed(max(gain_db, _MIN_GAIN_DB), 1)} dB was found "
                  f"to fit (asked: {format_sig(pb.gain_db)} dB): lower input.max_vpk{tones}, or "
                  f"widen the rails")
    else:
        where = ("converter's full scale" if worst.net == "adc" else
                 f"swing around the {format_si(req.supply.reference_v, 'V', significant=4)} "
                 f"reference on "
                 f"{format_sig(req.supply.rails_v[0])}/{format_si(req.supply.rails_v[1], 'V', significant=4)}"
                 if req.supply.single else
                 f"swing on {format_sig(req.supply.rails_v[0])}/{format_si(req.supply.rails_v[1], 'V', significant=4, sign=True)} rails")
        advice = (f"; at most about {format_fixed(found[0], 1)} dB of gain fits the "
                  f"±{format_si(worst.limit_vpk, 'V')} {where} with {_volts(inp.max_vpk)} "
                  f"in{tones} (asked: {format_sig(pb.gain_db)} dB; planned at "
                  f"{format_fixed(found[0], 1)} dB, the worst margin is "
                  f"{format_fixed(found[1], 1, sign=True)} dB)")
    return advise_on_headroom(design, worst.net, advice)


def advise_on_headroom(design, net: str, advice: str):
    """`design` with `advice` added to the message of its first failing headroom check on
    `net` (the worst clipping net, where every fix is said once)."""
    out, done = [], False
    for c in design.checks:
        if not done and c.id == "headroom" and c.status == "fail" and c.net == net:
            c = replace(c, message=c.message + advice)
            done = True
        out.append(c)
    return replace(design, checks=tuple(out))


def _volts(v: float) -> str:
    return format_si(v, "V")
