"""What the graphic renderers (plots, schematics, HTML) read from a Plan or an Audit.

A plan and an audit carry the same analyses under different attribute names; this module
gathers them into one frozen value so that a renderer never asks which one it was given.
Nothing here computes a figure.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from typing import TYPE_CHECKING

from bandwright.chain.graph import CHAIN_INPUT, Chain

if TYPE_CHECKING:
    from bandwright.analysis import Analyses
    from bandwright.analysis.montecarlo import YieldResult
    from bandwright.audit import Audit
    from bandwright.chain.stage import Stage
    from bandwright.checks.base import Check
    from bandwright.inputs.requirement import Requirement
    from bandwright.planner import Plan
    from bandwright.sections.section import Section

__all__ = ["Subject", "subject_of", "is_plan", "net_label", "stage_label"]


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
    yield_result : YieldResult or None
        The Monte Carlo result, when one was run.
    source : Plan or Audit
        The object itself, for the renderers that need more (candidates, ordering).
    """

    kind: str
    path: str
    requirement: Requirement
    has_mask: bool
    chain: Chain | None
    analyses: Analyses | None
    checks: tuple[Check, ...]
    ideal_sections: tuple[Section, ...]
    yield_result: YieldResult | None
    source: Plan | Audit


def is_plan(obj: Plan | Audit) -> bool:
    """True for a Plan, False for an Audit; a TypeError for anything else.

    The classes are looked up among the loaded modules rather than imported: a Plan exists only
    once ``bandwright.planner`` is loaded (likewise an Audit), and importing either here would
    load the planner or the audit for a run that needs only the other.
    """
    planner, audit = sys.modules.get("bandwright.planner"), sys.modules.get("bandwright.audit")
    if planner is not None and isinstance(obj, planner.Plan):
        return True
    if audit is not None and isinstance(obj, audit.Audit):
        return False
    raise TypeError(f"expected a Plan or an Audit, got {type(obj).__name__}")


def subject_of(obj: Plan | Audit) -> Subject:
    """Gather a Plan (its chosen design) or an Audit into a Subject.

    Parameters
    ----------
    obj : Plan or Audit

    Returns
    -------
    Subject
    """
    if is_plan(obj):
        d = obj.chosen
        return Subject(kind="plan", path=obj.requirement.path, requirement=obj.requirement,
                       has_mask=True, chain=d.chain, analyses=d.analyses, checks=tuple(d.checks),
                       ideal_sections=tuple(d.candidate.sections),
                       yield_result=d.yield_result, source=obj)
    chain = obj.chain
    return Subject(kind="audit", path=obj.path, requirement=obj.requirement,
                   has_mask=bool(obj.has_mask), chain=chain, analyses=obj.analyses,
                   checks=tuple(obj.checks),
                   ideal_sections=tuple(st.target for st in chain.stages),
                   yield_result=obj.yield_result, source=obj)


def stage_label(stage: Stage) -> str:
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

