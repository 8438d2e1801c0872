"""Normalised sensitivities read from built circuits, against closed forms.

Sources named beside each check:
* multiple-feedback bandpass, equal C: Q = (1/2) sqrt(R2/Rp), w0 = 1/(C sqrt(R2 Rp)),
  Rp = R1a ∥ R1b, |H0| = R2/(2 R1a) (Schaumann & Van Valkenburg, *Design of Analog
  Filters*, 2001, ch. 3 [mem]; Williams & Taylor 2006 §5.2 [mem]; docs/methods.md), so
  S_R2^Q = 1/2, S_Rp^Q = -1/2, every S^{f0} = -1/2 (R2, Rp, C1, C2);
* Sallen-Key bandpass, R1 = R2 = R, R3 = 2R, C1 = C2: Q = 1/(3 - K), hence
  S_K^Q = K Q = 3Q - 1 (docs/methods.md, "Topology facts"; Sallen & Key 1955 [mem]);
* Q sensitivity grows with Q in a positive-feedback section (common practice);
* finite GBW, multiple-feedback: df0/f0 = -Q e, dQ/Q = +Q e with e = f0/GBW
  (docs/methods.md [calc]), so S_GBW^{f0} = +Q e, S_GBW^Q = -Q e to first order.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
import sympy as sp

from bandwright.analysis.sensitivity import (GBW, first_order_spread, stage_sensitivity)
from bandwright.chain.stage import Stage
from bandwright.circuits import mfb_bandpass
from bandwright.circuits.elements import capacitor, opamp, resistor
from bandwright.circuits.figures import section_figures
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section

REAL = OpAmp(name="t", gbw_hz=10e6, dc_gain_db=200.0, slew_v_per_us=1.0, swing_to_rail_v=1.0,
             noise_v_per_rthz=1e-8, noise_a_per_rthz=1e-12, noise_corner_hz=0.0)
IDEAL = dataclasses.replace(REAL, gbw_hz=math.inf)


def make_stage(elements, kind: str, near_hz: float, *, topology: str = "test") -> Stage:
    built = section_figures(elements, kind=kind, near_hz=near_hz)
    target = Section(kind=kind, f0_hz=built.f0_hz, q=built.q, gain=built.gain)
    comps = tuple((e.name, e.value) for e in elements if e.kind in ("R", "C"))
    return Stage(position=1, topology=topology, target=target, components=comps,
                 elements=tuple(elements), model=elements[-1].model, built=built)


def mfb_stage(q: float, gain: float, model: OpAmp = IDEAL, f0_hz: float = 1e3) -> Stage:
    sec = Section(kind="bandpass", f0_hz=f0_hz, q=q, gain=-gain)
    comps = mfb_bandpass.design(sec, c_farads=10e-9)
    return make_stage(mfb_bandpass.elements(comps, model), "bandpass", f0_hz,
                      topology="mfb_bandpass")


def sk_bandpass(q: float, model: OpAmp = IDEAL) -> tuple[Stage, float]:
    """Equal-value Sallen-Key bandpass, wired as derived by nodal analysis:
    in-R1-a, a-R2-out, a-C1-0, a-C2-b, b-R3-0, op-amp + at b with gain K = 1 + Rf/Rg."""
    r, c = 10e3, 10e-9
    k = 3 - 1 / q
    els = (resistor("R1", "in", "a", r), resistor("R2", "a", "out", r),
           capacitor("C1", "a", "0", c), capacitor("C2", "a", "b", c),
           resistor("R3", "b", "0", 2 * r), resistor("Rf", "out", "fb", (k - 1) * 10e3),
           resistor("Rg", "fb", "0", 10e3), opamp("U1", "b", "fb", "out", model))
    return make_stage(els, "bandpass", 1 / (2 * math.pi * r * c), topology="sk"), k


@pytest.mark.parametrize("q, gain", [(5.0, 10.0), (10.0, 2.0), (3.0, 18.0)])
def test_mfb_q_and_f0_sensitivities_match_schaumann_closed_forms(q, gain):
    st = mfb_stage(q, gain)
    s = stage_sensitivity(st)
    comps = dict(st.components)
    rp = 1 / (1 / comps["R1a"] + (1 / comps["R1b"] if "R1b" in comps else 0.0))
    assert s.of("R2")[1] == pytest.approx(0.5, abs=1e-6)
    assert s.of("R1a")[1] == pytest.approx(-0.5 * rp / comps["R1a"], abs=1e-6)
    if "R1b" in comps:
        assert s.of("R1b")[1] == pytest.approx(-0.5 * rp / comps["R1b"], abs=1e-6)
        # The two input resistors share S_Rp^Q = -1/2 by their conductances.
        assert s.of("R1a")[1] + s.of("R1b")[1] == pytest.approx(-0.5, abs=1e-6)
    for c in ("C1", "C2"):
        assert s.of(c)[1] == pytest.approx(0.0, abs=1e-6)       # equal C: S_C^Q = 0
        assert s.of(c)[0] == pytest.approx(-0.5, abs=1e-6)
    assert s.of("R2")[0] == pytest.approx(-0.5, abs=1e-6)
    # |H0| = R2 / (2 R1a): S_R2 = 1, S_R1a = -1, R1b does not set the gain.
    assert s.of("R2")[2] == pytest.approx(1.0, abs=1e-6)
    assert s.of("R1a")[2] == pytest.approx(-1.0, abs=1e-6)
    if "R1b" in comps:
        assert s.of("R1b")[2] == pytest.approx(0.0, abs=1e-6)
    assert s.of(GBW) == (0.0, 0.0, 0.0)                          # ideal op-amp


def test_mfb_capacitor_gain_sensitivities_match_a_sympy_derivation():
    """|H0| = R2 C2 / (R1a (C1 + C2)) from the nodal equations of the element list [calc]:
    S_C1 = -C1/(C1 + C2), S_C2 = +C1/(C1 + C2) -> -1/2 and +1/2 at equal C."""
    s_, r1a, r1b, r2, c1, c2 = sp.symbols("s R1a R1b R2 C1 C2", positive=True)
    va, vout = sp.symbols("va vout")
    # Ideal op-amp: the inverting input is at 0 V.
    eqs = [(va - 1) / r1a + va / r1b + (va - vout) * s_ * c1 + va * s_ * c2,
           -va * s_ * c2 - vout / r2]
    h = sp.solve(eqs, [va, vout])[vout]
    num, den = sp.fraction(sp.together(h))
    a = sp.Poly(sp.expand(den), s_).all_coeffs()
    w0 = sp.sqrt(a[2] / a[0])
    h0 = sp.simplify(-(num / den).subs(s_, sp.I * w0))
    for cap, want in ((c1, -c1 / (c1 + c2)), (c2, c1 / (c1 + c2))):
        assert sp.simplify(sp.diff(h0, cap) * cap / h0 - want) == 0
    s = stage_sensitivity(mfb_stage(5.0, 10.0))
    assert s.of("C1")[2] == pytest.approx(-0.5, abs=1e-6)
    assert s.of("C2")[2] == pytest.approx(0.5, abs=1e-6)


@pytest.mark.parametrize("q", [2.0, 5.0, 8.0])
def test_sallen_key_bandpass_s_k_q_is_3q_minus_1(q):
    st, k = sk_bandpass(q)
    assert st.built.q == pytest.approx(q, rel=1e-9)              # Q = 1/(3 - K)
    s = stage_sensitivity(st)
    # K = 1 + Rf/Rg: S_Rf^K = (K - 1)/K, so S_K^Q = S_Rf^Q K/(K - 1) (chain rule, ch. 3).
    s_k_q = s.of("Rf")[1] * k / (k - 1)
    assert s_k_q == pytest.approx(3 * q - 1, rel=1e-6)
    assert s.of("Rg")[1] == pytest.approx(-s.of("Rf")[1], rel=1e-9)
    assert s.worst_part in ("Rf", "Rg")


def test_q_sensitivity_grows_with_q_in_the_sallen_key_bandpass():
    """Common practice: the higher the Q of a positive-feedback section, the more its Q
    moves per percent of part error."""
    worst = [max(abs(x) for x in stage_sensitivity(sk_bandpass(q)[0]).q[:-1])
             for q in (1.0, 2.0, 5.0, 10.0)]
    assert all(a < b for a, b in zip(worst, worst[1:]))
    assert worst[-1] > 15  # S_Rf^Q = (3Q - 1)(K - 1)/K = 19 at Q = 10


@pytest.mark.parametrize("q", [2.0, 5.0, 10.0])
def test_mfb_gbw_sensitivity_is_q_times_f0_over_gbw(q):
    """docs/methods.md [calc]: df0/f0 = -Q e, dQ/Q = +Q e per unit e = f0/GBW, so
    S_GBW^{f0} = Q e and S_GBW^Q = -Q e to first order (e = 1e-3 here)."""
    s = stage_sensitivity(mfb_stage(q, 2.0, REAL, f0_hz=10e3))
    e = 10e3 / REAL.gbw_hz
    s_f0, s_q, _ = s.of(GBW)
    assert s_f0 == pytest.approx(q * e, rel=0.1)
    assert s_q == pytest.approx(-q * e, rel=0.1)


def test_gain_stage_has_only_gain_sensitivities():
    els = (resistor("Rf", "out", "fb", 30e3), resistor("Rg", "fb", "0", 10e3),
           opamp("U1", "in", "fb", "out", IDEAL))
    st = make_stage(els, "gain", 1.0)
    s = stage_sensitivity(st)
    assert all(math.isnan(x) for x in s.f0 + s.q)
    # K = 1 + Rf/Rg = 4: S_Rf^K = (K - 1)/K = 3/4, S_Rg^K = -3/4.
    assert s.of("Rf")[2] == pytest.approx(0.75, abs=1e-7)
    assert s.of("Rg")[2] == pytest.approx(-0.75, abs=1e-7)
    assert s.worst_part in ("Rf", "Rg")


def test_first_order_spread_is_root_sum_square():
    """Schoeffler 1964 [mem]: (sigma_y/y)^2 = sum S^2 (sigma_x/x)^2."""
    s = stage_sensitivity(mfb_stage(5.0, 10.0))
    sig = {p: 0.01 for p in s.parts if p != GBW}
    f0_sig, q_sig, g_sig = first_order_spread(s, sig)
    assert f0_sig == pytest.approx(0.01 * math.sqrt(sum(x * x for x in s.f0[:-1])))
    assert q_sig == pytest.approx(0.01 * math.sqrt(sum(x * x for x in s.q[:-1])))
    assert g_sig == pytest.approx(0.01 * np.sqrt(np.sum(np.square(s.gain[:-1]))))
