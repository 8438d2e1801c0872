"""A stage: one built circuit in the chain, as the planner or an audit file gives it."""

from __future__ import annotations

from dataclasses import dataclass, replace

from bandwright.circuits import topology
from bandwright.circuits.base import Figures
from bandwright.circuits.dc_block import DcBlock, blocked
from bandwright.circuits.figures import section_figures
from bandwright.circuits.elements import Element, opamp_output_nets
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section

__all__ = ["Stage", "stage_output_nets", "with_parts", "with_block"]


@dataclass(frozen=True, slots=True)
class Stage:
    """One circuit of the chain.

    Attributes
    ----------
    position : int
        1-based place in the chain.
    topology : str
        Topology module name.
    target : Section
        What it must do (planned) or what its parts give with an ideal op-amp (audited).
    components : tuple of (name, value)
        Part values as built (ohms, farads).
    elements : tuple of Element
        Its element list, local nets ("in", "out", internal roles).
    model : OpAmp
    built : Figures
        f0, Q and signed gain of the built circuit with this op-amp.
    ideal : Figures or None
        Figures of the exact (unrounded) design with this op-amp; None for an audit.
    reason : str
        Why this topology (planned) or "as given" (audited).
    rejected : tuple of (topology, reason)
    dc_block : DcBlock or None
        A DC block at its input (``circuits.dc_block``); its parts are in `elements`, not
        in `components`, and `built` is the section's figures without it.
    """

    position: int
    topology: str
    target: Section
    components: tuple[tuple[str, float], ...]
    elements: tuple[Element, ...]
    model: OpAmp
    built: Figures
    ideal: Figures | None = None
    reason: str = ""
    rejected: tuple[tuple[str, str], ...] = ()
    dc_block: DcBlock | None = None

    @property
    def kind(self) -> str:
        return self.target.kind

    @property
    def nets(self) -> dict[str, str]:
        """Role → local net of the topology (only nets its element list uses)."""
        used = {n for e in self.elements for n in e.nets}
        return {role: net for role, net in topology(self.topology).NETS.items() if net in used}


def stage_output_nets(stage: Stage) -> tuple[str, ...]:
    """The stage's op-amp output nets (local names), "out" last."""
    outs = [n for n in opamp_output_nets(stage.elements) if n != "out"]
    return tuple(dict.fromkeys(outs)) + ("out",)


def with_parts(stage: Stage, components: dict[str, float], *, source_ohms: float = 0.0,
               note: str = "") -> Stage:
    """The same stage with other part values; built figures read again from its element
    list (with `source_ohms` ahead of it, as the chain drives it)."""
    topo = topology(stage.topology)
    elements = tuple(topo.elements(components, stage.model))
    near = stage.target.f0_hz if stage.kind != "gain" else 1.0
    built = section_figures(elements, kind=stage.kind, near_hz=near, source_ohms=source_ohms)
    order = [n for n in topo.PARTS if n in components]
    return Stage(position=stage.position, topology=stage.topology, target=stage.target,
                 components=tuple((n, float(components[n])) for n in order),
                 elements=blocked(elements, stage.dc_block), model=stage.model, built=built,
                 ideal=stage.ideal,
                 reason=stage.reason + (f"; {note}" if note and note not in stage.reason else ""),
                 rejected=stage.rejected, dc_block=stage.dc_block)


def with_block(stage: Stage, block: DcBlock | None) -> Stage:
    """The same stage with `block` (None: none) at its input; its figures stay the
    section's own."""
    bare = stage.elements if stage.dc_block is None else \
        tuple(topology(stage.topology).elements(dict(stage.components), stage.model))
    return replace(stage, elements=blocked(tuple(bare), block), dc_block=block)
