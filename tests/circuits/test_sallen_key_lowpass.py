"""Sallen-Key lowpass: design equations, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic_lp.py);
- [biquad] the standard second-order lowpass K w0^2/(s^2 + (w0/Q) s + w0^2), Schaumann &
  Van Valkenburg, *Design of Analog Filters*, 2001, ch. 4 [mem] (sections.section_response);
- [refs] docs/methods.md, "Lowpass/highpass": unity-gain equal-R C1/C2 = 4Q^2;
- [SK55] Sallen & Key, IRE Trans. CT-2, 1955 [mem]: equal components give Q = 1/(3 - K);
- [nodal] the project's nodal solver / polynomial reduction (circuits.nodal, circuits.figures).
"""

from __future__ import annotations

import math

import pytest
import sympy as sp

from bandwright.circuits import sallen_key_lowpass as skl
from bandwright.errors import InfeasibleDesign
from bandwright.sections.section import Section

from lphp_support import (IDEAL, SALLEN_KEY_CASES, check_interface,
                          exact_and_first_order_shifts, make_opamp, max_response_error,
                          noise_gain_coefficients, numeric_figures, rel,
                          sympy_design_figures, sympy_q_sensitivities)
from symbolic_lp import S, biquad_figures, element_symbols, transfer

ALL_PARTS = {"R1": 1.0, "R2": 1.0, "C1": 1.0, "C2": 1.0, "Rf": 1.0, "Rg": 1.0}
FOLLOWER_PARTS = {"R1": 1.0, "R2": 1.0, "C1": 1.0, "C2": 1.0}

CASES = SALLEN_KEY_CASES


def test_interface():
    """[base.Topology] attributes and registry entry."""
    check_interface(skl, "sallen_key_lowpass", "lowpass", inverting=False)
    assert skl.PARTS == ("R1", "R2", "C1", "C2", "Rf", "Rg")


@pytest.mark.parametrize("parts", [ALL_PARTS, FOLLOWER_PARTS], ids=["gain", "follower"])
def test_transfer_function_is_the_documented_one(parts):
    """[sympy] H(s) of the element list equals the module docstring's formula."""
    els = skl.elements(parts, IDEAL)
    sym = element_symbols(els)
    r1, r2, c1, c2 = sym["R1"], sym["R2"], sym["C1"], sym["C2"]
    k = 1 + sym["Rf"] / sym["Rg"] if "Rf" in sym else 1
    expected = k / (S**2 * r1 * r2 * c1 * c2 + S * (c2 * (r1 + r2) + r1 * c1 * (1 - k)) + 1)
    assert sp.simplify(transfer(els) - expected) == 0


def test_unity_gain_equal_r_derivation_gives_c1_over_c2_4q2():
    """[sympy] with R1 = R2, K = 1, C1 = m C2: Q^2 = m/4, so m = 4 Q^2 [refs]."""
    els = skl.elements(FOLLOWER_PARTS, IDEAL)
    sym = element_symbols(els)
    r, c, m, q = sp.symbols("R C m Q", positive=True)
    w0_sq, bw, _ = biquad_figures(transfer(els), "lowpass")
    q_sq = sp.simplify((w0_sq / bw**2).subs({sym["R1"]: r, sym["R2"]: r, sym["C2"]: c,
                                             sym["C1"]: m * c}))
    assert sp.simplify(q_sq - m / 4) == 0
    assert sp.solve(sp.Eq(q_sq, q**2), m) == [4 * q**2]


@pytest.mark.parametrize("q", [0.3, 0.5, 0.7071, 1.3065, 5.0, 12.0])
def test_unity_gain_design_ratio_and_which_capacitor_is_given(q):
    """[refs] C1/C2 = 4Q^2, R1 = R2; c_farads is the smaller capacitor (documented)."""
    parts = skl.design(Section("lowpass", 1e3, q, 1.0), c_farads=10e-9)
    assert rel(parts["C1"] / parts["C2"], 4 * q * q) < 1e-12
    assert parts["R1"] == parts["R2"]
    assert min(parts["C1"], parts["C2"]) == 10e-9
    assert "Rf" not in parts and "Rg" not in parts


