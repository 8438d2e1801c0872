"""Folds at the converter against outside references: the FFT of a sampled sine (numpy),
ngspice-39's AC at each tone, closed forms of folded white and first-order noise."""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from bandwright.analysis.aliasing import alias_hz, fold_intervals, folded_noise_vrms
from bandwright.audit import audit
from bandwright.chain.graph import converter_elements, flatten
from bandwright.report.spice import spice_deck

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from ngspice_runner import ngspice_available  # noqa: E402
from spice_tools import run_ngspice_ac_points  # noqa: E402

CHAIN = Path(__file__).resolve().parent / "conv_chain.toml"


def _fft_line_hz(freq_hz: float, sample_rate_hz: float, n: int = 1 << 15) -> float:
    """Sample a sine at `freq_hz` and find its spectral line (Hann window, parabolic
    interpolation between the largest bin and its neighbours; numpy)."""
    t = np.arange(n) / sample_rate_hz
    x = np.sin(2 * np.pi * freq_hz * t + 0.3) * np.hanning(n)
    mag = np.abs(np.fft.rfft(x))
    k = int(np.argmax(mag))
    if 0 < k < mag.size - 1:
        a, b, c = np.log(mag[k - 1: k + 2] + 1e-300)
        k = k + 0.5 * (a - c) / (a - 2 * b + c)
    return k * sample_rate_hz / n


@pytest.mark.parametrize("freq_hz,fs_hz", [
    (9000, 12000), (15000, 12000), (25000, 12000), (1.2e6, 1e6), (760e3, 1e6),
    (3.3e6, 1e6), (48123.0, 44100.0), (7.77e5, 2.0e5)])
def test_fold_frequency_matches_the_fft_of_the_sampled_sine(freq_hz, fs_hz):
    """numpy: a sine sampled at fs shows its line at alias_hz (within 0.05 of a bin: the
    interpolated line's accuracy with a Hann window is a few hundredths of a bin)."""
    n = 1 << 15
    line = _fft_line_hz(freq_hz, fs_hz, n)
    assert alias_hz(freq_hz, fs_hz) == pytest.approx(line, abs=0.05 * fs_hz / n)


def test_folded_white_noise_matches_its_closed_form():
    """Closed form [calc]: white S0 from fs/2 to M·fs folds into [a, b] through 2M − 1
    images of width b − a (k = 1…M below k·fs, k = 1…M−1 above), P = S0 (b − a)(2M − 1)."""
    fs, a, b, m, s0 = 1e5, 7e3, 11e3, 40, 3e-16
    f = np.geomspace(fs / 2, m * fs, 300)
    got = folded_noise_vrms(f, np.full_like(f, s0), band_hz=(a, b), sample_rate_hz=fs,
                            top_hz=m * fs)
    assert got ** 2 == pytest.approx(s0 * (b - a) * (2 * m - 1), rel=1e-9)


def test_folded_first_order_noise_matches_the_arctangent_sum():
    """S = S0 / (1 + (f/fc)²) integrates to S0 fc atan(f/fc); summed by hand over the
    images of [a, b] (each clipped to [fs/2, top]) [calc]. The log-log interpolation of
    a 60-point-a-decade grid holds it to 0.1 %."""
    fs, a, b, fc, s0, top = 48e3, 1e3, 4e3, 30e3, 1e-14, 48e5
    f = np.geomspace(fs / 2, top, 121)
    got = folded_noise_vrms(f, s0 / (1 + (f / fc) ** 2), band_hz=(a, b), sample_rate_hz=fs,
                            top_hz=top)

    def prim(x):
        return s0 * fc * math.atan(x / fc)
    want = 0.0
    for k in range(1, 102):
        for lo, hi in ((k * fs - b, k * fs - a), (k * fs + a, k * fs + b)):
            lo, hi = max(lo, fs / 2), min(hi, top)
            if hi > lo:
                want += prim(hi) - prim(lo)
    assert got ** 2 == pytest.approx(want, rel=1e-3)


def test_every_fold_interval_lands_in_the_band():
    """Points inside the intervals land in [a, b] on the sampled sine's FFT (numpy)."""
    fs, a, b = 12000.0, 1000.0, 5000.0
    iv = fold_intervals((a, b), fs, 40000.0)
    mids = iv.mean(axis=1)
    for f in mids[:: max(1, len(mids) // 6)]:
        line = _fft_line_hz(float(f), fs)
        assert a - 1 <= line <= b + 1


@pytest.fixture(scope="module")
def audited():
    return audit(CHAIN)


def test_folds_listed_are_the_tones_above_nyquist_that_land_in_band(audited):
    c = audited.analyses.converter
    tones = [f for f in c.folds if f.source != "noise"]
    # 5.5 kHz is below fs/2 = 6 kHz: it does not fold. The others land at 3, 3, 4, 1 kHz.
    assert [f.source for f in tones] == ["tone[0]", "tone[1]", "tone[2]", "tone[3]"]
    assert [f.alias_hz for f in tones] == pytest.approx([3000, 3000, 4000, 1000])
    assert c.folds[-1].source == "noise"
    assert sum(ch.id == "alias" for ch in audited.checks) == 5


@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
def test_tone_levels_at_the_converter_match_ngspice_ac(audited, tmp_path):
    """ngspice-39 AC of the deck the tool writes (converter load included), one point at
    each tone: V_t·|V(out)| against full scale within 1 % (0.086 dB)."""
    chain = audited.chain
    deck = spice_deck(flatten(chain) + converter_elements(chain), source_ohms=chain.source_ohms,
                      temperature_c=25.0, title="converter folds")
    assert "RADC out 0" in deck and "CADC out 0" in deck
    c = audited.analyses.converter
    tones = [f for f in c.folds if f.source != "noise"]
    ac = run_ngspice_ac_points(deck, [f.source_hz for f in tones], ["out"], tmp_path)
    vpk = {t.freq_hz: t.vpk for t in audited.requirement.input.tones}
    for f, v in zip(tones, ac["out"]):
        want = 20 * math.log10(vpk[f.source_hz] * abs(v) / 2.0)
        assert f.level_dbfs == pytest.approx(want, abs=20 * math.log10(1.01))
