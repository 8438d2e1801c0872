"""Multiple-feedback lowpass: design equations derived with sympy, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic_lp.py);
  the design equations are *derived* here from it, not copied;
- [W&T] Williams & Taylor, *Electronic Filter Design Handbook*, 4th ed., 2006, §3 [mem]:
  the textbook form w0^2 = 1/(R2 R3 C1 C2), H0 = -R2/R1, C1/C2 >= 4 Q^2 (1 + |H0|);
- [biquad] the standard second-order lowpass (sections.section_response, Schaumann & Van
  Valkenburg 2001, ch. 4 [mem]);
- [nodal] the project's nodal solver / polynomial reduction (circuits.nodal, circuits.figures).
"""

from __future__ import annotations

import math

import pytest
import sympy as sp

from bandwright.circuits import mfb_lowpass as mlp
from bandwright.errors import InfeasibleDesign
from bandwright.sections.section import Section

from lphp_support import (IDEAL, check_interface, exact_and_first_order_shifts,
                          first_order_shift, make_opamp, max_response_error,
                          noise_gain_coefficients, numeric_figures, rel, sympy_design_figures,
                          sympy_q_sensitivities)
from symbolic_lp import S, biquad_figures, element_symbols, transfer

UNIT_PARTS = {"R1": 1.0, "R2": 1.0, "R3": 1.0, "C1": 1.0, "C2": 1.0}

CASES = [
    (1e3, 0.7071, -1.0),
    (40e3, 1.3065, -1.0),
    (100.0, 0.3, -1.0),       # 4 Q^2 (1 + K) < 1: C1 is the smaller capacitor
    (5e3, 2.0, -4.0),
    (2e3, 0.5412, -0.25),
    (300.0, 6.0, -1.0),
]


def _symbolic_figures():
    els = mlp.elements(UNIT_PARTS, IDEAL)
    return element_symbols(els), biquad_figures(transfer(els), "lowpass")


def test_interface():
    """[base.Topology] attributes and registry entry."""
    check_interface(mlp, "mfb_lowpass", "lowpass", inverting=True)
    assert mlp.PARTS == ("R1", "R2", "R3", "C1", "C2")


def test_transfer_function_is_the_textbook_one():
    """[sympy] vs [W&T]: w0^2 = 1/(R2 R3 C1 C2), w0/Q = (1/R1+1/R2+1/R3)/C1, H0 = -R2/R1."""
    sym, (w0_sq, bw, gain) = _symbolic_figures()
    r1, r2, r3, c1, c2 = (sym[k] for k in ("R1", "R2", "R3", "C1", "C2"))
    assert sp.simplify(w0_sq - 1 / (r2 * r3 * c1 * c2)) == 0
    assert sp.simplify(bw - (1 / r1 + 1 / r2 + 1 / r3) / c1) == 0
    assert sp.simplify(gain + r2 / r1) == 0


