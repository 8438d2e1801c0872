"""Tests of circuits/nodal.py: AC response and noise by modified nodal analysis.

Each check names where its expected numbers come from.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from bandwright.circuits.elements import capacitor, opamp, resistor
from bandwright.circuits.nodal import (BOLTZMANN_J_PER_K, ac_solve, mna_system, noise,
                                       passive_names, transfer)
from bandwright.parts.opamp import OpAmp

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from ngspice_runner import WRDATA_SETUP, read_wrdata, run_ngspice  # noqa: E402

K_B = 1.380649e-23  # exact, SI 2019 (docs/methods.md)
T_25C = 298.15


def generic_opamp(gbw_hz: float = 1e6, dc_gain_db: float = 100.0, *, e_n: float = 10e-9,
                  i_n: float = 1e-12, corner_hz: float = 0.0) -> OpAmp:
    """A made-up op-amp archetype for tests."""
    return OpAmp(name="test", gbw_hz=gbw_hz, dc_gain_db=dc_gain_db, slew_v_per_us=1.0,
                 swing_to_rail_v=1.0, noise_v_per_rthz=e_n, noise_a_per_rthz=i_n,
                 noise_corner_hz=corner_hz)


def rc_lowpass(r_ohms: float = 1e3, c_farads: float = 1e-7):
    return (resistor("R1", "in", "out", r_ohms), capacitor("C1", "out", "0", c_farads))


def inverting_amp(r1_ohms: float, r2_ohms: float, model: OpAmp):
    return (resistor("R1", "in", "n", r1_ohms), resistor("R2", "n", "out", r2_ohms),
            opamp("U1", "0", "n", "out", model))


def noninverting_amp(r1_ohms: float, r2_ohms: float, model: OpAmp):
    return (resistor("R1", "n", "0", r1_ohms), resistor("R2", "n", "out", r2_ohms),
            opamp("U1", "in", "n", "out", model))


FREQ_HZ = np.logspace(0, 7, 57)


# --- AC response ---------------------------------------------------------------------------

def test_rc_lowpass_matches_first_order_closed_form():
    """H = 1/(1 + j w R C): first-order RC divider, e.g. Schaumann & Van Valkenburg 2001,
    ch. 1 [mem]; derived by hand from the voltage divider R, 1/(sC)."""
    r_ohms, c_farads = 1.5e3, 47e-9
    h = transfer(rc_lowpass(r_ohms, c_farads), FREQ_HZ)
    expected = 1 / (1 + 2j * np.pi * FREQ_HZ * r_ohms * c_farads)
    np.testing.assert_allclose(h, expected, rtol=1e-12)


@pytest.mark.parametrize("source_ohms", [0.0, 600.0])
def test_voltage_divider_matches_ratio(source_ohms):
    """V_out/V_src = R2/(Rs + R1 + R2): the series voltage divider (Ohm's law)."""
    els = (resistor("R1", "in", "out", 3.3e3), resistor("R2", "out", "0", 6.8e3))
    h = transfer(els, FREQ_HZ, source_ohms=source_ohms)
    np.testing.assert_allclose(h, 6.8e3 / (source_ohms + 3.3e3 + 6.8e3), rtol=1e-13)
    # The input net is the far side of the source resistance.
    v_in = ac_solve(els, FREQ_HZ, source_ohms=source_ohms).at("in")
    np.testing.assert_allclose(v_in, (3.3e3 + 6.8e3) / (source_ohms + 3.3e3 + 6.8e3), rtol=1e-13)


@pytest.mark.parametrize("gbw_hz, dc_gain_db", [(1e6, 100.0), (10e6, 80.0), (1e5, 120.0)])
def test_inverting_amp_with_finite_gbw_matches_feedback_formula(gbw_hz, dc_gain_db):
    """H = -(R2/R1) / (1 + (1 + R2/R1)/A(s)): the inverting amplifier with finite open-loop
    gain, derived from V_out = A (0 - V_-) and KCL at the inverting input (Franco 2015,
    §1.3 and §6.1 [mem]); A(s) the single-pole model of parts.opamp."""
    model = generic_opamp(gbw_hz, dc_gain_db)
    r1, r2 = 2.2e3, 47e3
    h = transfer(inverting_amp(r1, r2, model), FREQ_HZ)
    a = model.open_loop_gain(2j * np.pi * FREQ_HZ)
    expected = -(r2 / r1) / (1 + (1 + r2 / r1) / a)
    np.testing.assert_allclose(h, expected, rtol=1e-11)


def test_ideal_opamp_when_gbw_is_infinite():
    """gbw_hz = inf is the ideal op-amp (nullor): H = -R2/R1 exactly (Franco 2015, §1.3)."""
    h = transfer(inverting_amp(1e3, 10e3, generic_opamp(math.inf, 100.0)), FREQ_HZ)
    np.testing.assert_allclose(h, -10.0, rtol=1e-13)


def test_huge_a0_and_gbw_stay_well_conditioned():
    """A0 = 1e15 (300 dB), GBW = 1e18 Hz: the 1/A0-scaled row still reproduces the
    feedback formula -(R2/R1)/(1 + (1 + R2/R1)/A) (Franco 2015, §1.3 [mem]) to rounding,
    i.e. it resolves the model's own 11/A(f) error (1e-10 at 10 MHz), which an unscaled
    row A0 (V+ - V-) would drown."""
    model = generic_opamp(1e18, 300.0)
    h = transfer(inverting_amp(1e3, 10e3, model), FREQ_HZ)
    a = model.open_loop_gain(2j * np.pi * FREQ_HZ)
    np.testing.assert_allclose(h, -10.0 / (1 + 11.0 / a), rtol=1e-14)


# --- batching ----------------------------------------------------------------------------------

def _mfb_bandpass(model: OpAmp):
    """Equal-C multiple-feedback bandpass, f0 40 kHz, Q 10, H0 10 (docs/methods.md values)."""
    return (resistor("R1a", "in", "a", 3978.87), resistor("R1b", "a", "0", 209.41),
            capacitor("C1", "a", "out", 1e-9), capacitor("C2", "a", "n", 1e-9),
            resistor("R2", "n", "out", 79577.5), opamp("U1", "0", "n", "out", model))


def _with_values(elements, row):
    """The element list with its R/C values replaced (one sample), built element by element."""
    values = dict(zip(passive_names(elements), row))
    out = []
    for e in elements:
        if e.kind == "R":
            out.append(resistor(e.name, *e.nets, values[e.name]))
        elif e.kind == "C":
            out.append(capacitor(e.name, *e.nets, values[e.name]))
        else:
            out.append(e)
    return tuple(out)


def test_batch_over_values_equals_one_by_one():
    """Property: the stacked solve over (S, F) equals S separate solves."""
    rng = np.random.default_rng(7)
    els = _mfb_bandpass(generic_opamp(4e6, 100.0))
    nominal = np.array([e.value for e in els if e.kind in ("R", "C")])
    values = nominal * (1 + 0.05 * rng.standard_normal((6, nominal.size)))
    freq_hz = np.linspace(20e3, 80e3, 31)
    batch = ac_solve(els, freq_hz, values=values, source_ohms=50.0)
    assert batch.voltages.shape == (6, 31, len(batch.nets))
    loop = np.stack([ac_solve(_with_values(els, row), freq_hz, source_ohms=50.0).voltages
                     for row in values])
    np.testing.assert_allclose(batch.voltages, loop, rtol=1e-12, atol=1e-15)
    nz_batch = noise(els, freq_hz, values=values, source_ohms=50.0)
    nz_loop = np.stack([noise(_with_values(els, row), freq_hz, source_ohms=50.0).total_psd
                        for row in values])
    np.testing.assert_allclose(nz_batch.total_psd, nz_loop, rtol=1e-11)
    assert nz_batch.contributions["R2"].shape == (6, 31)


def test_values_shape_is_checked():
    els = rc_lowpass()
    with pytest.raises(ValueError, match="shape"):
        ac_solve(els, FREQ_HZ, values=np.ones((3, 5)))
    with pytest.raises(ValueError, match="> 0"):
        ac_solve(els, FREQ_HZ, values=np.array([[1e3, -1e-9]]))
    with pytest.raises(KeyError):
        transfer(els, FREQ_HZ, out_net="nowhere")


def test_mna_row_for_a_finite_gbw_opamp_is_scaled_by_a0():
    """The op-amp row is V_out (1/A0 + s/wt) - V+ + V- = 0 (nodal.py module docstring)."""
    model = generic_opamp(1e6, 100.0)
    sys_ = mna_system(inverting_amp(1e3, 1e4, model))
    row, out, n = sys_.opamp_rows["U1"], sys_.index("out"), sys_.index("n")
    assert sys_.g[row, out] == pytest.approx(1e-5)
    assert sys_.c[row, out] == pytest.approx(1 / (2 * math.pi * 1e6))
    assert sys_.g[row, n] == 1.0


def test_stamps_are_shared_by_wiring_and_follow_every_change_of_it():
    """The stamps kept per wiring (``nodal._stamps``) give the matrices a fresh stamping
    gives, and a change of nets, op-amp model, input net or source type is a new wiring:
    each is checked against the stamp rules of the module docstring (conductance 1/R on
    the diagonal, -1/R off it; op-amp row 1/A0 + s/wt)."""
    slow, fast = generic_opamp(1e6, 100.0), generic_opamp(5e6, 80.0)
    a = mna_system(inverting_amp(1e3, 1e4, slow))
    b = mna_system(inverting_amp(2e3, 3e4, slow))             # same wiring, other values
    n, out = b.index("n"), b.index("out")
    assert b.g[n, n] == pytest.approx(1 / 2e3 + 1 / 3e4)
    assert b.g[n, out] == pytest.approx(-1 / 3e4)
    assert a.g[n, n] == pytest.approx(1 / 1e3 + 1 / 1e4)
    c = mna_system(inverting_amp(1e3, 1e4, fast))             # another op-amp
    row = c.opamp_rows["U1"]
    assert c.g[row, out] == pytest.approx(10 ** (-80 / 20))
    assert c.c[row, out] == pytest.approx(1 / (2 * math.pi * 5e6))
    assert a.c[row, out] == pytest.approx(1 / (2 * math.pi * 1e6))
    moved = (resistor("R1", "in", "n", 1e3), resistor("R2", "in", "out", 1e4),
             opamp("U1", "0", "n", "out", slow))              # R2 on other nets
    d = mna_system(moved)
    assert d.g[d.index("n"), d.index("out")] == 0.0
    assert d.g[d.index("in"), d.index("out")] == pytest.approx(-1 / 1e4)
    norton = mna_system(inverting_amp(1e3, 1e4, slow), source_ohms=50.0)
    assert norton.size == a.size - 1                          # no source branch row
    assert norton.g[norton.index("in"), norton.index("in")] == pytest.approx(1 / 50 + 1 / 1e3)
    # What a caller gets is its own: changing it leaves the next stamping alone.
    a.rhs[:] = 7.0
    a.opamp_rows["U1"] = -1
    again = mna_system(inverting_amp(1e3, 1e4, slow))
    assert again.rhs.max() == 1.0 and again.opamp_rows["U1"] == row


# --- noise -------------------------------------------------------------------------------------

def test_resistor_to_ground_through_source_resistance_is_4ktr_parallel():
    """Johnson/Nyquist 1928: S = 4kT (R || Rs); 2 kOhm || 2 kOhm = 1 kOhm gives
    4.0578 nV/sqrt(Hz) at 25 C (docs/methods.md check table, calc from 4kTR)."""
    els = (resistor("R1", "in", "0", 2e3),)  # the source resistance is the other 2k
    result = noise(els, FREQ_HZ, out_net="in", source_ohms=2e3, temperature_c=25.0)
    np.testing.assert_allclose(result.density(), 4.0578e-9, rtol=1e-4)  # 5 printed digits
    np.testing.assert_allclose(result.total_psd, 4 * K_B * T_25C * 1e3, rtol=1e-12)
    # Each 2k carries half: 4kT/R * (R||Rs)^2 = 4kT * 500 ohms.
    np.testing.assert_allclose(result.contributions["R1"], 4 * K_B * T_25C * 500, rtol=1e-12)
    np.testing.assert_allclose(result.contributions["Rsource"], 4 * K_B * T_25C * 500, rtol=1e-12)
    assert BOLTZMANN_J_PER_K == K_B


def test_johnson_noise_at_27c():
    """4.0714 nV/sqrt(Hz) for 1 kOhm at 27 C (docs/methods.md, calc from 4kTR)."""
    result = noise((resistor("R1", "in", "0", 1e3),), np.array([1e3]), out_net="in",
                   source_ohms=1e15, temperature_c=27.0)
    assert result.density()[0] == pytest.approx(4.0714e-9, rel=1e-4)


def test_zero_source_resistance_contributes_nothing():
    """An ideal source holds the input net: no noise reaches it (its node is a short)."""
    result = noise(rc_lowpass(), FREQ_HZ, source_ohms=0.0)
    assert np.all(result.contributions["Rsource"] == 0)
    np.testing.assert_allclose(sum(result.contributions.values()), result.total_psd, rtol=1e-14)


def test_rc_integrated_noise_is_kt_over_c():
    """Integral over all f of 4kTR/|1 + j w R C|^2 = kT/C (Johnson/Nyquist 1928; the
    integral done analytically: 4kTR * 1/(4RC)). The grid 1e-4..1e4 times the corner
    misses (2/pi)*1e-4 of the power above and 4e-4 below, so 1 % is a loose bound."""
    r_ohms, c_farads = 10e3, 1e-9
    fc_hz = 1 / (2 * math.pi * r_ohms * c_farads)
    freq_hz = np.logspace(math.log10(fc_hz) - 4, math.log10(fc_hz) + 4, 4001)
    result = noise(rc_lowpass(r_ohms, c_farads), freq_hz, temperature_c=25.0)
    vrms = result.integrated_vrms((freq_hz[0], freq_hz[-1]))
    assert vrms == pytest.approx(math.sqrt(K_B * T_25C / c_farads), rel=1e-2)
    # The same analytic integral over the grid's own band, to 1e-5 (trapezoid error).
    w = 2 * math.pi * r_ohms * c_farads
    exact = 4 * K_B * T_25C * r_ohms / w * (math.atan(w * freq_hz[-1]) - math.atan(w * freq_hz[0]))
    assert vrms == pytest.approx(math.sqrt(exact), rel=1e-5)


def test_integrated_vrms_needs_points_in_band():
    result = noise(rc_lowpass(), np.array([10.0, 20.0]))
    with pytest.raises(ValueError, match="fewer than two"):
        result.integrated_vrms((100.0, 200.0))


@pytest.mark.parametrize("corner_hz", [0.0, 100.0])
def test_noninverting_amp_noise_with_ideal_opamp(corner_hz):
    """Non-inverting amplifier, ideal op-amp (Motchenbacher & Connelly 1993, ch. 4 [mem];
    Franco 2015 §7 [mem]): e_n appears times the noise gain (1 + R2/R1), with
    e_n^2(f) = e_w^2 (1 + fc/f); R2 gives 4kT R2, R1 gives 4kT R1 (R2/R1)^2, i_n into the
    inverting input gives (i_n R2)^2 and into the source-held + input nothing."""
    r1, r2 = 1e3, 9e3
    model = generic_opamp(math.inf, 100.0, e_n=5e-9, i_n=2e-12, corner_hz=corner_hz)
    freq_hz = np.logspace(0, 5, 21)
    result = noise(noninverting_amp(r1, r2, model), freq_hz)
    en2 = 5e-9**2 * (1 + corner_hz / freq_hz)
    c = result.contributions
    np.testing.assert_allclose(c["U1 voltage"], en2 * (1 + r2 / r1) ** 2, rtol=1e-12)
    np.testing.assert_allclose(c["R2"], 4 * K_B * T_25C * r2, rtol=1e-12)
    np.testing.assert_allclose(c["R1"], 4 * K_B * T_25C * r1 * (r2 / r1) ** 2, rtol=1e-12)
    in2 = 2e-12**2 * (1 + corner_hz / freq_hz)
    np.testing.assert_allclose(c["U1 current-"], in2 * r2**2, rtol=1e-12)
    assert np.all(c["U1 current+"] == 0)


def test_noninverting_amp_voltage_noise_with_finite_gbw():
    """Noise gain with finite A: (1 + R2/R1) / (1 + (1 + R2/R1)/A(s)) (Franco 2015, §6 [mem];
    the same feedback algebra as the signal gain, the noise being at the + input)."""
    r1, r2 = 1e3, 99e3
    model = generic_opamp(1e6, 100.0, e_n=8e-9, corner_hz=10.0)
    freq_hz = np.logspace(0, 6, 25)
    result = noise(noninverting_amp(r1, r2, model), freq_hz)
    a = model.open_loop_gain(2j * np.pi * freq_hz)
    g_n = (1 + r2 / r1) / (1 + (1 + r2 / r1) / a)
    np.testing.assert_allclose(result.contributions["U1 voltage"],
                               model.voltage_noise_psd(freq_hz) * np.abs(g_n) ** 2, rtol=1e-11)
    # Noise reaches out the way the signal does (the + input is the input net).
    np.testing.assert_allclose(np.abs(transfer(noninverting_amp(r1, r2, model), freq_hz)),
                               np.abs(g_n), rtol=1e-12)


# --- ngspice cross-checks -------------------------------------------------------------------

needs_ngspice = pytest.mark.ngspice

# Behavioural op-amp for ngspice: VCVS of gain A0, then a pole made of a VCCS wired as a
# 1 S conductance (noiseless, unlike a resistor) charging Cp = A0/wt, then a unity buffer:
# A(s) = A0/(1 + s A0/wt), as in parts.opamp.
_OPAMP_SUBCKT = """.subckt testamp plus minus out
E1 x 0 plus minus {a0}
G1 x y x y 1
Cp y 0 {cp}
Eo out 0 y 0 1
.ends
"""


def _subckt(model: OpAmp) -> str:
    cp = model.a0 / (2 * math.pi * model.gbw_hz)
    return _OPAMP_SUBCKT.format(a0=repr(model.a0), cp=repr(cp))


@needs_ngspice
def test_ac_matches_ngspice(tmp_path):
    """RC lowpass and a finite-GBW inverting amplifier, against ngspice-39 AC analysis.
    Tolerance 1e-6: wrdata prints 9 significant digits."""
    model = generic_opamp(1e6, 100.0)
    deck = f"""nodal cross-check
V1 src 0 AC 1
RS src in 600
R1 in out 1.5k
C1 out 0 47n
V2 in2 0 AC 1
R2a in2 n 2.2k
R2b n out2 47k
X1 0 n out2 testamp
{_subckt(model)}
.control
{WRDATA_SETUP}
ac dec 10 10 10meg
wrdata ac.txt v(out) v(out2)
quit 0
.endc
.end
"""
    run_ngspice(deck, tmp_path)
    data = read_wrdata(tmp_path / "ac.txt")
    f = data["frequency"]
    h_rc = transfer(rc_lowpass(1.5e3, 47e-9), f, source_ohms=600.0)
    h_inv = transfer(inverting_amp(2.2e3, 47e3, model), f)
    np.testing.assert_allclose(data["v(out)"], h_rc, rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(data["v(out2)"], h_inv, rtol=1e-6, atol=1e-9)


@needs_ngspice
def test_resistor_noise_matches_ngspice(tmp_path):
    """Output noise of a resistor network behind a finite-GBW inverting amplifier (noiseless
    behavioural op-amp) with a 600 ohm source, against ngspice-39 .noise at 25 C.
    Tolerance 1e-5: 9 printed digits, and ngspice's own Boltzmann constant
    (1.38064852e-23) differs from the exact SI value by 2e-7."""
    model = generic_opamp(1e6, 100.0, e_n=0.0, i_n=0.0)
    deck = f"""nodal noise cross-check
V1 src 0 AC 1
RS src in 600
R1 in a 1k
R3 a 0 4.7k
R4 a n 2.2k
R2 n out 47k
C1 n out 100p
X1 0 n out testamp
{_subckt(model)}
.options temp=25
.control
{WRDATA_SETUP}
noise v(out) V1 dec 10 10 1meg
setplot noise1
wrdata noise.txt onoise_spectrum
quit 0
.endc
.end
"""
    run_ngspice(deck, tmp_path)
    data = read_wrdata(tmp_path / "noise.txt")
    f = data["frequency"]
    els = (resistor("R1", "in", "a", 1e3), resistor("R3", "a", "0", 4.7e3),
           resistor("R4", "a", "n", 2.2e3), resistor("R2", "n", "out", 47e3),
           capacitor("C1", "n", "out", 100e-12), opamp("U1", "0", "n", "out", model))
    result = noise(els, f, source_ohms=600.0, temperature_c=25.0)
    np.testing.assert_allclose(result.density(), data["onoise_spectrum"], rtol=1e-5)
