"""Frequency grids of the reports (docs/design.md, JSON `response` and `noise`)."""

from __future__ import annotations

import math

import numpy as np

from bandwright.arrays import sorted_unique
from bandwright.inputs.requirement import Requirement

__all__ = ["response_grid", "passband_grid", "noise_band", "noise_grid", "converter_band_low_hz"]

POINTS_PER_DECADE = 120
PASSBAND_POINTS = 101


def passband_grid(requirement: Requirement, points: int = PASSBAND_POINTS) -> np.ndarray:
    """Log-spaced points across the passband, both edges included exactly."""
    pb = requirement.passband
    return np.geomspace(pb.low_hz, pb.high_hz, points)


def response_grid(requirement: Requirement) -> np.ndarray:
    """f0/10 (or half the lowest stopband point) to 10 f0 (or twice the highest), at least
    100 points a decade and at least 50 inside the passband (docs/design.md)."""
    f0 = requirement.passband.center_hz
    stops = [p.freq_hz for p in requirement.stopband]
    lo = min([f0 / 10] + [f / 2 for f in stops])
    hi = max([10 * f0] + [2 * f for f in stops])
    n = int(math.ceil(POINTS_PER_DECADE * math.log10(hi / lo))) + 1
    grid = np.concatenate([np.geomspace(lo, hi, n), passband_grid(requirement)])
    return sorted_unique(grid)


def converter_band_low_hz(requirement: Requirement) -> float:
    """The low end of the band a converter's noise is integrated over: the response grid's
    low end (f0/10, or half the lowest stopband point below the band)."""
    f0 = requirement.passband.center_hz
    lows = [p.freq_hz / 2 for p in requirement.stopband
            if p.freq_hz < requirement.passband.low_hz]
    return min([f0 / 10] + lows)


def noise_band(requirement: Requirement) -> tuple[float, float]:
    """`noise.band_hz`; else, with a converter, from the response grid's low end to fs/2
    (what the converter sees); else the passband."""
    if requirement.noise.band_hz is not None:
        return requirement.noise.band_hz
    conv = getattr(requirement, "converter", None)
    if conv is not None:
        return (converter_band_low_hz(requirement), conv.nyquist_hz)
    return (requirement.passband.low_hz, requirement.passband.high_hz)


def noise_grid(requirement: Requirement, points: int = 401) -> np.ndarray:
    """Log-spaced grid over the noise band, edges included (at least 50 points inside the
    passband: a converter's wider band takes the passband grid too)."""
    lo, hi = noise_band(requirement)
    grid = np.geomspace(lo, hi, max(points, 51))
    if getattr(requirement, "converter", None) is not None:
        pb = passband_grid(requirement)
        grid = sorted_unique(np.concatenate([grid, pb[(pb > lo) & (pb < hi)]]))
    return grid
