"""Op-amp archetypes and the model built from a requirement's [amplifier] table.

References: the single-pole model A(s) = A0/(1 + s·A0/ωt) of Franco, *Design with
Operational Amplifiers and Analog Integrated Circuits*, 4th ed., 2015, §6.1 [mem]; the
traits of each class (fastest, quietest, most precise, rail-to-rail micropower) are
common practice; the figures themselves are typical class values of our own.
"""

import dataclasses
import math

import numpy as np
import pytest

from bandwright.parts.catalogue import (ARCHETYPES, DEFAULT_ARCHETYPE, OVERRIDE_KEYS, archetype,
                                        make_opamp, suggest_faster)
from bandwright.parts.opamp import OpAmp

NAMES = ["micropower", "precision", "general", "low-noise", "wideband", "fast"]


def test_six_archetypes_named_as_their_keys():
    assert list(ARCHETYPES) == NAMES
    for name, amp in ARCHETYPES.items():
        assert isinstance(amp, OpAmp)
        assert amp.name == name
        assert archetype(name) is amp


@pytest.mark.parametrize("name", NAMES)
def test_figures_are_finite_and_in_range(name):
    amp = ARCHETYPES[name]
    for field in dataclasses.fields(OpAmp):
        if field.name != "name":
            value = getattr(amp, field.name)
            assert math.isfinite(value) and value >= 0, field.name
    assert amp.gbw_hz > 0 and amp.slew_v_per_us > 0 and amp.min_load_ohms > 0
    assert amp.dc_gain_db >= 80  # open-loop gain of every voltage-feedback class, common practice


@pytest.mark.parametrize("name", NAMES)
def test_single_pole_model_is_unity_at_gbw(name):
    """Franco §6.1 [mem]: with A0 >> 1, |A(j·2π·GBW)| = 1/sqrt(1 + 1/A0²) ≈ 1."""
    amp = ARCHETYPES[name]
    a = amp.open_loop_gain(np.array([2j * np.pi * amp.gbw_hz]))
    assert abs(a[0]) == pytest.approx(1.0, rel=1e-6)


def test_class_traits_common_practice():
    gbw = {n: a.gbw_hz for n, a in ARCHETYPES.items()}
    assert list(gbw) == sorted(gbw, key=gbw.get)  # listed from slowest to fastest
    amps = ARCHETYPES.values()
    assert min(amps, key=lambda a: a.noise_v_per_rthz).name == "low-noise"
    assert max(amps, key=lambda a: a.dc_gain_db).name == "precision"
    assert min(amps, key=lambda a: a.noise_corner_hz).name == "precision"
    assert min(amps, key=lambda a: a.swing_to_rail_v).name == "micropower"
    assert max(amps, key=lambda a: a.slew_v_per_us).name == "fast"
    assert min(amps, key=lambda a: a.slew_v_per_us).name == "micropower"


def test_unknown_archetype_is_a_key_error_with_a_suggestion():
    with pytest.raises(KeyError, match="low-noise"):
        archetype("lownoise")
    with pytest.raises(KeyError):
        make_opamp(archetype="nonesuch", overrides={})


def test_make_opamp_defaults_to_general():
    assert DEFAULT_ARCHETYPE == "general"
    assert make_opamp(archetype=None, overrides={}) == ARCHETYPES["general"]
    assert make_opamp() == ARCHETYPES["general"]


def test_make_opamp_applies_every_override_key():
    overrides = {"gbw_hz": 12e6, "dc_gain_db": 96.0, "slew_v_per_us": 9.0, "swing_to_rail_v": 0.2,
                 "noise_v_per_rthz": 7e-9, "noise_a_per_rthz": 0.3e-12, "noise_corner_hz": 0.0,
                 "min_load_ohms": 1e3, "current_noise_corner_hz": 40.0}
    assert set(overrides) == set(OVERRIDE_KEYS)
    amp = make_opamp(archetype="wideband", overrides=overrides)
    assert amp.name == "custom"
    for key, value in overrides.items():
        assert getattr(amp, key) == value


def test_make_opamp_partial_override_keeps_the_rest():
    amp = make_opamp(archetype="low-noise", overrides={"gbw_hz": 20e6})
    base = ARCHETYPES["low-noise"]
    assert amp == dataclasses.replace(base, name="custom", gbw_hz=20e6)
    # An override equal to the base changes nothing, so the archetype keeps its name.
    assert make_opamp(archetype="fast", overrides={"gbw_hz": ARCHETYPES["fast"].gbw_hz}).name == "fast"
    assert make_opamp(archetype=None, overrides={"slew_v_per_us": 1}).slew_v_per_us == 1.0


@pytest.mark.parametrize("overrides, match", [
    ({"gbw": 1e6}, "did you mean 'gbw_hz'"),
    ({"name": "x"}, "unknown op-amp parameter"),
    ({"gbw_hz": 0.0}, "gbw_hz"),
    ({"slew_v_per_us": -1.0}, "slew_v_per_us"),
    ({"dc_gain_db": float("nan")}, "dc_gain_db"),
    ({"swing_to_rail_v": -0.1}, "swing_to_rail_v"),
    ({"noise_corner_hz": float("inf")}, "noise_corner_hz"),
    ({"min_load_ohms": 0}, "min_load_ohms"),
    ({"gbw_hz": "1M"}, "must be a number"),
    ({"gbw_hz": True}, "must be a number"),
])
def test_make_opamp_rejects_bad_overrides(overrides, match):
    with pytest.raises(ValueError, match=match):
        make_opamp(archetype=None, overrides=overrides)


def test_zero_noise_and_swing_are_allowed():
    amp = make_opamp(overrides={"noise_v_per_rthz": 0, "noise_a_per_rthz": 0, "swing_to_rail_v": 0})
    assert (amp.noise_v_per_rthz, amp.noise_a_per_rthz, amp.swing_to_rail_v) == (0.0, 0.0, 0.0)


@pytest.mark.parametrize("need", [1.0, 200e3, 200e3 + 1, 2e6, 3e6, 5e6, 49e6, 150e6, 200e6,
                                  200e6 + 1, 1e12])
def test_suggest_faster_is_the_slowest_that_covers(need):
    fits = {n: a.gbw_hz for n, a in ARCHETYPES.items() if a.gbw_hz >= need}
    expected = min(fits, key=fits.get) if fits else None
    assert suggest_faster(need) == expected


def test_suggest_faster_examples():
    assert suggest_faster(5e6) == "low-noise"
    assert suggest_faster(0.5e6) == "precision"
    assert suggest_faster(1e9) is None
