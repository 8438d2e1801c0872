"""Dual-amplifier bandpass: design equations (re-derived), wiring, element list, limits.

References named beside each check:
- [sympy] nodal analysis of the module's own element list (tests/circuits/symbolic.py);
- [W&T] Williams & Taylor, *Electronic Filter Design Handbook*, 4th ed., 2006, §5.2 [mem]:
  R1 = Q/(w0 C), R2 = R3 = 1/(w0 C), gain 2 at f0, usable Q to about 150 -- recalled, so
  every one of these is derived here before it is relied on;
- [biquad] the standard bandpass biquad (sections.section_response);
- [nodal] the project's nodal solver / polynomial reduction.
"""

from __future__ import annotations

import math

import pytest
import sympy as sp

from bandwright.circuits import dual_amp_bandpass as dabp
from bandwright.circuits.elements import Element, opamp

from bandpass_support import (GENERAL_PURPOSE, IDEAL, bandpass_section, built_figures,
                              check_interface, ideal_figures, make_opamp, max_response_error,
                              rel, sensitivities_against_sympy, symbolic_fixtures,
                              sympy_noise_gains, unit_parts)
from symbolic import S, bandpass_figures, gbw_shift, transfer

CASES = [  # (f0_hz, Q, gain)
    (40e3, 10.0, 1.0),
    (1e3, 150.0, 2.0),
    (5e3, 0.9, 0.25),
    (200.0, 30.0, 5.0),  # above the natural 2: designed at 2
]


p, h_symbolic = symbolic_fixtures(dabp)


def _symbolic_design():
    q, rho = sp.symbols("Q rho", positive=True)
    # w0 = 1, C = 1: R = 1, R1 = Q split by the ratio rho = |H0|/2
    return q, rho, {"R1a": q / rho, "R1b": q / (1 - rho), "R2": 1, "R3": 1, "R4": 1,
                    "R5": 1, "C1": 1, "C2": 1}


def test_interface():
    check_interface(dabp, "dual_amp_bandpass", inverting=False, opamps=2)


def test_transfer_matches_module_form(h_symbolic, p):
    """[sympy]: H = (1 + R4/R5)(R1/R1a)(s/(R1 C1)) / (s^2 + s/(R1 C1) + R4/(R2 R3 R5 C1 C2))."""
    r1 = p["R1a"] * p["R1b"] / (p["R1a"] + p["R1b"])
    form = ((1 + p["R4"] / p["R5"]) * (r1 / p["R1a"]) * S / (r1 * p["C1"])
            / (S**2 + S / (r1 * p["C1"]) + p["R4"] / (p["R2"] * p["R3"] * p["R5"] * p["C1"]
                                                   * p["C2"])))
    assert sp.simplify(h_symbolic - form) == 0


def test_recalled_equations_hold(h_symbolic, p):
    """[W&T] (recalled) R1 = Q/(w0 C), R2 = R3 = 1/(w0 C), R4 = R5, no R1b: gain 2 at f0 [sympy]."""
    q, w, c, r = sp.symbols("Q omega0 C R", positive=True)
    h = sp.limit(h_symbolic, p["R1b"], sp.oo)
    h = h.subs({p["R1a"]: q / (w * c), p["R2"]: 1 / (w * c), p["R3"]: 1 / (w * c),
                p["R4"]: r, p["R5"]: r, p["C1"]: c, p["C2"]: c})
    w0, q_expr, h0 = bandpass_figures(h)
    assert sp.simplify(w0 - w) == 0
    assert sp.simplify(q_expr - q) == 0
    assert h0 == 2


def test_design_with_divider_gives_target_symbolically(h_symbolic, p):
    """[sympy] R1a = R1/rho, R1b = R1/(1 - rho): gain 2 rho, w0 and Q unchanged."""
    q, rho, design = _symbolic_design()
    w0, q_expr, h0 = bandpass_figures(h_symbolic.subs({p[k]: v for k, v in design.items()}))
    assert sp.simplify(w0 - 1) == 0
    assert sp.simplify(q_expr - q) == 0
    assert sp.simplify(h0 - 2 * rho) == 0


def test_gic_net_transfer(p):
    """[sympy] the first amplifier's net: rho/Q (s - 1)/(s^2 + s/Q + 1) at w0 = 1."""
    q, rho, design = _symbolic_design()
    h = transfer(dabp.elements(unit_parts(dabp), IDEAL), "gic", values=design)
    assert sp.simplify(h - rho / q * (S - 1) / (S**2 + S / q + 1)) == 0


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_design_matches_formula(f0_hz, q, gain):
    """[W&T] equations with the divider, typed here independently."""
    c = 1e-9
    parts = dabp.design(bandpass_section(f0_hz, q, gain), c_farads=c)
    r = 1 / (2 * math.pi * f0_hz * c)
    g = min(gain, 2.0)
    for name in ("R2", "R3", "R4", "R5"):
        assert parts[name] == pytest.approx(r, rel=1e-12)
    assert parts["R1a"] == pytest.approx(2 * q * r / g, rel=1e-12)
    if g < 2:
        assert parts["R1b"] == pytest.approx(2 * q * r / (2 - g), rel=1e-12)
    else:
        assert "R1b" not in parts
    assert parts["C1"] == parts["C2"] == c


