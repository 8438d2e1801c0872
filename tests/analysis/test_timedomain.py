"""Time-domain figures (analysis/timedomain.py) held to outside references.

* scipy.signal: ``freqs_zpk`` phase with a numerical derivative (group delay), and
  ``lsim`` of each stage's transfer polynomials, cascaded (bursts, steps, onsets) -- a
  different discretisation (matrix exponential of a state space, stage by stage) from the
  tool's partial fractions of the whole cascade.
* ngspice-39 (Debian): ``ac`` phase of the written deck (group delay); ``.tran ... uic``
  from rest of the written deck with sine and sine-burst sources (envelope rise time, onset
  peaks). The deck is the chain.cir the tool writes; the analyses are appended here.
* A closed form: a second-order bandpass driven at its centre has an envelope
  1 - exp(-t/tau), tau = 2Q/w0 (common practice), so its 10-90 % rise is tau ln 9.
"""

from __future__ import annotations

import functools
import math
import re
from pathlib import Path

import numpy as np
import pytest
import scipy.signal as ss

from bandwright.analysis.grid import passband_grid
from bandwright.analysis.timedomain import (burst_response, group_delay_s, net_zpk,
                                             onset_peaks, read_burst, step_response,
                                             tone_onset, worst_onset_phases, zpk_response)
from bandwright.chain.graph import CHAIN_OUTPUT, flatten, net_transfers
from bandwright.circuits.figures import transfer_polynomials
from bandwright.inputs.loader import spec_from_dict
from bandwright.inputs.requirement import Tone
from bandwright.planner import plan
from bandwright.report.spice import spice_deck

import tomllib

from conftest import planned_scenario  # noqa: E402
from ngspice_runner import WRDATA_SETUP, ngspice_available, read_wrdata, run_ngspice
from spice_tools import run_ngspice_ac_lin, with_control

SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"
needs_ngspice = pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")


@functools.lru_cache(maxsize=None)
def planned(name: str, **changes):
    if not changes:  # the unchanged scenario: the session's shared plan (tests/conftest.py)
        p = planned_scenario(name)
        return p.requirement, p.chosen
    doc = tomllib.loads((SCENARIOS / f"{name}.toml").read_text())
    for table, values in changes.items():
        doc.setdefault(table, {}).update(dict(values))
    req = spec_from_dict(doc, path=name)
    return req, plan(req).chosen


def _chain(name: str):
    req, design = planned(name)
    return req, design.chain


def _trim_top(c: np.ndarray, w: float) -> np.ndarray:
    """Drop highest powers that are interpolation rounding (tiny in s/w, w near the band)."""
    scaled = np.abs(c) * w ** np.arange(c.size)
    keep = np.nonzero(scaled > 1e-11 * scaled.max())[0]
    return c[: keep[-1] + 1]


def _cascade_lsim(chain, u: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Output of the chain for input u(t): the stages' polynomials as state-space blocks
    (scipy.signal.tf2ss), joined in series, one scipy.signal.lsim run. Joined rather than
    run stage after stage, so that no stage's sampled output is re-interpolated as the
    next one's input (a step through a strictly proper follower would reach the next stage
    as a one-sample ramp)."""
    a = np.zeros((0, 0)); b = np.zeros((0, 1)); c = np.zeros((1, 0)); d = np.ones((1, 1))
    for st in chain.stages:
        rs = chain.source_ohms if chain.input_of(st) == "in" else 0.0
        num, den = transfer_polynomials(st.elements, out_net="out", source_ohms=rs)
        w = 2 * np.pi * (st.built.f0_hz or 1e3)
        a2, b2, c2, d2 = ss.tf2ss(_trim_top(num, w)[::-1], _trim_top(den, w)[::-1])
        n1, n2 = a.shape[0], a2.shape[0]
        a = np.block([[a, np.zeros((n1, n2))], [b2 @ c, a2]])
        b = np.vstack([b, b2 @ d])
        c = np.hstack([d2 @ c, c2])
        d = d2 @ d
    _, y, _ = ss.lsim((a, b, c, d), u, t)
    return y


def test_group_delay_matches_scipy_freqs_zpk_phase_derivative():
    """Group delay over the passband against a central difference of scipy.signal.freqs_zpk's
    unwrapped phase (same zeros and poles; different formula). Tolerance 1e-4: the
    difference step's truncation error."""
    req, chain = _chain("lockin_mains")
    z = net_zpk(chain)[CHAIN_OUTPUT]
    f = passband_grid(req)
    w = 2 * np.pi * f
    dw = w * 1e-5
    _, h_hi = ss.freqs_zpk(z.zeros, z.poles, z.k, worN=w + dw)
    _, h_lo = ss.freqs_zpk(z.zeros, z.poles, z.k, worN=w - dw)
    dphi = np.angle(h_hi / h_lo)
    numeric = -dphi / (2 * dw)
    tool = group_delay_s(z, f)
    assert np.max(np.abs(tool / numeric - 1)) < 1e-4
    # The zeros, poles and gain reproduce the nodal solver's transfer (circuits.nodal).
    nodal = net_transfers(chain, f)[CHAIN_OUTPUT]
    assert np.max(np.abs(zpk_response(z, 1j * w) / nodal - 1)) < 1e-8


