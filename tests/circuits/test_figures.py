"""Tests of circuits/figures.py: transfer polynomials by FFT interpolation, section figures.

Each check names where its expected numbers come from.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from numpy.polynomial import polynomial as npoly

from bandwright.circuits.elements import capacitor, opamp, resistor
from bandwright.circuits.figures import polynomial_degree, section_figures, transfer_polynomials
from bandwright.circuits.nodal import passive_names, transfer
from bandwright.parts.opamp import OpAmp


def generic_opamp(gbw_hz: float = math.inf, dc_gain_db: float = math.inf) -> OpAmp:
    """A made-up op-amp archetype for tests (ideal by default)."""
    return OpAmp(name="test", gbw_hz=gbw_hz, dc_gain_db=dc_gain_db, slew_v_per_us=1.0,
                 swing_to_rail_v=1.0, noise_v_per_rthz=1e-8, noise_a_per_rthz=1e-12,
                 noise_corner_hz=0.0)


def mfb_bandpass(f0_hz: float, q: float, h0: float, c_farads: float, model: OpAmp):
    """Equal-C multiple-feedback bandpass with input divider, designed by the docs/methods.md
    equations (Williams & Taylor 2006, §5.2 [mem]; calc): R2 = Q/(pi f0 C),
    R1a = R2/(2|H0|), R1b = R2/(4Q^2 - 2|H0|)."""
    r2 = q / (math.pi * f0_hz * c_farads)
    r1a = r2 / (2 * h0)
    r1b = r2 / (4 * q * q - 2 * h0)
    return (resistor("R1a", "in", "a", r1a), resistor("R1b", "a", "0", r1b),
            capacitor("C1", "a", "out", c_farads), capacitor("C2", "a", "n", c_farads),
            resistor("R2", "n", "out", r2), opamp("U1", "0", "n", "out", model))


def mfb_sympy_polynomials(elements, model: OpAmp):
    """Exact num, den (ascending in s) of the MFB bandpass, derived with sympy from KCL at
    nets a and n and V_out = A(s) (0 - V_n), A(s) = A0/(1 + s A0/wt) (parts.opamp)."""
    s, va, vn, vo = sp.symbols("s va vn vo")
    val = {e.name: sp.Rational(e.value) for e in elements if e.kind in ("R", "C")}
    vin = 1
    kcl_a = ((va - vin) / val["R1a"] + va / val["R1b"] + (va - vo) * s * val["C1"]
             + (va - vn) * s * val["C2"])
    kcl_n = (vn - va) * s * val["C2"] + (vn - vo) / val["R2"]
    if math.isinf(model.gbw_hz):
        amp = vn  # nullor: V- = V+ = 0
    else:
        a0 = sp.Rational(model.a0)
        wt = sp.Rational(2 * math.pi * model.gbw_hz)
        amp = vo * (1 + s * a0 / wt) + a0 * vn
    sol = sp.solve([kcl_a, kcl_n, amp], [va, vn, vo], dict=True)[0]
    num, den = sp.fraction(sp.cancel(sp.together(sol[vo])))
    to_list = lambda p: np.array([float(c) for c in reversed(sp.Poly(p, s).all_coeffs())])
    return to_list(num), to_list(den)


def _scaled(num, den, w_rad_s, size):
    """Coefficients in sigma = s/w, padded to `size`, divided by den's largest one."""
    num = np.pad(num, (0, size - num.size)) * w_rad_s ** np.arange(size)
    den = np.pad(den, (0, size - den.size)) * w_rad_s ** np.arange(size)
    norm = np.max(np.abs(den))
    return num / norm, den / norm


# --- transfer polynomials --------------------------------------------------------------------

@pytest.mark.parametrize("gbw_hz, dc_gain_db", [(math.inf, math.inf), (4e6, 100.0),
                                                (400e6, 120.0)])
