"""The order a bandpass mask needs, through the lowpass-to-bandpass frequency map."""

from __future__ import annotations

import math

import numpy as np

from bandwright.vocabulary import Family

__all__ = ["bandpass_omega", "order_for_point", "minimum_order"]

# ceil() of a ratio that is an integer in exact arithmetic must not round up on float noise.
_CEIL_GUARD = 1e-9


def bandpass_omega(freq_hz, center_hz: float, bandwidth_hz: float):
    """Normalised lowpass frequency of a bandpass frequency.

    Notes
    -----
    Omega = |f^2 - f0^2| / (f BW); Omega = 1 at both edges, and f and f0^2/f map to the
    same Omega (docs/methods.md "Mask -> order"; Williams & Taylor 2006, §5.1 [mem]).
    """
    f = np.asarray(freq_hz, dtype=float)
    return np.abs(f * f - center_hz**2) / (f * bandwidth_hz)


def order_for_point(family: Family, omega_s: float, max_loss_db: float, min_loss_db: float) -> int:
    """Smallest order whose loss at `omega_s` is at least `min_loss_db`.

    Notes
    -----
    Butterworth: N >= log10[(10^(Amin/10) - 1)/(10^(Amax/10) - 1)] / (2 log10 Omega_s).
    Chebyshev I: N >= acosh(sqrt(same ratio)) / acosh(Omega_s)
    (docs/methods.md; Williams & Taylor 2006, §2 [mem]).
    """
    if omega_s <= 1:
        raise ValueError(f"stopband omega must be > 1, got {omega_s}")
    ratio = math.expm1(min_loss_db * math.log(10) / 10) / math.expm1(max_loss_db * math.log(10) / 10)
    if ratio <= 1:
        return 1
    if family == "butterworth":
        n = math.log10(ratio) / (2 * math.log10(omega_s))
    elif family == "chebyshev":
        n = math.acosh(math.sqrt(ratio)) / math.acosh(omega_s)
    else:
        raise ValueError(f"unknown family {family!r}")
    return max(1, math.ceil(n - _CEIL_GUARD))


def minimum_order(family: Family, omegas, max_loss_db: float, min_losses_db) -> int:
    """The order that meets every stopband point; the most demanding point decides."""
    orders = [order_for_point(family, float(w), max_loss_db, float(a))
              for w, a in zip(omegas, min_losses_db)]
    return max(orders, default=1)
