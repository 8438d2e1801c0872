"""Prototype poles → second-order sections (bandpass path and highpass + lowpass path)."""

from __future__ import annotations

import math

import numpy as np

from bandwright.prototype.poles import Prototype
from bandwright.sections.section import Section, section_response

__all__ = ["sections_from_poles", "bandpass_sections", "wideband_sections", "cascade_response"]


def sections_from_poles(poles, center_hz: float, bandwidth_hz: float) -> tuple[Section, ...]:
    """Map normalised lowpass poles to bandpass sections of unit centre gain.

    Parameters
    ----------
    poles : array of complex
        Prototype poles normalised to a 1 rad/s edge (conjugate pairs complete).
    center_hz : float
        Geometric centre f0 of the passband, Hz.
    bandwidth_hz : float
        Edge-to-edge width, Hz.

    Returns
    -------
    tuple of Section
        Sorted by f0; a real pole gives one section at f0, a complex pair two sections
        (one below, one above f0) of equal Q. Each has gain 1 (peak gain 1 at its own f0).

    Notes
    -----
    Each prototype pole p maps to the two roots of s^2 - p B s + w0^2 = 0 (the substitution
    s -> (s^2 + w0^2)/(B s), Williams & Taylor 2006, §5.1 [mem]); a bandpass pole q gives the
    section f0 = |q|/2pi, Q = |q|/(2|Re q|). This equals Geffe's closed form (EDN 1974 [mem];
    docs/methods.md) and the pairing of scipy.signal.lp2bp_zpk's poles.
    """
    w0_rad_s = 2 * math.pi * center_hz
    b_rad_s = 2 * math.pi * bandwidth_hz
    poles = np.asarray(poles, dtype=complex)
    out: list[Section] = []
    for p in poles:
        if p.imag < 0:
            continue  # its conjugate partner carries the pair
        if p.imag == 0:
            # real pole -a: s^2 + a B s + w0^2, a single section centred on f0 (it may have
            # two real poles when a B > 2 w0, i.e. Q < 1/2; still one biquad).
            out.append(Section(kind="bandpass", f0_hz=float(center_hz),
                               q=float(w0_rad_s / (-p.real * b_rad_s)), gain=1.0))
            continue
        pb = p * b_rad_s
        disc = np.sqrt(pb * pb - 4 * w0_rad_s**2 + 0j)
        for q_pole in ((pb + disc) / 2, (pb - disc) / 2):
            mag = abs(q_pole)
            out.append(Section(kind="bandpass", f0_hz=float(mag / (2 * math.pi)),
                               q=float(mag / (2 * abs(q_pole.real))), gain=1.0))
    return tuple(sorted(out, key=lambda s: s.f0_hz))


def cascade_response(sections, freq_hz) -> np.ndarray:
    """Product of the sections' ideal responses at `freq_hz`."""
    f = np.asarray(freq_hz, dtype=float)
    h = np.ones(f.shape, dtype=complex)
    for sec in sections:
        h = h * section_response(sec, f)
    return h


def _with_gains(sections: tuple[Section, ...], total_gain: float) -> tuple[Section, ...]:
    """Share `total_gain` (a positive V/V factor over the unit-gain cascade) equally."""
    per = total_gain ** (1.0 / len(sections))
    return tuple(Section(kind=s.kind, f0_hz=s.f0_hz, q=s.q, gain=float(s.gain * per))
                 for s in sections)


def bandpass_sections(proto: Prototype, *, center_hz: float, bandwidth_hz: float,
                      gain: float) -> tuple[Section, ...]:
    """Bandpass sections of a prototype whose passband maximum is `gain` (V/V).

    The centre of the bandpass maps to the prototype's DC, so the centre gain is
    gain · dc_gain (below the maximum for an even-order Chebyshev, which starts in a
    ripple trough; docs/design.md, "Meanings").
    """
    secs = sections_from_poles(proto.poles, center_hz, bandwidth_hz)
    centre = abs(cascade_response(secs, np.array([center_hz]))[0])
    return _with_gains(secs, gain * proto.dc_gain / centre)


def _lowpass_sections(poles, edge_hz: float, kind: str) -> list[Section]:
    """Lowpass (or, by s -> w_c^2/s, highpass) biquads of normalised poles at edge `edge_hz`."""
    out = []
    for p in np.asarray(poles, dtype=complex):
        if p.imag <= 0:
            continue
        mag = abs(p)
        # Lowpass: poles scale by w_c. Highpass: p -> w_c / p keeps |p|-inverse and the same Q.
        f0_hz = edge_hz * mag if kind == "lowpass" else edge_hz / mag
        out.append(Section(kind=kind, f0_hz=float(f0_hz), q=float(mag / (2 * abs(p.real))),
                           gain=1.0))
    return out


def wideband_sections(highpass: Prototype, lowpass: Prototype, *, low_hz: float, high_hz: float,
                      gain: float) -> tuple[Section, ...]:
    """Highpass cascade for the lower edge and lowpass cascade for the upper edge.

    Both prototypes must be of even order (every section a biquad). The section gains are
    scaled so that the passband maximum of the whole cascade is `gain`.

    Notes
    -----
    The lowpass-to-highpass map s -> w_c/s keeps each pole pair's Q and sends its
    frequency to w_c/|p| (Williams & Taylor 2006, §4 [mem]). The "more than an octave →
    highpass + lowpass" rule is Winder, *Analog and Digital Filter Design*, 2002, ch. 6.
    """
    for proto in (highpass, lowpass):
        if proto.order % 2:
            raise ValueError("wideband prototypes must be of even order")
    secs = tuple(_lowpass_sections(highpass.poles, low_hz, "highpass")
                 + _lowpass_sections(lowpass.poles, high_hz, "lowpass"))
    grid = np.geomspace(low_hz, high_hz, 4001)
    peak = np.max(np.abs(cascade_response(secs, grid)))
    return _with_gains(secs, gain / peak)
