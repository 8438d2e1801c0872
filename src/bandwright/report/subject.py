"""What the graphic renderers (plots, schematics, HTML) read from a Plan or an Audit.

A plan and an audit carry the same analyses under different attribute names; this module
gathers them into one frozen value so that a renderer never asks which one it was given.
Nothing here computes a figure.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from bandwright.chain.graph import CHAIN_INPUT, Chain

__all__ = ["Subject", "subject_of", "net_label", "stage_label", "source_label"]


@dataclass(frozen=True)
class Subject:
    """The parts of a Plan or an Audit that the graphic renderers draw.

    Attributes
    ----------
    kind : {"plan", "audit"}
    path : str
        The requirement or audit file.
    requirement : Requirement
    has_mask : bool
        False for an audit without a ``[passband]``: no mask to draw or check.
    chain : Chain or None
        None when the chosen candidate could not be built.
    analyses : Analyses or None
    checks : tuple of Check
    ideal_sections : tuple of Section
        The chosen candidate's unrounded sections (a plan); for an audit, each stage's
        target (what its parts give with an ideal op-amp).
    yield_result : object or None
        The Monte Carlo result, when one was run (read duck-typed: see ``plots``).
    source : Plan or Audit
        The object itself, for the renderers that need more (candidates, ordering).
    """

    kind: str
    path: str
    requirement: Any
    has_mask: bool
    chain: Chain | None
    analyses: Any
    checks: tuple
    ideal_sections: tuple
    yield_result: Any
    source: Any


def subject_of(obj) -> Subject:
    """Gather a Plan (its chosen design) or an Audit into a Subject.

    Parameters
    ----------
    obj : Plan or Audit

    Returns
    -------
    Subject
    """
    if hasattr(obj, "designs"):
        d = obj.chosen
        return Subject(kind="plan", path=obj.requirement.path, requirement=obj.requirement,
                       has_mask=True, chain=d.chain, analyses=d.analyses, checks=tuple(d.checks),
                       ideal_sections=tuple(d.candidate.sections),
                       yield_result=getattr(d, "yield_result", None), source=obj)
    chain = obj.chain
    return Subject(kind="audit", path=obj.path, requirement=obj.requirement,
                   has_mask=bool(obj.has_mask), chain=chain, analyses=obj.analyses,
                   checks=tuple(obj.checks),
                   ideal_sections=tuple(st.target for st in chain.stages),
                   yield_result=getattr(obj, "yield_result", None), source=obj)


def stage_label(stage) -> str:
    """"stage 2 (tow_thomas)": how every renderer names a stage."""
    return f"stage {stage.position} ({stage.topology})"


def net_label(chain: Chain, net: str) -> str:
    """A chain net in words: "stage 2 (tow_thomas) out", "chain input".

    Parameters
    ----------
    chain : Chain
    net : str
        A global net name (``chain.output_nets`` or the chain input).
    """
    if net == CHAIN_INPUT:
        return "chain input"
    (_, _, d), = chain.graph.in_edges(net, data=True)
    if d["stage"] is None:
        return "converter input"
    return f"{stage_label(d['stage'])} {d['local']}"


def source_label(chain, name: str) -> str:
    """A noise source in words: "stage 1 R2, thermal", "stage 2 U1, current noise into −".

    Parameters
    ----------
    chain : Chain
    name : str
        A key of ``NoiseAnalysis.contributions_psd`` ("R2_s1", "U1_s2 voltage",
        "U1_s2 current-", "Rsource").
    """
    if name == "Rsource":
        return "source resistance, thermal"
    part, _, what = name.partition(" ")
    ref, _, pos = part.rpartition("_s")
    if not pos.isdigit():
        return name
    where = f"stage {pos} {ref}"
    return {"": f"{where}, thermal", "voltage": f"{where}, voltage noise",
            "current+": f"{where}, current noise into +",
            "current-": f"{where}, current noise into −"}.get(what, f"{where} {what}")
