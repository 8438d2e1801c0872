"""Sorted unique values and linear-interpolation percentiles, as numpy computes them.

numpy's ``unique`` (without index outputs), ``percentile``, ``quantile`` and ``median``
ask ``numpy.ma`` whether their input is masked, and so import the masked-array package
(about 12 ms, every plan) though nothing here is masked. These give the same values bit
for bit for the plain float arrays the planner has (no NaN); the tests compare them with
numpy's own.
"""

from __future__ import annotations

import numpy as np

__all__ = ["sorted_unique", "percentile_linear", "quantile_linear"]


def sorted_unique(values) -> np.ndarray:
    """The distinct values of `values` (flattened), ascending: ``np.unique(values)`` for
    arrays without NaN."""
    s = np.sort(np.asarray(values).ravel())
    if s.size < 2:
        return s
    keep = np.empty(s.size, dtype=bool)
    keep[0] = True
    np.not_equal(s[1:], s[:-1], out=keep[1:])
    return s[keep]


def percentile_linear(a: np.ndarray, q, axis: int = -1) -> np.ndarray:
    """``np.percentile(a, q, axis=axis)`` (its default "linear" method) for `a` without NaN.

    Hyndman & Fan 1996, definition 7 (numpy's default): with the n values sorted,
    h = (n - 1) q / 100, the result interpolates between the values at floor(h) and
    floor(h) + 1 by the fraction h - floor(h), in numpy's own order of operations (its
    ``_lerp``: from the upper value where the fraction is 1/2 or more).

    Parameters
    ----------
    a : ndarray
    q : sequence of float
        Percentiles, 0 to 100.
    axis : int

    Returns
    -------
    ndarray
        The percentiles' axis first (as numpy puts it), then `a`'s other axes.
    """
    return quantile_linear(a, np.true_divide(q, 100), axis=axis)


def quantile_linear(a: np.ndarray, quantiles, axis: int = -1) -> np.ndarray:
    """``np.quantile(a, quantiles, axis=axis)`` ("linear") for `a` without NaN: as
    ``percentile_linear``, with `quantiles` from 0 to 1."""
    arr = np.moveaxis(np.asarray(a), axis, 0)
    n = arr.shape[0]
    virtual = np.asanyarray((n - 1) * np.asanyarray(quantiles))
    top = virtual >= n - 1                 # the largest value itself
    below = np.where(top, -1, np.floor(virtual)).astype(np.intp)
    above = np.where(top, -1, np.floor(virtual) + 1).astype(np.intp)
    s = np.sort(arr, axis=0)
    prev, nxt = s[below], s[above]
    gamma = np.asanyarray(virtual - below, dtype=virtual.dtype)
    gamma = gamma.reshape(virtual.shape + (1,) * (arr.ndim - 1))
    diff = nxt - prev
    out = np.add(prev, diff * gamma)
    np.subtract(nxt, diff * (1 - gamma), out=out, where=gamma >= 0.5, casting="unsafe",
                dtype=type(out.dtype))
    if np.issubdtype(s.dtype, np.inexact):
        out[..., np.isnan(s[-1])] = np.nan  # a NaN sorts last; numpy's answer is NaN
    return out
