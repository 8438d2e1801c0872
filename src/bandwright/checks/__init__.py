"""Checks: each a function of (chain, analyses, requirement) → Check records."""

from __future__ import annotations

from bandwright.analysis import Analyses
from bandwright.chain.graph import Chain
from bandwright.checks.alias import alias_checks, settling_checks
from bandwright.checks.base import Check, worst_status
from bandwright.checks.chain_checks import (drive_checks, gbw_checks, headroom_checks,
                                            noise_checks, parts_checks, slew_checks)
from bandwright.checks.mask import mask_checks
from bandwright.checks.stability import stability_checks, void_if_unstable
from bandwright.parts.windows import PartWindows
from bandwright.inputs.requirement import Requirement

__all__ = ["Check", "worst_status", "all_checks"]


def all_checks(chain: Chain, an: Analyses, requirement: Requirement, *,
               windows: PartWindows = PartWindows()) -> list[Check]:
    """Every check, in report order: stability, mask, headroom, slew, drive, gbw, noise,
    parts. When the chain is unstable the steady-state checks are failed as not meaningful
    (``checks.stability.void_if_unstable``)."""
    out: list[Check] = stability_checks(an)
    if an.mask is not None:
        out += mask_checks(an.mask, requirement)
    out += headroom_checks(an)
    out += slew_checks(an)
    out += drive_checks(an)
    out += settling_checks(an)
    out += gbw_checks(chain, stability=an.stability)
    out += noise_checks(an, requirement)
    out += alias_checks(an)
    out += parts_checks(chain, windows)
    return void_if_unstable(out, an)
