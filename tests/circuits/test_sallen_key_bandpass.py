"""Sallen-Key bandpass: design equations, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic.py);
- [SK] the equal-value Sallen-Key bandpass (Sallen & Key, IRE Trans. CT-2, 1955 [mem];
  the project's references): R1 = R2 = R, R3 = 2R, C1 = C2 = C -> w0 = 1/(RC),
  Q = 1/(3 - K), H0 = K Q, S_K^Q = 3Q - 1;
- [biquad] the standard bandpass biquad (sections.section_response);
- [nodal] the project's nodal solver / polynomial reduction;
- (common practice) positive-feedback sections are for low Q only.
"""

from __future__ import annotations

import math

import pytest
import sympy as sp

from bandwright.circuits import _bandpass_common as common
from bandwright.circuits import sallen_key_bandpass as sk
from bandwright.errors import InfeasibleDesign

from bandpass_support import (GENERAL_PURPOSE, IDEAL, bandpass_section, built_shifts_per_e,
                              check_interface, ideal_figures, make_opamp, max_response_error,
                              rel, sensitivities_against_sympy, symbolic_fixtures,
                              sympy_noise_gains, unit_parts)
from symbolic import bandpass_figures, gbw_shift, sensitivity

CASES = [  # (f0_hz, Q, gain): natural gain 3Q - 1 = 2.0, 8.0, 0.5, 5.0
    (1e3, 1.0, 1.0),
    (40e3, 3.0, 8.0),
    (10e3, 0.5 + 1 / 6, 0.2),
    (250.0, 2.0, 9.0),   # above the natural 5: designed at 5
]


p, h_symbolic = symbolic_fixtures(sk)


def test_interface():
    check_interface(sk, "sallen_key_bandpass", inverting=False, opamps=1)


def test_equal_value_figures_match_published(h_symbolic, p):
    """[sympy] vs [SK]: R1 = R2 = R, R3 = 2R, C1 = C2, K = 1 + Ra/Rb gives w0 = 1/(RC),
    Q = 1/(3 - K), H0 = K Q, and S_K^Q = 3Q - 1."""
    r, c, k = sp.symbols("R C K", positive=True)
    h = sp.limit(h_symbolic, p["R1b"], sp.oo)  # no divider
    h = h.subs({p["R1a"]: r, p["R2"]: r, p["R3"]: 2 * r, p["C1"]: c, p["C2"]: c,
                p["Ra"]: (k - 1) * p["Rb"]})
    w0, q, h0 = bandpass_figures(h)
    assert sp.simplify(w0 - 1 / (r * c)) == 0
    assert sp.simplify(q - 1 / (3 - k)) == 0
    assert sp.simplify(h0 - k / (3 - k)) == 0
    assert sp.simplify(sensitivity(q, k) - (3 * q - 1)) == 0


def test_design_equations_give_target_symbolically(h_symbolic, p):
    """[sympy] the design with divider ratio rho (w0 = 1, C = 1) gives w0 = 1, Q, rho (3Q-1)."""
    q, rho = sp.symbols("Q rho", positive=True)
    design = {"R1a": 1 / rho, "R1b": 1 / (1 - rho), "R2": 1, "R3": 2, "C1": 1, "C2": 1,
              "Ra": 2 - 1 / q, "Rb": 1}
    w0, q_expr, h0 = bandpass_figures(h_symbolic.subs({p[k]: v for k, v in design.items()}))
    assert sp.simplify(w0 - 1) == 0
    assert sp.simplify(q_expr - q) == 0
    assert sp.simplify(h0 - rho * (3 * q - 1)) == 0


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_matches_formula(f0_hz, q, gain):
    """[SK] equal-value equations with the divider, typed here independently."""
    c = 2.2e-9
    parts = sk.design(bandpass_section(f0_hz, q, gain), c_farads=c)
    r = 1 / (2 * math.pi * f0_hz * c)
    k = 3 - 1 / q
    rho = min(gain / (k * q), 1.0)
    assert parts["R2"] == pytest.approx(r, rel=1e-12)
    assert parts["R3"] == pytest.approx(2 * r, rel=1e-12)
    assert parts["R1a"] == pytest.approx(r / rho, rel=1e-12)
    if rho < 1:
        assert 1 / (1 / parts["R1a"] + 1 / parts["R1b"]) == pytest.approx(r, rel=1e-12)
    else:
        assert "R1b" not in parts
    assert 1 + parts["Ra"] / parts["Rb"] == pytest.approx(k, rel=1e-12)
    assert min(parts["Ra"], parts["Rb"]) == pytest.approx(r, rel=1e-12)
    assert parts["C1"] == parts["C2"] == c


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_ideal_build_hits_target(f0_hz, q, gain):
    """[nodal] ideal op-amp: f0, Q and gain within 0.1 % (gain capped at 3Q - 1)."""
    fig = ideal_figures(sk, bandpass_section(f0_hz, q, gain))
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, min(gain, 3 * q - 1)) < 1e-3