@needs_ngspice
def test_group_delay_matches_ngspice_ac_phase(tmp_path):
    """ngspice-39 ``ac lin`` phase of the written deck, differentiated numerically, against
    the tool's group delay across the passband: within 0.5 % (the 2 Hz step of a 400-point
    sweep over a 220 Hz band; ngspice prints 9 digits)."""
    req, chain = _chain("lockin_mains")
    deck = spice_deck(flatten(chain), source_ohms=chain.source_ohms, temperature_c=25.0,
                      title="group delay")
    lo, hi = req.passband.low_hz, req.passband.high_hz
    sweep = run_ngspice_ac_lin(deck, lo, hi, 401, ["out"], tmp_path)
    f, h = sweep["frequency"], sweep["out"]
    phase = np.unwrap(np.angle(h))
    mid = (f[1:] + f[:-1]) / 2
    spice_gd = -np.diff(phase) / (2 * np.pi * np.diff(f))
    tool = group_delay_s(net_zpk(chain)[CHAIN_OUTPUT], mid)
    assert np.max(np.abs(tool / spice_gd - 1)) < 5e-3


def test_burst_and_step_match_scipy_lsim():
    """The burst's real output (sin input, on for the burst) and the step response against
    scipy.signal.lsim of the stages' polynomials, cascaded: within 0.2 % of the peak (lsim
    interpolates the input linearly between samples, 200 per period)."""
    req, chain = _chain("lockin_mains")
    z = net_zpk(chain)[CHAIN_OUTPUT]
    f0 = req.passband.center_hz
    burst = 20 / f0
    t = np.arange(0, 3 * burst, 1 / (200 * f0))
    u = np.where(t < burst, np.sin(2 * np.pi * f0 * t), 0.0)
    ref = _cascade_lsim(chain, u, t)
    tool = burst_response(z, f0, t, burst).imag
    assert np.max(np.abs(tool - ref)) < 2e-3 * np.max(np.abs(ref))
    step_ref = _cascade_lsim(chain, np.ones_like(t), t)
    step = step_response(z, t)
    assert np.max(np.abs(step - step_ref)) < 2e-3 * np.max(np.abs(step_ref))


