"""Butterworth and Chebyshev-I lowpass prototype poles, normalised to a 1 rad/s edge."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.vocabulary import Family

__all__ = ["Prototype", "butterworth_poles", "chebyshev_poles", "prototype", "prototype_response"]


@dataclass(frozen=True, slots=True)
class Prototype:
    """A normalised lowpass prototype.

    Attributes
    ----------
    family : {"butterworth", "chebyshev"}
    order : int
    max_loss_db : float
        Loss at the edge Omega = 1 (Butterworth) or the ripple (Chebyshev), dB.
    poles : tuple of complex
        Left-half-plane poles, rad/s, edge at 1 rad/s.
    dc_gain : float
        |H(0)| when H is scaled so its passband maximum is 1.
    """

    family: Family
    order: int
    max_loss_db: float
    poles: tuple[complex, ...]
    dc_gain: float


def _ripple_factor(max_loss_db: float) -> float:
    """epsilon = sqrt(10^(Amax/10) - 1) (Williams & Taylor 2006, §2 [mem])."""
    if not max_loss_db > 0:
        raise ValueError(f"max_loss_db must be > 0, got {max_loss_db}")
    return float(np.sqrt(np.expm1(max_loss_db * np.log(10) / 10)))


def butterworth_poles(order: int, max_loss_db: float = 10 * np.log10(2)) -> np.ndarray:
    """Butterworth poles whose loss at Omega = 1 is exactly `max_loss_db`.

    Parameters
    ----------
    order : int
        Filter order N >= 1.
    max_loss_db : float
        Loss at the passband edge, dB (3.0103 dB gives the classical half-power poles).

    Returns
    -------
    ndarray of complex
        N poles, on the circle of radius epsilon^(-1/N), left half plane.

    Notes
    -----
    |H|^2 = 1 / (1 + eps^2 Omega^(2N)); the classical poles
    p_k = -sin(theta_k) + j cos(theta_k), theta_k = (2k - 1) pi / (2N), scaled by
    eps^(-1/N) (docs/methods.md, "Prototype scaling"; Williams & Taylor 2006, §2.1 [mem]).
    """
    if order < 1:
        raise ValueError(f"order must be >= 1, got {order}")
    eps = _ripple_factor(max_loss_db)
    theta = (2 * np.arange(1, order + 1) - 1) * np.pi / (2 * order)
    poles = -np.sin(theta) + 1j * np.cos(theta)
    # sin/cos leave ~1e-17 imaginary residue on the real pole of odd orders; make it exact
    # so that sections see a true real pole.
    if order % 2:
        poles[order // 2] = -1.0
    return poles * eps ** (-1.0 / order)


def chebyshev_poles(order: int, ripple_db: float) -> np.ndarray:
    """Chebyshev type-I poles with passband ripple `ripple_db`, ripple band edge at 1 rad/s.

    Notes
    -----
    a = asinh(1/eps)/N, p_k = -sinh(a) sin(theta_k) + j cosh(a) cos(theta_k),
    theta_k = (2k - 1) pi / (2N) (docs/methods.md; Williams & Taylor 2006, §2.3 [mem]).
    """
    if order < 1:
        raise ValueError(f"order must be >= 1, got {order}")
    eps = _ripple_factor(ripple_db)
    a = np.arcsinh(1 / eps) / order
    theta = (2 * np.arange(1, order + 1) - 1) * np.pi / (2 * order)
    poles = -np.sinh(a) * np.sin(theta) + 1j * np.cosh(a) * np.cos(theta)
    if order % 2:
        poles[order // 2] = -np.sinh(a)
    return poles


def prototype(family: Family, order: int, max_loss_db: float) -> Prototype:
    """The normalised prototype of `family` and `order` for passband loss `max_loss_db`."""
    if family == "butterworth":
        poles = butterworth_poles(order, max_loss_db)
        dc_gain = 1.0
    elif family == "chebyshev":
        poles = chebyshev_poles(order, max_loss_db)
        # An even-order Chebyshev starts in a ripple trough (Williams & Taylor §2.3 [mem]).
        dc_gain = 1.0 if order % 2 else 1.0 / np.sqrt(1 + _ripple_factor(max_loss_db) ** 2)
    else:
        raise ValueError(f"unknown family {family!r}")
    return Prototype(family=family, order=order, max_loss_db=float(max_loss_db),
                     poles=tuple(complex(p) for p in poles), dc_gain=float(dc_gain))


def prototype_response(proto: Prototype, omega: np.ndarray) -> np.ndarray:
    """Complex response of the prototype at normalised frequency `omega` (rad/s), peak 1."""
    s = 1j * np.asarray(omega, dtype=float)
    poles = np.asarray(proto.poles)
    k = proto.dc_gain * np.prod(-poles).real
    return k / np.prod(s[..., None] - poles, axis=-1)