def test_design_equations_derived_with_sympy():
    """[sympy] derivation of the design in the module docstring.

    1. Gain: R1 = R2/K. 2. For fixed capacitors and R2, Q^2 is stationary (largest) in R3
    at R3 = R2/(1 + K). 3. Solving w0 and Q there for R2 and C1 gives
    R2 = 1/(2 Q w0 C2) and C1 = 4 Q^2 (1 + K) C2 -- the [W&T] minimum capacitor ratio.
    """
    sym, (w0_sq, bw, _) = _symbolic_figures()
    r1, r2, r3, c1, c2 = (sym[k] for k in ("R1", "R2", "R3", "C1", "C2"))
    k, w, q = sp.symbols("K omega Q", positive=True)
    q_sq = sp.simplify((w0_sq / bw**2).subs(r1, r2 / k))
    stationary = sp.solve(sp.diff(q_sq, r3), r3)
    assert len(stationary) == 1 and sp.simplify(stationary[0] - r2 / (1 + k)) == 0
    at = {r1: r2 / k, r3: r2 / (1 + k)}
    sol = sp.solve([sp.Eq(w0_sq.subs(at), w**2), sp.Eq(bw.subs(at), w / q)], [r2, c1], dict=True)
    assert len(sol) == 1
    assert sp.simplify(sol[0][r2] - 1 / (2 * q * w * c2)) == 0
    assert sp.simplify(sol[0][c1] - 4 * q**2 * (1 + k) * c2) == 0

    # design() returns exactly these values.
    parts = mlp.design(Section("lowpass", 1e3, 2.0, -3.0), c_farads=1e-9)
    w0 = 2 * math.pi * 1e3
    assert rel(parts["R2"], 1 / (2 * 2.0 * w0 * 1e-9)) < 1e-12
    assert rel(parts["C1"], 4 * 4.0 * 4 * 1e-9) < 1e-12
    assert rel(parts["R3"], parts["R2"] / 4) < 1e-12
    assert rel(parts["R1"], parts["R2"] / 3) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_solves_the_sympy_equations(f0_hz, q, gain):
    """[sympy] the designed values put w0, Q and H0 of the derived H(s) on target."""
    parts = mlp.design(Section("lowpass", f0_hz, q, gain), c_farads=4.7e-9)
    assert min(parts["C1"], parts["C2"]) == 4.7e-9     # c_farads is the smaller capacitor
    f0_sym, q_sym, k = sympy_design_figures(mlp, parts)
    assert rel(f0_sym, f0_hz) < 1e-12
    assert rel(q_sym, q) < 1e-12
    assert rel(k, gain) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_designed_section_hits_target_in_the_nodal_solver(f0_hz, q, gain):
    """[nodal] ideal op-amp: f0, Q and gain within 0.1 %; response equals [biquad]."""
    section = Section("lowpass", f0_hz, q, gain)
    parts = mlp.design(section, c_farads=1e-9)
    fig = numeric_figures(mlp, parts, IDEAL, f0_hz)
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, gain) < 1e-3
    assert max_response_error(mlp, parts, section) < 1e-6


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_noise_gain_numerator_matches_sympy(f0_hz, q, gain):
    """[sympy] NG(s) of a source in series with U1's + input, numerator over monic D(s)."""
    parts = mlp.design(Section("lowpass", f0_hz, q, gain), c_farads=1e-9)
    ng, coeffs = noise_gain_coefficients(mlp, parts)
    for got, want in zip(mlp.noise_gain_numerator(parts), coeffs):
        assert rel(got, want) < 1e-9
    # At DC the loop is an inverting amplifier: NG(0) = 1 + K (Franco 2015, §1.3 [mem]).
    assert rel(float(ng.subs(S, 0)), 1 + abs(gain)) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_finite_gbw_first_order_shift_matches_exact_poles(f0_hz, q, gain):
    """[sympy] poles with A = wt/s at e = f0/GBW = 1e-7 vs the first-order formula."""
    parts = mlp.design(Section("lowpass", f0_hz, q, gain), c_farads=1e-9)
    e, (f_shift, q_shift), (k_f, k_q) = exact_and_first_order_shifts(mlp, parts, f0_hz, q)
    assert abs(f_shift / float(e) - k_f) < 1e-4 * max(1.0, abs(k_f))
    assert abs(q_shift / float(e) - k_q) < 1e-4 * max(1.0, abs(k_q))


def test_finite_gbw_in_the_project_model():
    """[nodal] single-pole op-amp (A0 200 dB), e = 1e-3: shifts within 2 % of first order."""
    f0_hz, q = 2e3, 2.0
    parts = mlp.design(Section("lowpass", f0_hz, q, -1.0), c_farads=1e-9)
    k_f, k_q = first_order_shift(mlp, parts)
    fig = numeric_figures(mlp, parts, make_opamp(f0_hz * 1e3, dc_gain_db=200.0), f0_hz)
    assert rel(fig.f0_hz / f0_hz - 1, k_f * 1e-3) < 0.02
    assert rel(fig.q / q - 1, k_q * 1e-3) < 0.02
    lim = mlp.limits(Section("lowpass", f0_hz, q, -1.0), IDEAL)
    # circuits.rules: pole movement max(Q |k_f|, |k_q|, 1) e within 10 % of the bandwidth.
    assert rel(lim.gbw_needed_hz, f0_hz * max(q * abs(k_f), abs(k_q), 1.0) / 0.1) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_q_sensitivity_is_one_half(f0_hz, q, gain):
    """[sympy] at the design point S^Q is 0 (R3), +-1/2 (C1, C2), +-K/(2(1+K)) (R1, R2)."""
    section = Section("lowpass", f0_hz, q, gain)
    sens = sympy_q_sensitivities(mlp, mlp.design(section, c_farads=1e-9))
    kk = abs(gain)
    assert abs(sens["R3"]) < 1e-12
    assert rel(sens["C1"], 0.5) < 1e-12 and rel(sens["C2"], -0.5) < 1e-12
    assert rel(sens["R1"], kk / (2 * (1 + kk))) < 1e-12
    assert rel(sens["R2"], -kk / (2 * (1 + kk))) < 1e-12
    assert rel(mlp.limits(section, IDEAL).q_sensitivity, 0.5) < 1e-6


