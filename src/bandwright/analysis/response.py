"""A chain's response and its reading against the requirement's mask."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from bandwright.analysis.grid import passband_grid
from bandwright.inputs.requirement import Requirement

__all__ = ["Response", "MaskReading", "read_mask", "to_db"]


def to_db(h) -> np.ndarray:
    """20 log10 |h|, with zero mapped to -400 dB rather than -inf (no inf in any output)."""
    mag = np.abs(np.asarray(h))
    return 20 * np.log10(np.maximum(mag, 1e-20))


@dataclass(frozen=True, slots=True)
class Response:
    """Complex response on a frequency grid."""

    freq_hz: np.ndarray
    h: np.ndarray

    @property
    def gain_db(self) -> np.ndarray:
        return to_db(self.h)

    @property
    def phase_deg(self) -> np.ndarray:
        return np.degrees(np.unwrap(np.angle(self.h)))


@dataclass(frozen=True, slots=True)
class MaskReading:
    """Gains (dB) at the points the mask constrains.

    `passband_gain_db` is on a log grid across the passband, both edges exact;
    `stop_gain_db` at each `[[stopband]]` point in file order.
    """

    passband_freq_hz: np.ndarray
    passband_gain_db: np.ndarray
    stop_freq_hz: np.ndarray
    stop_gain_db: np.ndarray


def read_mask(response_fn: Callable[[np.ndarray], np.ndarray],
              requirement: Requirement) -> MaskReading:
    """Evaluate `response_fn` (complex H at freq_hz) where the mask is defined."""
    pf = passband_grid(requirement)
    sf = np.array([p.freq_hz for p in requirement.stopband], dtype=float)
    h = response_fn(np.concatenate([pf, sf]))
    g = to_db(h)
    return MaskReading(passband_freq_hz=pf, passband_gain_db=g[: pf.size],
                       stop_freq_hz=sf, stop_gain_db=g[pf.size:])