def test_single_section_envelope_rises_with_time_constant_2q_over_w0():
    """One bandpass section driven at its centre: envelope 1 - exp(-t w0/2Q) (common
    practice, the second-order bandpass's envelope time constant), so t90 - t10 = (2Q/w0)
    ln 9. Q = 20 from a one-section plan; within 2 % (the neglected conjugate pole term,
    about 1/(4Q) of the envelope, and the finite-GBW pole)."""
    doc = {"passband": {"center_hz": 1000.0, "bandwidth_hz": 50.0, "max_loss_db": 3.0103},
           "design": {"order": 1, "family": "butterworth"},
           "input": {"max_vpk": 0.1}, "supply": {"rails_v": [-15, 15]},
           "amplifier": {"archetype": "general"}}
    req = spec_from_dict(doc, path="one-section")
    chain = plan(req).chosen.chain
    (st,) = [s for s in chain.stages if s.kind == "bandpass"]
    z = net_zpk(chain)[CHAIN_OUTPUT]
    f0, q = st.built.f0_hz, st.built.q
    tau = 2 * q / (2 * math.pi * f0)
    reading = read_burst(z, f0, burst_s=20 * tau, tail_s=20 * tau)
    assert reading.rise_s == pytest.approx(tau * math.log(9), rel=0.02)
    # ...and the ringing after the burst falls to 1 % in tau ln 100.
    assert reading.ringing_s == pytest.approx(tau * math.log(100), rel=0.02)


def _tran(deck: str, sources: list[str], t_stop: float, t_step: float, nets, tmp_path,
          tag: str) -> dict[str, np.ndarray]:
    # The deck's small-signal source (VIN src 0 DC <dc_v> AC 1) gives way to the transient ones.
    text = re.sub(r"(?m)^VIN src 0 .*$", lambda _: "\n".join(sources), deck, count=1)
    assert text != deck
    probes = " ".join(f"v({n})" for n in nets)
    text = with_control(text, [WRDATA_SETUP, f"tran {t_step!r} {t_stop!r} 0 {t_step!r} uic",
                               f"linearize {probes}", f"wrdata {tag}.txt {probes}"])
    run_ngspice(text, tmp_path, name=f"{tag}.cir")
    return read_wrdata(Path(tmp_path) / f"{tag}.txt")


def _chained_sources(parts: list[str]) -> list[str]:
    """Sources in series from net src to ground: V0 src n1 ..., V1 n1 n2 ..., ... 0."""
    nets = ["src"] + [f"vs{k}" for k in range(1, len(parts))] + ["0"]
    return [f"VS{k} {nets[k]} {nets[k + 1]} {p}" for k, p in enumerate(parts)]


@needs_ngspice
def test_burst_envelope_rise_matches_ngspice_tran(tmp_path):
    """ngspice-39 ``.tran uic`` from rest of the written deck, the centre tone switched on at
    t = 0 once as a sine and once as a cosine: sqrt(v_sin² + v_cos²) is the envelope of the
    analytic tone. Its 10-90 % rise and 50 % delay against the tool's burst: within 2 % (the
    issue's tolerance; 400 points a period). And a whole sine burst (a sine and a delayed
    opposite sine, a whole number of periods apart) against the tool's real output, within
    1 % of the peak, ringing included."""
    req, chain = _chain("lockin_mains")
    z = net_zpk(chain)[CHAIN_OUTPUT]
    f0 = req.passband.center_hz
    burst = 40 / f0
    deck = spice_deck(flatten(chain), source_ohms=chain.source_ohms, temperature_c=25.0,
                      title="burst")
    step = 1 / (400 * f0)
    runs = {}
    for tag, ph in (("sin", 0.0), ("cos", 90.0)):
        runs[tag] = _tran(deck, [f"VIN src 0 SIN(0 1 {f0!r} 0 0 {ph!r})"], burst, step,
                          ["out"], tmp_path, tag)
    t = runs["sin"]["time"]
    n = min(t.size, runs["cos"]["time"].size)
    t = t[:n]
    env = np.hypot(runs["sin"]["v(out)"][:n], runs["cos"]["v(out)"][:n])
    gain = abs(zpk_response(z, np.array([2j * np.pi * f0]))[0])

    def cross(level):
        i = np.nonzero(env >= level * gain)[0][0]
        return t[i - 1] + (level * gain - env[i - 1]) * (t[i] - t[i - 1]) / (env[i] - env[i - 1])

    tool = read_burst(z, f0, burst_s=burst, tail_s=0.5 * burst)
    assert tool.rise_s == pytest.approx(cross(0.9) - cross(0.1), rel=0.02)
    assert tool.delay_s == pytest.approx(cross(0.5), rel=0.02)
    src = _chained_sources([f"SIN(0 1 {f0!r} 0 0 0)", f"SIN(0 -1 {f0!r} {burst!r} 0 0)"])
    run = _tran(deck, src, 1.5 * burst, step, ["out"], tmp_path, "burst")
    mine = burst_response(z, f0, run["time"], burst).imag
    assert np.max(np.abs(mine - run["v(out)"])) < 0.01 * np.max(np.abs(mine))