def test_mfb_polynomials_match_sympy(gbw_hz, dc_gain_db):
    """FFT-interpolated num/den equal the sympy derivation of the same circuit, coefficient
    by coefficient in s/w0, to 1e-13 of the largest (rounding of a 4x4 determinant and a
    4-point FFT; the observed error is ~3e-16)."""
    model = generic_opamp(gbw_hz, dc_gain_db)
    els = mfb_bandpass(40e3, 10.0, 10.0, 1e-9, model)
    num, den = transfer_polynomials(els)
    assert num.shape == den.shape == (polynomial_degree(els) + 1,)
    ref_num, ref_den = mfb_sympy_polynomials(els, model)
    w0 = 2 * math.pi * 40e3
    ours = _scaled(num, den, w0, num.size)
    theirs = _scaled(ref_num, ref_den, w0, num.size)
    # A common factor is arbitrary: align on den's largest coefficient (done by _scaled),
    # whose sign may still differ.
    sign = np.sign(ours[1][np.argmax(np.abs(ours[1]))] * theirs[1][np.argmax(np.abs(theirs[1]))])
    np.testing.assert_allclose(ours[0] * sign, theirs[0], atol=1e-13)
    np.testing.assert_allclose(ours[1] * sign, theirs[1], atol=1e-13)


def test_rc_lowpass_polynomials_are_one_over_one_plus_src():
    """H = 1/(1 + s R C) (first-order RC divider; by hand)."""
    r_ohms, c_farads = 4.7e3, 22e-9
    num, den = transfer_polynomials((resistor("R1", "in", "out", r_ohms),
                                     capacitor("C1", "out", "0", c_farads)))
    np.testing.assert_allclose(num / den[0], [1.0, 0.0], atol=1e-14)
    np.testing.assert_allclose(den / den[0], [1.0, r_ohms * c_farads], rtol=1e-13)


def test_polynomials_reproduce_nodal_transfer_over_a_batch():
    """num/den evaluated at j w equals the nodal solver, sample by sample (property: both
    come from the same MNA matrices), with finite GBW and a source resistance."""
    rng = np.random.default_rng(3)
    els = mfb_bandpass(12e3, 8.0, 4.0, 3.3e-9, generic_opamp(2e6, 100.0))
    nominal = np.array([e.value for e in els if e.kind in ("R", "C")])
    values = nominal * (1 + 0.02 * rng.standard_normal((5, nominal.size)))
    num, den = transfer_polynomials(els, values=values, source_ohms=75.0)
    assert num.shape == (5, polynomial_degree(els) + 1)
    freq_hz = np.logspace(2, 7, 41)
    s = 2j * np.pi * freq_hz
    h_poly = npoly.polyval(s, num.T) / npoly.polyval(s, den.T)  # (S, F)
    h_nodal = transfer(els, freq_hz, values=values, source_ohms=75.0)
    np.testing.assert_allclose(h_poly, h_nodal, rtol=1e-9)
    # One sample alone gives the same coefficients as its row of the batch.
    one = mfb_bandpass(12e3, 8.0, 4.0, 3.3e-9, generic_opamp(2e6, 100.0))
    one = tuple(type(e)(name=e.name, kind=e.kind, nets=e.nets,
                        value=dict(zip(passive_names(els), values[2])).get(e.name, e.value),
                        model=e.model) for e in one)
    n1, d1 = transfer_polynomials(one, source_ohms=75.0)
    np.testing.assert_allclose(n1 / d1[0], num[2] / den[2, 0], rtol=1e-10, atol=1e-30)
    np.testing.assert_allclose(d1 / d1[0], den[2] / den[2, 0], rtol=1e-10, atol=1e-30)


# --- section figures -------------------------------------------------------------------------

@pytest.mark.parametrize("f0_hz, q, h0", [(40e3, 10.0, 10.0), (1e3, 2.0, 1.0),
                                          (250e3, 25.0, 30.0)])
def test_mfb_bandpass_ideal_figures_match_design_equations(f0_hz, q, h0):
    """With an ideal op-amp the built section has exactly the design f0, Q and gain -H0
    (docs/methods.md MFB equations [calc]; the MFB is inverting: centre gain -R2/(2 R1a))."""
    fig = section_figures(mfb_bandpass(f0_hz, q, h0, 1e-9, generic_opamp()), kind="bandpass",
                          near_hz=f0_hz)
    assert fig.f0_hz == pytest.approx(f0_hz, rel=1e-6)
    assert fig.q == pytest.approx(q, rel=1e-6)
    assert fig.gain == pytest.approx(-h0, rel=1e-6)


