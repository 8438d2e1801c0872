"""Tow-Thomas bandpass (three op-amps): design equations, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic.py);
- [TT] Tow, Proc. IEEE 56, 1968; Thomas, IEEE Trans. CT-18, 1971 [mem], as listed in the
  project's references: w0^2 = 1/(R2 R4 C1 C2), w0/Q = 1/(RQ C1), H_BP(f0) = -RQ/Rin;
  finite GBW Q_a ~= Q/(1 - 4 Q e); lowpass net passes low tones with gain H0/Q;
- [refs] the project's check value: Q 10, f0/GBW = 1e-3 -> built Q 10.417 ([mem] formula,
  full circuit [calc]);
- [biquad] the standard bandpass biquad (sections.section_response);
- [nodal] the project's nodal solver / polynomial reduction.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from bandwright.circuits import tow_thomas as tt
from bandwright.circuits.nodal import transfer as nodal_transfer

from bandpass_support import (IDEAL, bandpass_section, built_figures, built_shifts_per_e,
                              check_interface, ideal_figures, make_opamp, max_response_error,
                              rel, sensitivities_against_sympy, symbolic_fixtures,
                              sympy_noise_gains, unit_parts)
from symbolic import S, bandpass_figures, gbw_shift, transfer

CASES = [  # (f0_hz, Q, gain)
    (40e3, 10.0, -1.0),
    (1e3, 0.6, -0.3),
    (300.0, 40.0, -25.0),
    (12e3, 3.0, 4.0),  # positive request: the circuit inverts, |gain| is realised
]


p, h_symbolic = symbolic_fixtures(tt)


def _symbolic_design():
    q, g = sp.symbols("Q H0", positive=True)
    # w0 = 1, C = 1: R = 1
    return q, g, {"Rin": q / g, "RQ": q, "R2": 1, "R4": 1, "R5": 1, "R6": 1, "C1": 1,
                  "C2": 1}


def test_interface():
    check_interface(tt, "tow_thomas", inverting=True, opamps=3)


def test_figures_match_published(h_symbolic, p):
    """[sympy] vs [TT] (R5 = R6): w0^2 = 1/(R2 R4 C1 C2), w0/Q = 1/(RQ C1), H0 = -RQ/Rin."""
    h = h_symbolic.subs(p["R6"], p["R5"])
    w0, q, h0 = bandpass_figures(h)
    assert sp.simplify(w0**2 - 1 / (p["R2"] * p["R4"] * p["C1"] * p["C2"])) == 0
    assert sp.simplify(w0 / q - 1 / (p["RQ"] * p["C1"])) == 0
    assert sp.simplify(h0 + p["RQ"] / p["Rin"]) == 0


def test_design_equations_give_target_symbolically(h_symbolic, p):
    """[sympy] the design (w0 = 1, C = 1) gives w0 = 1, Q and -H0 exactly."""
    q, g, design = _symbolic_design()
    w0, q_expr, h0 = bandpass_figures(h_symbolic.subs({p[k]: v for k, v in design.items()}))
    assert (sp.simplify(w0 - 1), sp.simplify(q_expr - q), sp.simplify(h0 + g)) == (0, 0, 0)


def test_lowpass_and_inverter_nets(p):
    """[sympy] lowpass net = (H0/Q) w0^2/D ([TT]: low tones pass with gain H0/Q);
    inverter net = -lowpass."""
    q, g, design = _symbolic_design()
    volts = {net: transfer(tt.elements(unit_parts(tt), IDEAL), net, values=design)
             for net in ("lowpass", "inverter")}
    assert sp.simplify(volts["lowpass"] - (g / q) / (S**2 + S / q + 1)) == 0
    assert sp.simplify(volts["inverter"] + volts["lowpass"]) == 0


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_matches_formula(f0_hz, q, gain):
    """[TT] equations, typed here independently."""
    c = 3.3e-9
    parts = tt.design(bandpass_section(f0_hz, q, gain), c_farads=c)
    r = 1 / (2 * math.pi * f0_hz * c)
    for name in ("R2", "R4", "R5", "R6"):
        assert parts[name] == pytest.approx(r, rel=1e-12)
    assert parts["RQ"] == pytest.approx(q * r, rel=1e-12)
    assert parts["Rin"] == pytest.approx(q * r / abs(gain), rel=1e-12)
    assert parts["C1"] == parts["C2"] == c
    assert tuple(parts) == tt.PARTS


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_ideal_build_hits_target(f0_hz, q, gain):
    """[nodal] ideal op-amps: f0, Q and gain (-|gain|) within 0.1 %."""
    fig = ideal_figures(tt, bandpass_section(f0_hz, q, gain))
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, -abs(gain)) < 1e-3


def test_response_is_the_standard_biquad():
    """[nodal] vs [biquad]: the whole response, two decades around f0."""
    assert max_response_error(tt, bandpass_section(2e3, 6.0, -2.0), gain=-2.0) < 1e-9


def test_lowpass_net_passes_low_tones_numerically():
    """[nodal] a tone at f0/100 reaches the lowpass net at about |H0|/Q [TT], 100 times what
    reaches the output ([biquad]: |H0| (f/f0)/Q / (1 - (f/f0)^2))."""
    sec = bandpass_section(6e3, 20.0, -2.0)
    els = tt.elements(tt.design(sec, c_farads=1e-9), IDEAL)
    f = np.array([sec.f0_hz / 100])
    assert abs(nodal_transfer(els, f, out_net="lowpass")[0]) == pytest.approx(0.1, rel=1e-3)
    assert abs(nodal_transfer(els, f, out_net="out")[0]) == pytest.approx(
        2 * 0.01 / 20 / (1 - 1e-4), rel=1e-6)


@pytest.mark.parametrize("f0_hz,q,gain", CASES[:3])
def test_q_sensitivities_match_sympy(f0_hz, q, gain, h_symbolic):
    """[sympy] S_x^Q of the derived Q at the designed values."""
    sec = bandpass_section(f0_hz, q, gain)
    parts, derived, mine = sensitivities_against_sympy(tt, sec, h_symbolic)
    assert set(mine) == set(parts)
    for name, value in mine.items():
        assert value == pytest.approx(derived.get(name, 0.0), abs=1e-9)


@pytest.mark.parametrize("q,gain", [(10.0, -1.0), (2.0, -8.0)])
def test_noise_gain_matches_sympy(q, gain):
    """[sympy] |V(out)/e_n| at f0, largest over U1, U2, U3."""
    sec = bandpass_section(5e3, q, gain)
    gains = sympy_noise_gains(tt, sec, ("U1", "U2", "U3"))
    g = abs(gain)
    assert gains == pytest.approx([math.hypot(g + q + 1, q), math.sqrt(2) * q, 2 * q],
                                  rel=1e-9)
    assert tt.noise_gain(sec) == pytest.approx(max(gains))


def test_gbw_shift_matches_sympy_perturbation():
    """[sympy] all three op-amps wt/s: k_f = -(1 + H0/(2Q)), k_q = 4Q + H0/(2Q) [TT: 4Q]."""
    q, g, design = _symbolic_design()
    k_f, k_q = gbw_shift(tt.elements(unit_parts(tt), IDEAL), design, q)
    assert sp.simplify(k_f + 1 + g / (2 * q)) == 0
    assert sp.simplify(k_q - 4 * q - g / (2 * q)) == 0
    assert tt.gbw_shift(bandpass_section(1e3, 10.0, -3.0)) == pytest.approx((-1.15, 40.15))


def test_built_q_reference_value():
    """[refs] Q 10, f0/GBW = 1e-3 (H0 = 1): built Q 10.417 [nodal], as Q/(1 - 4Qe) = 10.4167
    [TT]. Wiring: the classic three-op-amp loop, bandpass at the lossy integrator (module
    docstring). The reference value is about GBW alone, so A0 is made 240 dB here; with
    A0 = 120 dB the built Q is 2.5e-4 lower (10.4163)."""
    sec = bandpass_section(10e3, 10.0, -1.0)
    fig = built_figures(tt, sec, make_opamp(sec.f0_hz * 1e3, dc_gain_db=240))
    assert fig.q == pytest.approx(10.417, abs=5e-4)
    assert fig.q == pytest.approx(10 / (1 - 4 * 10 * 1e-3), rel=1e-4)
    with_a0 = built_figures(tt, sec, make_opamp(sec.f0_hz * 1e3, dc_gain_db=120))
    assert with_a0.q == pytest.approx(10.4163, abs=1e-4)


@pytest.mark.parametrize("q", [2.0, 10.0])
def test_gbw_shift_matches_nodal(q):
    """[nodal] built with GBW = 1e4 f0: shifts within 2 % of the first-order figures."""
    sec = bandpass_section(10e3, q, -1.0)
    df0_per_e, dq_per_e = built_shifts_per_e(tt, sec, 1e-4)
    k_f, k_q = tt.gbw_shift(sec)
    assert df0_per_e == pytest.approx(k_f, rel=0.02)
    assert dq_per_e == pytest.approx(k_q, rel=0.02)


def test_limits():
    """GBW from 4Qe <= 0.1 (about 40 Q f0); no gain limit; spread Q/|H0| at high gain."""
    sec = bandpass_section(10e3, 10.0, -1.0)
    lim = tt.limits(sec, make_opamp(3e6))
    assert lim.gbw_needed_hz == pytest.approx(10e3 * (40 + 0.05) / 0.1)
    assert not lim.feasible and any("4.005 MHz" in r and "3 MHz" in r for r in lim.reasons)
    ok = tt.limits(sec, make_opamp(5e6))
    assert ok.feasible and ok.opamps == 3 and ok.q_sensitivity == 1.0
    assert ok.spread == pytest.approx(10.0)
    big_gain = tt.limits(bandpass_section(1e3, 20.0, -1000.0), make_opamp(1e9))
    assert big_gain.spread == pytest.approx(1000.0)  # RQ/Rin = |H0|
