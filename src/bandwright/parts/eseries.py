"""IEC 60063 preferred-number series E3 … E192 and rounding to them.

The series are typed from the standard's tables, not generated: the two-digit series
(E3 … E24, Table 1) keep historical values that the formula ``10**(i/n)`` rounded to two
digits does not give, and E192 (Table 2) keeps 9.20 where the formula gives 9.19.

A series is treated as one endless, sorted sequence across decades: index ``n`` stands
for ``mantissa[n mod N] * 10**(n // N)``, where ``N`` is the series length. Rounding,
bracketing and neighbour search are integer arithmetic on that index, vectorised with
numpy.

References
----------
.. [1] IEC 60063:2015, *Preferred number series for resistors and capacitors*, 3rd ed.,
   Table 1 (E3, E6, E12, E24) and Table 2 (E48, E96, E192).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "SERIES_NAMES",
    "series_mantissas",
    "nearest",
    "bracket",
    "neighbours",
    "is_member",
]

# IEC 60063:2015 Table 1, two significant digits (mantissa x 10).
_E24_CODES = (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
              33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91)

# IEC 60063:2015 Table 2, three significant digits (mantissa x 100).
_E192_CODES = (
    100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114,
    115, 117, 118, 120, 121, 123, 124, 126, 127, 129, 130, 132,
    133, 135, 137, 138, 140, 142, 143, 145, 147, 149, 150, 152,
    154, 156, 158, 160, 162, 164, 165, 167, 169, 172, 174, 176,
    178, 180, 182, 184, 187, 189, 191, 193, 196, 198, 200, 203,
    205, 208, 210, 213, 215, 218, 221, 223, 226, 229, 232, 234,
    237, 240, 243, 246, 249, 252, 255, 258, 261, 264, 267, 271,
    274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309, 312,
    316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361,
    365, 370, 374, 379, 383, 388, 392, 397, 402, 407, 412, 417,
    422, 427, 432, 437, 442, 448, 453, 459, 464, 470, 475, 481,
    487, 493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556,
    562, 569, 576, 583, 590, 597, 604, 612, 619, 626, 634, 642,
    649, 657, 665, 673, 681, 690, 698, 706, 715, 723, 732, 741,
    750, 759, 768, 777, 787, 796, 806, 816, 825, 835, 845, 856,
    866, 876, 887, 898, 909, 920, 931, 942, 953, 965, 976, 988,
)

# Each shorter series takes every 2nd, 4th or 8th value of its parent (IEC 60063, Tables 1-2).
# Codes are integers so that a series value is one correctly rounded division, see _values_at.
_CODES: dict[str, tuple[np.ndarray, int]] = {
    "E3": (np.array(_E24_CODES[::8]), 1),
    "E6": (np.array(_E24_CODES[::4]), 1),
    "E12": (np.array(_E24_CODES[::2]), 1),
    "E24": (np.array(_E24_CODES), 1),
    "E48": (np.array(_E192_CODES[::4]), 2),
    "E96": (np.array(_E192_CODES[::2]), 2),
    "E192": (np.array(_E192_CODES), 2),
}
#: The series names, coarsest first: the one list the loader, the BOM and the tolerance table
#: read.
SERIES_NAMES: tuple[str, ...] = tuple(_CODES)


def _lookup(series: str) -> tuple[np.ndarray, int]:
    key = str(series).strip().upper()
    if key not in _CODES:
        raise ValueError(
            f"unknown E-series {series!r}: expected one of {', '.join(SERIES_NAMES)}")
    return _CODES[key]


def series_mantissas(name: str) -> tuple[float, ...]:
    """The values of one decade of an IEC 60063 series.

    Parameters
    ----------
    name : str
        Series name, one of `SERIES_NAMES` ("E3" … "E192"; case is ignored).

    Returns
    -------
    tuple of float
        Sorted mantissas ``1.0 <= m < 10``, as printed in the standard.

    Raises
    ------
    ValueError
        If `name` is not a known series.

    References
    ----------
    .. [1] IEC 60063:2015, Table 1 (E3 … E24) and Table 2 (E48 … E192).

    Examples
    --------
    >>> series_mantissas("E6")
    (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
    """
    codes, digits = _lookup(name)
    return tuple(float(c) / 10.0**digits for c in codes)


def _values_at(index: np.ndarray, codes: np.ndarray, digits: int) -> np.ndarray:
    """Series values at global indices; exact to the last bit of a double.

    The exponent is applied as a multiplication or a division by an exact power of ten,
    so 4.7 kΩ comes out as 4700.0, not 4700.000000000001.
    """
    n = codes.size
    decade, position = np.divmod(np.asarray(index, dtype=np.int64), n)
    exponent = decade - digits
    scale = np.power(10.0, np.abs(exponent).astype(float))
    code = codes[position].astype(float)
    return np.where(exponent >= 0, code * scale, code / scale)


def _check_positive(values: np.ndarray) -> None:
    if not np.all(np.isfinite(values)) or np.any(values <= 0):
        raise ValueError("series rounding needs finite values > 0")


def _positive_scalar(value: float) -> float:
    """``_check_positive`` for one number, without the array machinery (the part search
    rounds one value at a time, thousands of times)."""
    x = float(value)
    if not (math.isfinite(x) and x > 0):
        raise ValueError("series rounding needs finite values > 0")
    return x


def _nearest_index(values: np.ndarray, codes: np.ndarray, digits: int) -> np.ndarray:
    """Global index of the series value nearest each value in log (ties go down)."""
    n = codes.size
    log_v = np.log10(values)
    decade = np.floor(log_v).astype(np.int64)
    log_m = np.log10(codes / 10.0**digits)
    start = decade * n + np.searchsorted(log_m, log_v - decade)
    # Float noise in floor/log can shift the estimate by one; checking four candidates
    # around it makes the pick exact.
    candidates = start[..., None] + np.arange(-2, 2)
    distance = np.abs(np.log10(_values_at(candidates, codes, digits)) - log_v[..., None])
    return np.take_along_axis(candidates, np.argmin(distance, axis=-1)[..., None], -1)[..., 0]


def nearest(value: ArrayLike, series: str) -> float | np.ndarray:
    """Round to the nearest value of an E-series, across decades.

    Parameters
    ----------
    value : float or array_like of float
        Values to round, > 0 (ohms, farads or any unit).
    series : str
        Series name, one of `SERIES_NAMES`.

    Returns
    -------
    float or ndarray
        The series value with the smallest ``|log(value / series value)|``; a float for a
        scalar input, an array of the input's shape otherwise. An exact tie in log goes to
        the lower value.

    Raises
    ------
    ValueError
        If `series` is unknown or a value is not finite and positive.

    Notes
    -----
    The series is geometric, so nearness is measured in log: 4.8 k rounds to 4.7 k in E24
    because 4.8 lies below the geometric mean of 4.7 and 5.1 (4.896).

    References
    ----------
    .. [1] IEC 60063:2015, Tables 1 and 2.

    Examples
    --------
    >>> nearest(4.8e3, "E24")
    4700.0
    >>> nearest(9.6, "E24")
    10.0
    """
    codes, digits = _lookup(series)
    if isinstance(value, (float, int)):
        return _nearest_of(_positive_scalar(value), series)
    v = np.asarray(value, dtype=float)
    _check_positive(v)
    if v.ndim == 0:
        return _nearest_of(float(v), series)
    return _values_at(_nearest_index(v, codes, digits), codes, digits)


@lru_cache(maxsize=8192)
def _nearest_of(value: float, series: str) -> float:
    # One value at a time is how the part search and the trims ask: kept, as neighbours.
    codes, digits = _lookup(series)
    return float(_values_at(_nearest_index(np.asarray(value), codes, digits), codes, digits))


def is_member(value: ArrayLike, series: str, rel_tol: float = 1e-9) -> bool | np.ndarray:
    """Whether values belong to an E-series (in any decade).

    Parameters
    ----------
    value : float or array_like of float
        Values to test, > 0.
    series : str
        Series name, one of `SERIES_NAMES`.
    rel_tol : float, optional
        Relative tolerance of the comparison with the nearest series value.

    Returns
    -------
    bool or ndarray of bool
        True where ``|value - nearest| <= rel_tol * nearest``.

    Raises
    ------
    ValueError
        If `series` is unknown or a value is not finite and positive.

    Examples
    --------
    >>> is_member(4.7e-9, "E6"), is_member(5.1e3, "E12")
    (True, False)
    """
    codes, digits = _lookup(series)
    v = np.asarray(value, dtype=float)
    _check_positive(v)
    near = _values_at(_nearest_index(v, codes, digits), codes, digits)
    member = np.abs(v - near) <= rel_tol * near
    return bool(member) if v.ndim == 0 else member


def bracket(value: float, series: str) -> tuple[float, float]:
    """The series values just below and just above a value.

    Parameters
    ----------
    value : float
        Value to bracket, > 0.
    series : str
        Series name, one of `SERIES_NAMES`.

    Returns
    -------
    tuple of float
        ``(lower, upper)`` with ``lower <= value <= upper``, adjacent in the series. When
        `value` is a member (within a relative 1e-9) both are that member.

    Raises
    ------
    ValueError
        If `series` is unknown or `value` is not finite and positive.

    Examples
    --------
    >>> bracket(9.6e3, "E12")
    (8200.0, 10000.0)
    """
    codes, digits = _lookup(series)
    v = np.asarray(value, dtype=float)
    if v.ndim != 0:
        raise ValueError("bracket takes one value")
    _check_positive(v)
    n0 = _nearest_index(v, codes, digits)
    near = float(_values_at(n0, codes, digits))
    if abs(near - float(v)) <= 1e-9 * near:
        return near, near
    pair = n0 + (np.array([0, 1]) if near < v else np.array([-1, 0]))
    lower, upper = _values_at(pair, codes, digits)
    return float(lower), float(upper)


def neighbours(value: float, series: str, *, count: int) -> np.ndarray:
    """The nearest series value and `count` series values on each side of it.

    Parameters
    ----------
    value : float
        Centre of the search, > 0.
    series : str
        Series name, one of `SERIES_NAMES`.
    count : int
        How many series values to take below and above the nearest one, >= 0.

    Returns
    -------
    ndarray of float
        ``2 * count + 1`` ascending series values, crossing decade boundaries as needed;
        the middle one is ``nearest(value, series)``.

    Raises
    ------
    ValueError
        If `series` is unknown, `value` is not finite and positive, or `count` < 0.

    Notes
    -----
    Used by the part search, which tries neighbouring values of every part for the
    smallest f0/Q/gain error of a section.

    Examples
    --------
    >>> neighbours(1.0e3, "E12", count=2).tolist()
    [680.0, 820.0, 1000.0, 1200.0, 1500.0]
    """
    _lookup(series)
    if int(count) != count or count < 0:
        raise ValueError(f"count must be a whole number >= 0, got {count!r}")
    if isinstance(value, (float, int)):
        return np.array(_neighbours_of(_positive_scalar(value), series, int(count)))
    v = np.asarray(value, dtype=float)
    if v.ndim != 0:
        raise ValueError("neighbours takes one value")
    _check_positive(v)
    return np.array(_neighbours_of(float(v), series, int(count)))


@lru_cache(maxsize=8192)
def _neighbours_of(value: float, series: str, count: int) -> tuple[float, ...]:
    # The part search asks for the same few values over and over (each sweep recentres
    # on a point it has seen): a pure function of its arguments, kept.
    codes, digits = _lookup(series)
    n0 = int(_nearest_index(np.asarray(value), codes, digits))
    return tuple(_values_at(np.arange(n0 - count, n0 + count + 1), codes, digits).tolist())
