"""The Check record: one verdict with its figure, its limit and a reason."""

from __future__ import annotations

from dataclasses import dataclass

from bandwright.vocabulary import CheckStatus

__all__ = ["Check", "worst_status"]


@dataclass(frozen=True, slots=True)
class Check:
    """One check result.

    Attributes
    ----------
    id : str
        One of docs/design.md's check ids (mask, headroom, slew, drive, gbw, noise, parts, yield),
        "stability", "topology" or "order".
    status : {"pass", "warn", "fail"}
    value, limit : float or None
        The figure and what it is held against, in `unit`.
    unit : str
    message : str
        One line a designer understands.
    stage : int or None
        Position of the stage it concerns (1-based), if any.
    net : str or None
        The op-amp output net it concerns, if any.
    """

    id: str
    status: CheckStatus
    value: float | None
    limit: float | None
    unit: str
    message: str
    stage: int | None = None
    net: str | None = None


_RANK = {"pass": 0, "warn": 1, "fail": 2}


def worst_status(checks) -> CheckStatus:
    """The worst status among `checks` ("pass" when empty)."""
    return max((c.status for c in checks), key=_RANK.__getitem__, default="pass")