def test_limits_feasible_section_reports_figures():
    """Spread is C1/C2 = 4 Q^2 (1 + K) [W&T]; reasons carry the figures."""
    lim = mlp.limits(Section("lowpass", 1e3, 2.0, -1.0), make_opamp(1e6))
    assert lim.feasible and lim.opamps == 1
    assert rel(lim.spread, 32.0) < 1e-12
    assert any("C1/C2 = 32" in r for r in lim.reasons)


@pytest.mark.parametrize("section,words", [
    (Section("lowpass", 1e3, 1.0, 0.0), "non-zero"),
    (Section("highpass", 1e3, 1.0, -1.0), "builds 'lowpass'"),
    (Section("lowpass", -5.0, 1.0, -1.0), "f0"),
])
def test_limits_reject_what_the_topology_cannot_build(section, words):
    """Zero gain, wrong kind, f0 <= 0: infeasible, with the reason."""
    lim = mlp.limits(section, IDEAL)
    assert not lim.feasible
    assert any(words in r for r in lim.reasons)


def test_limits_reject_slow_opamp_and_large_spread():
    """Too little GBW fails; Q = 12 at unity gain needs C1/C2 = 1152 > 1000 and fails."""
    section = Section("lowpass", 10e3, 2.0, -1.0)
    need = mlp.limits(section, IDEAL).gbw_needed_hz
    assert not mlp.limits(section, make_opamp(0.9 * need)).feasible
    assert mlp.limits(section, make_opamp(1.1 * need)).feasible
    wide = mlp.limits(Section("lowpass", 1e3, 12.0, -1.0), IDEAL)
    assert not wide.feasible and any("spread 1152" in r for r in wide.reasons)


def test_gain_sign_is_ignored_and_the_circuit_inverts():
    """The chain's gains are magnitudes (docs/design.md): +3 designs as -3, built gain -3 [nodal]."""
    pos = mlp.design(Section("lowpass", 1e3, 1.5, 3.0), c_farads=1e-9)
    assert pos == mlp.design(Section("lowpass", 1e3, 1.5, -3.0), c_farads=1e-9)
    assert rel(numeric_figures(mlp, pos, IDEAL, 1e3).gain, -3.0) < 1e-9
    assert mlp.limits(Section("lowpass", 1e3, 1.5, 3.0), IDEAL).feasible


def test_design_and_element_errors():
    """Zero gain: InfeasibleDesign; wrong kind, c <= 0, missing part: ValueError."""
    with pytest.raises(InfeasibleDesign):
        mlp.design(Section("lowpass", 1e3, 1.0, 0.0), c_farads=1e-9)
    with pytest.raises(ValueError):
        mlp.design(Section("bandpass", 1e3, 1.0, -1.0), c_farads=1e-9)
    with pytest.raises(ValueError):
        mlp.design(Section("lowpass", 1e3, 1.0, -1.0), c_farads=-1e-9)
    with pytest.raises(ValueError):
        mlp.elements({"R1": 1.0, "R2": 1.0, "C1": 1.0, "C2": 1.0}, IDEAL)


@pytest.mark.parametrize("ratio_factor", [1.0, 1.15, 2.0, 5.0])
def test_resistors_for_rounded_capacitors_hit_target(ratio_factor):
    """[nodal] re-solved resistors for a larger C1/C2 than the minimum still hit target."""
    f0_hz, q, gain = 3e3, 1.8, -2.0
    section = Section("lowpass", f0_hz, q, gain)
    c1 = 4 * q * q * (1 + 2.0) * ratio_factor * 1e-9
    parts = mlp.resistors_for_capacitors(section, c1_farads=c1, c2_farads=1e-9)
    fig = numeric_figures(mlp, parts, IDEAL, f0_hz)
    assert rel(fig.f0_hz, f0_hz) < 1e-9 and rel(fig.q, q) < 1e-9 and rel(fig.gain, gain) < 1e-9


def test_resistors_for_capacitors_below_minimum_ratio_is_infeasible():
    """[W&T, sympy above] C1/C2 < 4 Q^2 (1 + K): no real resistors reach Q."""
    with pytest.raises(InfeasibleDesign, match="below"):
        mlp.resistors_for_capacitors(Section("lowpass", 1e3, 2.0, -1.0),
                                     c1_farads=31e-9, c2_farads=1e-9)
