"""Sallen-Key highpass: design equations, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic_lp.py);
- [biquad] the standard second-order highpass K s^2/(s^2 + (w0/Q) s + w0^2), Schaumann &
  Van Valkenburg, *Design of Analog Filters*, 2001, ch. 4 [mem] (sections.section_response);
- [refs] docs/methods.md, "Lowpass/highpass": unity-gain equal-C R2/R1 = 4Q^2;
- [SK55] Sallen & Key, IRE Trans. CT-2, 1955 [mem]: equal components give Q = 1/(3 - K)
  (the highpass is the RC dual of the lowpass);
- [nodal] the project's nodal solver / polynomial reduction (circuits.nodal, circuits.figures).
"""

from __future__ import annotations

import pytest
import sympy as sp

from bandwright.circuits import sallen_key_highpass as skh
from bandwright.errors import InfeasibleDesign
from bandwright.sections.section import Section

from lphp_support import (IDEAL, SALLEN_KEY_CASES, check_interface,
                          exact_and_first_order_shifts, make_opamp, max_response_error,
                          noise_gain_coefficients, numeric_figures, rel,
                          sympy_design_figures, sympy_q_sensitivities)
from symbolic_lp import S, biquad_figures, element_symbols, transfer

ALL_PARTS = {"C1": 1.0, "C2": 1.0, "R1": 1.0, "R2": 1.0, "Rf": 1.0, "Rg": 1.0}
FOLLOWER_PARTS = {"C1": 1.0, "C2": 1.0, "R1": 1.0, "R2": 1.0}

CASES = SALLEN_KEY_CASES


def test_interface():
    """[base.Topology] attributes and registry entry."""
    check_interface(skh, "sallen_key_highpass", "highpass", inverting=False)
    assert skh.PARTS == ("C1", "C2", "R1", "R2", "Rf", "Rg")


@pytest.mark.parametrize("parts", [ALL_PARTS, FOLLOWER_PARTS], ids=["gain", "follower"])
def test_transfer_function_is_the_documented_one(parts):
    """[sympy] H(s) of the element list equals the module docstring's formula."""
    els = skh.elements(parts, IDEAL)
    sym = element_symbols(els)
    r1, r2, c1, c2 = sym["R1"], sym["R2"], sym["C1"], sym["C2"]
    k = 1 + sym["Rf"] / sym["Rg"] if "Rf" in sym else 1
    a2 = r1 * r2 * c1 * c2
    expected = k * S**2 * a2 / (S**2 * a2 + S * (r1 * (c1 + c2) + r2 * c2 * (1 - k)) + 1)
    assert sp.simplify(transfer(els) - expected) == 0


def test_unity_gain_equal_c_derivation_gives_r2_over_r1_4q2():
    """[sympy] with C1 = C2, K = 1, R2 = r R1: Q^2 = r/4, so r = 4 Q^2 [refs]."""
    els = skh.elements(FOLLOWER_PARTS, IDEAL)
    sym = element_symbols(els)
    r, c, ratio, q = sp.symbols("R C r Q", positive=True)
    w0_sq, bw, _ = biquad_figures(transfer(els), "highpass")
    q_sq = sp.simplify((w0_sq / bw**2).subs({sym["C1"]: c, sym["C2"]: c, sym["R1"]: r,
                                             sym["R2"]: ratio * r}))
    assert sp.simplify(q_sq - ratio / 4) == 0
    assert sp.solve(sp.Eq(q_sq, q**2), ratio) == [4 * q**2]


@pytest.mark.parametrize("q", [0.3, 0.5, 0.7071, 1.3065, 5.0, 12.0])
def test_unity_gain_design_ratio(q):
    """[refs] R2/R1 = 4Q^2 and C1 = C2 = c_farads at unity gain; no gain resistors."""
    parts = skh.design(Section("highpass", 1e3, q, 1.0), c_farads=10e-9)
    assert rel(parts["R2"] / parts["R1"], 4 * q * q) < 1e-12
    assert parts["C1"] == parts["C2"] == 10e-9
    assert "Rf" not in parts and "Rg" not in parts


