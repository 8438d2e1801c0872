"""The planner: candidates, the pick, and the chain's analyses and checks."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.analysis.grid import response_grid
from bandwright.analysis.response import Response, read_mask
from bandwright.candidates import Candidate, make_candidates
from bandwright.checks.base import Check
from bandwright.checks.mask import mask_checks
from bandwright.sections.split import cascade_response
from bandwright.spec.requirement import Requirement

__all__ = ["Plan", "plan"]


@dataclass(frozen=True, slots=True)
class Plan:
    """What `bandwright plan` found.

    Attributes
    ----------
    requirement : Requirement
    candidates : tuple of Candidate
        Ranked, best first.
    chosen : Candidate
    why : str
        Why the chosen candidate won.
    response : Response
        The chain's response on the report grid.
    checks : tuple of Check
    """

    requirement: Requirement
    candidates: tuple[Candidate, ...]
    chosen: Candidate
    why: str
    response: Response
    checks: tuple[Check, ...]


def plan(requirement: Requirement, *, family: str | None = None,
         order: int | None = None) -> Plan:
    """Plan a chain for `requirement`.

    Parameters
    ----------
    requirement : Requirement
    family : str, optional
        Overrides `design.family`.
    order : int, optional
        Overrides `design.order`.
    """
    candidates = make_candidates(requirement, family=family, order=order)
    chosen = candidates[0]
    why = _why(chosen, candidates)

    def respond(f):
        return cascade_response(chosen.sections, f)

    grid = response_grid(requirement)
    response = Response(freq_hz=grid, h=respond(grid))
    checks = tuple(mask_checks(read_mask(respond, requirement), requirement))
    return Plan(requirement=requirement, candidates=candidates, chosen=chosen, why=why,
                response=response, checks=checks)


def _why(chosen: Candidate, candidates: tuple[Candidate, ...]) -> str:
    if len(candidates) == 1:
        return "the only candidate for the family and order asked"
    runner = candidates[1]
    if len(chosen.sections) < len(runner.sections):
        return (f"fewest sections ({len(chosen.sections)} against {len(runner.sections)} for "
                f"the next, {runner.family} {runner.path})")
    return (f"same number of sections as the next ({runner.family} {runner.path}), lower highest "
            f"Q ({chosen.highest_q:.3g} against {runner.highest_q:.3g})")
