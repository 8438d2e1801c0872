"""Transfer polynomials of an element list, and the section figures (f0, Q, gain) they give.

The nodal solver (``circuits.nodal``) is the reference but costs one complex solve per
frequency and sample. Here the same MNA matrices are reduced to the numerator and
denominator polynomials in s of the transfer, which are cheap to evaluate anywhere and
whose roots are the poles.

Method
------
``det(G + s C)`` is a polynomial in s of degree at most d = (number of capacitors) +
(number of op-amps with finite GBW): every capacitor and every finite-GBW op-amp row puts
s in one matrix entry, and each (row, column) of the determinant's expansion takes one
entry per row. By Cramer's rule the output voltage is ``det(Y_out) / det(Y)``, with
``Y_out`` the matrix whose output column is replaced by the excitation; ``det(Y_out)`` is
also of degree <= d. Both are evaluated at the K = d + 1 points ``s_k = w_c exp(2 pi j
k / K)`` on a circle, and ``fft(P) / K`` returns the coefficients of P(w_c sigma) in
sigma exactly (the discrete Fourier transform interpolates a polynomial of degree < K
from K roots of unity), up to rounding.

The radius ``w_c`` is the reciprocal of a characteristic RC time constant (geometric mean
of the resistors times the geometric mean of the capacitors), so that in sigma = s/w_c
the coefficients are of similar size; rows and columns of ``G + s C`` are equilibrated by
constant (s-independent) factors, which scale both determinants alike and leave the ratio
and the polynomial structure untouched.

References
----------
.. [1] J. Vlach, K. Singhal, *Computer Methods for Circuit Analysis and Design*, 2nd ed.,
   Van Nostrand Reinhold, 1994 -- network functions by polynomial interpolation on a
   circle with the FFT [mem; chapter not checked].
.. [2] J. W. Cooley, J. W. Tukey, "An algorithm for the machine calculation of complex
   Fourier series", Math. Comp. 19, 1965 -- the DFT as interpolation at the roots of unity.
.. [3] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*, Oxford UP, 2001,
   ch. 4 -- pole frequency and quality factor of a pole pair:
   w0 = |p|, Q = w0 / (2 |Re p|) [mem].
"""

from __future__ import annotations

import math
from typing import Callable, Sequence

import numpy as np
from numpy.polynomial import polynomial as npoly

from bandwright.circuits.base import Figures
from bandwright.circuits.elements import GROUND, Element
from bandwright.circuits.expansion import (expandable, expanded_polynomials,
                                           expanded_polynomials_many, expanded_split)
from bandwright.circuits.nodal import mna_system
from bandwright.vocabulary import StageKind

__all__ = ["transfer_polynomials", "transfer_polynomials_many", "polynomial_degree",
           "section_figures", "section_figures_batch", "section_poles_rad_s",
           "figures_from_scaled",
           "part_sweep_figures", "horner_rows"]

# Coefficients below this fraction of the largest one (in sigma = s/w_c) are rounding
# noise of the FFT interpolation: a genuine coefficient that small would stand for a pole
# some 1e10 times w_c away, which no figure depends on.
_NEGLIGIBLE = 1e-10


def polynomial_degree(elements: Sequence[Element]) -> int:
    """Upper bound d on the degree in s of the transfer's numerator and denominator.

    Parameters
    ----------
    elements : sequence of Element
        The element list.

    Returns
    -------
    int
        Number of capacitors plus number of op-amps with finite GBW.
    """
    n_c = sum(1 for e in elements if e.kind == "C")
    n_poles = sum(1 for e in elements if e.kind == "opamp" and math.isfinite(e.model.gbw_hz))
    return n_c + n_poles


def horner_rows(coefs: np.ndarray, x: np.ndarray) -> np.ndarray:
    """sum_m coefs[:, m] x^m: each row's polynomial (ascending coefficients, (S, d + 1)) at
    every point of `x` (F,), (S, F), by Horner's rule in one buffer (the steps of
    ``numpy.polynomial.polynomial.polyval(x, coefs.T, tensor=True)``, the same values,
    without a new (S, F) array per step). Real or complex, as coefs and x are."""
    out = np.empty((coefs.shape[0], x.size), dtype=np.result_type(coefs, x))
    out[...] = coefs[:, -1:]
    for m in range(coefs.shape[1] - 2, -1, -1):
        out *= x
        out += coefs[:, m:m + 1]
    return out


def _scale_rad_s(elements: Sequence[Element], v: np.ndarray) -> np.ndarray:
    """Characteristic angular frequency w_c per sample: 1 / (gm(R) gm(C))."""
    is_r = np.array([e.kind == "R" for e in elements if e.kind in ("R", "C")], dtype=bool)
    is_c = ~is_r
    if is_r.any() and is_c.any():
        # np.mean's own sum and division, without its Python layer (called per batch).
        log_tau = (np.add.reduce(np.log(v[..., is_r]), axis=-1) / int(is_r.sum())
                   + np.add.reduce(np.log(v[..., is_c]), axis=-1) / int(is_c.sum()))
        return np.exp(-log_tau)
    wt = [2 * math.pi * e.model.gbw_hz for e in elements
          if e.kind == "opamp" and math.isfinite(e.model.gbw_hz)]
    # No RC time constant: the op-amp poles are the only dynamics.
    w = math.exp(np.mean(np.log(wt))) if wt else 1.0
    return np.full(v.shape[:-1], w)


