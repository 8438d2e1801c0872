"""State-variable (KHN) bandpass: design equations, internal nets, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic.py);
- [KHN] Kerwin, Huelsman & Newcomb, IEEE JSSC SC-2, 1967 [mem], as listed in the
  project's references: w0 = 1/(RC), Q set by the divider at the summer, at f0
  |HP| = |BP| = |LP|, the lowpass and highpass nets pass out-of-band tones with gain
  H_BP(f0)/Q;
- [biquad] the standard bandpass biquad (sections.section_response);
- [nodal] the project's nodal solver / polynomial reduction.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from bandwright.circuits import state_variable as sv
from bandwright.circuits.nodal import transfer as nodal_transfer
from bandwright.errors import InfeasibleDesign

from bandpass_support import (GENERAL_PURPOSE, IDEAL, bandpass_section, built_shifts_per_e,
                              check_interface, ideal_figures, make_opamp, max_response_error,
                              rel, sensitivities_against_sympy, symbolic_fixtures,
                              sympy_noise_gains, unit_parts)
from symbolic import S, bandpass_figures, gbw_shift, node_voltages

CASES = [  # (f0_hz, Q, gain): natural gain 2Q - 1 = 19, 0.4, 59, 3
    (40e3, 10.0, -1.0),
    (1e3, 0.7, -0.2),
    (250.0, 30.0, -59.0),
    (8e3, 2.0, -6.0),  # above the natural 3: designed at 3
]


p, h_symbolic = symbolic_fixtures(sv)


def _symbolic_design():
    q, g = sp.symbols("Q H0", positive=True)
    # w0 = 1, C = 1: R = 1, divider Thevenin resistance 1/2
    return q, g, {"R1a": q / g, "R1b": q / (2 * q - 1 - g), "RQ": q, "Rf": 1, "Rg": 1,
                  "Ri1": 1, "Ri2": 1, "C1": 1, "C2": 1}


def test_interface():
    check_interface(sv, "state_variable", inverting=True, opamps=3)


def test_three_outputs_match_published_forms(p):
    """[sympy] vs [KHN]: HP = 2a s^2/D, BP = -2a w0 s/D, LP = 2a w0^2/D,
    D = s^2 + 2b w0 s + w0^2, w0 = 1/(RC), a = G1a/G, b = GQ/G (Rf = Rg)."""
    r, c = sp.symbols("R C", positive=True)
    values = {**{k: v for k, v in p.items()}, "Rf": r, "Rg": r, "Ri1": r, "Ri2": r,
              "C1": c, "C2": c}
    v = node_voltages(sv.elements(unit_parts(sv), IDEAL), values=values)
    g1a, g1b, gq = 1 / p["R1a"], 1 / p["R1b"], 1 / p["RQ"]
    a, b = g1a / (g1a + g1b + gq), gq / (g1a + g1b + gq)
    w0 = 1 / (r * c)
    d = S**2 + 2 * b * w0 * S + w0**2
    assert sp.simplify(v["highpass"] - 2 * a * S**2 / d) == 0
    assert sp.simplify(v["out"] + 2 * a * w0 * S / d) == 0
    assert sp.simplify(v["lowpass"] - 2 * a * w0**2 / d) == 0


def test_design_equations_give_target_symbolically(h_symbolic, p):
    """[sympy] the design (w0 = 1, C = 1) gives w0 = 1, Q and -H0 exactly (H0 < 2Q - 1)."""
    q, g, design = _symbolic_design()
    w0, q_expr, h0 = bandpass_figures(h_symbolic.subs({p[k]: v for k, v in design.items()}))
    assert sp.simplify(w0 - 1) == 0
    assert sp.simplify(h0 + g) == 0
    # Q comes out as Q |2Q - 1 - H0| / (2Q - 1 - H0): Q while H0 < 2Q - 1
    at = {q: sp.Rational(7, 2), g: sp.Rational(3, 2)}
    assert sp.simplify(q_expr.subs(at)) == sp.Rational(7, 2)


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_matches_formula(f0_hz, q, gain):
    """[KHN] equations with the divider at the summer, typed here independently."""
    c = 1.5e-9
    parts = sv.design(bandpass_section(f0_hz, q, gain), c_farads=c)
    r = 1 / (2 * math.pi * f0_hz * c)
    g = min(abs(gain), 2 * q - 1)
    for name in ("Rf", "Rg", "Ri1", "Ri2"):
        assert parts[name] == pytest.approx(r, rel=1e-12)
    assert parts["RQ"] == pytest.approx(q * r, rel=1e-12)
    assert parts["R1a"] == pytest.approx(q * r / g, rel=1e-12)
    if g < 2 * q - 1:
        assert parts["R1b"] == pytest.approx(q * r / (2 * q - 1 - g), rel=1e-9)
    else:
        assert "R1b" not in parts
    conductance = sum(1 / parts[k] for k in ("R1a", "R1b", "RQ") if k in parts)
    assert 1 / conductance == pytest.approx(r / 2, rel=1e-9)  # = Rf ∥ Rg, bias balance


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_ideal_build_hits_target(f0_hz, q, gain):
    """[nodal] ideal op-amps: f0, Q and gain within 0.1 % (|gain| capped at 2Q - 1)."""
    fig = ideal_figures(sv, bandpass_section(f0_hz, q, gain))
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, -min(abs(gain), 2 * q - 1)) < 1e-3


def test_response_is_the_standard_biquad():
    """[nodal] vs [biquad]: the whole response, two decades around f0."""
    assert max_response_error(sv, bandpass_section(3e3, 5.0, -2.0), gain=-2.0) < 1e-9


def test_equal_levels_at_f0_and_out_of_band_tones():
    """[nodal] vs [KHN]: at f0 |HP| = |BP| = |LP| = |H0|; a tone at f0/100 reaches the lowpass
    net and one at 100 f0 the highpass net with about |H0|/Q."""
    sec = bandpass_section(5e3, 8.0, -4.0)
    els = sv.elements(sv.design(sec, c_farads=1e-9), IDEAL)
    at_f0 = np.array([sec.f0_hz])
    for net in ("highpass", "out", "lowpass"):
        assert abs(nodal_transfer(els, at_f0, out_net=net)[0]) == pytest.approx(4.0, rel=1e-9)
    low = abs(nodal_transfer(els, np.array([sec.f0_hz / 100]), out_net="lowpass")[0])
    high = abs(nodal_transfer(els, np.array([sec.f0_hz * 100]), out_net="highpass")[0])
    assert low == pytest.approx(0.5, rel=1e-3) and high == pytest.approx(0.5, rel=1e-3)


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_q_sensitivities_match_sympy(f0_hz, q, gain, h_symbolic):
    """[sympy] S_x^Q of the derived Q at the designed values."""
    sec = bandpass_section(f0_hz, q, gain)
    parts, derived, mine = sensitivities_against_sympy(sv, sec, h_symbolic)
    assert set(mine) == set(parts)
    for name, value in mine.items():
        assert value == pytest.approx(derived[name], abs=1e-9)


def test_noise_gain_matches_sympy():
    """[sympy] |V(out)/e_n| at f0: U1 2Q, U2 and U3 sqrt(2) Q, whatever the gain."""
    sec = bandpass_section(2e3, 6.0, -1.5)
    gains = sympy_noise_gains(sv, sec, ("U1", "U2", "U3"))
    assert gains == pytest.approx([12.0, 6 * math.sqrt(2), 6 * math.sqrt(2)], rel=1e-9)
    assert sv.noise_gain(sec) == pytest.approx(max(gains))


def test_gbw_shift_matches_sympy_perturbation():
    """[sympy] all three op-amps wt/s: k_f = 3/(2Q) - 1, k_q = 4Q - 3/(2Q), gain-free."""
    q, g, design = _symbolic_design()
    k_f, k_q = gbw_shift(sv.elements(unit_parts(sv), IDEAL), design, q)
    assert sp.simplify(k_f - (sp.Rational(3, 2) / q - 1)) == 0
    assert sp.simplify(k_q - (4 * q - sp.Rational(3, 2) / q)) == 0
    assert sv.gbw_shift(bandpass_section(1e3, 10.0, -3.0)) == pytest.approx((-0.85, 39.85))


@pytest.mark.parametrize("q", [2.0, 10.0])
def test_gbw_shift_matches_nodal(q):
    """[nodal] built with GBW = 1e4 f0: shifts within 2 % of the first-order figures."""
    sec = bandpass_section(10e3, q, -1.0)
    df0_per_e, dq_per_e = built_shifts_per_e(sv, sec, 1e-4)
    k_f, k_q = sv.gbw_shift(sec)
    assert df0_per_e == pytest.approx(k_f, rel=0.02)
    assert dq_per_e == pytest.approx(k_q, rel=0.02)


def test_limits():
    """GBW f0 max(Q|k_f|, |k_q|)/0.1; gain above 2Q - 1 fails unless accepted; Q <= 1/2 never."""
    sec = bandpass_section(10e3, 10.0, -1.0)
    lim = sv.limits(sec, make_opamp(5e6))
    assert lim.feasible and lim.gbw_needed_hz == pytest.approx(10e3 * 39.85 / 0.1)
    assert lim.opamps == 3 and lim.noise_gain == pytest.approx(20.0)
    assert not sv.limits(sec, make_opamp(3e6)).feasible

    high = bandpass_section(1e3, 2.0, -6.0)
    assert not sv.limits(high, GENERAL_PURPOSE).feasible
    accepted = sv.limits(high, GENERAL_PURPOSE, accept_gain_shortfall=True)
    assert accepted.feasible and any("exceeds the 3 V/V" in r for r in accepted.reasons)

    low_q = bandpass_section(1e3, 0.5, -0.1)
    assert not sv.limits(low_q, GENERAL_PURPOSE).feasible
    with pytest.raises(InfeasibleDesign):
        sv.design(low_q, c_farads=1e-9)