@pytest.mark.parametrize("f0_hz,q,gain", CASES)
def test_ideal_build_hits_target(f0_hz, q, gain):
    """[nodal] ideal op-amps: f0, Q and gain within 0.1 % (gain capped at 2)."""
    fig = ideal_figures(dabp, bandpass_section(f0_hz, q, gain))
    assert rel(fig.f0_hz, f0_hz) < 1e-3
    assert rel(fig.q, q) < 1e-3
    assert rel(fig.gain, min(gain, 2.0)) < 1e-3


def test_response_is_the_standard_biquad():
    """[nodal] vs [biquad]: the whole response, two decades around f0."""
    assert max_response_error(dabp, bandpass_section(7e3, 12.0, 1.5), gain=1.5) < 1e-9


@pytest.mark.parametrize("f0_hz,q,gain", CASES[:3])
def test_q_sensitivities_match_sympy(f0_hz, q, gain, h_symbolic):
    """[sympy] S_x^Q of the derived Q at the designed values."""
    sec = bandpass_section(f0_hz, q, gain)
    parts, derived, mine = sensitivities_against_sympy(dabp, sec, h_symbolic)
    assert set(mine) == set(parts)
    for name, value in mine.items():
        assert value == pytest.approx(derived[name], abs=1e-9)


def test_noise_gain_matches_sympy():
    """[sympy] |V(out)/e_n| at f0: U1 2 sqrt(4Q^2 + 1), U2 2 sqrt(2Q^2 + 2Q + 1)."""
    sec = bandpass_section(2e3, 7.0, 0.5)
    u1, u2 = sympy_noise_gains(dabp, sec, ("U1", "U2"))
    assert u1 == pytest.approx(2 * math.sqrt(4 * 49 + 1), rel=1e-9)
    assert u2 == pytest.approx(2 * math.sqrt(2 * 49 + 14 + 1), rel=1e-9)
    assert dabp.noise_gain(sec) == pytest.approx(max(u1, u2))


def test_gbw_shift_matches_sympy_perturbation():
    """[sympy] both op-amps wt/s: df0/f0 = -2 e, dQ/Q = 0 e (first order), for any Q, gain."""
    q, _, design = _symbolic_design()
    k_f, k_q = gbw_shift(dabp.elements(unit_parts(dabp), IDEAL), design, q)
    assert (k_f, k_q) == (-2, 0)
    assert dabp.gbw_shift(bandpass_section(1e3, 10.0, 1.0)) == (-2.0, 0.0)


@pytest.mark.parametrize("q", [10.0, 50.0, 150.0])
def test_built_q_second_order_only(q):
    """[nodal] GBW = 1000 f0: f0 moves by about -2e, Q by about -4 Q e^2 only."""
    e = 1e-3
    sec = bandpass_section(10e3, q, 1.0)
    fig = built_figures(dabp, sec, make_opamp(sec.f0_hz / e, dc_gain_db=240))
    assert (fig.f0_hz / sec.f0_hz - 1) / e == pytest.approx(-2.0, rel=0.01)
    assert (fig.q / sec.q - 1) / e**2 == pytest.approx(-4 * q, rel=0.05)


def _rewired(els: tuple[Element, ...]) -> tuple[Element, ...]:
    """The textbook GIC wiring: U1 senses [x]/[n3], U2 senses [n3]/[n5]."""
    new = {"U1": ("x", "n3", "gic"), "U2": ("n3", "n5", "out")}
    return tuple(opamp(e.name, *new[e.name], e.model) if e.kind == "opamp" else e for e in els)


def test_textbook_wiring_would_move_q():
    """[nodal] the wiring not used keeps f0 but moves Q by about +6 Q e (module docstring)."""
    from bandwright.circuits.figures import section_figures

    e = 1e-4
    sec = bandpass_section(10e3, 10.0, 1.0)
    parts = dabp.design(sec, c_farads=1e-9)
    model = make_opamp(sec.f0_hz / e, dc_gain_db=240)
    ideal = section_figures(_rewired(dabp.elements(parts, IDEAL)), kind="bandpass",
                            near_hz=sec.f0_hz)
    assert rel(ideal.q, sec.q) < 1e-9  # the same ideal circuit
    built = section_figures(_rewired(dabp.elements(parts, model)), kind="bandpass",
                            near_hz=sec.f0_hz)
    assert (built.q / sec.q - 1) / (sec.q * e) == pytest.approx(6.1, abs=0.1)


def test_limits():
    """GBW 20 Q f0; gain above 2 fails unless accepted; large spread at low gain and high Q."""
    sec = bandpass_section(1e3, 150.0, 2.0)
    lim = dabp.limits(sec, make_opamp(3e6))
    assert lim.feasible and lim.gbw_needed_hz == pytest.approx(20 * 150 * 1e3)
    assert lim.opamps == 2 and lim.q_sensitivity == pytest.approx(1.0)
    assert not dabp.limits(sec, make_opamp(2.9e6)).feasible

    high = bandpass_section(1e3, 5.0, 4.0)
    assert not dabp.limits(high, GENERAL_PURPOSE).feasible
    assert any("exceeds the 2 V/V" in r for r in dabp.limits(high, GENERAL_PURPOSE).reasons)
    assert dabp.limits(high, GENERAL_PURPOSE, accept_gain_shortfall=True).feasible

    wide = dabp.limits(bandpass_section(1e3, 150.0, 0.1), make_opamp(1e9))
    assert wide.spread == pytest.approx(2 * 150 / 0.1)
    assert not wide.feasible and any("spread 3000:1" in r for r in wide.reasons)