@pytest.mark.parametrize("q", [0.6, 1.0, 2.0, 5.0])
def test_equal_components_when_gain_is_three_minus_one_over_q(q):
    """[SK55] equal R and equal C give Q = 1/(3 - K): the design returns C1 = C2 there."""
    parts = skl.design(Section("lowpass", 1e3, q, 3 - 1 / q), c_farads=1e-9)
    assert rel(parts["C1"], parts["C2"]) < 1e-12
    assert rel(parts["Rf"] / parts["Rg"], 2 - 1 / q) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_solves_the_sympy_equations(f0_hz, q, gain):
    """[sympy] the designed values put w0, Q and K of the derived H(s) on target."""
    parts = skl.design(Section("lowpass", f0_hz, q, gain), c_farads=4.7e-9)
    f0_sym, q_sym, k = sympy_design_figures(skl, parts)
    assert rel(f0_sym, f0_hz) < 1e-12
    assert rel(q_sym, q) < 1e-12
    assert rel(k, gain) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_designed_section_hits_target_in_the_nodal_solver(f0_hz, q, gain):
    """[nodal] ideal op-amp: f0, Q and gain within 0.1 %; response equals [biquad]."""
    section = Section("lowpass", f0_hz, q, gain)
    parts = skl.design(section, c_farads=2.2e-9)
    fig = numeric_figures(skl, parts, IDEAL, f0_hz)
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, gain) < 1e-3
    assert max_response_error(skl, parts, section) < 1e-6


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_noise_gain_numerator_matches_sympy(f0_hz, q, gain):
    """[sympy] NG(s) of a source in series with U1's + input, numerator over monic D(s)."""
    parts = skl.design(Section("lowpass", f0_hz, q, gain), c_farads=1e-9)
    _, coeffs = noise_gain_coefficients(skl, parts)
    for got, want in zip(skl.noise_gain_numerator(parts), coeffs):
        assert rel(got, want) < 1e-9


@pytest.mark.parametrize("q", [0.7071, 2.0, 6.0])
def test_unity_gain_noise_gain_at_f0_is_one_plus_two_q_squared(q):
    """[sympy, calc] at w0 NG = (C1 + 2 C2)/(2 C2) = 1 + 2Q^2 for the follower design."""
    lim = skl.limits(Section("lowpass", 1e3, q, 1.0), IDEAL)
    assert rel(lim.noise_gain, 1 + 2 * q * q) < 1e-9


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_finite_gbw_first_order_shift_matches_exact_poles(f0_hz, q, gain):
    """[sympy] poles with A = wt/s at e = f0/GBW = 1e-7 vs the first-order formula."""
    parts = skl.design(Section("lowpass", f0_hz, q, gain), c_farads=1e-9)
    e, (f_shift, q_shift), (k_f, k_q) = exact_and_first_order_shifts(skl, parts, f0_hz, q)
    assert abs(f_shift / float(e) - k_f) < 1e-4 * max(1.0, abs(k_f))
    assert abs(q_shift / float(e) - k_q) < 1e-4 * max(1.0, abs(k_q))


@pytest.mark.parametrize("q", [0.7071, 3.0])
def test_finite_gbw_in_the_project_model(q):
    """[nodal] single-pole op-amp, e = 1e-3/Q: shifts within 2 % of first order.

    A0 = 200 dB, so that GBW alone acts (at 120 dB the finite A0 moves Q by a further
    S_K^Q / A0 = 2 Q^2 / A0, 2 % of this shift at Q = 3).

    At unity gain with equal R the first-order shifts are df0/f0 = -Q e, dQ/Q = +Q e
    (derived in circuits._filter_and_gain).
    """
    f0_hz = 2e3
    gbw_hz = f0_hz * q * 1e3
    parts = skl.design(Section("lowpass", f0_hz, q, 1.0), c_farads=1e-9)
    fig = numeric_figures(skl, parts, make_opamp(gbw_hz, dc_gain_db=200.0), f0_hz)
    e = f0_hz / gbw_hz
    assert rel(fig.f0_hz / f0_hz - 1, -q * e) < 0.02
    assert rel(fig.q / q - 1, q * e) < 0.02


