"""DC bias points of every op-amp output: the source's DC level, the reference and every
op-amp's offset voltage and input bias current, through the chain's own element list.

The whole chain (with its reference network on a single supply) is solved at DC by the
nodal solver (``circuits.nodal.dc_solve``); superposition splits each net's level into the
source's share, the reference's, and each stage's op-amp errors, so the report can say
which stage's offset dominates where. Offsets add up through every DC-coupled stage.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from bandwright.chain.graph import Chain, flatten
from bandwright.circuits.nodal import dc_solve
from bandwright.circuits.reference import (SPLIT_REFERENCE, Reference, design_reference,
                                           referenced)
from bandwright.circuits.elements import REFERENCE_NET, SUPPLY_NET
from bandwright.inputs.requirement import Requirement
from bandwright.parts.notation import format_si

__all__ = ["NetBias", "FloatingInput", "BiasAnalysis", "chain_reference", "bias_points",
           "REFERENCE_OWNER"]

#: Owner name of the reference follower's errors in `NetBias.shares`.
REFERENCE_OWNER = "reference"


@dataclass(frozen=True, slots=True)
class NetBias:
    """DC level of one op-amp output net.

    Attributes
    ----------
    net : str
    stage : int
    dc_v : float
        Operating point, V (split rails: around 0; single supply: around the reference).
    error_v : float
        The part of `dc_v` due to op-amp offsets and bias currents, V.
    source_v : float
        The part due to the source's DC level (`input.dc_v`) and the reference, V: where
        the net would sit with perfect op-amps.
    dominant : int or str or None
        The stage whose op-amp errors move the net most ("reference" for the reference
        follower), None when no op-amp error reaches it.
    dominant_v : float
        That stage's share, V.
    """

    net: str
    stage: int
    dc_v: float
    error_v: float
    source_v: float
    dominant: int | str | None
    dominant_v: float


@dataclass(frozen=True, slots=True)
class FloatingInput:
    """An op-amp input with no DC path to a source, an output or the reference."""

    stage: int | str
    opamp: str
    net: str


@dataclass(frozen=True, slots=True)
class BiasAnalysis:
    """Bias points of the chain.

    Attributes
    ----------
    nets : dict of str to NetBias
        By global net, every op-amp output of the chain.
    floating : tuple of FloatingInput
    reference : Reference
        The chain's reference (split rails: ground).
    reference_dc_v : float
        The level the reference net actually sits at, V (0 on split rails).
    plus_dc : dict of str to (str, float)
        Every op-amp's (flat name) + input net and its DC level, V.
    """

    nets: dict[str, NetBias]
    floating: tuple[FloatingInput, ...]
    reference: Reference
    reference_dc_v: float
    plus_dc: dict[str, tuple[str, float]] = field(default_factory=dict)


def chain_reference(chain: Chain, requirement: Requirement) -> Reference:
    """The reference network the chain needs on `requirement`'s supply (``design_reference``);
    ground on split rails."""
    sup = requirement.supply
    if not sup.single:
        return SPLIT_REFERENCE
    return design_reference(referenced(flatten(chain)), rails_v=sup.rails_v,
                            reference_v=sup.reference_v, model=chain.stages[0].model,
                            low_hz=requirement.passband.low_hz,
                            c_series=requirement.design.capacitor_series)


def _owner(name: str) -> int | str:
    """Stage position of a flat element name ("U1_s3" -> 3), or "reference"."""
    tag = name.rsplit("_", 1)[-1]
    return int(tag[1:]) if tag.startswith("s") and tag[1:].isdigit() else REFERENCE_OWNER


def bias_points(chain: Chain, requirement: Requirement, reference: Reference) -> BiasAnalysis:
    """DC level of every op-amp output, split into the source's share and each stage's.

    Notes
    -----
    Modified nodal analysis at s = 0 with each op-amp's offset in its gain row and its bias
    current into each input (Franco 2015, §5.1-5.2 [mem]); one right-hand side per source,
    so the shares add to the operating point (``circuits.nodal.dc_solve``).
    """
    flat = flatten(chain, reference)
    if reference.single:
        fixed = {SUPPLY_NET: reference.supply_v} if reference.elements else \
            {REFERENCE_NET: reference.reference_v}
    else:
        fixed = {}
    sol = dc_solve(flat, source_ohms=chain.source_ohms, input_dc_v=requirement.input.dc_v,
                   fixed_v=fixed)
    nets = {}
    for net in chain.output_nets:
        by_owner: dict[int | str, float] = {}
        clean = 0.0
        for name, share in sol.shares.items():
            v = float(share[sol.nets.index(net)])
            if name == "input" or name.endswith(" fixed"):
                clean += v
                continue
            owner = _owner(name.split(" ", 1)[0])
            by_owner[owner] = by_owner.get(owner, 0.0) + v
        error = sum(by_owner.values())
        dom = max(by_owner, key=lambda k: abs(by_owner[k]), default=None)
        dom_v = by_owner.get(dom, 0.0) if dom is not None else 0.0
        if dom is not None and dom_v == 0.0:
            dom = None
        nets[net] = NetBias(net=net, stage=chain.stage_of(net).position, dc_v=clean + error,
                            error_v=error, source_v=clean, dominant=dom, dominant_v=dom_v)
    floating = tuple(FloatingInput(stage=_owner(e.name), opamp=e.name, net=n)
                     for e in flat if e.kind == "opamp" for n in e.nets[:2]
                     if n in sol.floating)
    ref_dc = sol.at(REFERENCE_NET) if reference.single and REFERENCE_NET in sol.nets else 0.0
    plus_dc = {e.name: (e.nets[0], sol.at(e.nets[0])) for e in flat if e.kind == "opamp"}
    return BiasAnalysis(nets=nets, floating=floating, reference=reference,
                        reference_dc_v=ref_dc, plus_dc=plus_dc)


def _volts(v: float) -> str:
    return format_si(v, "V", significant=3 if abs(v) < 1 else 4, sign=True)


def describe(b: NetBias) -> str:
    """'bias +132 mV (op-amp errors +132 mV, mostly stage 1's …)' for a message."""
    if b.dominant is None or not math.isfinite(b.error_v):
        return f"bias {_volts(b.dc_v)}"
    who = "the reference follower's" if b.dominant == REFERENCE_OWNER else \
        f"stage {b.dominant}'s"
    return (f"bias {_volts(b.dc_v)} (op-amp offsets and bias currents {_volts(b.error_v)}, "
            f"mostly {who} {_volts(b.dominant_v)})")
