"""Multiple-feedback highpass: design equations derived with sympy, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic_lp.py);
  the design equations are *derived* here from it, not copied;
- [W&T] Williams & Taylor, *Electronic Filter Design Handbook*, 4th ed., 2006, §4 [mem]:
  the textbook form w0^2 = 1/(R1 R2 C2 C3), H_inf = -C1/C3;
- [biquad] the standard second-order highpass (sections.section_response, Schaumann & Van
  Valkenburg 2001, ch. 4 [mem]);
- [nodal] the project's nodal solver / polynomial reduction (circuits.nodal, circuits.figures).
"""

from __future__ import annotations

import math

import pytest
import sympy as sp

from bandwright.circuits import mfb_highpass as mhp
from bandwright.errors import InfeasibleDesign
from bandwright.sections.section import Section

from lphp_support import (IDEAL, check_interface, exact_and_first_order_shifts,
                          first_order_shift, make_opamp, max_response_error,
                          noise_gain_coefficients, numeric_figures, rel, sympy_design_figures,
                          sympy_q_sensitivities)
from symbolic_lp import S, biquad_figures, element_symbols, transfer

UNIT_PARTS = {"C1": 1.0, "C2": 1.0, "C3": 1.0, "R1": 1.0, "R2": 1.0}

CASES = [
    (1e3, 0.7071, -1.0),
    (40e3, 1.3065, -1.0),
    (100.0, 0.3, -1.0),
    (5e3, 2.0, -4.0),
    (2e3, 0.5412, -0.25),
    (300.0, 5.0, -1.0),
]


def _symbolic_figures():
    els = mhp.elements(UNIT_PARTS, IDEAL)
    return element_symbols(els), biquad_figures(transfer(els), "highpass")


def test_interface():
    """[base.Topology] attributes and registry entry."""
    check_interface(mhp, "mfb_highpass", "highpass", inverting=True)
    assert mhp.PARTS == ("C1", "C2", "C3", "R1", "R2")


def test_transfer_function_is_the_textbook_one():
    """[sympy] vs [W&T]: w0^2 = 1/(R1 R2 C2 C3), w0/Q = (C1+C2+C3)/(R2 C2 C3), -C1/C3."""
    sym, (w0_sq, bw, gain) = _symbolic_figures()
    c1, c2, c3, r1, r2 = (sym[k] for k in ("C1", "C2", "C3", "R1", "R2"))
    assert sp.simplify(w0_sq - 1 / (r1 * r2 * c2 * c3)) == 0
    assert sp.simplify(bw - (c1 + c2 + c3) / (r2 * c2 * c3)) == 0
    assert sp.simplify(gain + c1 / c3) == 0


def test_design_equations_derived_with_sympy():
    """[sympy] with C1 = C2 = C, C3 = C/K, solving w0 and Q for R1, R2 gives
    R2 = Q (2K + 1)/(w0 C) and R1 = K/(Q (2K + 1) w0 C), and the gain is -K."""
    sym, (w0_sq, bw, gain) = _symbolic_figures()
    c1, c2, c3, r1, r2 = (sym[k] for k in ("C1", "C2", "C3", "R1", "R2"))
    c, k, w, q = sp.symbols("C K omega Q", positive=True)
    at = {c1: c, c2: c, c3: c / k}
    assert sp.simplify(gain.subs(at) + k) == 0
    sol = sp.solve([sp.Eq(w0_sq.subs(at), w**2), sp.Eq(bw.subs(at), w / q)], [r1, r2], dict=True)
    assert len(sol) == 1
    assert sp.simplify(sol[0][r2] - q * (2 * k + 1) / (w * c)) == 0
    assert sp.simplify(sol[0][r1] - k / (q * (2 * k + 1) * w * c)) == 0

    parts = mhp.design(Section("highpass", 1e3, 2.0, -3.0), c_farads=1e-9)
    w0 = 2 * math.pi * 1e3
    assert parts["C1"] == parts["C2"] == 1e-9 and rel(parts["C3"], 1e-9 / 3) < 1e-12
    assert rel(parts["R2"], 2.0 * 7 / (w0 * 1e-9)) < 1e-12
    assert rel(parts["R1"], 3 / (2.0 * 7 * w0 * 1e-9)) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_solves_the_sympy_equations(f0_hz, q, gain):
    """[sympy] the designed values put w0, Q and H_inf of the derived H(s) on target."""
    parts = mhp.design(Section("highpass", f0_hz, q, gain), c_farads=4.7e-9)
    f0_sym, q_sym, k = sympy_design_figures(mhp, parts)
    assert rel(f0_sym, f0_hz) < 1e-12
    assert rel(q_sym, q) < 1e-12
    assert rel(k, gain) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_designed_section_hits_target_in_the_nodal_solver(f0_hz, q, gain):
    """[nodal] ideal op-amp: f0, Q and gain within 0.1 %; response equals [biquad]."""
    section = Section("highpass", f0_hz, q, gain)
    parts = mhp.design(section, c_farads=1e-9)
    fig = numeric_figures(mhp, parts, IDEAL, f0_hz)
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, gain) < 1e-3
    assert max_response_error(mhp, parts, section) < 1e-6


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_noise_gain_numerator_matches_sympy(f0_hz, q, gain):
    """[sympy] NG(s) numerator over monic D(s); NG(inf) = 1 + K (Franco 2015, §1.3 [mem])."""
    parts = mhp.design(Section("highpass", f0_hz, q, gain), c_farads=1e-9)
    ng, coeffs = noise_gain_coefficients(mhp, parts)
    for got, want in zip(mhp.noise_gain_numerator(parts), coeffs):
        assert rel(got, want) < 1e-9
    assert rel(float(sp.limit(ng, S, sp.oo)), 1 + abs(gain)) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_finite_gbw_first_order_shift_matches_exact_poles(f0_hz, q, gain):
    """[sympy] poles with A = wt/s at e = f0/GBW = 1e-7 vs the first-order formula."""
    parts = mhp.design(Section("highpass", f0_hz, q, gain), c_farads=1e-9)
    e, (f_shift, q_shift), (k_f, k_q) = exact_and_first_order_shifts(mhp, parts, f0_hz, q)
    assert abs(f_shift / float(e) - k_f) < 1e-4 * max(1.0, abs(k_f))
    assert abs(q_shift / float(e) - k_q) < 1e-4 * max(1.0, abs(k_q))