def test_response_is_the_standard_biquad():
    """[nodal] vs [biquad]: the whole response, two decades around f0."""
    sec = bandpass_section(3e3, 2.5, 4.0)
    assert max_response_error(sk, sec, gain=4.0) < 1e-9


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_q_sensitivities_match_sympy(f0_hz, q, gain, h_symbolic):
    """[sympy] S_x^Q of the derived Q at the designed values; they sum to 9Q - 9/2."""
    sec = bandpass_section(f0_hz, q, gain)
    parts, derived, mine = sensitivities_against_sympy(sk, sec, h_symbolic)
    assert set(mine) == set(parts)
    for name, value in mine.items():
        assert value == pytest.approx(derived[name], abs=1e-9)
    if q >= 1:
        assert sum(map(abs, mine.values())) == pytest.approx(9 * q - 4.5)
    assert sk.limits(sec, IDEAL).q_sensitivity == pytest.approx(max(map(abs, derived.values())))


@pytest.mark.parametrize("f0_hz,q,gain", CASES[:3])
def test_noise_gain_matches_sympy(f0_hz, q, gain):
    """[sympy] |V(out)/e_n| at f0 = 3 (3Q - 1), whatever the divider."""
    sec = bandpass_section(f0_hz, q, gain)
    (u1,) = sympy_noise_gains(sk, sec)
    assert u1 == pytest.approx(sk.noise_gain(sec), rel=1e-9)
    assert sk.noise_gain(sec) == pytest.approx(3 * (3 * q - 1))


def test_gbw_shift_matches_sympy_perturbation():
    """[sympy] first-order shifts per e = f0/GBW: -K^2/2 and +K^2/2."""
    q, rho = sp.symbols("Q rho", positive=True)
    design = {"R1a": 1 / rho, "R1b": 1 / (1 - rho), "R2": 1, "R3": 2, "C1": 1, "C2": 1,
              "Ra": 2 - 1 / q, "Rb": 1}
    k_f, k_q = gbw_shift(sk.elements(unit_parts(sk), IDEAL), design, q)
    assert not ({rho} & (k_f.free_symbols | k_q.free_symbols))
    for qq in (0.75, 2.0, 8.0):
        mine = sk.gbw_shift(bandpass_section(1e3, qq, 1.0))
        assert mine == pytest.approx((float(k_f.subs(q, qq)), float(k_q.subs(q, qq))))


@pytest.mark.parametrize("q", [1.0, 4.0])
def test_gbw_shift_matches_nodal(q):
    """[nodal] built with GBW = 1e4 f0: shifts within 2 % of the first-order figures."""
    sec = bandpass_section(10e3, q, 1.0)
    df0_per_e, dq_per_e = built_shifts_per_e(sk, sec, 1e-4)
    k_f, k_q = sk.gbw_shift(sec)
    assert df0_per_e == pytest.approx(k_f, rel=0.02)
    assert dq_per_e == pytest.approx(k_q, rel=0.02)


def test_limits_reject_q_20_with_general_purpose_opamp():
    """(common practice) positive feedback at Q 20: rejected, the reason giving the figures."""
    sec = bandpass_section(1e3, 20.0, 1.0)
    lim = sk.limits(sec, GENERAL_PURPOSE)
    assert not lim.feasible
    text = " ".join(lim.reasons)
    assert "Q 20" in text and "1 % parts" in text and "up to Q 6.06" in text
    # with a generous GBW the tolerance reason alone still rejects it
    assert not sk.limits(sec, make_opamp(1e9)).feasible


def test_tolerance_q_max_is_where_the_shift_reaches_the_limit():
    """The Q bound quoted in the reason is where sum |S_x^Q| t_x = 50 % (sympy sums above)."""
    for r_tol, c_tol in ((0.01, None), (0.01, 0.05), (0.05, 0.05)):
        q_max = sk.tolerance_q_max(r_tol, c_tol)
        sens = sk.q_sensitivities(bandpass_section(1e3, q_max, 1.0))
        shift = common.tolerance_shift(sens, r_tol, r_tol if c_tol is None else c_tol)
        assert shift == pytest.approx(common.TOLERANCE_Q_SHIFT_LIMIT)
    sec = bandpass_section(1e3, 5.0, 1.0)
    assert sk.limits(sec, GENERAL_PURPOSE).feasible
    assert not sk.limits(sec, GENERAL_PURPOSE, r_tolerance=0.05).feasible


def test_limits_gain_above_natural():
    """Gain above K Q = 3Q - 1 fails unless accepted; then the dB to make up is stated."""
    sec = bandpass_section(1e3, 2.0, 10.0)
    assert not sk.limits(sec, GENERAL_PURPOSE).feasible
    lim = sk.limits(sec, GENERAL_PURPOSE, accept_gain_shortfall=True)
    assert lim.feasible
    assert any("exceeds the 5 V/V" in r and "6.02 dB" in r for r in lim.reasons)


def test_low_q_is_infeasible():
    """K = 3 - 1/Q must exceed 1: Q <= 1/2 cannot be built."""
    sec = bandpass_section(1e3, 0.5, 1.0)
    with pytest.raises(InfeasibleDesign):
        sk.design(sec, c_farads=1e-9)
    lim = sk.limits(sec, GENERAL_PURPOSE)
    assert not lim.feasible and "0.5" in lim.reasons[0]
