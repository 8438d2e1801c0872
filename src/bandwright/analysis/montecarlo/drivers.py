"""Which parts decide a Monte Carlo failure: each part's first-order index on the worst
excess over the requirement, streamed chunk by chunk.

References
----------
.. [1] I. M. Sobol', "Global sensitivity indices for nonlinear mathematical models and
   their Monte Carlo estimates", Math. Comput. Simulation 55, 2001 -- first-order index
   Var(E[Y | X_i]) / Var(Y) [mem].
.. [2] K. Pearson, "On the general theory of skew correlation and non-linear regression",
   Drapers' Company Research Memoirs, 1905 -- the correlation ratio eta^2, the same
   quantity estimated by binning [mem].
"""

from __future__ import annotations

from dataclasses import dataclass
from statistics import NormalDist

import numpy as np

from bandwright.analysis.montecarlo.sampling import SampleColumn

__all__ = ["Driver", "DriverStats"]

# Bins of each part's deviation for the first-order failure index.
_BINS = 10
# Worst excesses beyond ±20 dB (a board far off, or unstable) are clipped before their
# variance is taken: they would otherwise decide every index alone.
_EXCESS_CLIP_DB = 20.0
# A first-order index below this share is noise of the estimate, not a driver.
_DRIVER_FLOOR = 0.01
_MAX_DRIVERS = 6


@dataclass(frozen=True, slots=True)
class Driver:
    """A part whose spread decides pass or fail.

    Attributes
    ----------
    stage : int
    part : str
    index : float
        Share of the variance of the worst excess over the requirement (dB) explained by
        this part's value alone: its first-order index, bias-corrected, 0 to 1.
    worst_fail_rate : float
        Failure rate of the samples whose deviation of this part falls in its worst tenth
        (the tenth with the largest mean excess).
    worst_side : {"high", "low", "middle"}
        Where that tenth lies: the part too high, too low, or near nominal.
    """

    stage: int
    part: str
    index: float
    worst_fail_rate: float
    worst_side: str


def _bin_edges(distribution: str) -> np.ndarray:
    """Inner edges of `_BINS` equally likely bins of u."""
    q = np.arange(1, _BINS) / _BINS
    if distribution == "uniform":
        return 2 * q - 1
    nd = NormalDist(0.0, 1.0 / 3.0)
    return np.array([nd.inv_cdf(float(p)) for p in q])


class DriverStats:
    """Per-part, per-bin sums over the samples seen so far (streamed chunk by chunk)."""

    def __init__(self, cols: tuple[SampleColumn, ...], distribution: str) -> None:
        self.cols = cols
        self.edges = _bin_edges(distribution)
        shape = (len(cols), _BINS)
        self.count = np.zeros(shape)
        self.fail = np.zeros(shape)
        self.excess_sum = np.zeros(shape)
        self.n = 0
        self.y_sum = 0.0
        self.y_sq = 0.0
        self.shift = None

    def add(self, u: np.ndarray, failed: np.ndarray, excess_db: np.ndarray) -> None:
        """Add one chunk: deviations u (S, columns), failure flags and worst excess (S,)."""
        # Extreme excesses (an unstable board) would swamp the variance: clip them.
        y = np.clip(np.nan_to_num(excess_db, nan=_EXCESS_CLIP_DB), -_EXCESS_CLIP_DB,
                    _EXCESS_CLIP_DB)
        if self.shift is None:
            self.shift = float(np.mean(y))    # centred sums keep the variance exact
        y = y - self.shift
        onehot = np.searchsorted(self.edges, u, side="right")[:, :, None] == np.arange(_BINS)
        self.count += onehot.sum(axis=0)
        self.fail += onehot[failed].sum(axis=0)
        self.excess_sum += np.einsum("scb,s->cb", onehot, y)
        self.n += y.size
        self.y_sum += float(y.sum())
        self.y_sq += float(np.dot(y, y))

    def drivers(self) -> tuple[tuple[Driver, ...], float]:
        """First-order index of every part on the worst excess (see ``monte_carlo``).

        eta^2 = sum_b n_b (ybar_b - ybar)^2 / sum (y - ybar)^2 over ten equally likely bins
        of the part's deviation: Pearson's correlation ratio [2]_, an estimate of Sobol's
        first-order index Var(E[y | x_i]) / Var(y) [1]_. With no dependence its expectation
        is (B - 1)/(n - 1) (B bins), which is subtracted.
        """
        n = self.n
        if n < 2:
            return (), 0.0
        mean = self.y_sum / n
        total = self.y_sq - n * mean * mean
        if not total > 0:
            return (), 0.0
        with np.errstate(divide="ignore", invalid="ignore"):
            bin_mean = np.where(self.count > 0, self.excess_sum / self.count, mean)
            fail_rate = np.where(self.count > 0, self.fail / self.count, 0.0)
        eta2 = np.sum(self.count * (bin_mean - mean) ** 2, axis=1) / total
        index = np.maximum(eta2 - (_BINS - 1) / (n - 1), 0.0)
        out = []
        for i in np.argsort(-index, kind="stable")[:_MAX_DRIVERS]:
            if index[i] < _DRIVER_FLOOR:
                break
            b = int(np.argmax(bin_mean[i]))
            side = "low" if b < _BINS // 2 - 1 else ("high" if b > _BINS // 2 else "middle")
            c = self.cols[i]
            out.append(Driver(stage=c.stage, part=c.part, index=float(index[i]),
                              worst_fail_rate=float(fail_rate[i, b]), worst_side=side))
        return tuple(out), float(index.sum())