@pytest.mark.parametrize("e", [1e-5, 1e-4])
def test_mfb_finite_gbw_shifts_follow_first_order_rule(e):
    """Finite GBW, e = f0/GBW: df0/f0 ~ -Q e and dQ/Q ~ +Q e (docs/methods.md, [mem]).
    First order only: at Q = 10 the computed shifts are 0.9985 and 0.9975 of the rule at
    e = 1e-4, so a 1 % band around the rule is what the rule promises, not more."""
    f0_hz, q = 40e3, 10.0
    model = generic_opamp(f0_hz / e, 200.0)
    fig = section_figures(mfb_bandpass(f0_hz, q, 10.0, 1e-9, model), kind="bandpass",
                          near_hz=f0_hz)
    assert (fig.f0_hz / f0_hz - 1) == pytest.approx(-q * e, rel=1e-2)
    assert (fig.q / q - 1) == pytest.approx(q * e, rel=1e-2)
    assert fig.gain == pytest.approx(-10.0, rel=10 * q * e)


def test_mfb_finite_gbw_poles_match_sympy():
    """Poles of the sympy-derived denominator give the same f0 and Q (to 1e-9)."""
    model = generic_opamp(4e6, 100.0)
    els = mfb_bandpass(40e3, 10.0, 10.0, 1e-9, model)
    _, ref_den = mfb_sympy_polynomials(els, model)
    poles = np.roots(ref_den[::-1])
    p = poles[np.argmin(np.abs(np.abs(poles) - 2 * math.pi * 40e3))]
    fig = section_figures(els, kind="bandpass", near_hz=40e3)
    assert fig.f0_hz == pytest.approx(abs(p) / (2 * math.pi), rel=1e-9)
    assert fig.q == pytest.approx(abs(p) / (2 * abs(p.real)), rel=1e-9)


def sallen_key_lowpass(r_ohms, c1_farads, c2_farads, model):
    """Unity-gain Sallen-Key lowpass, equal R (Sallen & Key 1955 [mem])."""
    return (resistor("R1", "in", "a", r_ohms), resistor("R2", "a", "b", r_ohms),
            capacitor("C1", "a", "out", c1_farads), capacitor("C2", "b", "0", c2_farads),
            opamp("U1", "b", "out", "out", model))


def sallen_key_highpass(r1_ohms, r2_ohms, c_farads, model):
    """Unity-gain Sallen-Key highpass, equal C (Sallen & Key 1955 [mem])."""
    return (capacitor("C1", "in", "a", c_farads), capacitor("C2", "a", "b", c_farads),
            resistor("R1", "a", "out", r1_ohms), resistor("R2", "b", "0", r2_ohms),
            opamp("U1", "b", "out", "out", model))


def test_sallen_key_lowpass_figures():
    """Equal-R unity-gain Sallen-Key lowpass: w0 = 1/(R sqrt(C1 C2)), Q = sqrt(C1/C2)/2,
    i.e. C1/C2 = 4Q^2 (docs/methods.md, Sallen & Key 1955 [mem]); DC gain 1."""
    q, f0_hz, r_ohms = 3.0, 5e3, 10e3
    c2 = 1 / (2 * math.pi * f0_hz * r_ohms * 2 * q)
    c1 = 4 * q * q * c2
    fig = section_figures(sallen_key_lowpass(r_ohms, c1, c2, generic_opamp()), kind="lowpass",
                          near_hz=f0_hz)
    assert (fig.f0_hz, fig.q, fig.gain) == pytest.approx((f0_hz, q, 1.0), rel=1e-9)


