"""Tests of report/spice.py: the chain.cir deck, checked against ngspice-39 and the nodal solver.

The deck must reproduce, in ngspice, what the nodal solver (circuits/nodal.py) computes
for the same element list: AC response, resistor noise and the op-amp noise model
(white + 1/f voltage noise in series with +, current noise into each input;
Motchenbacher & Connelly 1993, ch. 4 [mem]). ngspice is the outside reference here; the
nodal solver is itself held to closed forms and ngspice in tests/circuits/test_nodal.py.
"""

from __future__ import annotations

import math
import re
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from bandwright.circuits.elements import capacitor, opamp, resistor
from bandwright.circuits.nodal import noise, transfer
from bandwright.parts.notation import parse_value
from bandwright.parts.opamp import OpAmp
from bandwright.report.spice import (TINY_SOURCE_OHMS, noise_sense_gain,
                                     opamp_subckt, spice_deck, subckt_name)

sys.path.insert(0, str(Path(__file__).resolve().parent))
from spice_tools import run_ngspice_ac, run_ngspice_noise, run_ngspice_op  # noqa: E402

needs_ngspice = pytest.mark.ngspice


# --- circuits ------------------------------------------------------------------------------

def generic_opamp(*, name: str = "generic", gbw_hz: float = 3e6, dc_gain_db: float = 100.0,
                  e_w: float = 0.0, i_w: float = 0.0, corner_hz: float = 0.0) -> OpAmp:
    """A made-up op-amp archetype (not a product)."""
    return OpAmp(name=name, gbw_hz=gbw_hz, dc_gain_db=dc_gain_db, slew_v_per_us=5.0,
                 swing_to_rail_v=1.0, noise_v_per_rthz=e_w, noise_a_per_rthz=i_w,
                 noise_corner_hz=corner_hz)


NOISY = dict(e_w=12e-9, i_w=2e-12, corner_hz=1e3)


def rc_ladder():
    """Passive two-pole RC ladder (resistor noise only)."""
    return (resistor("R1", "in", "a", 1e3), capacitor("C1", "a", "0", 100e-9),
            resistor("R2", "a", "out", 10e3), capacitor("C2", "out", "0", 2.2e-9))


def inverting_amp(model: OpAmp):
    """Gain -10 inverting amplifier; R3 at the + input so that i_n+ reaches the output."""
    return (resistor("R1", "in", "n", 2e3), resistor("R2", "n", "out", 20e3),
            resistor("R3", "p", "0", 1.8e3), opamp("U1", "p", "n", "out", model))


def mfb_bandpass(stage: int, net_in: str, net_out: str, *, f0_hz: float, q: float,
                 h0: float, c_farads: float, model: OpAmp):
    """Equal-C multiple-feedback bandpass with input divider R1a/R1b.

    R2 = Q/(pi f0 C), R1a = R2/(2|H0|), R1b = R2/(4Q^2 - 2|H0|) (docs/methods.md "Topology
    facts"; Williams & Taylor 2006 §5.2 [mem]).
    """
    r2 = q / (math.pi * f0_hz * c_farads)
    r1a = r2 / (2 * abs(h0))
    r1b = r2 / (4 * q**2 - 2 * abs(h0))
    a, n = f"a_s{stage}", f"n_s{stage}"
    return (resistor(f"R1a_s{stage}", net_in, a, r1a), resistor(f"R1b_s{stage}", a, "0", r1b),
            capacitor(f"C1_s{stage}", a, net_out, c_farads),
            capacitor(f"C2_s{stage}", a, n, c_farads),
            resistor(f"R2_s{stage}", n, net_out, r2),
            opamp(f"U1_s{stage}", "0", n, net_out, model))


def mfb_cascade(model_1: OpAmp, model_2: OpAmp):
    """Two MFB bandpass sections (10 kHz and 12 kHz, Q 5), built by hand."""
    return (mfb_bandpass(1, "in", "out_s1", f0_hz=10e3, q=5.0, h0=2.0, c_farads=10e-9,
                         model=model_1)
            + mfb_bandpass(2, "out_s1", "out", f0_hz=12e3, q=5.0, h0=1.0, c_farads=4.7e-9,
                           model=model_2))


