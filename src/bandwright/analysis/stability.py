"""Stability of a stage from its denominator polynomial: the Routh–Hurwitz test, batched
over boards, and the poles of one stage for the reports.

|H(jw)|^2 is the same for a right-half-plane pole and its left-half-plane mirror, so a
response or a mask reading cannot tell an oscillator from a filter: the denominator must be
tested on its own. The op-amp outputs are ideal sources (stages do not load each other), so a
chain is stable exactly when every stage is.

References
----------
.. [1] E. J. Routh, *A Treatise on the Stability of a Given State of Motion*, Macmillan,
   1877; A. Hurwitz, "Ueber die Bedingungen, unter welchen eine Gleichung nur Wurzeln mit
   negativen reellen Theilen besitzt", Math. Ann. 46, 1895 -- the Routh array [mem].
.. [2] K. Ogata, *Modern Control Engineering*, 5th ed., Prentice Hall, 2010, §5-6 -- the
   Routh array, its first column and the count of right-half-plane roots [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from bandwright.circuits.elements import Element
from bandwright.circuits.figures import transfer_polynomials

__all__ = ["routh_stable", "scale_rad_s", "significant_degree", "StagePoles", "stage_poles"]

# Coefficients below this fraction of the largest one, in s scaled by the stage's own RC
# frequency, are the rounding noise of the polynomial interpolation (``circuits.figures``
# drops them alike): a genuine one would stand for a pole 1e10 times out.
_NEGLIGIBLE = 1e-10


def scale_rad_s(elements: Sequence[Element], values: np.ndarray | None = None) -> np.ndarray:
    """A stage's characteristic angular frequency per board: 1 / (gm(R) gm(C)), the
    reciprocal of its geometric-mean RC time constant (the op-amps' own GBW when it has no
    R or no C), rad/s.

    Parameters
    ----------
    elements : sequence of Element
    values : ndarray, shape (S, P), optional
        Part values in ``passive_names`` order (default: the element list's).

    Returns
    -------
    ndarray, shape (S,) or ()
    """
    kinds = np.array([e.kind for e in elements if e.kind in ("R", "C")])
    v = (np.array([e.value for e in elements if e.kind in ("R", "C")], dtype=float)
         if values is None else np.asarray(values, dtype=float))
    is_r, is_c = kinds == "R", kinds == "C"
    if is_r.any() and is_c.any():
        return np.exp(-(np.mean(np.log(v[..., is_r]), axis=-1)
                        + np.mean(np.log(v[..., is_c]), axis=-1)))
    wt = [2 * math.pi * e.model.gbw_hz for e in elements
          if e.kind == "opamp" and math.isfinite(e.model.gbw_hz)]
    return np.full(v.shape[:-1], math.exp(np.mean(np.log(wt))) if wt else 1.0)


def _scaled(den: np.ndarray, w_rad_s: np.ndarray) -> np.ndarray:
    """Coefficients of D(w sigma) in sigma, each board divided by its largest one."""
    den = np.atleast_2d(den)
    w = np.broadcast_to(np.asarray(w_rad_s, dtype=float), den.shape[:1])
    c = den * w[:, None] ** np.arange(den.shape[1])
    return c / np.max(np.abs(c), axis=1, keepdims=True)


def significant_degree(scaled: np.ndarray) -> int:
    """Highest power whose coefficient is more than rounding noise in any board."""
    keep = np.nonzero(np.any(np.abs(scaled) > _NEGLIGIBLE, axis=0))[0]
    return int(keep[-1]) if keep.size else 0


def routh_stable(den: np.ndarray, w_rad_s: np.ndarray | float = 1.0) -> np.ndarray:
    """Whether every root of each polynomial lies in the open left half-plane.

    Parameters
    ----------
    den : ndarray, shape (S, d + 1) or (d + 1,)
        Denominator coefficients in ASCENDING powers of s (as ``circuits.figures``).
    w_rad_s : float or ndarray (S,)
        A characteristic frequency of each polynomial (``scale_rad_s``): coefficients are
        read in s / w so that rounding noise above the true degree can be told apart.

    Returns
    -------
    ndarray of bool, shape (S,)
        True where the polynomial is strictly Hurwitz; a root on the imaginary axis (a zero
        in the first column) counts as not stable.

    Notes
    -----
    The Routh array ([1]_, [2]_): rows r0 = (a_n, a_(n-2), ...), r1 = (a_(n-1), a_(n-3),
    ...), each further row r_(i+1)[j] = (r_i[0] r_(i-1)[j+1] - r_(i-1)[0] r_i[j+1]) / r_i[0].
    The polynomial is Hurwitz exactly when the n + 1 first-column entries are all nonzero and
    of one sign; the number of sign changes counts the right-half-plane roots. A few
    multiplications per board: the test vectorises over boards, where roots would need an
    iterative eigenvalue solve each.
    """
    c = _scaled(den, w_rad_s)
    n = significant_degree(c)
    if n == 0:
        return np.isfinite(c[:, 0]) & (c[:, 0] != 0)
    desc = c[:, n::-1]                                    # a_n ... a_0
    width = n // 2 + 1
    r0 = np.zeros((c.shape[0], width))
    r1 = np.zeros((c.shape[0], width))
    r0[:, :desc[:, 0::2].shape[1]] = desc[:, 0::2]
    r1[:, :desc[:, 1::2].shape[1]] = desc[:, 1::2]
    sign = np.sign(r0[:, 0])
    ok = sign != 0
    ok &= r1[:, 0] * sign > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        for _ in range(n - 1):
            nxt = np.zeros_like(r0)
            nxt[:, :-1] = (r1[:, :1] * r0[:, 1:] - r0[:, :1] * r1[:, 1:]) / r1[:, :1]
            r0, r1 = r1, nxt
            ok &= np.isfinite(r1[:, 0]) & (r1[:, 0] * sign > 0)
    return ok


@dataclass(frozen=True, slots=True)
class StagePoles:
    """The poles of one stage as built.

    Attributes
    ----------
    position : int
    poles_rad_s : ndarray of complex
        Roots of the stage's denominator, rad/s.
    stable : bool
        Every pole in the open left half-plane (Routh–Hurwitz on the same polynomial).
    """

    position: int
    poles_rad_s: np.ndarray
    stable: bool

    @property
    def unstable_poles(self) -> np.ndarray:
        """Poles on or right of the imaginary axis."""
        return self.poles_rad_s[self.poles_rad_s.real >= 0]


def stage_poles(elements: Sequence[Element], *, position: int, source_ohms: float = 0.0
                ) -> StagePoles:
    """Poles and stability of one stage with the parts and op-amp it is built with.

    Parameters
    ----------
    elements : sequence of Element
    position : int
    source_ohms : float
        Resistance of the source driving it (the first stage).

    Returns
    -------
    StagePoles
    """
    _, den = transfer_polynomials(elements, source_ohms=source_ohms)
    w = scale_rad_s(elements)
    c = _scaled(den, w)[0]
    n = significant_degree(c[None, :])
    roots = np.roots(c[: n + 1][::-1]) * float(w) if n > 0 else np.zeros(0, dtype=complex)
    stable = bool(routh_stable(den, w)[0])
    return StagePoles(position=position, poles_rad_s=roots, stable=stable)
