"""When a single-supply chain cannot fit its rails: why, with the figures, and the nearest
fixes — a rail-to-rail op-amp class, a higher supply — each planned to show that it works.

The lower-gain fix is ``advice.with_gain_advice`` (shared with split rails); this module adds
what only a single supply offers, to the worst clipping net's headroom check.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any, Callable

from bandwright.advice.gain import advise_on_headroom
from bandwright.analysis.levels import swing_limit_vpk
from bandwright.inputs.requirement import AmplifierChoice, Requirement, Supply
from bandwright.parts.catalogue import ARCHETYPES
from bandwright.parts.notation import format_fixed, format_si, format_sig

__all__ = ["with_supply_advice", "RAIL_TO_RAIL", "COMMON_SUPPLIES_V"]

#: The rail-to-rail class tried as a fix.
RAIL_TO_RAIL = "rail-to-rail"
#: Single supplies boards commonly have, V (common practice).
COMMON_SUPPLIES_V = (1.8, 2.5, 3.3, 5.0, 9.0, 12.0, 15.0, 24.0, 36.0)


def _fits(design) -> tuple[bool, float]:
    an = design.analyses
    if an is None:
        return False, -math.inf
    bad = [c for c in design.checks if c.id in ("headroom", "input_range") and c.status == "fail"]
    return not bad, an.worst_margin_db


def with_supply_advice(design, req: Requirement,
                       rebuild: Callable[[Requirement], Any]) -> Any:
    """`design` with the worst clipping net's headroom message explaining the single supply.

    Parameters
    ----------
    design : planner.Design
        The chosen design; returned unchanged on split rails or when nothing clips.
    req : Requirement
    rebuild : callable(Requirement) -> planner.Design
        Plans the same candidate for a requirement with another op-amp or supply.

    Returns
    -------
    planner.Design

    Notes
    -----
    The swing around the reference is min(V+ - V_ref, V_ref - V-) - swing_to_rail
    (docs/methods.md, "Headroom / slew"). A mid-rail reference on the smallest common supply
    V+ >= 2 (peak + |bias - V_ref| + swing_to_rail) leaves every net its peak; each fix is
    planned and named only if its plan passes headroom.
    """
    sup = req.supply
    if not sup.single or design.analyses is None:
        return design
    nodes = design.analyses.nodes
    clipping = [n for n in nodes if math.isfinite(n.margin_db) and n.margin_db < 0]
    if not clipping:
        return design
    worst = min(clipping, key=lambda n: n.margin_db)
    model = design.chain.stage_of(worst.net).model
    around = swing_limit_vpk(sup, model.swing_to_rail_v)
    why = (f"; gain {format_sig(req.passband.gain_db)} dB puts {format_si(worst.peak_vpk, 'Vpk')} "
           f"on {worst.net} (bias {format_si(worst.dc_v, 'V')}), the swing around the "
           f"{format_si(sup.reference_v, 'V')} reference is {format_si(around, 'Vpk')} on "
           f"{format_sig(sup.rails_v[0])}/{format_si(sup.rails_v[1], 'V', significant=4)}")
    fixes: list[str] = []
    rr = ARCHETYPES[RAIL_TO_RAIL]
    if model.swing_to_rail_v > rr.swing_to_rail_v:
        trial = rebuild(replace(req, amplifier=AmplifierChoice(archetype=RAIL_TO_RAIL)))
        ok, margin = _fits(trial)
        if ok:
            fixes.append(f"a rail-to-rail class ('{RAIL_TO_RAIL}', "
                         f"{format_si(rr.swing_to_rail_v, 'V', significant=4)} "
                         f"from each rail) fits: planned, worst margin "
                         f"{format_fixed(margin, 1, sign=True)} dB")
    need = max(n.peak_vpk + abs(n.dc_v - sup.reference_v) for n in nodes)
    v_need = 2 * (need + model.swing_to_rail_v)
    higher = [v for v in COMMON_SUPPLIES_V if v > sup.rails_v[1] and v >= v_need]
    if higher:
        top = higher[0]
        mid = (sup.rails_v[0] + top) / 2
        # A source biased at the old reference follows the new one (its bias network is
        # fed from the same supply); any other DC level stays as given.
        dc = mid if math.isclose(req.input.dc_v, sup.reference_v) else req.input.dc_v
        trial = rebuild(replace(req, supply=Supply(rails_v=(sup.rails_v[0], top),
                                                   reference_v=mid),
                                input=replace(req.input, dc_v=dc)))
        ok, margin = _fits(trial)
        if ok:
            fixes.append(f"a {format_si(top, 'V', significant=4)} supply (reference "
                         f"{format_si(mid, 'V', significant=4)}) fits: planned, worst "
                         f"margin {format_fixed(margin, 1, sign=True)} dB")
    why += ("; fixes: " + "; ".join(fixes)) if fixes else "; no rail-to-rail class or " \
        "common supply up to 36 V was found to fit: lower the gain or input.max_vpk"
    return advise_on_headroom(design, worst.net, why)