def test_hand_built_mfb_section_meets_its_design_equations():
    """The hand-built section is what the tests think it is: with an ideal op-amp its
    centre gain is -H0 at f0 (docs/methods.md MFB equations, Williams & Taylor §5.2 [mem])."""
    els = mfb_bandpass(1, "in", "out", f0_hz=10e3, q=5.0, h0=2.0, c_farads=10e-9,
                       model=generic_opamp(gbw_hz=math.inf))
    h = transfer(els, np.array([10e3]))
    np.testing.assert_allclose(h, [-2.0], rtol=1e-9)


# --- the deck's text (docs/design.md, "Interfaces": chain.cir) --------------------------------

def test_deck_text_follows_the_chain_cir_interface():
    """docs/design.md: VIN src 0 AC 1, RSRC src in (source_ohms), .temp, no .control, .end last."""
    deck = spice_deck(inverting_amp(generic_opamp(**NOISY)), source_ohms=600.0,
                      temperature_c=40.0, title="inverting amplifier")
    lines = deck.splitlines()
    assert lines[0] == "inverting amplifier"
    assert any(re.fullmatch(r"VIN src 0 AC 1( DC 0)?", line) for line in lines)
    rsrc = [line.split() for line in lines if line.startswith("RSRC ")]
    assert len(rsrc) == 1 and rsrc[0][1:3] == ["src", "in"]
    assert parse_value(rsrc[0][3]) == 600.0
    assert ".temp 40" in lines
    assert ".control" not in deck.lower() and ".endc" not in deck.lower()
    assert lines[-1] == ".end" and deck.endswith(".end\n")
    assert "XU1 p n out " + subckt_name(generic_opamp(**NOISY)) in lines


def test_zero_source_resistance_is_written_as_a_tiny_resistor():
    """SPICE has no 0 ohm resistor (ngspice-39 manual [mem]); see the module docstring."""
    deck = spice_deck(rc_ladder(), source_ohms=0.0, temperature_c=25.0, title="t")
    rsrc = next(line for line in deck.splitlines() if line.startswith("RSRC "))
    assert parse_value(rsrc.split()[3]) == TINY_SOURCE_OHMS


def test_mega_values_are_written_meg():
    """SPICE reads "M" as milli, so 2.2 Mohm must be "2.2Meg" (ngspice-39 manual §2.3 [mem])."""
    els = (resistor("R1", "in", "out", 2.2e6), capacitor("C1", "out", "0", 1e-12))
    deck = spice_deck(els, source_ohms=50.0, temperature_c=25.0, title="t")
    assert "R1 in out 2.2Meg" in deck.splitlines()


def test_one_subckt_per_distinct_model():
    """Equal models share one .subckt; a same-named model with other numbers gets its own."""
    a = generic_opamp(name="general")
    b = generic_opamp(name="general", gbw_hz=1e6)
    deck = spice_deck(mfb_cascade(a, a), source_ohms=0.0, temperature_c=25.0, title="t")
    assert deck.count(".subckt ") == 1
    deck = spice_deck(mfb_cascade(a, b), source_ohms=0.0, temperature_c=25.0, title="t")
    assert deck.count(".subckt ") == 2
    assert subckt_name(a) != subckt_name(b)
    assert re.fullmatch(r"oa_general_[0-9a-f]{8}", subckt_name(a))


def test_noiseless_opamp_has_no_noise_generators():
    """With e_w = i_w = 0 the subcircuit holds only the gain stage (no diodes)."""
    text = opamp_subckt(generic_opamp(), temperature_c=25.0)
    assert not re.search(r"^[DI]_", text, re.MULTILINE)
    assert "G_A 0 x plus minus 1" in text


def test_noise_sense_gain_matches_hand_calculation():
    """Diode pair: 2 x 2qI x (kT/qI)^2 = 4kT^2 k/(q I) [Schottky 1918, mem]; at 25 C, 1 mA
    its density is 0.650419 nV/rtHz (calc), so 15 nV/rtHz needs a gain of 23.0621."""
    vt = 1.380649e-23 * 298.15 / 1.602176634e-19
    pair = math.sqrt(4 * 1.602176634e-19 * vt**2 / 1e-3)
    assert pair == pytest.approx(0.650419e-9, rel=1e-5)
    assert noise_sense_gain(15e-9, temperature_c=25.0) == pytest.approx(15e-9 / pair, rel=1e-12)


