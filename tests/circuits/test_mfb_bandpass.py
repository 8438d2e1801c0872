"""Multiple-feedback bandpass: design equations, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic.py);
- [W&T] Williams & Taylor, *Electronic Filter Design Handbook*, 4th ed., 2006, §5.2 [mem]:
  equal C, R2 = Q/(pi f0 C), R1a = R2/(2|H0|), R1b = R2/(4Q^2 - 2|H0|);
- [refs] the project's check values (docs/methods.md, [calc] from those equations):
  f0 40 kHz, Q 10, H0 10, C 1 nF -> R2 79.577 kOhm, R1a 3.9789 kOhm, R1b 209.41 Ohm,
  noise gain 201;
- [biquad] the standard bandpass biquad (sections.section_response);
- [nodal] the project's nodal solver / polynomial reduction;
- (common practice) the trade rules named in the test.
"""

from __future__ import annotations

import math

import pytest
import sympy as sp

from bandwright.circuits import mfb_bandpass as mfb
from bandwright.sections.section import Section

from bandpass_support import (GENERAL_PURPOSE, IDEAL, bandpass_section, built_shifts_per_e,
                              check_interface, ideal_figures, make_opamp, max_response_error,
                              rel, sensitivities_against_sympy, symbolic_fixtures,
                              sympy_noise_gains, unit_parts)
from symbolic import S, bandpass_figures, gbw_shift

CASES = [  # (f0_hz, Q, gain): below, at and (designed at 2Q^2) above the natural gain
    (40e3, 10.0, -10.0),
    (1e3, 0.7071, -0.5),
    (5e3, 3.0, -18.0),
    (100.0, 15.0, -1.0),
]


p, h_symbolic = symbolic_fixtures(mfb)


def test_interface():
    check_interface(mfb, "mfb_bandpass", inverting=True, opamps=1)


def test_transfer_matches_published_form(h_symbolic, p):
    """[sympy] vs [W&T]: H = -(s/(R1a C1)) / (s^2 + s (C1+C2)/(R2 C1 C2) + 1/(R1 R2 C1 C2))."""
    r1 = p["R1a"] * p["R1b"] / (p["R1a"] + p["R1b"])
    c1, c2, r2 = p["C1"], p["C2"], p["R2"]
    published = -(S / (p["R1a"] * c1)) / (S**2 + S * (c1 + c2) / (r2 * c1 * c2)
                                          + 1 / (r1 * r2 * c1 * c2))
    assert sp.simplify(h_symbolic - published) == 0


def test_design_equations_give_target_symbolically(h_symbolic, p):
    """[sympy] the [W&T] equal-C design (w0 = 1, C = 1) gives w0 = 1, Q and -H0 exactly."""
    q, g = sp.symbols("Q H0", positive=True)
    r2 = 2 * q  # Q/(pi f0 C) with 2 pi f0 = 1
    design = {"R2": r2, "R1a": r2 / (2 * g), "R1b": r2 / (4 * q**2 - 2 * g), "C1": 1, "C2": 1}
    w0, q_expr, h0 = bandpass_figures(h_symbolic.subs({p[k]: v for k, v in design.items()}))
    assert sp.simplify(w0 - 1) == 0
    assert sp.simplify(q_expr - q) == 0
    assert sp.simplify(h0 + g) == 0


def test_reference_check_values():
    """[refs]: f0 40 kHz, Q 10, H0 10, C 1 nF (printed to 5 digits)."""
    parts = mfb.design(bandpass_section(40e3, 10.0, -10.0), c_farads=1e-9)
    assert parts["R2"] == pytest.approx(79.577e3, rel=1e-4)
    assert parts["R1a"] == pytest.approx(3.9789e3, rel=1e-4)
    assert parts["R1b"] == pytest.approx(209.41, rel=1e-4)
    assert mfb.noise_gain(bandpass_section(40e3, 10.0, -10.0)) == pytest.approx(201)
    assert list(parts) == [p for p in mfb.PARTS if p in parts]


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_matches_formula(f0_hz, q, gain):
    """[W&T] equations, typed here independently, vs design()."""
    c = 4.7e-9
    parts = mfb.design(bandpass_section(f0_hz, q, gain), c_farads=c)
    g = min(abs(gain), 2 * q * q)
    r2 = q / (math.pi * f0_hz * c)
    assert parts["R2"] == pytest.approx(r2, rel=1e-12)
    assert parts["R1a"] == pytest.approx(r2 / (2 * g), rel=1e-12)
    if abs(gain) < 2 * q * q:
        assert parts["R1b"] == pytest.approx(r2 / (4 * q * q - 2 * g), rel=1e-12)
    else:
        assert "R1b" not in parts
    assert parts["C1"] == parts["C2"] == c


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_ideal_build_hits_target(f0_hz, q, gain):
    """[nodal] ideal op-amp: f0, Q and gain within 0.1 % of the target (gain capped at 2Q^2)."""
    sec = bandpass_section(f0_hz, q, gain)
    fig = ideal_figures(mfb, sec)
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, -min(abs(gain), 2 * q * q)) < 1e-3


def test_response_is_the_standard_biquad():
    """[nodal] vs [biquad]: the whole response, two decades around f0."""
    sec = bandpass_section(2e3, 4.0, -3.0)
    assert max_response_error(mfb, sec, gain=-3.0) < 1e-9


