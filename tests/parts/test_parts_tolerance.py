"""Customary tolerances and capacitor dielectrics.

References: customary tolerance by series, docs/methods.md "Tolerance" [mem, common
practice]: E6 20 %, E12 10 %, E24 5 %, E48 2 %, E96 1 %, E192 0.5 %; step sizes of
IEC 60063:2015 Tables 1-2; the dielectric rule (C0G/NP0 up to about 10 nF, film above)
is common practice.
"""

import math

import pytest

from bandwright.parts.eseries import SERIES_NAMES
from bandwright.parts.tolerance import (C0G_MAX_FARADS, DEFAULT_TOLERANCE_PCT,
                                        default_tolerance_pct, dielectric)

CUSTOMARY = {"E6": 20.0, "E12": 10.0, "E24": 5.0, "E48": 2.0, "E96": 1.0, "E192": 0.5}


@pytest.mark.parametrize("series, pct", CUSTOMARY.items())
def test_customary_tolerance_per_references(series, pct):
    assert default_tolerance_pct(series) == pct
    assert default_tolerance_pct(series.lower()) == pct


def test_every_series_has_a_tolerance():
    assert set(DEFAULT_TOLERANCE_PCT) == set(SERIES_NAMES)
    assert default_tolerance_pct("E3") == 20.0  # no customary figure; kept with E6


@pytest.mark.parametrize("series, pct", CUSTOMARY.items())
def test_tolerance_bands_of_neighbours_about_touch(series, pct):
    """Common practice [mem]: a series step 10**(1/N) is about the width (1+t)/(1-t) of one
    tolerance band, so neighbouring values' bands just meet; within 25 % in log."""
    n = int(series[1:])
    step = math.log(10) / n
    band = math.log((1 + pct / 100) / (1 - pct / 100))
    assert abs(band - step) / step < 0.25


def test_unknown_series_is_a_value_error():
    with pytest.raises(ValueError, match="unknown E-series"):
        default_tolerance_pct("E5")


@pytest.mark.parametrize("c_farads, kind", [
    (100e-12, "C0G/NP0"), (4.7e-9, "C0G/NP0"), (10e-9, "C0G/NP0"), (1e-8, "C0G/NP0"),
    (10.1e-9, "film (PPS/PP)"), (100e-9, "film (PPS/PP)"), (1e-6, "film (PPS/PP)"),
])
def test_dielectric_common_practice(c_farads, kind):
    assert C0G_MAX_FARADS == 10e-9
    assert dielectric(c_farads) == kind


@pytest.mark.parametrize("bad", [0.0, -1e-9, float("nan"), float("inf")])
def test_dielectric_rejects_bad_values(bad):
    with pytest.raises(ValueError):
        dielectric(bad)
