"""bandwright.arrays against numpy's own unique, percentile and quantile (the reference:
the same values bit for bit, on the kinds of arrays the planner passes: float32 and float64
rows, ties, -inf from the log of a zero gain, a NaN)."""

from __future__ import annotations

import numpy as np
import pytest

from bandwright.arrays import percentile_linear, quantile_linear, sorted_unique


def _same(ours: np.ndarray, ref: np.ndarray) -> bool:
    return (ours.dtype == ref.dtype and ours.shape == ref.shape
            and np.array_equal(ours, ref, equal_nan=True)
            and bool(np.all(np.signbit(ours) == np.signbit(ref))))


def _sample(rng, trial: int) -> np.ndarray:
    n, f = int(rng.integers(1, 700)), int(rng.integers(1, 30))
    a = (rng.normal(size=(f, n)) * 10).astype(np.float32 if trial % 2 else np.float64)
    if trial % 5 == 0:
        a[rng.random(a.shape) < 0.05] = -np.inf
    if trial % 7 == 0:
        a = np.round(a) + 0.0  # ties (+0.0: no negative zeros, which compare equal)
    if trial % 11 == 0:
        a[0, 0] = np.nan
    return a


@pytest.mark.parametrize("q", [[1, 50, 99], [0, 100], [2.5, 97.5], [25, 75, 99.9], [50]])
def test_percentile_is_numpys_bit_for_bit(q):
    rng = np.random.default_rng(20261204)
    with np.errstate(invalid="ignore"):  # -inf - -inf, as in numpy's own
        for trial in range(120):
            a = _sample(rng, trial)
            assert _same(percentile_linear(a, q, axis=1), np.percentile(a, q, axis=1)), trial
            assert _same(percentile_linear(a.T, q, axis=0), np.percentile(a.T, q, axis=0))


def test_quantile_and_unique_are_numpys_bit_for_bit():
    rng = np.random.default_rng(7)
    for _ in range(200):
        v = np.round(rng.normal(size=int(rng.integers(1, 500))), 1) + 0.0
        assert np.array_equal(sorted_unique(v), np.unique(v))
        qs = np.linspace(0, 1, int(rng.integers(2, 40)))
        assert _same(quantile_linear(v, qs, axis=0), np.quantile(v, qs))
    assert sorted_unique(np.array([])).size == 0
    assert np.array_equal(sorted_unique(np.array([[3.0, 1.0], [3.0, 2.0]])), [1.0, 2.0, 3.0])