def test_without_r1b_centre_gain_is_two_q_squared():
    """(common practice) equal-C MFB without R1b: centre gain -2Q^2 [nodal]."""
    for q in (2.0, 5.0, 12.0):
        sec = bandpass_section(10e3, q, -2 * q * q)
        parts = mfb.design(sec, c_farads=1e-9)
        assert "R1b" not in parts
        assert rel(ideal_figures(mfb, sec, 1e-9).gain, -2 * q * q) < 1e-9


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_q_sensitivities_match_sympy(f0_hz, q, gain, h_symbolic):
    """[sympy] S_x^Q = (x/Q) dQ/dx of the derived Q, at the designed values."""
    sec = bandpass_section(f0_hz, q, gain)
    parts, derived, mine = sensitivities_against_sympy(mfb, sec, h_symbolic)
    assert set(mine) == set(parts)
    for name, value in mine.items():
        assert value == pytest.approx(derived[name], abs=1e-9)
    assert mfb.limits(sec, IDEAL).q_sensitivity == pytest.approx(max(map(abs, derived.values())))


@pytest.mark.parametrize("f0_hz,q,gain", CASES[:3])
def test_noise_gain_matches_sympy(f0_hz, q, gain):
    """[sympy] |V(out)/e_n| at f0 = 1 + 2Q^2 (common practice), whatever the gain."""
    sec = bandpass_section(f0_hz, q, gain)
    (u1,) = sympy_noise_gains(mfb, sec)
    assert u1 == pytest.approx(1 + 2 * q * q, rel=1e-9)
    assert mfb.noise_gain(sec) == pytest.approx(1 + 2 * q * q)


def test_gbw_shift_matches_sympy_perturbation():
    """[sympy] first-order df0/f0 and dQ/Q per e = f0/GBW: -Q e and +Q e ([refs] [calc])."""
    q, g = sp.symbols("Q H0", positive=True)
    design = {"R2": 2 * q, "R1a": q / g, "R1b": 2 * q / (4 * q**2 - 2 * g), "C1": 1, "C2": 1}
    k_f, k_q = gbw_shift(mfb.elements(unit_parts(mfb), IDEAL), design, q)
    for qq, gg in ((0.8, 0.5), (10.0, 10.0), (25.0, 3.0)):
        sec = bandpass_section(1e3, qq, -gg)
        at = {q: qq, g: gg}
        assert mfb.gbw_shift(sec) == pytest.approx((float(k_f.subs(at)), float(k_q.subs(at))))


@pytest.mark.parametrize("q", [3.0, 10.0])
def test_gbw_shift_matches_nodal(q):
    """[nodal] built with GBW = 1e4 f0: shifts within 2 % of the first-order figures."""
    sec = bandpass_section(10e3, q, -1.0)
    df0_per_e, dq_per_e = built_shifts_per_e(mfb, sec, 1e-4)
    k_f, k_q = mfb.gbw_shift(sec)
    assert df0_per_e == pytest.approx(k_f, rel=0.02)
    assert dq_per_e == pytest.approx(k_q, rel=0.02)


def test_limits_ask_more_gbw_as_q_rises():
    """MFB needs more GBW at higher Q: 10 Q² f0, the pole-movement rule of circuits.rules
    with k_f = -Q, k_q = Q (references: the shifts; sympy in test_gbw_shift)."""
    needed = [mfb.limits(bandpass_section(10e3, q, -1.0), IDEAL).gbw_needed_hz
              for q in (1, 2, 5, 10, 20)]
    assert all(b > a for a, b in zip(needed, needed[1:]))
    assert needed[3] == pytest.approx(10 * 10**2 * 10e3)


def test_limits_reasons_carry_figures():
    """GBW shortfall names both figures; a gain above 2Q^2 fails unless accepted."""
    sec = bandpass_section(40e3, 10.0, -10.0)
    lim = mfb.limits(sec, make_opamp(10e6))
    assert not lim.feasible
    assert any("40 MHz" in r and "10 MHz" in r for r in lim.reasons)
    assert lim.noise_gain == pytest.approx(201) and lim.opamps == 1
    assert lim.spread == pytest.approx(4 * 10**2 - 2 * 10)  # R2 / R1b = 4Q^2 - 2|H0|

    high = bandpass_section(1e3, 2.0, -20.0)  # natural gain 8
    assert not mfb.limits(high, GENERAL_PURPOSE).feasible
    assert any("exceeds the 8 V/V" in r for r in mfb.limits(high, GENERAL_PURPOSE).reasons)
    accepted = mfb.limits(high, GENERAL_PURPOSE, accept_gain_shortfall=True)
    assert accepted.feasible
    assert any("7.96 dB" in r for r in accepted.reasons)


def test_limits_feasible_low_q():
    lim = mfb.limits(bandpass_section(1e3, 2.0, -1.0), GENERAL_PURPOSE)
    assert lim.feasible
    assert lim.spread == pytest.approx(4 * 2**2 - 2 * 1)  # R2 / R1b = 4Q^2 - 2|H0|


def test_bad_arguments():
    with pytest.raises(ValueError):
        mfb.design(Section(kind="lowpass", f0_hz=1e3, q=1.0, gain=1.0), c_farads=1e-9)
    with pytest.raises(ValueError):
        mfb.design(bandpass_section(1e3, 1.0, 0.0), c_farads=1e-9)
    with pytest.raises(ValueError):
        mfb.design(bandpass_section(1e3, 1.0, -1.0), c_farads=0.0)