@pytest.mark.parametrize("q", [0.6, 1.0, 2.0, 5.0])
def test_equal_components_when_gain_is_three_minus_one_over_q(q):
    """[SK55] equal R and equal C give Q = 1/(3 - K): the design returns R1 = R2 there."""
    parts = skh.design(Section("highpass", 1e3, q, 3 - 1 / q), c_farads=1e-9)
    assert rel(parts["R1"], parts["R2"]) < 1e-12
    assert rel(parts["Rf"] / parts["Rg"], 2 - 1 / q) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_solves_the_sympy_equations(f0_hz, q, gain):
    """[sympy] the designed values put w0, Q and K of the derived H(s) on target."""
    parts = skh.design(Section("highpass", f0_hz, q, gain), c_farads=4.7e-9)
    f0_sym, q_sym, k = sympy_design_figures(skh, parts)
    assert rel(f0_sym, f0_hz) < 1e-12
    assert rel(q_sym, q) < 1e-12
    assert rel(k, gain) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_designed_section_hits_target_in_the_nodal_solver(f0_hz, q, gain):
    """[nodal] ideal op-amp: f0, Q and gain within 0.1 %; response equals [biquad]."""
    section = Section("highpass", f0_hz, q, gain)
    parts = skh.design(section, c_farads=2.2e-9)
    fig = numeric_figures(skh, parts, IDEAL, f0_hz)
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, gain) < 1e-3
    assert max_response_error(skh, parts, section) < 1e-6


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_noise_gain_numerator_matches_sympy(f0_hz, q, gain):
    """[sympy] NG(s) of a source in series with U1's + input, numerator over monic D(s)."""
    parts = skh.design(Section("highpass", f0_hz, q, gain), c_farads=1e-9)
    _, coeffs = noise_gain_coefficients(skh, parts)
    for got, want in zip(skh.noise_gain_numerator(parts), coeffs):
        assert rel(got, want) < 1e-9


@pytest.mark.parametrize("q", [0.7071, 2.0, 6.0])
def test_unity_gain_noise_gain_at_f0_is_one_plus_two_q_squared(q):
    """[sympy, calc] at w0 NG = (2 R1 + R2)/(2 R1) = 1 + 2Q^2 for the follower design."""
    lim = skh.limits(Section("highpass", 1e3, q, 1.0), IDEAL)
    assert rel(lim.noise_gain, 1 + 2 * q * q) < 1e-9


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_finite_gbw_first_order_shift_matches_exact_poles(f0_hz, q, gain):
    """[sympy] poles with A = wt/s at e = f0/GBW = 1e-7 vs the first-order formula."""
    parts = skh.design(Section("highpass", f0_hz, q, gain), c_farads=1e-9)
    e, (f_shift, q_shift), (k_f, k_q) = exact_and_first_order_shifts(skh, parts, f0_hz, q)
    assert abs(f_shift / float(e) - k_f) < 1e-4 * max(1.0, abs(k_f))
    assert abs(q_shift / float(e) - k_q) < 1e-4 * max(1.0, abs(k_q))


@pytest.mark.parametrize("q", [0.7071, 3.0])
def test_finite_gbw_in_the_project_model(q):
    """[nodal] single-pole op-amp (A0 200 dB), e = 1e-3/Q: shifts within 2 % of first order.

    At unity gain with equal C, as for the lowpass: df0/f0 = -Q e, dQ/Q = +Q e (derived
    in circuits._filter_and_gain), hence gbw_needed_hz = 10 max(Q², 1) f0 (the pole-movement
    rule of circuits.rules).
    """
    f0_hz = 2e3
    gbw_hz = f0_hz * q * 1e3
    parts = skh.design(Section("highpass", f0_hz, q, 1.0), c_farads=1e-9)
    fig = numeric_figures(skh, parts, make_opamp(gbw_hz, dc_gain_db=200.0), f0_hz)
    e = f0_hz / gbw_hz
    assert rel(fig.f0_hz / f0_hz - 1, -q * e) < 0.02
    assert rel(fig.q / q - 1, q * e) < 0.02
    lim = skh.limits(Section("highpass", f0_hz, q, 1.0), IDEAL)
    assert rel(lim.gbw_needed_hz, 10 * max(q * q, 1.0) * f0_hz) < 1e-9