@pytest.mark.parametrize("q", [0.5412, 1.3065, 4.0])
def test_gbw_needed_at_unity_gain_is_ten_max_q2_1_f0(q):
    """[derived] |df0/f0| = |dQ/Q| = Q e at unity gain, so the pole movement of circuits.rules,
    max(Q·Q e, Q e, e), reaches 10 % at GBW = 10 max(Q², 1) f0 (against the
    common-practice 100 x gain x Q x f0, which assumes no predistortion)."""
    lim = skl.limits(Section("lowpass", 5e3, q, 1.0), IDEAL)
    assert rel(lim.gbw_needed_hz, 10 * max(q * q, 1.0) * 5e3) < 1e-9


@pytest.mark.parametrize("f0_hz,q,gain", CASES[:6])
def test_q_sensitivity_matches_sympy(f0_hz, q, gain):
    """[sympy] limits().q_sensitivity is the largest classical sensitivity S_x^Q."""
    section = Section("lowpass", f0_hz, q, gain)
    sens = sympy_q_sensitivities(skl, skl.design(section, c_farads=1e-9))
    want = max(map(abs, sens.values()))
    assert rel(skl.limits(section, IDEAL).q_sensitivity, want) < 1e-6


def test_unity_gain_sensitivity_is_one_half():
    """[sympy, calc] equal R at unity gain: S_C1^Q = 1/2, S_C2^Q = -1/2, S_R^Q = 0."""
    assert rel(skl.limits(Section("lowpass", 1e3, 3.0, 1.0), IDEAL).q_sensitivity, 0.5) < 1e-6


@pytest.mark.parametrize("q", [1.0, 2.0, 5.0])
def test_equal_component_gain_sensitivity_is_3q_minus_1(q):
    """[SK55; docs/methods.md Sallen-Key: S_K^Q = 3Q - 1] via sympy on the derived Q(K)."""
    kk = sp.Symbol("K", positive=True)
    parts = skl.design(Section("lowpass", 1e3, q, 3 - 1 / q), c_farads=1e-9)
    els = skl.elements(parts, IDEAL)
    sym = element_symbols(els)
    w0_sq, bw, _ = biquad_figures(transfer(els), "lowpass")
    q_expr = (sp.sqrt(w0_sq) / bw).subs(sym["Rf"], (kk - 1) * sym["Rg"])
    at = {sym[k]: sp.Rational(v) for k, v in parts.items() if k != "Rf"}
    at[kk] = sp.Rational(3) - 1 / sp.Rational(q)
    s_k = float((kk / q_expr * sp.diff(q_expr, kk)).subs(at))
    assert rel(s_k, 3 * q - 1) < 1e-9


def test_limits_feasible_section_reports_figures():
    """Feasible unity-gain section: spread C1/C2 = 4Q^2 [refs], reasons carry numbers."""
    lim = skl.limits(Section("lowpass", 1e3, 2.0, 1.0), make_opamp(1e6))
    assert lim.feasible
    assert lim.opamps == 1
    assert rel(lim.spread, 16.0) < 1e-12
    assert any("C1/C2 = 16" in r for r in lim.reasons)
    assert any("needs 40 kHz GBW" in r for r in lim.reasons)  # 10 Q² f0


@pytest.mark.parametrize("section,words", [
    (Section("lowpass", 1e3, 1.0, 0.5), "gain stage"),
    (Section("lowpass", 1e3, 1.0, -0.5), "gain stage"),
    (Section("highpass", 1e3, 1.0, 1.0), "builds 'lowpass'"),
    (Section("lowpass", 1e3, 0.0, 1.0), "Q = 0"),
])
def test_limits_reject_what_the_topology_cannot_build(section, words):
    """Attenuation, wrong kind, Q <= 0: infeasible, with the reason."""
    lim = skl.limits(section, IDEAL)
    assert not lim.feasible
    assert any(words in r for r in lim.reasons)
    assert math.isinf(lim.gbw_needed_hz)


def test_gain_sign_is_ignored_and_the_circuit_does_not_invert():
    """The chain's gains are magnitudes (docs/design.md): -2 designs as +2, built gain +2 [nodal]."""
    neg = skl.design(Section("lowpass", 1e3, 1.5, -2.0), c_farads=1e-9)
    assert neg == skl.design(Section("lowpass", 1e3, 1.5, 2.0), c_farads=1e-9)
    assert rel(numeric_figures(skl, neg, IDEAL, 1e3).gain, 2.0) < 1e-9
    assert skl.limits(Section("lowpass", 1e3, 1.5, -2.0), IDEAL).feasible


