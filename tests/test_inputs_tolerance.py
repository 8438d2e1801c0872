"""The `[tolerance]` table: defaults, values read, and every bad value a SpecError that
names the file and the key (docs/design.md, "Unknown keys are errors")."""

from __future__ import annotations

import pytest

from bandwright.errors import SpecError
from bandwright.inputs import load_spec
from bandwright.inputs.requirement import Tolerance

GOOD = """
[passband]
center_hz = 1000
bandwidth_hz = 100
[[stopband]]
freq_hz = 700
min_loss_db = 30
"""


def test_defaults_when_the_table_is_absent(write_spec):
    t = load_spec(write_spec(GOOD)).tolerance
    assert t == Tolerance()
    assert t.resistor_pct is None and t.capacitor_pct is None  # series defaults later
    assert (t.distribution, t.samples, t.seed, t.min_yield) == ("uniform", 2000, 1, 0.95)


def test_values_are_read(write_spec):
    text = GOOD + """
[tolerance]
resistor_pct = 0.5
capacitor_pct = 2
distribution = "Gaussian"
gbw_spread_pct = 0
samples = 500
seed = 7
min_yield = 0.99
"""
    t = load_spec(write_spec(text)).tolerance
    assert t == Tolerance(resistor_pct=0.5, capacitor_pct=2.0, distribution="gaussian",
                          gbw_spread_pct=0.0, samples=500, seed=7, min_yield=0.99)


@pytest.mark.parametrize("line, key, words", [
    ("resistor_pct = 0", "tolerance.resistor_pct", "> 0 and < 50"),
    ("resistor_pct = 50", "tolerance.resistor_pct", "< 50"),
    ("capacitor_pct = -2", "tolerance.capacitor_pct", "> 0"),
    ('capacitor_pct = "5%"', "tolerance.capacitor_pct", "did you mean 5"),
    ('distribution = "normal"', "tolerance.distribution", "uniform, gaussian"),
    ("gbw_spread_pct = 75", "tolerance.gbw_spread_pct", "< 50"),
    ("gbw_spread_pct = -1", "tolerance.gbw_spread_pct", ">= 0"),
    ("samples = 3", "tolerance.samples", "from 10"),
    ("samples = 2.5", "tolerance.samples", "whole number"),
    ("seed = -1", "tolerance.seed", "from 0"),
    ("min_yield = 1.2", "tolerance.min_yield", "<= 1"),
    ("min_yield = 0", "tolerance.min_yield", "> 0"),
    ("resistor_percent = 1", "tolerance.resistor_percent", "resistor_pct"),
])
def test_bad_values_name_file_and_key(write_spec, line, key, words):
    path = write_spec(GOOD + "\n[tolerance]\n" + line + "\n")
    with pytest.raises(SpecError) as err:
        load_spec(path)
    msg = str(err.value)
    assert str(path) in msg and key in msg and words in msg
