"""IEC 60063 series: the typed tables against the standard's stated construction, and rounding.

Reference: IEC 60063:2015 (3rd ed.), Table 1 (E3 … E24, two digits) and Table 2 (E48 …
E192, three digits). The standard builds each series from 10**(i/N) rounded, then keeps
historical values in Table 1 and one in Table 2; the places where the tables differ from
the rounded formula are listed in docs/methods.md ("IEC 60063" row, typed from public copies
of the standard [mem]).
"""

import numpy as np
import pytest

from bandwright.parts.eseries import (SERIES_NAMES, bracket, is_member, nearest, neighbours,
                                      series_mantissas)

LENGTHS = {"E3": 3, "E6": 6, "E12": 12, "E24": 24, "E48": 48, "E96": 96, "E192": 192}


def rounded_formula(n: int, digits: int) -> np.ndarray:
    """The IEC 60063 construction 10**(i/n) rounded to `digits` significant digits."""
    scale = 10.0 ** (digits - 1)
    return np.round(scale * 10.0 ** (np.arange(n) / n)) / scale


def test_series_names_and_lengths_match_iec_60063():
    assert SERIES_NAMES == tuple(LENGTHS)
    for name, n in LENGTHS.items():
        m = series_mantissas(name)
        assert len(m) == n, name
        assert m[0] == 1.0 and m[-1] < 10.0
        assert all(a < b for a, b in zip(m, m[1:])), name


def test_e24_differs_from_rounded_formula_exactly_at_the_documented_values():
    """IEC 60063 Table 1 vs round(10·10^(i/24))/10: differs at 2.7 … 8.2 only (docs/methods.md)."""
    table = np.array(series_mantissas("E24"))
    formula = rounded_formula(24, 2)
    differs = ~np.isclose(table, formula, rtol=0, atol=1e-12)
    assert table[differs].tolist() == [2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2]
    # Every historical value sits one step of 0.1 from the formula's.
    assert np.allclose(np.abs(table[differs] - formula[differs]), 0.1)


@pytest.mark.parametrize("name", ["E48", "E96"])
def test_e48_e96_equal_the_rounded_formula(name):
    """IEC 60063 Table 2: E48 and E96 are the rounded formula throughout (docs/methods.md)."""
    np.testing.assert_allclose(series_mantissas(name), rounded_formula(LENGTHS[name], 3),
                               rtol=0, atol=1e-12)


def test_e192_differs_from_rounded_formula_only_at_9_20():
    """IEC 60063 Table 2: E192 keeps 9.20 where the formula gives 9.19 (docs/methods.md)."""
    table = np.array(series_mantissas("E192"))
    formula = rounded_formula(192, 3)
    differs = ~np.isclose(table, formula, rtol=0, atol=1e-12)
    assert table[differs].tolist() == [9.2]
    assert formula[differs].tolist() == [9.19]


@pytest.mark.parametrize("small, large", [("E3", "E6"), ("E6", "E12"), ("E12", "E24"),
                                          ("E48", "E96"), ("E96", "E192")])
def test_series_nest_as_every_second_value(small, large):
    """IEC 60063: each series is every second value of the next larger one."""
    assert series_mantissas(small) == series_mantissas(large)[::2]
    assert set(series_mantissas(small)) <= set(series_mantissas(large))


def test_e12_values_as_printed():
    """IEC 60063 Table 1, E12 column."""
    assert series_mantissas("E12") == (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)


def test_unknown_series_is_a_value_error():
    for call in (lambda: series_mantissas("E5"), lambda: nearest(1.0, "E7"),
                 lambda: bracket(1.0, "X"), lambda: neighbours(1.0, "", count=1),
                 lambda: is_member(1.0, "E")):
        with pytest.raises(ValueError, match="unknown E-series"):
            call()


def test_series_name_case_is_ignored():
    assert series_mantissas("e24") == series_mantissas("E24")


