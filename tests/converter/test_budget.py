"""The noise budget to the bits and the drive estimate against outside references:
quantisation noise (closed form and numpy), settling (scipy.signal), the chain's noise to
fs/2 (ngspice-39 .noise)."""

from __future__ import annotations

import dataclasses
import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

from bandwright.analysis.converter import quantisation_vrms, settling_gbw_hz
from bandwright.audit import audit
from bandwright.chain.graph import converter_elements, flatten
from bandwright.report.spice import spice_deck

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from ngspice_runner import ngspice_available  # noqa: E402
from spice_tools import run_ngspice_noise  # noqa: E402

CHAIN = Path(__file__).resolve().parent / "conv_chain.toml"


@pytest.mark.parametrize("bits", [12, 14, 16])
def test_quantisation_noise_of_a_quantised_full_scale_sine(bits):
    """numpy: round a full-scale sine (incommensurate frequency) to codes of FS/2^N and
    measure the error's rms; against q/√12 within 3 % (a sine's error is deterministic, not
    uniform noise: at 12 bits its rms departs from q/√12 by up to about 3 % depending on
    amplitude and frequency, at 16 bits by well under 1 %; at 8 bits by up to 8 %, so that
    case is left out)."""
    fs_vpp = 4.0
    q = fs_vpp / 2 ** bits
    n = np.arange(1 << 18)
    x = (fs_vpp / 2 - q / 2) * np.sin(2 * np.pi * 0.1234567891 * n)
    err = np.round(x / q) * q - x
    assert quantisation_vrms(fs_vpp, bits) == pytest.approx(np.sqrt(np.mean(err ** 2)),
                                                            rel=0.03)


def test_quantisation_noise_gives_the_6_02_n_plus_1_76_rule():
    """SNR of an ideal N-bit converter with a full-scale sine is 6.02 N + 1.76 dB
    (common practice; Bennett 1948 [mem]): 74.0 dB at 12 bits."""
    fs_vpp, bits = 2.0, 12
    snr = 20 * math.log10((fs_vpp / 2 / math.sqrt(2)) / quantisation_vrms(fs_vpp, bits))
    assert snr == pytest.approx(6.0206 * bits + 1.7609, abs=1e-3)
    assert snr == pytest.approx(74.0, abs=0.05)


@pytest.mark.parametrize("bits,fs_hz", [(12, 1e6), (16, 48e3), (10, 2e7)])
def test_settling_gbw_settles_a_single_pole_step_to_one_lsb_in_half_a_period(bits, fs_hz):
    """scipy.signal: the step response of 1 / (1 + s/(2π GBW)) at t = 1/(2 fs) is within
    2^-N of its final value exactly when GBW = settling_gbw_hz."""
    gbw = settling_gbw_hz(fs_hz, bits)
    t = np.array([0.0, 1 / (2 * fs_hz)])
    _, y = signal.step(signal.lti([1.0], [1 / (2 * np.pi * gbw), 1.0]), T=t)
    assert 1 - y[-1] == pytest.approx(2.0 ** -bits, rel=1e-6)


@pytest.fixture(scope="module")
def audited():
    return audit(CHAIN)


@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
def test_chain_noise_to_nyquist_matches_ngspice_noise(audited, tmp_path):
    """ngspice-39 .noise on the written deck, integrated from the band's low end to fs/2
    (onoise_total): the converter's chain noise within 2 % (ngspice integrates its own
    log sweep of 200 points a decade)."""
    c = audited.analyses.converter
    chain = audited.chain
    deck = spice_deck(flatten(chain) + converter_elements(chain), source_ohms=chain.source_ohms,
                      temperature_c=25.0, title="converter noise")
    lo, hi = c.band_hz
    assert hi == 6000.0
    ng = run_ngspice_noise(deck, lo, hi, 200, tmp_path)
    assert c.chain_vrms == pytest.approx(ng.onoise_total_vrms, rel=0.02)


def test_budget_adds_chain_folded_and_quantisation_noise_in_power(audited):
    """The noises are independent, so their powers add (common practice); the quantisation
    share in the band lo … fs/2 is (fs/2 − lo)/(fs/2) of q²/12 (uniform over 0 … fs/2)."""
    c = audited.analyses.converter
    conv = c.converter
    lo, hi = c.band_hz
    q2 = (conv.full_scale_vpp / 2 ** 12) ** 2 / 12 * (hi - lo) / hi
    assert c.quantisation_vrms ** 2 == pytest.approx(q2, rel=1e-12)
    assert c.total_vrms ** 2 == pytest.approx(c.chain_vrms ** 2 + c.folded_vrms ** 2 + q2,
                                              rel=1e-12)
    sig_rms = audited.analyses.signal_out_vpk / math.sqrt(2)
    assert c.snr_db == pytest.approx(20 * math.log10(sig_rms / c.total_vrms), abs=1e-9)