def test_sallen_key_highpass_figures():
    """Equal-C unity-gain Sallen-Key highpass: w0 = 1/(C sqrt(R1 R2)), R2/R1 = 4Q^2
    (docs/methods.md, Sallen & Key 1955 [mem]); high-frequency gain 1. With finite GBW the
    section's own gain (op-amp pole divided out at its DC value) stays 1 to within the
    buffer's DC error 1/A0 and first-order terms in e = f0/GBW (1e-4 here)."""
    q, f0_hz, c_farads = 0.9, 2e3, 10e-9
    r1 = 1 / (2 * math.pi * f0_hz * c_farads * 2 * q)
    r2 = 4 * q * q * r1
    fig = section_figures(sallen_key_highpass(r1, r2, c_farads, generic_opamp()),
                          kind="highpass", near_hz=f0_hz)
    assert (fig.f0_hz, fig.q, fig.gain) == pytest.approx((f0_hz, q, 1.0), rel=1e-9)
    real = section_figures(sallen_key_highpass(r1, r2, c_farads, generic_opamp(20e6, 100.0)),
                           kind="highpass", near_hz=f0_hz)
    assert real.gain == pytest.approx(1.0, abs=1e-3)
    assert real.f0_hz == pytest.approx(f0_hz, rel=1e-3)


def test_passive_rc_ladder_has_a_real_pole_pair():
    """Two equal RC sections in cascade: den = 1 + 3 sRC + (sRC)^2 (by hand), so
    w0 = 1/RC and Q = 1/3 from two real poles; DC gain 1."""
    r_ohms, c_farads = 1e3, 1e-6
    els = (resistor("R1", "in", "a", r_ohms), capacitor("C1", "a", "0", c_farads),
           resistor("R2", "a", "out", r_ohms), capacitor("C2", "out", "0", c_farads))
    fig = section_figures(els, kind="lowpass", near_hz=160.0)
    assert fig.f0_hz == pytest.approx(1 / (2 * math.pi * r_ohms * c_farads), rel=1e-12)
    assert fig.q == pytest.approx(1 / 3, rel=1e-12)
    assert fig.gain == pytest.approx(1.0, rel=1e-12)


def sallen_key_bandpass(r_ohms, c_farads, k_gain, model):
    """Sallen-Key bandpass R1 = R2 = R, R3 = 2R, C1 = C2, amplifier gain K
    (Sallen & Key 1955 [mem]; docs/methods.md)."""
    return (resistor("R1", "in", "a", r_ohms), capacitor("C1", "a", "0", c_farads),
            capacitor("C2", "a", "b", c_farads), resistor("R3", "b", "0", 2 * r_ohms),
            resistor("R2", "a", "out", r_ohms),
            resistor("Ra", "n", "0", 10e3), resistor("Rb", "n", "out", (k_gain - 1) * 10e3),
            opamp("U1", "b", "n", "out", model))


@pytest.mark.parametrize("k_gain", [2.0, 2.8, 3.5])
def test_sallen_key_bandpass_q_and_instability(k_gain):
    """Q = 1/(3 - K), H0 = K Q, w0 = 1/RC (docs/methods.md; re-derived with sympy for this
    wiring: H = K sRC / ((sRC)^2 + (3 - K) sRC + 1)). K > 3 puts the pair in the right
    half plane, which section_figures reports as Q < 0."""
    r_ohms, c_farads = 10e3, 10e-9
    fig = section_figures(sallen_key_bandpass(r_ohms, c_farads, k_gain, generic_opamp()),
                          kind="bandpass", near_hz=1.6e3)
    assert fig.f0_hz == pytest.approx(1 / (2 * math.pi * r_ohms * c_farads), rel=1e-9)
    assert fig.q == pytest.approx(1 / (3 - k_gain), rel=1e-9)
    assert fig.gain == pytest.approx(k_gain / (3 - k_gain), rel=1e-9)


def test_gain_stage_figures():
    """Inverting gain stage: H(0) = -(R2/R1)/(1 + (1 + R2/R1)/A0) (Franco 2015, §1.3 [mem])."""
    model = generic_opamp(1e6, 60.0)
    els = (resistor("R1", "in", "n", 1e3), resistor("R2", "n", "out", 22e3),
           opamp("U1", "0", "n", "out", model))
    fig = section_figures(els, kind="gain", near_hz=0.0)
    assert fig.gain == pytest.approx(-22.0 / (1 + 23.0 / model.a0), rel=1e-12)
    assert (fig.f0_hz, fig.q) == (0.0, 0.0)