@pytest.mark.parametrize("name", list(LENGTHS))
def test_nearest_matches_brute_force_in_log(name):
    """Property: nearest is the argmin of |log v - log s| over an explicit list of all values."""
    rng = np.random.default_rng(60063)
    values = 10.0 ** rng.uniform(-13, 7, 3000)
    decades = 10.0 ** np.arange(-15, 10)
    every = np.sort(np.outer(decades, series_mantissas(name)).ravel())
    expected = every[np.argmin(np.abs(np.log(every)[None, :] - np.log(values)[:, None]), axis=1)]
    got = nearest(values, name)
    assert got.shape == values.shape
    np.testing.assert_allclose(got, expected, rtol=1e-12)


def test_nearest_examples_and_exact_doubles():
    """Log midpoint of 4.7 and 5.1 is 4.896 (geometric mean); across a decade 9.539."""
    assert nearest(4.8e3, "E24") == 4700.0
    assert nearest(4.9e3, "E24") == 5100.0
    assert nearest(9.6, "E24") == 10.0
    assert nearest(9.5, "E24") == 9.1
    assert nearest(0.98e-9, "E12") == 1e-9
    # The result is the double nearest the decimal value, not 4.7 * 1e-9 with its error.
    assert nearest(4.71e-9, "E6") == 4.7e-9
    assert nearest(16.3e3, "E96") == 16.2e3
    assert isinstance(nearest(1.0, "E6"), float)


def test_nearest_rejects_non_positive():
    for bad in (0.0, -1.0, np.nan, np.inf):
        with pytest.raises(ValueError):
            nearest(bad, "E24")


def test_bracket_below_above_and_member():
    assert bracket(9.6e3, "E12") == (8.2e3, 10e3)
    assert bracket(1.05e3, "E24") == (1.0e3, 1.1e3)
    assert bracket(0.95, "E6") == (0.68, 1.0)
    assert bracket(4.7e-9, "E6") == (4.7e-9, 4.7e-9)
    assert bracket(16.2e3 * (1 + 1e-12), "E96") == (16.2e3, 16.2e3)
    # IEC 60063 Table 2: 1.23 and 1.24 are adjacent in E192.
    assert bracket(12345.0, "E192") == (12300.0, 12400.0)


def test_neighbours_cross_decades():
    assert neighbours(1.0e3, "E12", count=2).tolist() == [680.0, 820.0, 1000.0, 1200.0, 1500.0]
    assert neighbours(9.0e-9, "E6", count=1).tolist() == [6.8e-9, 10e-9, 15e-9]
    assert neighbours(4.6, "E3", count=4).tolist() == [0.22, 0.47, 1.0, 2.2, 4.7, 10.0, 22.0,
                                                       47.0, 100.0]
    assert neighbours(5.0, "E24", count=0).tolist() == [5.1]


@pytest.mark.parametrize("name", list(LENGTHS))
def test_neighbours_are_consecutive_members(name):
    got = neighbours(3.3e4, name, count=7)
    assert got.size == 15
    assert got[7] == nearest(3.3e4, name)
    assert np.all(np.diff(got) > 0)
    assert np.all(is_member(got, name))
    # Consecutive: ratio of neighbours is about one series step, 10**(1/N), never two.
    steps = np.log10(got[1:] / got[:-1]) * LENGTHS[name]
    assert np.all((steps > 0.5) & (steps < 1.5))


def test_neighbours_rejects_bad_count():
    with pytest.raises(ValueError):
        neighbours(1e3, "E24", count=-1)
    with pytest.raises(ValueError):
        neighbours(1e3, "E24", count=1.5)


def test_is_member_scalar_and_array():
    assert is_member(4.7e-9, "E6") is True
    assert is_member(5.1e3, "E12") is False
    assert is_member(5.1e3, "E24") is True
    got = is_member([1e3, 1.001e3, 9.2e5, 9.19e5], "E192")
    assert got.tolist() == [True, False, True, False]
    assert is_member(1.001e3, "E24", rel_tol=2e-3) is True