def test_which_noise_dominates_follows_the_bits(audited):
    """At 8 bits the converter's own noise (4 V/256/√12 = 4.5 mV) dwarfs the chain's
    (tens of µV); at 24 bits (0.07 µV) the chain's dominates."""
    from bandwright.analysis import analyse
    req = audited.requirement
    for bits, who in ((8, "converter"), (24, "chain")):
        r = dataclasses.replace(req, converter=dataclasses.replace(req.converter, bits=bits))
        assert analyse(audited.chain, r).converter.dominant_noise == who


def test_enob_sets_the_converter_noise(audited):
    """ENOB 10 of 12 bits: the converter's noise is that of an ideal 10-bit converter,
    4× (12.04 dB) the 12-bit figure (IEEE Std 1241 ENOB definition [mem])."""
    from bandwright.analysis import analyse
    req = audited.requirement
    r = dataclasses.replace(req, converter=dataclasses.replace(req.converter, enob=10.0))
    q10 = analyse(audited.chain, r).converter.quantisation_vrms
    assert q10 / audited.analyses.converter.quantisation_vrms == pytest.approx(4.0, rel=1e-12)


def test_a_slow_driver_is_flagged_by_the_settling_estimate(audited):
    """At 2 MS/s and 12 bits the estimate asks 12·ln2·2e6/π = 5.2953 MHz [calc]: the 3 MHz
    op-amp gets a warning on the converter's node (a warning only: an estimate)."""
    from bandwright.analysis import analyse
    from bandwright.checks.alias import settling_checks
    req = audited.requirement
    r = dataclasses.replace(req, converter=dataclasses.replace(req.converter,
                                                               sample_rate_hz=2e6))
    (check,) = settling_checks(analyse(audited.chain, r))
    assert check.value == pytest.approx(12 * math.log(2) * 2e6 / math.pi, rel=1e-12)
    assert check.value == pytest.approx(5.2953e6, rel=1e-4)
    assert check.status == "warn" and check.net == "adc"
    (ok,) = settling_checks(audited.analyses)
    assert ok.status == "pass"


@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
def test_without_a_converter_the_whole_span_noise_matches_ngspice(tmp_path):
    """Without [converter] the report shows the noise over its whole grid beside the
    band's: ngspice-39 .noise over the same span (onoise_total) within 2 %; the passband
    figure is the smaller."""
    text = CHAIN.read_text()
    head, rest = text.split("[converter]", 1)
    path = tmp_path / "plain.toml"
    path.write_text(head + "[[stage]]" + rest.split("[[stage]]", 1)[1])
    a = audit(path)
    assert a.analyses.converter is None
    nz = a.analyses.noise
    lo, hi = nz.wide_band_hz
    deck = spice_deck(flatten(a.chain), source_ohms=a.chain.source_ohms, temperature_c=25.0,
                      title="whole span noise")
    ng = run_ngspice_noise(deck, lo, hi, 200, tmp_path)
    assert nz.wide_vrms == pytest.approx(ng.onoise_total_vrms, rel=0.02)
    assert nz.band_hz == (1000.0, 5000.0) and nz.integrated_vrms < nz.wide_vrms


def test_the_converter_input_loads_the_last_op_amp(audited):
    """The drive check of "out" sees the converter's input in parallel with the feedback
    network: a 1 kΩ input is below the 2 kΩ the 'general' op-amp drives (its catalogue
    figure), so the check fails; the least load is below 1 kΩ (a parallel combination is
    below each branch, common practice)."""
    from bandwright.analysis import analyse
    from bandwright.checks.chain_checks import drive_checks
    req = audited.requirement
    r = dataclasses.replace(req, converter=dataclasses.replace(req.converter, input_ohms=1e3))
    an = analyse(audited.chain, r)
    out = next(n for n in an.nodes if n.net == "out")
    before = next(n for n in audited.analyses.nodes if n.net == "out")
    assert out.load_ohms < 1e3 < before.load_ohms
    (check,) = [c for c in drive_checks(an) if c.net == "out"]
    assert check.status == "fail" and "converter input" in check.message