@pytest.mark.parametrize("mutate, message", [
    (lambda els: els + (resistor("R9", "src", "0", 1e3),), "reserved"),
    (lambda els: tuple(replace(e, nets=tuple("o2" if n == "out" else n for n in e.nets))
                       for e in els), "'out'"),
    (lambda els: els + (resistor("r1", "n", "0", 1e3),), "clashes"),
    (lambda els: els + (resistor("R9", "n x", "0", 1e3),), "cannot be written"),
    (lambda els: els + (capacitor("C9", "n", "0", 0.0),), "> 0"),
])
def test_bad_element_lists_are_refused(mutate, message):
    """Names SPICE cannot read, the reserved source net, clashes and missing nets are errors."""
    with pytest.raises(ValueError, match=message):
        spice_deck(mutate(inverting_amp(generic_opamp())), source_ohms=0.0, temperature_c=25.0,
                   title="t")


# --- ngspice cross-checks ------------------------------------------------------------------

# Cases: (id, element list, source_ohms, AC band in Hz).
AC_CASES = [
    ("rc_ladder", rc_ladder(), 600.0, (10.0, 1e6)),
    ("inverting_finite_gbw", inverting_amp(generic_opamp(gbw_hz=1e6, dc_gain_db=90.0)), 0.0,
     (100.0, 10e6)),
    ("inverting_ideal", inverting_amp(generic_opamp(gbw_hz=math.inf)), 50.0, (100.0, 10e6)),
    ("mfb_cascade", mfb_cascade(generic_opamp(name="general"),
                                generic_opamp(name="general", gbw_hz=1e6, dc_gain_db=110.0)),
     1e3, (1e3, 100e3)),
]


@needs_ngspice
@pytest.mark.parametrize("case", AC_CASES, ids=[c[0] for c in AC_CASES])
def test_ac_response_matches_nodal_solver(case, tmp_path):
    """ngspice-39 .ac of the deck vs nodal.transfer: 0.05 dB and 0.5 deg wherever the
    response is within 40 dB of its peak. Both solve the same linear network, so they
    agree to ngspice's 9 printed digits; the tolerance leaves room for the 1 mohm stand-in
    of a 0 ohm source and the 1e12 stand-in of an ideal op-amp (module docstring)."""
    _, els, source_ohms, (f_lo, f_hi) = case
    deck = spice_deck(els, source_ohms=source_ohms, temperature_c=25.0, title="ac check")
    spice = run_ngspice_ac(deck, f_lo, f_hi, 40, ["out"], tmp_path)
    f = spice["frequency"]
    h_ref = transfer(els, f, source_ohms=source_ohms)
    h_sp = spice["out"]
    mag_ref_db = 20 * np.log10(np.abs(h_ref))
    near_peak = mag_ref_db >= mag_ref_db.max() - 40.0
    assert np.count_nonzero(near_peak) >= 20
    mag_err_db = 20 * np.log10(np.abs(h_sp) / np.abs(h_ref))
    phase_err_deg = np.degrees(np.angle(h_sp / h_ref))
    assert np.max(np.abs(mag_err_db[near_peak])) < 0.05
    assert np.max(np.abs(phase_err_deg[near_peak])) < 0.5


# Cases: (id, element list, source_ohms, temperature_c, noise band in Hz, op-amp noise on).
_quiet = generic_opamp(gbw_hz=3e6)
NOISE_CASES = [
    ("rc_ladder", rc_ladder(), 600.0, 25.0, (10.0, 1e6), False),
    ("inverting_resistors_only", inverting_amp(_quiet), 0.0, 25.0, (10.0, 1e6), False),
    ("inverting_en_in_1f", inverting_amp(generic_opamp(**NOISY)), 0.0, 25.0, (10.0, 1e6), True),
    ("inverting_en_in_1f_85C", inverting_amp(generic_opamp(**NOISY)), 50.0, 85.0, (10.0, 1e6),
     True),
    ("inverting_en_only", inverting_amp(generic_opamp(e_w=30e-9, corner_hz=300.0)), 0.0, 25.0,
     (10.0, 1e6), True),
    ("inverting_in_only", inverting_amp(generic_opamp(i_w=20e-12, corner_hz=300.0)), 0.0, 25.0,
     (10.0, 1e6), True),
    ("mfb_cascade_resistors_only", mfb_cascade(_quiet, _quiet), 1e3, 25.0, (100.0, 1e6),
     False),
    ("mfb_cascade_en_in_1f", mfb_cascade(generic_opamp(**NOISY),
                                         generic_opamp(e_w=5e-9, i_w=5e-12, corner_hz=3e3)),
     1e3, 25.0, (100.0, 1e6), True),
]


