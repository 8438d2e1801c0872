"""Inverting gain stage: gain -Rf/Rin of any magnitude.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic_lp.py);
- [Franco] Franco, *Design with Operational Amplifiers and Analog Integrated Circuits*, 4th
  ed., 2015, §1.3 and §6.2 [mem]: gain -Rf/Rin, noise gain 1 + Rf/Rin; with
  A(s) = A0/(1 + s A0/wt) the closed loop is G / (1 + NG/A0 + s NG/wt);
- [nodal] the project's nodal solver (circuits.nodal.transfer).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from bandwright.circuits import inverting_gain as ivg
from bandwright.circuits import noninverting_gain as nig
from bandwright.circuits.nodal import transfer as nodal_transfer
from bandwright.errors import InfeasibleDesign
from bandwright.sections.section import Section

from lphp_support import (FLAT_FREQS_HZ, IDEAL, check_interface, gain_section, make_opamp,
                          rel)
from symbolic_lp import element_symbols, noise_gain, transfer

def test_interface():
    """[base.Topology] attributes and registry entry."""
    check_interface(ivg, "inverting_gain", "gain", inverting=True)
    assert ivg.PARTS == ("Rin", "Rf") and ivg.OPTIONAL_PARTS == ()


@pytest.mark.parametrize("g,want", [
    (-1.0, {"Rin": 10e3, "Rf": 10e3}),
    (-20.0, {"Rin": 10e3, "Rf": 200e3}),
    (-0.1, {"Rin": 100e3, "Rf": 10e3}),
    (20.0, {"Rin": 10e3, "Rf": 200e3}),                 # sign ignored (magnitudes)
])
def test_design_values(g, want):
    """Rf/Rin = |gain|, the smaller 10 kOhm, so the input resistance is >= 10 kOhm; the
    sign of the section's gain is ignored (the stage always inverts)."""
    parts = ivg.design(gain_section(g), c_farads=1e-9)
    assert parts.keys() == want.keys()
    for k, v in want.items():
        assert rel(parts[k], v) < 1e-12


def test_transfer_and_noise_gain_of_the_element_list():
    """[sympy] H = -Rf/Rin and NG = 1 + Rf/Rin [Franco]."""
    els = ivg.elements({"Rin": 1.0, "Rf": 1.0}, IDEAL)
    sym = element_symbols(els)
    assert sp.simplify(transfer(els) + sym["Rf"] / sym["Rin"]) == 0
    assert sp.simplify(noise_gain(els, "U1") - (1 + sym["Rf"] / sym["Rin"])) == 0


@pytest.mark.parametrize("g", [-1.0, -2.0, -7.5, -100.0, -0.5, -0.01])
def test_gain_is_exact_with_an_ideal_opamp(g):
    """[nodal] flat gain equal to the target at every frequency (ideal op-amp)."""
    parts = ivg.design(gain_section(g))
    h = nodal_transfer(ivg.elements(parts, IDEAL), FLAT_FREQS_HZ)
    assert np.max(np.abs(h - g)) < 1e-12 * abs(g)
    assert rel(ivg.ideal_figures(parts).gain, g) < 1e-12


@pytest.mark.parametrize("g", [-1.0, -2.0, -10.0, -0.5])
def test_bandwidth_is_gbw_over_noise_gain(g):
    """[Franco] vs [nodal]: |H(f_b)| = |H(0)|/sqrt(2) at f_b = GBW (1 + NG/A0)/NG with
    NG = 1 + |G|; H(0) = G/(1 + NG/A0)."""
    model = make_opamp(1e6, dc_gain_db=120.0)
    parts = ivg.design(gain_section(g))
    ng = ivg.noise_gain(parts)
    assert rel(ng, 1 + abs(g)) < 1e-12
    f_b = ivg.bandwidth_hz(parts, model)
    assert rel(f_b, 1e6 / ng) < 2 * ng / model.a0
    h = nodal_transfer(ivg.elements(parts, model), np.array([0.0, f_b]))
    assert rel(h[0].real, g / (1 + ng / model.a0)) < 1e-12
    assert rel(abs(h[1]) / abs(h[0]), 1 / math.sqrt(2)) < 1e-9


def test_unity_inverter_has_half_the_follower_bandwidth():
    """[Franco] NG = 2 for the unity inverter vs 1 for the follower."""
    model = make_opamp(1e6, dc_gain_db=240.0)
    inv = ivg.bandwidth_hz(ivg.design(gain_section(-1.0)), model)
    fol = nig.bandwidth_hz(nig.design(gain_section(1.0)), model)
    assert rel(inv, fol / 2) < 1e-9


def test_gbw_needed_gives_one_percent_error_at_f_max():
    """[Franco] vs [nodal]: with GBW = gbw_needed_for_hz, |H(f_max)| = 0.99 |H(0)|."""
    section = gain_section(-4.0)
    need = ivg.gbw_needed_for_hz(section, 20e3)
    model = make_opamp(need, dc_gain_db=240.0)
    h = nodal_transfer(ivg.elements(ivg.design(section), model), np.array([0.0, 20e3]))
    assert rel(abs(h[1]) / abs(h[0]), 0.99) < 1e-9
    assert ivg.limits(section, make_opamp(1.01 * need), max_freq_hz=20e3).feasible
    assert not ivg.limits(section, make_opamp(0.99 * need), max_freq_hz=20e3).feasible


def test_limits_figures():
    """noise gain 1 + |G|, spread Rf/Rin, no Q; without max_freq_hz nothing is asked of GBW."""
    lim = ivg.limits(gain_section(-5.0), IDEAL)
    assert lim.feasible and rel(lim.noise_gain, 6.0) < 1e-12 and lim.q_sensitivity == 0.0
    assert rel(lim.spread, 5.0) < 1e-12 and lim.opamps == 1
    assert lim.gbw_needed_hz == 0.0 and any("input resistance 10 kΩ" in r for r in lim.reasons)


@pytest.mark.parametrize("section,words", [
    (gain_section(0.0), "non-zero"),
    (Section("highpass", 1e3, 1.0, -2.0), "builds 'gain'"),
    (gain_section(-5000.0), "ratio 5000"),
])
def test_limits_reject(section, words):
    """Zero gain, wrong kind, a resistor ratio beyond 1000: infeasible."""
    lim = ivg.limits(section, IDEAL)
    assert not lim.feasible and any(words in r for r in lim.reasons)


def test_design_and_element_errors():
    """Zero gain: InfeasibleDesign; wrong kind, missing part: ValueError."""
    with pytest.raises(InfeasibleDesign):
        ivg.design(gain_section(0.0))
    with pytest.raises(ValueError):
        ivg.design(Section("lowpass", 1e3, 1.0, -1.0))
    with pytest.raises(ValueError):
        ivg.elements({"Rf": 1e3}, IDEAL)