def test_unknown_kind_is_rejected():
    with pytest.raises(ValueError, match="kind"):
        section_figures(mfb_bandpass(1e3, 1.0, 1.0, 1e-9, generic_opamp()), kind="notch",
                        near_hz=1e3)


def test_polished_poles_of_a_grid_match_its_eigenvalues():
    """``section_figures_batch(start_rad_s=...)`` (each point's roots polished by Aberth's
    iteration from the start's poles, as the series search does for sections of four poles
    or more) gives the figures the companion eigenvalues give, to rounding: a Tow-Thomas
    section with finite-GBW op-amps, every part moved by up to ±5 %."""
    from bandwright.circuits import tow_thomas
    from bandwright.circuits.figures import section_figures_batch, section_poles_rad_s
    from bandwright.sections.section import Section

    model = generic_opamp(gbw_hz=5e6, dc_gain_db=100.0)
    sec = Section(kind="bandpass", f0_hz=20e3, q=4.0, gain=2.0)
    elements = tuple(tow_thomas.elements(tow_thomas.design(sec, c_farads=1e-9), model))
    nominal = np.array([e.value for e in elements if e.kind in ("R", "C")])
    grid = nominal * (1 + 0.05 * np.random.default_rng(3).uniform(-1, 1, (300, nominal.size)))
    seed = section_poles_rad_s(elements, values=nominal)
    assert seed.size == 5                   # two capacitors and three op-amp poles
    eig = section_figures_batch(elements, kind="bandpass", near_hz=20e3, values=grid,
                                method="auto")
    polished = section_figures_batch(elements, kind="bandpass", near_hz=20e3, values=grid,
                                     method="auto", start_rad_s=seed)
    for a, b in zip(eig, polished):
        np.testing.assert_allclose(b, a, rtol=1e-12)


def test_horner_rows_equals_numpys_polyval():
    """``figures.horner_rows`` (the one Horner evaluation of the trim, the Monte Carlo
    kernel and the diagnosis model) gives numpy.polynomial.polynomial.polyval's values
    (tensor=True, coefficients as columns) bit for bit, on real and on complex points."""
    from numpy.polynomial import polynomial as npoly
    from bandwright.circuits.figures import horner_rows
    rng = np.random.default_rng(3)
    coefs = rng.standard_normal((40, 7))
    for x in (np.linspace(0.1, 3.0, 25), 1j * np.geomspace(0.1, 10.0, 25)):
        got = horner_rows(coefs, x)
        assert got.dtype == np.result_type(coefs, x)
        assert np.array_equal(got, npoly.polyval(x, coefs.T, tensor=True))


def _minus_3db_points(els, f0_hz: float) -> tuple[float, float]:
    """Lower and upper -3 dB frequencies of a bandpass from the nodal AC solve (root
    search on |H|^2 = |H(f0)|^2 / 2 either side of f0)."""
    from scipy.optimize import brentq

    def excess(f):
        return abs(transfer(els, np.array([f]))[0]) ** 2 - peak_sq / 2

    peak_sq = abs(transfer(els, np.array([f0_hz]))[0]) ** 2
    return (brentq(excess, f0_hz / 1e3, f0_hz, xtol=1e-12, rtol=1e-14),
            brentq(excess, f0_hz, f0_hz * 1e3, xtol=1e-12, rtol=1e-14))