def test_finite_gbw_in_the_project_model():
    """[nodal] single-pole op-amp (A0 200 dB), e = 1e-3: shifts within 2 % of first order."""
    f0_hz, q = 2e3, 2.0
    section = Section("highpass", f0_hz, q, -1.0)
    parts = mhp.design(section, c_farads=1e-9)
    k_f, k_q = first_order_shift(mhp, parts)
    fig = numeric_figures(mhp, parts, make_opamp(f0_hz * 1e3, dc_gain_db=200.0), f0_hz)
    assert rel(fig.f0_hz / f0_hz - 1, k_f * 1e-3) < 0.02
    assert rel(fig.q / q - 1, k_q * 1e-3) < 0.02
    # circuits.rules: pole movement max(Q |k_f|, |k_q|, 1) e within 10 % of the bandwidth.
    assert rel(mhp.limits(section, IDEAL).gbw_needed_hz,
               f0_hz * max(q * abs(k_f), abs(k_q), 1.0) / 0.1) < 1e-12


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_q_sensitivities(f0_hz, q, gain):
    """[sympy] S^Q = +-1/2 (R2, R1), -K/(2K+1) (C1); the largest is 1/2 for any K."""
    section = Section("highpass", f0_hz, q, gain)
    sens = sympy_q_sensitivities(mhp, mhp.design(section, c_farads=1e-9))
    kk = abs(gain)
    assert rel(sens["R2"], 0.5) < 1e-12 and rel(sens["R1"], -0.5) < 1e-12
    assert rel(sens["C1"], -kk / (2 * kk + 1)) < 1e-12
    assert rel(mhp.limits(section, IDEAL).q_sensitivity, 0.5) < 1e-6


def test_limits_feasible_section_reports_figures():
    """Spread R2/R1 = Q^2 (2K+1)^2 / K = 9 Q^2 at unity gain (from the derived design)."""
    lim = mhp.limits(Section("highpass", 1e3, 2.0, -1.0), make_opamp(1e6))
    assert lim.feasible and lim.opamps == 1
    assert rel(lim.spread, 36.0) < 1e-12
    assert any("R2/R1 = 36" in r for r in lim.reasons)


@pytest.mark.parametrize("section,words", [
    (Section("highpass", 1e3, 1.0, math.inf), "finite"),
    (Section("lowpass", 1e3, 1.0, -1.0), "builds 'highpass'"),
    (Section("highpass", 1e3, math.nan, -1.0), "Q = nan"),
])
def test_limits_reject_what_the_topology_cannot_build(section, words):
    """Infinite gain, wrong kind, Q not finite: infeasible, with the reason."""
    lim = mhp.limits(section, IDEAL)
    assert not lim.feasible
    assert any(words in r for r in lim.reasons)


def test_limits_reject_slow_opamp_and_large_spread():
    """Too little GBW fails; Q = 11 at unity gain needs R2/R1 = 1089 > 1000 and fails."""
    section = Section("highpass", 10e3, 2.0, -1.0)
    need = mhp.limits(section, IDEAL).gbw_needed_hz
    assert not mhp.limits(section, make_opamp(0.9 * need)).feasible
    assert mhp.limits(section, make_opamp(1.1 * need)).feasible
    wide = mhp.limits(Section("highpass", 1e3, 11.0, -1.0), IDEAL)
    assert not wide.feasible and any("spread 1089" in r for r in wide.reasons)


def test_gain_sign_is_ignored_and_the_circuit_inverts():
    """The chain's gains are magnitudes (docs/design.md): +3 designs as -3, built gain -3 [nodal]."""
    pos = mhp.design(Section("highpass", 1e3, 1.5, 3.0), c_farads=1e-9)
    assert pos == mhp.design(Section("highpass", 1e3, 1.5, -3.0), c_farads=1e-9)
    assert rel(numeric_figures(mhp, pos, IDEAL, 1e3).gain, -3.0) < 1e-9


def test_design_and_element_errors():
    """Zero gain: InfeasibleDesign; wrong kind, c <= 0, missing part: ValueError."""
    with pytest.raises(InfeasibleDesign):
        mhp.design(Section("highpass", 1e3, 1.0, 0.0), c_farads=1e-9)
    with pytest.raises(ValueError):
        mhp.design(Section("lowpass", 1e3, 1.0, -1.0), c_farads=1e-9)
    with pytest.raises(ValueError):
        mhp.design(Section("highpass", 1e3, 1.0, -1.0), c_farads=0.0)
    with pytest.raises(ValueError):
        mhp.elements({"C1": 1.0, "C2": 1.0, "R1": 1.0, "R2": 1.0}, IDEAL)
