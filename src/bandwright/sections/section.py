"""The second-order section: one value, and its ideal response."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.vocabulary import StageKind

__all__ = ["Section", "section_response"]


@dataclass(frozen=True, slots=True)
class Section:
    """One second-order (or first-order gain) block of the chain.

    Attributes
    ----------
    kind : {"bandpass", "lowpass", "highpass", "gain"}
    f0_hz : float
        Pole frequency in Hz (for "gain": 0).
    q : float
        Pole quality factor (for "gain": 0).
    gain : float
        V/V, signed: at f0 for a bandpass, at DC for a lowpass, at high frequency for a
        highpass, flat for a gain stage.
    """

    kind: StageKind
    f0_hz: float
    q: float
    gain: float


def section_response(section: Section, freq_hz: np.ndarray) -> np.ndarray:
    """Ideal complex response of a section.

    Parameters
    ----------
    section : Section
    freq_hz : ndarray of float
        Frequencies in Hz.

    Returns
    -------
    ndarray of complex
        H(j 2 pi f).

    Notes
    -----
    The standard biquads, e.g. Schaumann & Van Valkenburg, *Design of Analog Filters*,
    2001, ch. 4: bandpass H = K (w0/Q) s / (s^2 + (w0/Q) s + w0^2); lowpass
    H = K w0^2 / (...); highpass H = K s^2 / (...).
    """
    f = np.asarray(freq_hz, dtype=float)
    if section.kind == "gain":
        return np.full(f.shape, complex(section.gain))
    w0_rad_s = 2 * np.pi * section.f0_hz
    s = 2j * np.pi * f
    den = s * s + (w0_rad_s / section.q) * s + w0_rad_s**2
    if section.kind == "bandpass":
        num = (w0_rad_s / section.q) * s
    elif section.kind == "lowpass":
        num = np.full(s.shape, w0_rad_s**2, dtype=complex)
    else:
        num = s * s
    return section.gain * num / den