def test_gain_within_a_tenth_of_a_percent_of_unity_is_a_follower_with_a_note():
    """UNITY_RTOL = 1/MAX_SPREAD: closer to 1 would need Rf/Rg < 1/1000 (documented)."""
    section = Section("lowpass", 1e3, 1.5, 1.0005)
    assert "Rf" not in skl.design(section, c_farads=1e-9)
    lim = skl.limits(section, IDEAL)
    assert lim.feasible and any("built at unity" in r for r in lim.reasons)
    assert not any("built at unity" in r
                   for r in skl.limits(Section("lowpass", 1e3, 1.5, 1.0), IDEAL).reasons)
    assert "Rf" in skl.design(Section("lowpass", 1e3, 1.5, 1.002), c_farads=1e-9)


def test_limits_reject_slow_opamp_and_large_spread():
    """GBW below 10 Q f0 fails; Q = 20 at unity gain needs C1/C2 = 1600 > 1000 and fails."""
    slow = skl.limits(Section("lowpass", 10e3, 2.0, 1.0), make_opamp(150e3))
    assert not slow.feasible and any("falls short" in r for r in slow.reasons)
    wide = skl.limits(Section("lowpass", 1e3, 20.0, 1.0), IDEAL)
    assert not wide.feasible and any("spread 1600" in r for r in wide.reasons)
    assert skl.limits(Section("lowpass", 1e3, 15.0, 1.0), IDEAL).feasible


def test_design_errors():
    """Attenuation is an InfeasibleDesign; a wrong kind or c_farads <= 0 a ValueError."""
    with pytest.raises(InfeasibleDesign):
        skl.design(Section("lowpass", 1e3, 1.0, 0.5), c_farads=1e-9)
    with pytest.raises(ValueError):
        skl.design(Section("highpass", 1e3, 1.0, 1.0), c_farads=1e-9)
    with pytest.raises(ValueError):
        skl.design(Section("lowpass", 1e3, 1.0, 1.0), c_farads=0.0)


def test_follower_element_list_and_part_checks():
    """Unity gain: no Rf/Rg, inverting input on out; a half pair or unknown part raises."""
    els = skl.elements(skl.design(Section("lowpass", 1e3, 1.0, 1.0), c_farads=1e-9), IDEAL)
    assert [e.name for e in els] == ["R1", "R2", "C1", "C2", "U1"]
    assert els[-1].nets == ("ninp", "out", "out")
    with pytest.raises(ValueError):
        skl.elements({**FOLLOWER_PARTS, "Rf": 1.0}, IDEAL)
    with pytest.raises(ValueError):
        skl.elements({**FOLLOWER_PARTS, "R9": 1.0}, IDEAL)


@pytest.mark.parametrize("gain,ratio_factor", [(1.0, 1.0), (1.0, 1.2), (1.0, 3.0),
                                                     (2.0, 1.5), (2.0, 0.9)])
def test_resistors_for_rounded_capacitors_hit_target(gain, ratio_factor):
    """[nodal] re-solved R1, R2 for a capacitor ratio off the design's still hit target."""
    q, f0_hz = 2.5, 3e3
    section = Section("lowpass", f0_hz, q, gain)
    ideal = skl.design(section, c_farads=1e-9)
    c1 = ideal["C1"] / ideal["C2"] * ratio_factor * 1e-9
    parts = skl.resistors_for_capacitors(section, c1_farads=c1, c2_farads=1e-9)
    fig = numeric_figures(skl, parts, IDEAL, f0_hz)
    assert rel(fig.f0_hz, f0_hz) < 1e-9 and rel(fig.q, q) < 1e-9 and rel(fig.gain, gain) < 1e-9


def test_resistors_for_capacitors_below_minimum_ratio_is_infeasible():
    """[refs] at unity gain no resistor pair reaches Q when C1/C2 < 4 Q^2."""
    with pytest.raises(InfeasibleDesign, match="below"):
        skl.resistors_for_capacitors(Section("lowpass", 1e3, 2.0, 1.0),
                                     c1_farads=15e-9, c2_farads=1e-9)