def _reciprocal(x: np.ndarray) -> np.ndarray:
    """1/x, with 1 where x is 0 (an all-zero row: the circuit is singular anyway)."""
    return 1.0 / np.where(x > 0, x, 1.0)


def _scaled_polynomials(elements: Sequence[Element], *, out_net: str, input_net: str,
                        source_ohms: float, values: np.ndarray | None,
                        gbw_scale: np.ndarray | None = None
                        ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Coefficients (ascending) of num and den in sigma = s / w_c, and w_c.

    Both are divided by the largest |den coefficient|, per sample.
    """
    if gbw_scale is not None and values is None:
        # A GBW spread alone still makes a batch: every sample gets the nominal parts.
        nominal = np.array([e.value for e in elements if e.kind in ("R", "C")], dtype=float)
        values = np.broadcast_to(nominal, (np.shape(gbw_scale)[0], nominal.size))
    system = mna_system(elements, input_net=input_net, source_ohms=source_ohms, values=values,
                        gbw_scale=gbw_scale)
    k_out = system.index(out_net)
    if k_out < 0:
        raise ValueError("out_net cannot be ground")
    if values is None:
        v = np.array([e.value for e in elements if e.kind in ("R", "C")], dtype=float)
    else:
        v = np.asarray(values, dtype=float)
    w_c = _scale_rad_s(elements, v)                       # () or (S,)
    n_points = polynomial_degree(elements) + 1
    sigma = np.exp(2j * np.pi * np.arange(n_points) / n_points)
    g, c = system.g, system.c                              # (..., M, M)
    # Constant equilibration: det(D1 Y D2) = det(D1) det(D2) det(Y) for every s.
    mag = np.abs(g) + w_c[..., None, None] * np.abs(c)
    row = _reciprocal(np.max(mag, axis=-1))                # (..., M)
    mag = mag * row[..., :, None]
    col = _reciprocal(np.max(mag, axis=-2))
    d1 = row[..., None, :, None]
    d2 = col[..., None, None, :]
    s = w_c[..., None] * sigma                             # (..., K)
    # d1 (G + s C) d2, built in place: the same operations in the same order, one array.
    y = s[..., :, None, None] * c[..., None, :, :]
    y += g[..., None, :, :]
    y *= d1
    y *= d2
    y_out = y.copy()
    # Cramer: x_out = col_out * det(Y with column out <- D1 rhs) / det(Y).
    y_out[..., :, k_out] = (system.rhs * row)[..., None, :] * col[..., None, k_out, None]
    den = np.fft.fft(np.linalg.det(y), axis=-1) / n_points
    num = np.fft.fft(np.linalg.det(y_out), axis=-1) / n_points
    norm = np.max(np.abs(den), axis=-1, keepdims=True)
    return (num / norm).real, (den / norm).real, w_c


def _scaled_expanded(elements: Sequence[Element], *, out_net: str, input_net: str,
                     source_ohms: float, values: np.ndarray | None,
                     gbw_scale: np.ndarray | None = None, fast: bool = False
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``_scaled_polynomials`` from the cached monomial expansion (``circuits.expansion``)
    instead of determinants: the same scaling to sigma = s / w_c and normalisation.
    `fast`: see ``expansion.expanded_polynomials``."""
    nominal = np.array([e.value for e in elements if e.kind in ("R", "C")], dtype=float)
    if gbw_scale is not None and values is None:
        values = np.broadcast_to(nominal, (np.shape(gbw_scale)[0], nominal.size))
    num, den = expanded_polynomials(elements, out_net=out_net, input_net=input_net,
                                    source_ohms=source_ohms, values=values, gbw_scale=gbw_scale,
                                    fast=fast)
    if values is None:
        v = nominal
        num, den = num[0], den[0]
    else:
        v = np.asarray(values, dtype=float)
    w_c = _scale_rad_s(elements, v)
    powers = w_c[..., None] ** np.arange(den.shape[-1])
    num, den = num * powers, den * powers
    norm = np.max(np.abs(den), axis=-1, keepdims=True)
    return num / norm, den / norm, w_c


def _scaled_auto(elements: Sequence[Element], *, source_ohms: float, **kw
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The expansion where the wiring can be expanded, the determinants otherwise."""
    if expandable(elements, source_ohms=source_ohms):
        return _scaled_expanded(elements, source_ohms=source_ohms, fast=True, **kw)
    return _scaled_polynomials(elements, source_ohms=source_ohms, **kw)


_METHODS = {"det": _scaled_polynomials, "expansion": _scaled_expanded, "auto": _scaled_auto}


def transfer_polynomials(elements: Sequence[Element], *, out_net: str = "out",
                         input_net: str = "in", source_ohms: float = 0.0,
                         values: np.ndarray | None = None,
                         gbw_scale: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator of the transfer to `out_net` as polynomials in s.

    Parameters
    ----------
    elements : sequence of Element
        The element list.
    out_net : str
        Output net.
    input_net : str
        Net driven by the (1 V open-circuit) source.
    source_ohms : float
        Source resistance, ohms (0: ideal source).
    values : ndarray of float, shape (S, P), optional
        Part-value samples in ``passive_names(elements)`` order.
    gbw_scale : ndarray of float, shape (S,) or (S, A), optional
        Per-sample factor on the GBW of every op-amp, or of each op-amp in element order
        (see ``circuits.nodal.mna_system``).

    Returns
    -------
    num, den : ndarray of float, shape (d + 1,) or (S, d + 1)
        Coefficients in ASCENDING powers of s (``num[k]`` multiplies s**k), so that
        ``numpy.polynomial.polynomial.polyval(s, num)`` evaluates them; reverse them for
        ``np.roots``. d is ``polynomial_degree(elements)``; coefficients above the true
        degree come out as rounding noise. Only the ratio num/den is meaningful: both are
        divided by a common factor chosen so that the largest coefficient of den, in the
        scaled variable s/w_c, is 1 (w_c: see Notes).

    Raises
    ------
    ValueError
        On bad arguments (see ``circuits.nodal.mna_system``).

    Notes
    -----
    Evaluates ``det(G + s C)`` and its Cramer numerator at d + 1 points on the circle
    |s| = w_c and interpolates by inverse DFT ([1]_, [2]_); w_c = 1/(gm(R) gm(C)), the
    reciprocal geometric-mean RC time constant (module docstring). The transfer is the same
    as ``circuits.nodal.transfer``: from the open-circuit source voltage to `out_net`.
    """
    num, den, w_c = _scaled_polynomials(elements, out_net=out_net, input_net=input_net,
                                        source_ohms=source_ohms, values=values,
                                        gbw_scale=gbw_scale)
    powers = w_c[..., None] ** -np.arange(num.shape[-1])
    return num * powers, den * powers


def transfer_polynomials_many(elements: Sequence[Element], *, out_nets: Sequence[str],
                              input_net: str = "in", source_ohms: float = 0.0,
                              values: np.ndarray | None = None,
                              gbw_scale: np.ndarray | None = None, method: str = "det"
                              ) -> tuple[np.ndarray, np.ndarray]:
    """Numerators of the transfers to several nets, over their one shared denominator.

    Parameters
    ----------
    elements : sequence of Element
        The element list.
    out_nets : sequence of str
        Output nets (not ground).
    input_net : str
        Net driven by the (1 V open-circuit) source.
    source_ohms : float
        Source resistance, ohms (0: ideal source).
    values : ndarray of float, shape (S, P), optional
        Part-value samples in ``passive_names(elements)`` order.
    gbw_scale : ndarray of float, shape (S,) or (S, A), optional
        Per-sample factor on the op-amps' GBW (see ``circuits.nodal.mna_system``).

    Returns
    -------
    nums : ndarray of float, shape (N, d + 1) or (N, S, d + 1)
        Numerator of the transfer to each of the N `out_nets`, ascending powers of s.
    den : ndarray of float, shape (d + 1,) or (S, d + 1)
        The common denominator, scaled as in ``transfer_polynomials``.

    Raises
    ------
    ValueError
        On bad arguments, or an output net that is ground.
    numpy.linalg.LinAlgError
        If the circuit is singular at an interpolation point.

    Notes
    -----
    By Cramer's rule the numerator of net k is det(Y) x_k ([1]_): one determinant and one
    solve of ``(G + s C) x = rhs`` at the d + 1 points on the circle |s| = w_c serve every
    net, where ``transfer_polynomials`` takes one determinant per net. The DFT then
    interpolates the coefficients exactly as there ([2]_). Matches
    ``transfer_polynomials`` net by net to rounding (tested).

    ``method="auto"`` takes the polynomials from the cached monomial expansion of each net
    (``circuits.expansion``) where the wiring can be expanded, the determinants otherwise;
    the same normalisation, equal to rounding (tests/circuits/test_expansion.py).
    """
    if method not in ("det", "auto"):
        raise ValueError(f"unknown method {method!r}")
    if method == "auto" and expandable(elements, source_ohms=source_ohms):
        return _expanded_many(elements, out_nets=out_nets, input_net=input_net,
                              source_ohms=source_ohms, values=values, gbw_scale=gbw_scale)
    if gbw_scale is not None and values is None:
        nominal = np.array([e.value for e in elements if e.kind in ("R", "C")], dtype=float)
        values = np.broadcast_to(nominal, (np.shape(gbw_scale)[0], nominal.size))
    system = mna_system(elements, input_net=input_net, source_ohms=source_ohms, values=values,
                        gbw_scale=gbw_scale)
    ks = [system.index(n) for n in out_nets]
    if any(k < 0 for k in ks):
        raise ValueError("an output net cannot be ground")
    if values is None:
        v = np.array([e.value for e in elements if e.kind in ("R", "C")], dtype=float)
    else:
        v = np.asarray(values, dtype=float)
    w_c = _scale_rad_s(elements, v)
    n_points = polynomial_degree(elements) + 1
    sigma = np.exp(2j * np.pi * np.arange(n_points) / n_points)
    g, c = system.g, system.c
    # The same constant equilibration as _scaled_polynomials, applied to the real G and C
    # once rather than to the complex matrix at every point.
    mag = np.abs(g) + w_c[..., None, None] * np.abs(c)
    row = _reciprocal(np.max(mag, axis=-1))
    mag = mag * row[..., :, None]
    col = _reciprocal(np.max(mag, axis=-2))
    scale = row[..., :, None] * col[..., None, :]
    s = w_c[..., None] * sigma
    y = (g * scale)[..., None, :, :] + s[..., :, None, None] * (c * scale)[..., None, :, :]
    det = np.linalg.det(y)
    rhs = np.broadcast_to((system.rhs * row)[..., None, :, None], y.shape[:-1] + (1,))
    z = np.linalg.solve(y, rhs)[..., 0]                      # D2^-1 x at every point
    den = np.fft.fft(det, axis=-1) / n_points
    norm = np.max(np.abs(den), axis=-1, keepdims=True)
    powers = w_c[..., None] ** -np.arange(n_points)
    nums = np.stack([(np.fft.fft(det * z[..., k] * col[..., k, None], axis=-1) / n_points
                      / norm).real * powers for k in ks])
    return nums, (den / norm).real * powers


def _expanded_many(elements: Sequence[Element], *, out_nets: Sequence[str], input_net: str,
                   source_ohms: float, values: np.ndarray | None,
                   gbw_scale: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """``transfer_polynomials_many`` from the expansions: one per net, one shared den."""
    nominal = np.array([e.value for e in elements if e.kind in ("R", "C")], dtype=float)
    if gbw_scale is not None and values is None:
        values = np.broadcast_to(nominal, (np.shape(gbw_scale)[0], nominal.size))
    if any(n == GROUND for n in out_nets):
        raise ValueError("an output net cannot be ground")
    nums, den = expanded_polynomials_many(elements, out_nets=out_nets, input_net=input_net,
                                          source_ohms=source_ohms, values=values,
                                          gbw_scale=gbw_scale, fast=True)
    v = nominal if values is None else np.asarray(values, dtype=float)
    w_c = _scale_rad_s(elements, v)
    norm = np.max(np.abs(den * w_c[..., None] ** np.arange(den.shape[-1])), axis=-1,
                  keepdims=True)
    out_nums, out_den = np.stack(nums) / norm, den / norm
    if values is None:
        return out_nums[:, 0], out_den[0]
    return out_nums, out_den


def _trim(coefs: np.ndarray) -> np.ndarray:
    """Drop highest-power coefficients that are rounding noise."""
    big = np.max(np.abs(coefs))
    keep = np.nonzero(np.abs(coefs) > _NEGLIGIBLE * big)[0]
    return coefs[: keep[-1] + 1] if keep.size else coefs[:1]


# A complex pair within this factor of the expected pole frequency is the section's own;
# only beyond it can two real poles (a section with Q < 1/2) be nearer (op-amp poles often
# form a complex pair far above such a section).
_COMPLEX_REACH = math.log(2.0)


def _pick_pair(poles: np.ndarray, w_near: float) -> tuple[complex, complex, bool]:
    """The section's pole pair: the complex pair closest in log |p| to w_near, unless none
    lies within ``_COMPLEX_REACH`` and two real poles adjacent in |p| have their geometric
    mean closer (a section with Q < 1/2). ``_pair_indices`` is the same rule for batches.
    Returns the two poles and whether they are real."""
    k1, k2, is_real = _pair_indices(poles[None, :], np.array([w_near]), conj=True)
    if k1[0] < 0:
        raise ValueError(f"the transfer has fewer than two poles: {poles}")
    return complex(poles[k1[0]]), complex(poles[k2[0]]), bool(is_real[0])


def _pair_indices(poles: np.ndarray, w_near: np.ndarray, *, conj: bool = False
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Column indices (S,), (S,) of each row's section pole pair in `poles` (S, d) (see
    ``_pick_pair``), -1 where a row has neither a complex pair nor two real poles; and
    whether the pair is two real poles (S,). For a complex pair the second index is its
    conjugate's only with `conj` (else the first again: its figures need only the one)."""
    s_count, d = poles.shape
    if d == 0:
        none = np.full(s_count, -1)
        return none, none.copy(), np.zeros(s_count, dtype=bool)
    rows = np.arange(s_count)
    mag = np.abs(poles)
    tiny = 1e-9 * np.maximum(mag, np.finfo(float).tiny)   # |Im p| below this: real
    with np.errstate(divide="ignore", invalid="ignore"):
        upper = poles.imag > tiny
        d_c = np.where(upper, np.abs(np.log(np.maximum(mag, 1e-300) / w_near[:, None])),
                       np.inf)
    k1 = np.argmin(d_c, axis=1)
    best = d_c[rows, k1]
    k2 = k1.copy()
    is_real = np.zeros(s_count, dtype=bool)
    far = np.flatnonzero(~(best <= _COMPLEX_REACH))
    if far.size and d >= 2:
        # Real poles in order of |p| (the others last); a pair's w0 is its geometric mean.
        m = mag[far]
        key = np.where(np.abs(poles[far].imag) <= tiny[far], m, np.inf)
        order = np.argsort(key, axis=1, kind="stable")
        sm = np.take_along_axis(key, order, axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            log_gm = 0.5 * (np.log(np.maximum(sm[:, :-1], 1e-300))
                            + np.log(np.maximum(sm[:, 1:], 1e-300)))
            d_r = np.where(np.isfinite(sm[:, 1:]),
                           np.abs(log_gm - np.log(np.maximum(w_near[far], 1e-300))[:, None]),
                           np.inf)
        j = np.argmin(d_r, axis=1)
        sub = np.arange(far.size)
        use = d_r[sub, j] < best[far]
        rr = far[use]
        k1[rr], k2[rr] = order[sub, j][use], order[sub, j + 1][use]
        is_real[rr] = True
        best[rr] = d_r[sub, j][use]
    if conj:
        cx = np.flatnonzero(~is_real)
        masked = np.where(np.arange(d) == k1[cx][:, None], np.inf, 0.0)
        k2[cx] = np.argmin(np.abs(poles[cx] - np.conj(poles[cx, k1[cx]])[:, None]) + masked,
                           axis=1)
    if not np.isfinite(best).all():
        none = ~np.isfinite(best)
        k1[none] = -1
        k2[none] = -1
    return k1, k2, is_real


def _pair_figures(p1: np.ndarray, p2: np.ndarray, is_real: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray]:
    """w0 and Q of pole pairs (in any unit of angular frequency; [3]_).

    A complex pair p, p*: w0 = |p|, Q = -w0 / (2 Re p), negative for a right-half-plane
    pair. Two real poles: w0 = sqrt(p1 p2), Q = w0 / |p1 + p2| (at most 1/2), made negative
    when either pole lies in the right half plane, so that an unstable section shows as
    Q < 0 either way. `is_real` (S,) says which kind each pair is."""
    with np.errstate(divide="ignore", invalid="ignore"):
        w0 = np.abs(p1)
        q = -w0 / (2 * p1.real)
        if is_real.any():
            w0_r = np.sqrt(np.abs(p1.real * p2.real))
            q_r = w0_r / np.abs(p1.real + p2.real)
            q_r = np.where((p1.real > 0) | (p2.real > 0), -q_r, q_r)
            w0, q = np.where(is_real, w0_r, w0), np.where(is_real, q_r, q)
    return w0, q


def section_figures(elements: Sequence[Element], *, kind: StageKind, near_hz: float,
                    out_net: str = "out", input_net: str = "in",
                    source_ohms: float = 0.0) -> Figures:
    """Pole frequency, Q and gain of a section as built, from its transfer polynomials.

    Parameters
    ----------
    elements : sequence of Element
        The section's element list (its op-amp models included: finite GBW moves the
        figures).
    kind : {"bandpass", "lowpass", "highpass", "gain"}
        Which gain to report (see Notes).
    near_hz : float
        Expected pole frequency, Hz; the pole pair closest to it in log frequency is used.
    out_net : str
        Output net.
    input_net : str
        Input net.
    source_ohms : float
        Resistance of the source driving `input_net` (0: ideal); the figures are then those
        of the section as the source sees it.

    Returns
    -------
    Figures
        ``f0_hz``, ``q`` and signed ``gain`` (V/V). For kind "gain": f0_hz = q = 0.

    Raises
    ------
    ValueError
        If the transfer has no pole pair, or `kind` is unknown.

    Notes
    -----
    Poles are the roots of the denominator. The section's pair is the complex pair nearest
    `near_hz`; where none lies within a factor 2 of it, two real poles adjacent in |p|
    whose geometric mean is nearer (a section with Q < 1/2 has real poles, while its
    op-amps' poles may still form a complex pair far above). For a complex pair p, p*:
    w0 = |p|, Q = -|p| / (2 Re p) ([3]_), which equals |p|/(2|Re p|) for a stable pair and
    is negative for a right-half-plane pair, so that an unstable section shows as Q < 0.
    For two real poles p1, p2: w0 = sqrt(p1 p2), Q = w0 / |p1 + p2| (Q <= 1/2), negative
    if either lies in the right half plane. f0 = w0 / 2 pi.

    Gain, signed:

    * bandpass -- H(j w0), reported as sign(Re H) |H| (H is real at w0 for an ideal
      biquad; finite GBW adds a small phase that this ignores, keeping the sign, so an
      inverting multiple-feedback section gives about -H0);
    * lowpass -- H(0) = num[0] / den[0];
    * highpass -- the high-frequency gain of the section itself, with the poles and zeros
      that are not its own divided out at their DC value:
      ``num_m / den_n * prod(-z_extra) / prod(-p_extra)``, where the section keeps the
      chosen pole pair and the two zeros nearest the origin, and every other pole and zero
      (the op-amp poles, above all) is an "extra" one. With an ideal op-amp this is
      simply lim H(s) as s -> infinity; with finite GBW it is the gain the section would
      have if its op-amps were ideal above f0 only, not H at any one frequency;
    * gain -- H(0).
    """
    if kind not in ("bandpass", "lowpass", "highpass", "gain"):
        raise ValueError(f"unknown section kind {kind!r}")
    num, den, w_c = _scaled_polynomials(elements, out_net=out_net, input_net=input_net,
                                        source_ohms=source_ohms, values=None)
    w_c = float(w_c)
    num, den = _trim(num), _trim(den)
    if kind == "gain":
        return Figures(f0_hz=0.0, q=0.0, gain=float(num[0] / den[0]))
    poles = np.roots(den[::-1])                             # in sigma = s / w_c
    pair = _pick_pair(poles, 2 * math.pi * near_hz / w_c)
    p = pair[0]
    if pair[2]:
        w0_a, q_a = _pair_figures(np.array([p]), np.array([pair[1]]), np.array([True]))
        w0, q = float(w0_a[0]), float(q_a[0])
    else:
        w0 = float(abs(p))
        q = -w0 / (2 * p.real) if p.real != 0 else math.inf
    if kind == "bandpass":
        with np.errstate(divide="ignore", invalid="ignore"):  # a pole on the jω axis
            h = npoly.polyval(1j * w0, num) / npoly.polyval(1j * w0, den)
        gain = math.copysign(abs(h), h.real)
    elif kind == "lowpass":
        gain = float(num[0] / den[0])
    else:
        zeros = np.roots(num[::-1])
        order = np.argsort(np.abs(zeros))
        if zeros.size < 2:
            raise ValueError("a highpass transfer needs at least two zeros")
        extra_zeros = zeros[order[2:]]
        others = list(poles)
        for chosen in pair[:2]:
            others.pop(int(np.argmin(np.abs(np.asarray(others) - chosen))))
        gain = float(np.real(num[-1] / den[-1] * np.prod(-extra_zeros)
                             / np.prod(-np.asarray(others, dtype=complex))))
    return Figures(f0_hz=float(w0 * w_c / (2 * math.pi)), q=float(q), gain=float(gain))


def _batch_roots(coefs: np.ndarray) -> np.ndarray:
    """Roots of many polynomials of one degree (ascending coefficients, shape (S, d+1)),
    as eigenvalues of their companion matrices, shape (S, d)."""
    d = coefs.shape[-1] - 1
    if d < 1:
        return np.zeros(coefs.shape[:-1] + (0,), dtype=complex)
    comp = np.zeros(coefs.shape[:-1] + (d, d))
    comp[..., 1:, :-1] = np.eye(d - 1)
    comp[..., :, -1] = -coefs[..., :-1] / coefs[..., -1:]
    return np.linalg.eigvals(comp)


def _batch_degree(coefs: np.ndarray) -> int:
    """Highest power whose coefficient is not rounding noise in any sample."""
    size = np.abs(coefs)
    big = size.max(axis=-1, keepdims=True)
    keep = np.nonzero((size > _NEGLIGIBLE * big).any(axis=0))[0]
    return int(keep[-1]) if keep.size else 0


def section_figures_batch(elements: Sequence[Element], *, kind: StageKind, near_hz: float,
                          values: np.ndarray, out_net: str = "out", input_net: str = "in",
                          gbw_scale: np.ndarray | None = None, source_ohms: float = 0.0,
                          method: str = "det", start_rad_s: np.ndarray | None = None
                          ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``section_figures`` for many part-value samples at once.

    Parameters
    ----------
    elements : sequence of Element
    kind : {"bandpass", "lowpass", "highpass", "gain"}
    near_hz : float
    values : ndarray, shape (S, P)
        Part values in ``passive_names(elements)`` order.
    out_net, input_net : str
    gbw_scale : ndarray of float, shape (S,) or (S, A), optional
        Per-sample factor on the op-amps' GBW (see ``circuits.nodal.mna_system``).
    start_rad_s : ndarray of complex, shape (d,), optional
        Approximate poles shared by every sample (those of a nearby value set, rad/s,
        ``section_poles_rad_s``): the roots are polished from them by Aberth's iteration
        instead of taken as companion eigenvalues; equal to rounding, and samples that do
        not converge get the eigenvalues.

    Returns
    -------
    f0_hz, q, gain : ndarray, shape (S,)
        As ``section_figures`` (same pole choice and gain definitions), NaN where a sample
        has no pole pair. Samples must share one polynomial degree (they do when only
        values change).

    Notes
    -----
    Roots come from batched companion-matrix eigenvalues instead of ``np.roots`` per
    sample; the figures are the same to rounding (tested). ``method="expansion"`` takes the
    polynomials from the wiring's cached monomial expansion (``circuits.expansion``), a
    product and a matrix multiply per batch, instead of determinants on a circle; the
    figures agree to rounding (tests/circuits/test_expansion.py). ``method="auto"`` takes
    the expansion where the wiring can be expanded (``circuits.expansion.expandable``) and
    the determinants otherwise, and solves a quadratic denominator in closed form.
    """
    if method not in _METHODS:
        raise ValueError(f"unknown method {method!r}")
    num, den, w_c = _METHODS[method](elements, out_net=out_net, input_net=input_net,
                                     source_ohms=source_ohms, values=values,
                                     gbw_scale=gbw_scale)
    start = None if start_rad_s is None else \
        np.asarray(start_rad_s, dtype=complex)[None, :] / np.asarray(w_c)[:, None]
    return _figures_and_poles(num, den, w_c, kind=kind, near_hz=near_hz,
                              closed_form=method == "auto", start=start)[:3]


def section_poles_rad_s(elements: Sequence[Element], *, values: np.ndarray,
                        source_ohms: float = 0.0, out_net: str = "out",
                        input_net: str = "in") -> np.ndarray:
    """Every pole (rad/s, shape (d,)) of the transfer for one value set `values` (P,), from
    the expansion where the wiring can be expanded (companion eigenvalues): the start
    ``section_figures_batch`` polishes a batch of nearby value sets from."""
    num, den, w_c = _scaled_auto(elements, out_net=out_net, input_net=input_net,
                                 source_ohms=source_ohms,
                                 values=np.asarray(values, dtype=float)[None, :])
    den = den[..., : _batch_degree(den) + 1]
    return _batch_roots(den)[0] * float(w_c[0])


def _quadratic_roots(coefs: np.ndarray) -> np.ndarray:
    """Roots (S, 2) of c0 + c1 x + c2 x^2 in closed form, the larger-magnitude one first
    computed without cancellation (Numerical Recipes, 3rd ed., §5.6 [mem])."""
    c0, c1, c2 = coefs[:, 0].astype(complex), coefs[:, 1].astype(complex), coefs[:, 2]
    root = np.sqrt(c1 * c1 - 4 * c2 * c0)
    # q = -(c1 + sgn(c1) sqrt(disc)) / 2, the sign taken so that no cancellation occurs.
    sgn = np.where((np.conj(c1) * root).real >= 0, 1.0, -1.0)
    q = -0.5 * (c1 + sgn * root)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.stack([q / c2, c0 / q], axis=1)


# Aberth iterations from given starting roots, and the relative step below which a root
# counts as converged: convergence is cubic, so the root after a step of 1e-11 is exact to
# rounding, as the companion eigenvalues are.
_ABERTH_ITERATIONS = 8
_ABERTH_TOL = 1e-11


def _aberth_step(coefs: np.ndarray, z: np.ndarray) -> np.ndarray:
    """One Aberth correction (S, d) for roots `z` of ascending `coefs` (S, d + 1).

    Worked in place (a grid search runs it on hundreds of samples, several times): the
    same operations in the same order as the plain expressions in the comments."""
    d = z.shape[-1]
    p = np.empty(z.shape, dtype=complex)
    p[...] = coefs[:, -1:]
    dp = np.zeros_like(z)
    for m in range(d - 1, -1, -1):                       # Horner for p and p'
        dp *= z                                          # dp = dp * z + p
        dp += p
        p *= z                                           # p = p * z + c_m
        p += coefs[:, m:m + 1]
    w = p / dp
    diff = z[:, :, None] - z[:, None, :]
    diag = np.arange(d)
    diff[:, diag, diag] = np.inf                         # j = i left out: 1/inf = 0
    np.divide(1.0, diff, out=diff)
    inv = np.add.reduce(diff, axis=-1)                   # sum over j != i of 1/(z_i - z_j)
    step = w / (1.0 - w * inv)
    return np.where(np.isfinite(step), step, 0.0)


def _polished_roots(coefs: np.ndarray, start: np.ndarray) -> np.ndarray:
    """Roots (S, d) of ascending `coefs` (S, d + 1) by the Aberth–Ehrlich simultaneous
    iteration from `start` (S, d), e.g. the roots of a nearby polynomial; samples that do
    not converge get the companion eigenvalues (``_batch_roots``).

    O. Aberth, "Iteration methods for finding all zeros of a polynomial simultaneously",
    Math. Comp. 27(122), 1973 [mem]: z_i -= w_i / (1 - w_i sum_{j != i} 1/(z_i - z_j)),
    w_i = p(z_i) / p'(z_i); cubic convergence to simple roots.
    """
    z = start.astype(complex).copy()
    rows = np.arange(z.shape[0])                          # samples still iterating
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for _ in range(_ABERTH_ITERATIONS):
            zr = z[rows]
            step = _aberth_step(coefs[rows], zr)
            zr = zr - step
            z[rows] = zr
            done = (np.all(np.abs(step) <= _ABERTH_TOL * np.abs(zr), axis=-1)
                    & np.all(np.isfinite(zr), axis=-1))
            rows = rows[~done]
            if not rows.size:
                break
    if rows.size:
        z[rows] = _batch_roots(coefs[rows])
    return z


def figures_from_scaled(num: np.ndarray, den: np.ndarray, w_c: np.ndarray, *, kind: StageKind,
                        near_hz: float, closed_form: bool = False
                        ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """f0, Q and gain (S,) from scaled polynomials (S, d + 1) in sigma = s / w_c, as
    ``section_figures_batch`` reads them. `closed_form`: a quadratic denominator's roots
    by formula instead of eigenvalues (equal to rounding)."""
    return _figures_and_poles(num, den, w_c, kind=kind, near_hz=near_hz,
                              closed_form=closed_form)[:3]


def _figures_and_poles(num: np.ndarray, den: np.ndarray, w_c: np.ndarray, *, kind: StageKind,
                       near_hz: float, closed_form: bool = False,
                       start: np.ndarray | None = None
                       ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray | None]:
    """``figures_from_scaled`` and the poles (S, d) in s / w_c; `start`: approximate poles
    in the same units, polished (``_polished_roots``) instead of eigenvalues."""
    num = num[..., : _batch_degree(num) + 1]
    den = den[..., : _batch_degree(den) + 1]
    s_count = den.shape[0]
    if kind == "gain":
        g = num[:, 0] / den[:, 0]
        return np.zeros(s_count), np.zeros(s_count), g, None
    if closed_form and den.shape[-1] == 3:
        poles = _quadratic_roots(den)
    elif start is not None and start.shape == (s_count, den.shape[-1] - 1):
        poles = _polished_roots(den, start)
    else:
        poles = _batch_roots(den)                               # (S, d), in s / w_c
    w_near = 2 * math.pi * near_hz / w_c                        # (S,)
    k1, k2, is_real = _pair_indices(poles, w_near, conj=kind == "highpass")
    rows = np.arange(s_count)
    ok = k1 >= 0
    w0, q = _pair_figures(poles[rows, k1], poles[rows, k2], is_real)
    q = np.where(ok, q, np.nan)
    if kind == "bandpass":
        s = 1j * w0
        h = npoly.polyval(s, num.T, tensor=False) / npoly.polyval(s, den.T, tensor=False)
        gain = np.copysign(np.abs(h), h.real)
    elif kind == "lowpass":
        gain = num[:, 0] / den[:, 0]
    else:
        zeros = _batch_roots(num)
        z_order = np.argsort(np.abs(zeros), axis=1)
        extra = np.take_along_axis(zeros, z_order[:, 2:], axis=1)
        mask = np.ones(poles.shape, dtype=bool)
        mask[rows, k1] = False
        mask[rows, k2] = False
        others = np.where(mask, -poles, 1.0)
        gain = np.real(num[:, -1] / den[:, -1] * np.prod(-extra, axis=1) / np.prod(others, axis=1))
    f0 = np.where(ok, w0 * w_c / (2 * math.pi), np.nan)
    return f0, q, np.where(ok, gain, np.nan), poles


def part_sweep_figures(elements: Sequence[Element], *, kind: StageKind, near_hz: float,
                       values: np.ndarray, part: int, out_net: str = "out",
                       input_net: str = "in", gbw_scale: np.ndarray | None = None,
                       source_ohms: float = 0.0
                       ) -> Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """``section_figures_batch(method="auto")`` as a function of one part's value per
    sample, every other part held at `values`: what a trim's root search calls many times.

    Parameters
    ----------
    elements, kind, near_hz, out_net, input_net, gbw_scale, source_ohms
        As ``section_figures_batch``.
    values : ndarray, shape (S, P)
        Part values; column `part` is ignored (copied: the caller's array is not changed).
    part : int
        Column (``passive_names`` order) of the part that varies.

    Returns
    -------
    callable
        ``f(value (S,)) -> (f0_hz, q, gain)``, each (S,).

    Notes
    -----
    The expansion is multilinear in its variables ([1]_ of ``circuits.expansion``), so
    num and den are ``a + x b`` in the part's variable x (1/R or C): the monomials are
    evaluated once here and each call is two multiply-adds and the roots: in closed form for
    a quadratic, else the previous call's poles polished by Aberth's iteration
    (``_polished_roots``; eigenvalues on the first call). Wirings too large
    to expand fall back to ``section_figures_batch`` per call (determinants).
    """
    vals = np.array(values, dtype=float)
    is_r = [e.kind for e in elements if e.kind in ("R", "C")][part] == "R"
    if not expandable(elements, source_ohms=source_ohms):
        def by_det(value: np.ndarray):
            vals[:, part] = value
            return section_figures_batch(elements, kind=kind, near_hz=near_hz, values=vals,
                                         out_net=out_net, input_net=input_net,
                                         gbw_scale=gbw_scale, source_ohms=source_ohms,
                                         method="auto")
        return by_det
    if gbw_scale is not None and vals.shape[0] != np.shape(gbw_scale)[0]:
        raise ValueError("values and gbw_scale must have one row per sample")
    (num_a, num_b), (den_a, den_b) = expanded_split(
        elements, var=part, out_net=out_net, input_net=input_net, source_ohms=source_ohms,
        values=vals, gbw_scale=gbw_scale)
    k = np.arange(den_a.shape[-1])
    # The poles of the previous call, rad/s: a root search moves the part a little per
    # call, so they are close starting points for the next call's roots.
    last = {"poles_rad_s": None}

    def by_expansion(value: np.ndarray):
        value = np.asarray(value, dtype=float)
        vals[:, part] = value
        x = (1.0 / value if is_r else value)[:, None]
        num, den = num_a + x * num_b, den_a + x * den_b
        w_c = _scale_rad_s(elements, vals)
        powers = w_c[:, None] ** k
        num, den = num * powers, den * powers
        norm = np.max(np.abs(den), axis=-1, keepdims=True)
        prev = last["poles_rad_s"]
        f0, q, gain, poles = _figures_and_poles(
            num / norm, den / norm, w_c, kind=kind, near_hz=near_hz, closed_form=True,
            start=None if prev is None else prev / w_c[:, None])
        if poles is not None:
            last["poles_rad_s"] = np.where(np.isfinite(poles), poles, 1.0) * w_c[:, None]
        return f0, q, gain
    return by_expansion
