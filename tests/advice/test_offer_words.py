"""The tighter-tolerance offer names a grade per part kind: an E-series grade for resistors,
the dielectric for capacitors.

References: the tolerance customarily sold with each E-series and the C0G/NP0-below-10-nF,
film-above rule are common practice [mem] (``parts.tolerance``, docs/methods.md
"Tolerance").
"""

from __future__ import annotations

from types import SimpleNamespace as NS

from bandwright.advice.tolerance import _capacitors, _resistors


def _chain(*caps_farads):
    elements = [NS(kind="R", value=10e3)] + [NS(kind="C", value=c) for c in caps_farads]
    return NS(stages=[NS(elements=elements)])


def test_resistor_grade_is_the_series_sold_at_that_tolerance():
    assert _resistors(1.0) == "resistors 1 % (the grade E96 values are customarily sold at)"
    assert _resistors(0.5) == "resistors 0.5 % (the grade E192 values are customarily sold at)"
    assert _resistors(0.1) == "resistors 0.1 %"  # no series is customarily sold at 0.1 %


def test_capacitor_grade_names_the_dielectric_not_a_resistor_series():
    assert _capacitors(1.0, _chain(4.7e-9)) == "capacitors 1 % (C0G/NP0)"
    both = _capacitors(2.0, _chain(4.7e-9, 220e-9))
    assert both == "capacitors 2 % (C0G/NP0 and film (PPS/PP))"
    assert "E96" not in both and "E12" not in both