@pytest.mark.parametrize("f0_hz,q,gain", CASES[:6])
def test_q_sensitivity_matches_sympy(f0_hz, q, gain):
    """[sympy] limits().q_sensitivity is the largest classical sensitivity |S_x^Q|."""
    section = Section("highpass", f0_hz, q, gain)
    sens = sympy_q_sensitivities(skh, skh.design(section, c_farads=1e-9))
    assert rel(skh.limits(section, IDEAL).q_sensitivity, max(map(abs, sens.values()))) < 1e-6


def test_unity_gain_sensitivities():
    """[sympy, calc] equal C at unity gain: S_R2^Q = 1/2, S_R1^Q = -1/2, S_C^Q = 0."""
    parts = skh.design(Section("highpass", 1e3, 3.0, 1.0), c_farads=1e-9)
    sens = sympy_q_sensitivities(skh, parts)
    assert rel(sens["R2"], 0.5) < 1e-12 and rel(sens["R1"], -0.5) < 1e-12
    assert abs(sens["C1"]) < 1e-12 and abs(sens["C2"]) < 1e-12


def test_limits_feasible_section_reports_figures():
    """Feasible unity-gain section: spread R2/R1 = 4Q^2 [refs], reasons carry numbers."""
    lim = skh.limits(Section("highpass", 1e3, 2.0, 1.0), make_opamp(1e6))
    assert lim.feasible and lim.opamps == 1
    assert rel(lim.spread, 16.0) < 1e-12
    assert any("R2/R1 = 16" in r for r in lim.reasons)


@pytest.mark.parametrize("section,words", [
    (Section("highpass", 1e3, 1.0, 0.5), "gain stage"),
    (Section("lowpass", 1e3, 1.0, 1.0), "builds 'highpass'"),
])
def test_limits_reject_what_the_topology_cannot_build(section, words):
    """Attenuation, wrong kind: infeasible, with the reason."""
    lim = skh.limits(section, IDEAL)
    assert not lim.feasible
    assert any(words in r for r in lim.reasons)


def test_gain_sign_is_ignored_and_the_circuit_does_not_invert():
    """The chain's gains are magnitudes (docs/design.md): -2 designs as +2, built gain +2 [nodal]."""
    neg = skh.design(Section("highpass", 1e3, 1.5, -2.0), c_farads=1e-9)
    assert neg == skh.design(Section("highpass", 1e3, 1.5, 2.0), c_farads=1e-9)
    assert rel(numeric_figures(skh, neg, IDEAL, 1e3).gain, 2.0) < 1e-9


def test_limits_reject_slow_opamp_and_large_spread():
    """GBW below 10 Q f0 fails; Q = 20 at unity gain needs R2/R1 = 1600 > 1000 and fails."""
    slow = skh.limits(Section("highpass", 10e3, 2.0, 1.0), make_opamp(150e3))
    assert not slow.feasible and any("falls short" in r for r in slow.reasons)
    wide = skh.limits(Section("highpass", 1e3, 20.0, 1.0), IDEAL)
    assert not wide.feasible and any("spread 1600" in r for r in wide.reasons)


def test_design_and_element_errors():
    """Attenuation: InfeasibleDesign; wrong kind, c <= 0, half gain pair: ValueError."""
    with pytest.raises(InfeasibleDesign):
        skh.design(Section("highpass", 1e3, 1.0, 0.5), c_farads=1e-9)
    with pytest.raises(ValueError):
        skh.design(Section("lowpass", 1e3, 1.0, 1.0), c_farads=1e-9)
    with pytest.raises(ValueError):
        skh.design(Section("highpass", 1e3, 1.0, 1.0), c_farads=0.0)
    with pytest.raises(ValueError):
        skh.elements({**FOLLOWER_PARTS, "Rg": 1.0}, IDEAL)


def test_follower_element_list():
    """Unity gain: no Rf/Rg, the inverting input is the output net."""
    els = skh.elements(skh.design(Section("highpass", 1e3, 1.0, 1.0), c_farads=1e-9), IDEAL)
    assert [e.name for e in els] == ["C1", "C2", "R1", "R2", "U1"]
    assert els[-1].nets == ("ninp", "out", "out")