@pytest.mark.parametrize("q", [0.3, 0.12])
def test_low_q_tow_thomas_reads_its_real_pole_pair(q):
    """A bandpass with Q < 1/2 has two real poles; its three op-amps' poles form a complex
    pair far above, which must not be taken for the section's. The reading is checked
    against the section's own AC response from the nodal solver: for a second-order
    bandpass the -3 dB points satisfy f_lo f_hi = f0^2 and f_hi - f_lo = f0 / Q at any Q
    (Schaumann & Van Valkenburg 2001, ch. 4 [mem])."""
    from bandwright.circuits import tow_thomas
    from bandwright.circuits.figures import section_figures_batch, section_poles_rad_s
    from bandwright.sections import Section
    f0_hz = 14.0
    parts = tow_thomas.design(Section("bandpass", f0_hz, q, -10.0), c_farads=33e-9)
    els = tuple(tow_thomas.elements(parts, generic_opamp(1e6, 130.0)))
    poles = section_poles_rad_s(els, values=np.array([parts[n] for n in passive_names(els)]))
    assert np.any((np.abs(poles) > 2 * math.pi * 1e5) & (poles.imag > 0))  # the trap
    f_lo, f_hi = _minus_3db_points(els, f0_hz)
    f0_ref, q_ref = math.sqrt(f_lo * f_hi), math.sqrt(f_lo * f_hi) / (f_hi - f_lo)
    fig = section_figures(els, kind="bandpass", near_hz=f0_hz)
    assert (fig.f0_hz, fig.q) == pytest.approx((f0_ref, q_ref), rel=1e-6)
    assert fig.gain == pytest.approx(-10.0, rel=1e-4)
    values = np.array([[parts[n] for n in passive_names(els)]])
    for method in ("det", "auto"):
        f0, qb, g = section_figures_batch(els, kind="bandpass", near_hz=f0_hz, values=values,
                                          method=method)
        assert (f0[0], qb[0], g[0]) == pytest.approx((fig.f0_hz, fig.q, fig.gain), rel=1e-9)


def test_real_pole_pair_in_the_right_half_plane_reads_as_negative_q():
    """Hand-made denominators in sigma (w_c = 1): (s + 1)(s + 4) with a complex pair at
    |p| = 1e4 gives w0 = 2, Q = 2/5 (w0 = sqrt(p1 p2), Q = w0/|p1 + p2|, by hand); with
    (s + 4)(s - 1) instead, one pole is in the right half plane and Q must come out < 0
    (so that the stability rules see it), as for a right-half-plane complex pair."""
    from bandwright.circuits.figures import figures_from_scaled
    far = npoly.polyfromroots([-5e3 + 8.66e3j, -5e3 - 8.66e3j]).real
    num = np.array([[0.0, 1.0, 0.0, 0.0, 0.0]])
    w_c = np.array([1.0])
    near = 2.0 / (2 * math.pi)
    stable = npoly.polymul(npoly.polyfromroots([-1.0, -4.0]), far)[None, :]
    f0, q, _ = figures_from_scaled(num, stable, w_c, kind="bandpass", near_hz=near)
    assert (f0[0] * 2 * math.pi, q[0]) == pytest.approx((2.0, 0.4), rel=1e-9)
    unstable = npoly.polymul(npoly.polyfromroots([1.0, -4.0]), far)[None, :]
    f0, q, _ = figures_from_scaled(num, unstable, w_c, kind="bandpass", near_hz=near)
    assert f0[0] * 2 * math.pi == pytest.approx(2.0, rel=1e-9)
    assert q[0] < 0


@pytest.mark.parametrize("name,gain", [("mfb_bandpass", -0.15), ("tow_thomas", -10.0)])
def test_low_q_section_is_searched_not_just_rounded(name, gain):
    """The series search of a Q < 1/2 section must do better than rounding each exact part
    to its nearest E96/E12 value (IEC 60063): before its figures were read from the real
    pole pair, every grid point read as 'no pole pair' and the nearest values stood (both
    cases here were 8 to 80 times worse than what the search now finds)."""
    from bandwright.circuits import topology
    from bandwright.circuits.realize import figure_error, realize
    from bandwright.parts.eseries import nearest
    from bandwright.sections import Section
    topo = topology(name)
    model = generic_opamp(1e6, 130.0)
    sec = Section("bandpass", 100.0, 0.3, gain)
    r = realize(topo, sec, model, r_series="E96", c_series="E12")
    naive = {n: float(nearest(v, "E12" if n.startswith("C") else "E96"))
             for n, v in r.ideal_components}
    naive_fig = section_figures(tuple(topo.elements(naive, model)), kind="bandpass",
                                near_hz=sec.f0_hz)
    assert figure_error(r.built, sec) < 0.25 * figure_error(naive_fig, sec)
    df, dq, dg = r.errors()
    assert abs(df) < 0.005 and abs(dq) < 0.02 and abs(dg) < 0.02