@needs_ngspice
def test_onset_peak_matches_ngspice_tran_from_rest(tmp_path):
    """The lock-in scenario's worst onset at the chain output: every tone (and the in-band
    signal) started at the phase the tool finds worst, simulated by ngspice-39 ``.tran uic``
    from rest on the written deck; the peak |v(out)| within 2 % of the tool's (the issue's
    tolerance; 200 points a period of the band centre)."""
    req, chain = _chain("lockin_mains")
    zpks = net_zpk(chain)
    limits = {n: 13.5 for n in chain.output_nets}
    sig_f = np.array([req.passband.low_hz, req.passband.center_hz, req.passband.high_hz])
    (_, out), = [(o.net, o) for o in onset_peaks(chain, zpks, signal_vpk=req.input.max_vpk,
                                                 signal_hz=sig_f, tones=req.input.tones,
                                                 dc_step_v=None, limits_vpk=limits)
                 if o.net == CHAIN_OUTPUT]
    # The finding: the mains tone's switch-on drives the output past its 13.5 V.
    assert out.peak_vpk > 13.5
    freqs = np.array([out.signal_hz] + [t.freq_hz for t in req.input.tones])
    amps = [req.input.max_vpk] + [t.vpk for t in req.input.tones]
    phases = worst_onset_phases(zpks[CHAIN_OUTPUT], freqs, out.at_s)
    src = _chained_sources([f"SIN(0 {a!r} {f!r} 0 0 {math.degrees(p)!r})"
                            for a, f, p in zip(map(float, amps), map(float, freqs), map(float, phases))])
    deck = spice_deck(flatten(chain), source_ohms=chain.source_ohms, temperature_c=25.0,
                      title="onset")
    step = 1 / (200 * req.passband.center_hz)
    run = _tran(deck, src, 3 * out.at_s, step, ["out"], tmp_path, "onset")
    assert float(np.max(np.abs(run["v(out)"]))) == pytest.approx(out.peak_vpk, rel=0.02)


def test_onset_peak_bounds_lsim_for_the_mains_at_its_peak():
    """The tool's worst-phase peak is at least the peak of one particular start -- the issue's
    mains tone switched on at its peak with its third harmonic -- from scipy.signal.lsim, and
    the worst-phase waveform the tool reconstructs reaches its own figure in lsim (0.5 %)."""
    req, chain = _chain("lockin_mains")
    zpks = net_zpk(chain)
    f0 = req.passband.center_hz
    (o,) = [o for o in onset_peaks(chain, zpks, signal_vpk=0.0, signal_hz=np.array([f0]),
                                   tones=req.input.tones, dc_step_v=None,
                                   limits_vpk={n: 13.5 for n in chain.output_nets})
            if o.net == CHAIN_OUTPUT]
    t = np.arange(0, 20e-3, 1 / (400 * f0))
    u = 2.0 * np.cos(2 * np.pi * 50 * t) + 0.6 * np.cos(2 * np.pi * 150 * t)
    at_peak = np.max(np.abs(_cascade_lsim(chain, u, t)))
    assert o.peak_vpk >= at_peak
    freqs = np.array([50.0, 150.0])
    ph = worst_onset_phases(zpks[CHAIN_OUTPUT], freqs, o.at_s)
    u = 2.0 * np.sin(2 * np.pi * 50 * t + ph[0]) + 0.6 * np.sin(2 * np.pi * 150 * t + ph[1])
    assert np.max(np.abs(_cascade_lsim(chain, u, t))) == pytest.approx(o.peak_vpk, rel=5e-3)


