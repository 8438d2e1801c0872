"""Fitting a chain's part deviations to a measured sweep.

Two fits of the same objective

    cost(x) = 1/2 sum_f ((m_g(x) - g)/s_g)^2 + 1/2 sum_f (wrap(m_p(x) - p)/s_p)^2
              + 1/2 sum_i (x_i / sigma_i)^2,

with x the log deviations of every part and op-amp GBW (``diagnosis.model``), m_g and m_p
the model's gain (dB) and phase (degrees), s_g and s_p the measurement's own noise and
sigma_i each part's tolerance:

* ``fit_all``: every variable at once, Levenberg-Marquardt ([1]_, [2]_) on the residual
  vector with the prior rows (Tikhonov regularisation, [3]_): the most likely deviations
  of the whole board, and the curve the residual is measured against;
* ``fit_each``: each variable alone (the rest at nominal), a grid over its range then
  Gauss-Newton steps: the single-part explanations that are ranked as suspects.

References
----------
.. [1] K. Levenberg, "A method for the solution of certain non-linear problems in least
   squares", Quart. Appl. Math. 2(2), 1944, pp. 164-168.
.. [2] D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear
   parameters", J. SIAM 11(2), 1963, pp. 431-441.
.. [3] A. N. Tikhonov, "Solution of incorrectly formulated problems and the
   regularization method", Soviet Math. Dokl. 4, 1963 [mem].
.. [4] F. R. Hampel, "The influence curve and its role in robust estimation", J. Amer.
   Statist. Assoc. 69, 1974 -- the median absolute deviation, 1.4826 MAD = sigma for
   Gaussian data [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bandwright.diagnosis.model import DB_PER_NEPER, ChainModel

__all__ = ["Measurement", "FitResult", "SingleFit", "roughness", "fit_all", "fit_each",
           "DEG_PER_RAD", "MAX_SINGLE_FACTOR", "MAX_DRIFT_FACTOR"]

DEG_PER_RAD = 180.0 / math.pi
#: A single part is searched from 1/3 to 3 times its value: beyond that it is a different
#: part (or a wiring fault), which the residual shows as unexplained.
MAX_SINGLE_FACTOR = 3.0
#: In the all-parts fit no part moves beyond a factor of 1.5: that fit stands for drifts and
#: tolerances, and without a bound it could trade two swapped parts for two deviations.
MAX_DRIFT_FACTOR = 1.5
_GRID_STEP = 0.02   # in ln(value): 2 % steps before the Gauss-Newton refinement
_GN_STEPS = 6
_LM_ITERATIONS = 25
# A step that lowers the cost by less than this share of it is no progress (the residual
# it would still change is far below the noise).
_LM_TOL = 1e-3


@dataclass(frozen=True)
class Measurement:
    """What is fitted: the sweep, its noise, and the model's frequencies.

    Attributes
    ----------
    w_rad_s : ndarray (F,)
    gain_db : ndarray (F,)
    phase_deg : ndarray (F,) or None
    noise_db : float
        Standard deviation of one gain reading.
    noise_deg : float
        Standard deviation of one phase reading (unused without phase).
    """

    w_rad_s: np.ndarray
    gain_db: np.ndarray
    phase_deg: np.ndarray | None
    noise_db: float
    noise_deg: float

    @property
    def points(self) -> int:
        return self.gain_db.size * (2 if self.phase_deg is not None else 1)

    def residual(self, log_h: np.ndarray) -> np.ndarray:
        """Noise-weighted residuals model - measured, (..., F) or (..., 2F) with phase."""
        rg = (DB_PER_NEPER * log_h.real - self.gain_db) / self.noise_db
        if self.phase_deg is None:
            return rg
        d = DEG_PER_RAD * log_h.imag - self.phase_deg
        d = (d + 180.0) % 360.0 - 180.0
        return np.concatenate([rg, d / self.noise_deg], axis=-1)

    def weighted(self, d_log_h: np.ndarray) -> np.ndarray:
        """Derivatives of `residual` from derivatives of ln H (F, n) -> (F or 2F, n)."""
        jg = DB_PER_NEPER * d_log_h.real / self.noise_db
        if self.phase_deg is None:
            return jg
        return np.vstack([jg, DEG_PER_RAD * d_log_h.imag / self.noise_deg])


def roughness(y: np.ndarray) -> float:
    """Point-to-point scatter of a sampled curve: its noise standard deviation.

    Parameters
    ----------
    y : ndarray (F,), F >= 3

    Returns
    -------
    float
        1.4826 MAD(d2) / sqrt(6), d2 the second differences y[i+1] - 2 y[i] + y[i-1].

    Notes
    -----
    Second differences cancel a locally straight curve; for independent readings of
    standard deviation s, var(d2) = (1 + 4 + 1) s^2. The median absolute deviation, scaled
    by 1.4826 ([4]_), ignores the few points where the curve itself bends sharply (a high-Q
    peak between two readings).
    """
    y = np.asarray(y, dtype=float)
    d2 = y[2:] - 2 * y[1:-1] + y[:-2]
    mad = float(np.median(np.abs(d2 - np.median(d2))))
    return 1.4826 * mad / math.sqrt(6.0)


@dataclass(frozen=True)
class FitResult:
    """The all-parts fit.

    Attributes
    ----------
    x : ndarray (n,)
        Fitted log deviations.
    log_h : ndarray (F,) complex
        The fitted chain's ln H at the measured frequencies.
    data_cost : float
        1/2 sum of squared weighted residuals (the data part of the cost).
    cost : float
        data_cost plus the prior's share.
    iterations : int
    """

    x: np.ndarray
    log_h: np.ndarray
    data_cost: float
    cost: float
    iterations: int


def _cost(meas: Measurement, log_h: np.ndarray, x: np.ndarray, sigma: np.ndarray
          ) -> tuple[float, float]:
    r = meas.residual(log_h)
    data = 0.5 * float(r @ r)
    return data, data + 0.5 * float(np.sum((x / sigma) ** 2))


def fit_all(model: ChainModel, meas: Measurement, *, start: np.ndarray | None = None,
            bound: float = math.log(MAX_DRIFT_FACTOR)) -> FitResult:
    """Regularised Levenberg-Marquardt fit of every variable.

    Parameters
    ----------
    model : ChainModel
    meas : Measurement
    start : ndarray (n,), optional
        Starting point (default: every part at nominal).
    bound : float
        |x_i| is kept within this (a projected step).

    Returns
    -------
    FitResult

    Notes
    -----
    Residual vector R = [r_data(x); x / sigma], Jacobian [J_data; diag(1/sigma)]; the step
    solves (A + lambda diag(A)) dx = -g with A = J^T J, g = J^T R (Marquardt's scaling,
    [2]_); lambda follows the ratio rho of actual to predicted decrease (times
    max(1/3, 1 - (2 rho - 1)^3) on success, doubling growth on failure: H. B. Nielsen,
    "Damping parameter in Marquardt's method", IMM-REP-1999-05, DTU, 1999 [mem]). The prior rows are
    Tikhonov regularisation ([3]_): a part with a loose tolerance moves more readily, and
    parts the sweep cannot tell apart share a deviation in proportion to their tolerances
    instead of drifting apart.
    """
    sigma = model.sigma
    x = np.zeros(model.size) if start is None else np.clip(np.asarray(start, float), -bound,
                                                            bound)
    lh = model.log_h_parts(x, meas.w_rad_s).sum(axis=0)
    data, cost = _cost(meas, lh, x, sigma)
    lam, nu = 1e-3, 2.0
    it = 0
    jd = meas.weighted(model.jacobian(x, meas.w_rad_s))
    for it in range(1, _LM_ITERATIONS + 1):
        r = meas.residual(lh)
        a = jd.T @ jd + np.diag(1.0 / sigma ** 2)
        g = jd.T @ r + x / sigma ** 2
        step = np.linalg.solve(a + lam * np.diag(np.diag(a)), -g)
        x_new = np.clip(x + step, -bound, bound)
        step = x_new - x
        lh_new = model.log_h_parts(x_new, meas.w_rad_s).sum(axis=0)
        data_new, cost_new = _cost(meas, lh_new, x_new, sigma)
        predicted = -float(g @ step + 0.5 * step @ a @ step)
        rho = (cost - cost_new) / predicted if predicted > 0 else -1.0
        if rho > 0:
            gain = cost - cost_new
            x, lh, data, cost = x_new, lh_new, data_new, cost_new
            # Nielsen's update of the damping: smooth in the gain ratio rho.
            lam *= max(1.0 / 3.0, 1.0 - (2.0 * rho - 1.0) ** 3)
            nu = 2.0
            if gain < _LM_TOL * cost:
                break
            jd = meas.weighted(model.jacobian(x, meas.w_rad_s))
        else:
            lam *= nu
            nu *= 2.0
            if lam > 1e12:
                break
    return FitResult(x=x, log_h=lh, data_cost=data, cost=cost, iterations=it)


@dataclass(frozen=True)
class SingleFit:
    """Each variable fitted alone, the others at nominal.

    Attributes
    ----------
    x : ndarray (n,)
        The fitted log deviation of each variable.
    data_cost, cost : ndarray (n,)
        As in FitResult, for each variable's own fit.
    change_db : ndarray (n, F)
        The gain change (dB) the fitted deviation makes against the nominal chain: what the
        equivalence of two explanations is judged on.
    weighted_change : ndarray (n, F or 2F)
        The same change as weighted residual units (phase included when measured).
    null_data_cost : float
        The data cost of the nominal chain (no part off).
    """

    x: np.ndarray
    data_cost: np.ndarray
    cost: np.ndarray
    change_db: np.ndarray
    weighted_change: np.ndarray
    null_data_cost: float


def fit_each(model: ChainModel, meas: Measurement, *,
             bound: float = math.log(MAX_SINGLE_FACTOR)) -> SingleFit:
    """Best single-variable explanation for every variable.

    Parameters
    ----------
    model : ChainModel
    meas : Measurement
    bound : float
        Each |x_j| is searched within this.

    Returns
    -------
    SingleFit

    Notes
    -----
    For variable j of stage k, ln H = ln H0 - ln H_k(0) + ln H_k(t e_j): only its stage is
    evaluated again. Every t on a 2 % grid over [-bound, bound] is evaluated in one batch
    per stage (a one-dimensional search cannot be trapped by the response's many local
    minima the way a descent from t = 0 can, e.g. a shifted high-Q peak), then the best
    grid point is refined by Gauss-Newton steps on the same regularised cost.
    """
    w = meas.w_rad_s
    sigma = model.sigma
    parts = model.log_h_parts(np.zeros(model.size), w)
    base = parts.sum(axis=0)
    r0 = meas.residual(base)
    null = 0.5 * float(r0 @ r0)
    grid = np.arange(-bound, bound + 1e-12, _GRID_STEP)
    n = model.size
    best_t = np.zeros(n)
    for k in range(parts.shape[0]):
        sl = model.stage_slice(k)
        nk = sl.stop - sl.start
        if nk == 0:
            continue
        xs = np.zeros((nk * grid.size, nk))
        for i in range(nk):
            xs[i * grid.size:(i + 1) * grid.size, i] = grid
        lh = base - parts[k] + model.stage_log_h(k, xs, w)
        r = meas.residual(lh)
        c = 0.5 * np.einsum("sf,sf->s", r, r).reshape(nk, grid.size)
        c += 0.5 * (grid[None, :] / sigma[sl, None]) ** 2
        best_t[sl] = grid[np.argmin(c, axis=1)]
    # Gauss-Newton on each variable alone, all of a stage's variables in one batch.
    h = 1e-4
    t = best_t.copy()
    for _ in range(_GN_STEPS):
        for k in range(parts.shape[0]):
            sl = model.stage_slice(k)
            nk = sl.stop - sl.start
            if nk == 0:
                continue
            idx = np.arange(nk)
            xs = np.zeros((3 * nk, nk))
            xs[idx, idx] = t[sl]
            xs[nk + idx, idx] = t[sl] + h
            xs[2 * nk + idx, idx] = t[sl] - h
            lh_k = model.stage_log_h(k, xs, w)
            lh = base - parts[k] + lh_k[:nk]
            r = meas.residual(lh)
            d = meas.weighted(((lh_k[nk:2 * nk] - lh_k[2 * nk:]) / (2 * h)).T).T  # (nk, F)
            num = np.einsum("sf,sf->s", d, r) + t[sl] / sigma[sl] ** 2
            den = np.einsum("sf,sf->s", d, d) + 1.0 / sigma[sl] ** 2
            t[sl] = np.clip(t[sl] - num / den, -bound, bound)
    data, change, wchange = _single_costs(model, meas, parts, base, r0, t)
    worse = data + 0.5 * (t / sigma) ** 2 > _grid_costs(model, meas, parts, base, best_t)
    if np.any(worse):  # a refinement that left its grid point's basin: keep the grid point
        t = np.where(worse, best_t, t)
        data, change, wchange = _single_costs(model, meas, parts, base, r0, t)
    cost = data + 0.5 * (t / sigma) ** 2
    return SingleFit(x=t, data_cost=data, cost=cost, change_db=change, weighted_change=wchange,
                     null_data_cost=null)


def _single_costs(model: ChainModel, meas: Measurement, parts: np.ndarray, base: np.ndarray,
                  r0: np.ndarray, t: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Data cost, gain change (dB) and weighted change of each variable alone at t."""
    w = meas.w_rad_s
    n = model.size
    data = np.zeros(n)
    change = np.zeros((n, w.size))
    wchange = np.zeros((n, r0.size))
    for k in range(parts.shape[0]):
        sl = model.stage_slice(k)
        nk = sl.stop - sl.start
        if nk == 0:
            continue
        xs = np.zeros((nk, nk))
        xs[np.arange(nk), np.arange(nk)] = t[sl]
        lh_k = model.stage_log_h(k, xs, w)
        r = meas.residual(base - parts[k] + lh_k)
        data[sl] = 0.5 * np.einsum("sf,sf->s", r, r)
        change[sl] = DB_PER_NEPER * (lh_k - parts[k]).real
        wchange[sl] = r - r0
    return data, change, wchange


def _grid_costs(model: ChainModel, meas: Measurement, parts: np.ndarray, base: np.ndarray,
                t: np.ndarray) -> np.ndarray:
    """Total cost of each variable alone at t (the grid's best points)."""
    data, _, _ = _single_costs(model, meas, parts, base, meas.residual(base), t)
    return data + 0.5 * (t / model.sigma) ** 2 + 1e-9
