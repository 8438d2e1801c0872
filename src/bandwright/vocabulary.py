"""Closed sets of words used across the package."""

from __future__ import annotations

from typing import Literal

__all__ = ["StageKind", "Family", "CheckStatus", "CheckId", "FAMILIES", "STAGE_KINDS"]

StageKind = Literal["bandpass", "lowpass", "highpass", "gain"]
Family = Literal["butterworth", "chebyshev"]
CheckStatus = Literal["pass", "warn", "fail"]
CheckId = Literal["mask", "headroom", "slew", "drive", "gbw", "noise", "parts", "yield", "topology",
                  "onset", "time"]

FAMILIES: tuple[str, ...] = ("butterworth", "chebyshev")
STAGE_KINDS: tuple[str, ...] = ("bandpass", "lowpass", "highpass", "gain")