def _opamp_share(result) -> np.ndarray:
    """Fraction of the nodal output PSD that comes from op-amp noise."""
    opamp_psd = sum(v for k, v in result.contributions.items() if k.startswith("U"))
    return opamp_psd / result.total_psd


@needs_ngspice
@pytest.mark.parametrize("case", NOISE_CASES, ids=[c[0] for c in NOISE_CASES])
def test_noise_matches_nodal_solver(case, tmp_path):
    """ngspice-39 .noise of the deck (onoise_spectrum, onoise_total) vs nodal.noise:
    density within 0.5 dB at every point, integral within 0.3 dB. Resistors: 4kT/R in
    both (Johnson; Nyquist 1928). Op-amp: e_n^2 = e_w^2 (1 + fc/f) and i_n^2 alike
    (Motchenbacher & Connelly 1993, ch. 4 [mem]), in ngspice from diode shot and flicker
    noise (ngspice-39 manual, diode KF/AF [mem]). The agreement seen is about 1e-4 dB for
    the density and 0.003 dB for the integral; the tolerances are the task's."""
    _, els, source_ohms, temperature_c, (f_lo, f_hi), opamp_noise = case
    deck = spice_deck(els, source_ohms=source_ohms, temperature_c=temperature_c,
                      title="noise check")
    # 200 points a decade: ngspice integrates onoise_total over its own sweep, and at 20
    # points a decade it integrates the Q = 5 peaks 0.25 dB low (at 200: 0.003 dB).
    spice = run_ngspice_noise(deck, f_lo, f_hi, 200, tmp_path)
    ref = noise(els, spice.freq_hz, source_ohms=source_ohms, temperature_c=temperature_c)
    err_db = 20 * np.log10(spice.onoise_v_per_rthz / ref.density())
    assert np.max(np.abs(err_db)) < 0.5

    # The integral: nodal on a fine grid (trapezoid, 400 points a decade) over ngspice's
    # band, against ngspice's own log-log integration of its sweep.
    fine_hz = np.logspace(math.log10(f_lo), math.log10(f_hi),
                          int(400 * math.log10(f_hi / f_lo)) + 1)
    fine = noise(els, fine_hz, source_ohms=source_ohms, temperature_c=temperature_c)
    total_ref = fine.integrated_vrms((f_lo, f_hi))
    assert abs(20 * math.log10(spice.onoise_total_vrms / total_ref)) < 0.3

    # The case tests what it claims: op-amp noise dominates somewhere, and its 1/f corner
    # shows at the bottom of the band (or the op-amp contributes nothing at all).
    share = _opamp_share(ref)
    if opamp_noise:
        assert share.max() > 0.5
        white = [replace(e, model=replace(e.model, noise_corner_hz=0.0,
                                          current_noise_corner_hz=0.0))
                 if e.kind == "opamp" else e for e in els]
        low = noise(white, spice.freq_hz[:1], source_ohms=source_ohms,
                    temperature_c=temperature_c)
        assert ref.total_psd[0] > 2 * low.total_psd[0]
    else:
        assert np.all(share == 0)


@needs_ngspice
def test_noise_generators_put_no_dc_on_signal_nets(tmp_path):
    """ngspice-39 .op of a deck with every noise generator: each signal net (and the gain
    node) sits at 0 V, since VIN has DC 0 and the diode pairs cancel (module docstring).
    The limit, 1 nV, is far below ngspice's vntol (1 uV); equal pairs cancel exactly."""
    els = mfb_cascade(generic_opamp(**NOISY), generic_opamp(**NOISY, gbw_hz=1e6))
    deck = spice_deck(els, source_ohms=1e3, temperature_c=25.0, title="op check")
    op = run_ngspice_op(deck, tmp_path)
    signal_nets = {n for e in els for n in e.nets if n != "0"} | {"src", "in", "out"}
    for net in signal_nets:
        assert abs(op[net]) < 1e-9, (net, op[net])
    gain_nodes = [k for k in op if k.endswith(".x")]
    assert len(gain_nodes) == 2 and all(abs(op[k]) < 1e-9 for k in gain_nodes)
    diode_nodes = [k for k in op if re.search(r"\.n[epm][ab]$", k)]
    assert len(diode_nodes) == 12  # 2 op-amps x 3 generators x 2 diodes, all biased on
    assert all(0.5 < op[k] < 0.8 for k in diode_nodes)