@pytest.mark.slow
def test_dc_step_onset_against_lsim():
    """A 0.3 V DC step on a chain whose tones are silent: the onset peak is 0.3 V times the
    largest |step response|, from scipy.signal.lsim of the cascade (0.5 %)."""
    req, chain = _chain("geophone_channel")
    zpks = net_zpk(chain)
    f0 = req.passband.center_hz
    readings = onset_peaks(chain, zpks, signal_vpk=1e-9, signal_hz=np.array([f0]),
                           tones=(Tone(freq_hz=f0, vpk=0.0),), dc_step_v=0.3,
                           limits_vpk={n: 1e-6 for n in chain.output_nets})
    o = readings[-1]
    assert o.event == "dc_step"
    t = np.linspace(0, 3 * max(o.at_s, 1 / f0), 20000)
    ref = 0.3 * np.max(np.abs(_cascade_lsim(chain, np.ones_like(t), t)))
    assert o.peak_vpk == pytest.approx(ref, rel=5e-3)
    assert o.recovery_s > o.at_s


def test_tone_onset_settles_to_the_steady_state():
    """Long after the start the onset response is H(jw) e^{jwt}: the steady state of the
    nodal solver (circuits.nodal), to 1e-6 after 40 time constants."""
    req, chain = _chain("lockin_mains")
    z = net_zpk(chain)[CHAIN_OUTPUT]
    f = np.array([50.0, 1100.0, 3300.0])
    t_end = 40 / z.slowest_rad_s
    y = tone_onset(z, f, np.array([t_end]))[:, 0]
    h = net_transfers(chain, f)[CHAIN_OUTPUT]
    steady = h * np.exp(2j * np.pi * f * t_end)
    assert np.max(np.abs(y - steady) / np.abs(h)) < 1e-6


def test_exponentials_skipped_only_where_they_are_zero():
    """``_exp_matrix`` leaves out a fast pole's row where e^{p t} is 0 in doubles: the
    matrix equals the full e^{p max(t, 0)} (0 before t = 0) bit for bit, on a rising grid
    that starts before 0, on one from 0, and on an unordered one (IEEE 754: e^x is 0 below
    x = -745.1)."""
    from bandwright.analysis.timedomain import _exp_matrix
    rng = np.random.default_rng(5)
    poles = np.concatenate([-10 ** rng.uniform(2, 8, 12) + 1j * 10 ** rng.uniform(2, 7, 12),
                            [-1e3 + 0j, 0j, 40 + 5j]])
    for t in (np.linspace(0, 0.02, 4096), np.linspace(-0.01, 0.02, 3001),
              rng.uniform(-0.01, 0.02, 257)):
        with np.errstate(under="ignore", over="ignore"):
            full = np.where(t >= 0, np.exp(poles[:, None] * np.maximum(t, 0)), 0)
        assert np.array_equal(_exp_matrix(poles, t), full)
        # Rows shared between nets on one grid (a downstream net carries the upstream
        # poles): the second matrix takes them from the first, unchanged.
        rows = {}
        _exp_matrix(poles[:6], t, rows)
        assert len(rows) == 6
        assert np.array_equal(_exp_matrix(poles, t, rows), full)
        assert len(rows) == poles.size


def test_shared_tones_give_the_same_onset():
    """The tones computed once for several nets on one grid (``tone_phasors``, as
    ``onset_peaks`` shares them) give each net's onset bit for bit as computed alone, on a
    grid from 0 and on one that starts before the switch-on."""
    from bandwright.analysis.timedomain import tone_phasors
    req, chain = _chain("lockin_mains")
    z = net_zpk(chain)[CHAIN_OUTPUT]
    f = np.array([50.0, 1100.0, 3300.0])
    for t in (np.linspace(0, 12 / z.slowest_rad_s, 2048),
              np.linspace(-2 / z.slowest_rad_s, 12 / z.slowest_rad_s, 2048)):
        assert np.array_equal(tone_onset(z, f, t, tone_phasors(f, t)), tone_onset(z, f, t))
        before = t < 0
        assert np.all(np.abs(tone_onset(z, f, t)[:, before]) == 0)  # at rest before
