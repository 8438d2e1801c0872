"""Non-inverting gain stage: follower, amplifier, buffered divider.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic_lp.py);
- [Franco] Franco, *Design with Operational Amplifiers and Analog Integrated Circuits*, 4th
  ed., 2015, §1.4 and §6.2 [mem]: gain 1 + Rf/Rg; with A(s) = A0/(1 + s A0/wt) the closed
  loop is G / (1 + NG/A0 + s NG/wt): DC gain G/(1 + NG/A0), one pole at GBW (1 + NG/A0)/NG;
- [nodal] the project's nodal solver (circuits.nodal.transfer).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from bandwright.circuits import noninverting_gain as nig
from bandwright.circuits.nodal import transfer as nodal_transfer
from bandwright.errors import InfeasibleDesign
from bandwright.sections.section import Section

from lphp_support import (FLAT_FREQS_HZ, IDEAL, check_interface, gain_section, make_opamp,
                          rel)
from symbolic_lp import element_symbols, noise_gain, transfer

def test_interface():
    """[base.Topology] attributes and registry entry; every part optional."""
    check_interface(nig, "noninverting_gain", "gain", inverting=False)
    assert nig.PARTS == ("Rf", "Rg", "Ra", "Rb") == nig.OPTIONAL_PARTS


@pytest.mark.parametrize("g,want", [
    (1.0, {}),
    (1.0 + 5e-10, {}),                                  # float round-off of unity
    (1.0005, {}),                                       # within UNITY_RTOL = 0.1 %
    (-4.0, {"Rf": 30e3, "Rg": 10e3}),                   # sign ignored (magnitudes)
    (4.0, {"Rf": 30e3, "Rg": 10e3}),
    (1.5, {"Rf": 10e3, "Rg": 20e3}),
    (0.25, {"Ra": 30e3, "Rb": 10e3}),
    (0.8, {"Ra": 10e3, "Rb": 40e3}),
])
def test_design_forms_and_values(g, want):
    """Follower / amplifier / divider; the smaller resistor of a pair is 10 kOhm; |gain|
    within 0.1 % of 1 is the follower; the sign is ignored (all documented)."""
    parts = nig.design(gain_section(g), c_farads=1e-9)
    assert parts.keys() == want.keys()
    for k, v in want.items():
        assert rel(parts[k], v) < 1e-12


def test_follower_element_list_is_one_opamp():
    """Unity gain: no resistors at all, U1 from in to out with out fed back."""
    els = nig.elements({}, IDEAL)
    assert len(els) == 1 and els[0].kind == "opamp" and els[0].nets == ("in", "out", "out")


def test_transfer_of_the_combined_element_list():
    """[sympy] divider and amplifier together: H = Rb/(Ra + Rb) (1 + Rf/Rg) [Franco]."""
    els = nig.elements({"Rf": 1.0, "Rg": 1.0, "Ra": 1.0, "Rb": 1.0}, IDEAL)
    sym = element_symbols(els)
    want = sym["Rb"] / (sym["Ra"] + sym["Rb"]) * (1 + sym["Rf"] / sym["Rg"])
    assert sp.simplify(transfer(els) - want) == 0
    # [sympy] noise gain 1 + Rf/Rg: the divider does not amplify the op-amp's e_n.
    assert sp.simplify(noise_gain(els, "U1") - (1 + sym["Rf"] / sym["Rg"])) == 0


@pytest.mark.parametrize("g", [1.0, 1.01, 2.0, 7.5, 100.0, 0.9, 0.5, 0.01])
def test_gain_is_exact_with_an_ideal_opamp(g):
    """[nodal] flat gain equal to the target at every frequency (ideal op-amp)."""
    parts = nig.design(gain_section(g))
    h = nodal_transfer(nig.elements(parts, IDEAL), FLAT_FREQS_HZ)
    assert np.max(np.abs(h - g)) < 1e-12 * g
    assert rel(nig.ideal_figures(parts).gain, g) < 1e-12


@pytest.mark.parametrize("g", [1.0, 2.0, 10.0, 0.5])
def test_bandwidth_is_gbw_over_noise_gain(g):
    """[Franco] vs [nodal]: |H(f_b)| = |H(0)|/sqrt(2) at f_b = GBW (1 + NG/A0)/NG;
    H(0) = G/(1 + NG/A0); f_b ~= GBW/NG."""
    model = make_opamp(1e6, dc_gain_db=120.0)
    parts = nig.design(gain_section(g))
    ng = nig.noise_gain(parts)
    f_b = nig.bandwidth_hz(parts, model)
    assert rel(f_b, 1e6 / ng) < 2 * ng / model.a0
    h = nodal_transfer(nig.elements(parts, model), np.array([0.0, f_b]))
    assert rel(h[0].real, g / (1 + ng / model.a0)) < 1e-12
    assert rel(abs(h[1]) / abs(h[0]), 1 / math.sqrt(2)) < 1e-9


@pytest.mark.parametrize("g", [1.0, 3.0, 0.3])
def test_gbw_needed_gives_one_percent_error_at_f_max(g):
    """[Franco] vs [nodal]: with GBW = gbw_needed_for_hz, |H(f_max)| = 0.99 |H(0)|."""
    section = gain_section(g)
    need = nig.gbw_needed_for_hz(section, 20e3)
    model = make_opamp(need, dc_gain_db=240.0)
    h = nodal_transfer(nig.elements(nig.design(section), model), np.array([0.0, 20e3]))
    assert rel(abs(h[1]) / abs(h[0]), 0.99) < 1e-9
    assert nig.limits(section, make_opamp(1.01 * need), max_freq_hz=20e3).feasible
    lim = nig.limits(section, make_opamp(0.99 * need), max_freq_hz=20e3)
    assert not lim.feasible and any("falls short" in r for r in lim.reasons)


def test_limits_figures():
    """noise gain = G for the amplifier, 1 for follower and divider; no Q, so S^Q = 0."""
    amp = nig.limits(gain_section(5.0), IDEAL)
    assert amp.feasible and rel(amp.noise_gain, 5.0) < 1e-12 and amp.q_sensitivity == 0.0
    assert rel(amp.spread, 4.0) < 1e-12
    assert any("amplifier" in r for r in amp.reasons)
    assert nig.limits(gain_section(1.0), IDEAL).noise_gain == 1.0
    assert nig.limits(gain_section(0.5), IDEAL).noise_gain == 1.0
    no_freq = nig.limits(gain_section(5.0), make_opamp(1e6))
    assert no_freq.gbw_needed_hz == 0.0 and any("max_freq_hz" in r for r in no_freq.reasons)


def test_near_unity_gain_is_noted():
    """A |gain| built at unity says so in the reasons."""
    lim = nig.limits(gain_section(0.9995), IDEAL)
    assert lim.feasible and any("built at unity" in r for r in lim.reasons)


@pytest.mark.parametrize("section,words", [
    (gain_section(0.0), "non-zero"),
    (Section("lowpass", 1e3, 1.0, 2.0), "builds 'gain'"),
    (gain_section(2000.0), "ratio 1999"),
])
def test_limits_reject(section, words):
    """Zero gain, wrong kind, a resistor ratio beyond 1000: infeasible."""
    lim = nig.limits(section, IDEAL)
    assert not lim.feasible and any(words in r for r in lim.reasons)


def test_design_and_element_errors():
    """Zero gain: InfeasibleDesign; wrong kind, half pair, unknown part: ValueError."""
    with pytest.raises(InfeasibleDesign):
        nig.design(gain_section(0.0))
    with pytest.raises(ValueError):
        nig.design(Section("highpass", 1e3, 1.0, 1.0))
    with pytest.raises(ValueError):
        nig.elements({"Rf": 1e3}, IDEAL)
    with pytest.raises(ValueError):
        nig.elements({"Ra": 1e3}, IDEAL)
    with pytest.raises(ValueError):
        nig.elements({"Rx": 1e3}, IDEAL)
