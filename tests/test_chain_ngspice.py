"""End to end: chains the planner builds, held to ngspice-39 (the Debian package).

Every chain here comes from ``bandwright.plan`` on a requirement; its ``chain.cir`` (the
``--out`` file, ``report.files.plan_files``) is run in ngspice with an analysis appended
(``spice_tools``) and ngspice's numbers are compared with the figures the tool reports:
the response (``analyses.response``), the worst-case level at every op-amp output
(``analyses.nodes``), the output noise (``analyses.noise``), a high-Q section's f0 and Q
with and without the op-amp's finite GBW (``circuits.figures.section_figures``), and the
audit round trip through ``chain.toml``.

The source of every check is ngspice-39 (Debian package) in batch mode, an independent
solver of the same circuit: it shares no code with the nodal solver. Its printed numbers
(``wrdata``) carry 9 significant digits, about 1e-8 relative; the tolerances asked of the
tool are far wider and each says why it is what it is.
"""

from __future__ import annotations

import copy
import functools
import json
import math
import subprocess
import sys
import tomllib
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from bandwright.analysis.grid import passband_grid
from bandwright.analysis.levels import net_transfers
from bandwright.analysis.noise import chain_noise
from bandwright.chain.graph import flatten
from bandwright.circuits import topology
from bandwright.circuits.figures import section_figures
from bandwright.planner import plan
from bandwright.report.files import plan_files
from bandwright.report.json_out import dumps, plan_to_dict
from bandwright.report.spice import spice_deck
from bandwright.report.tuning import design_settings, set_trimmers
from bandwright.inputs import spec_from_dict

sys.path.insert(0, str(Path(__file__).resolve().parent))
from conftest import exit_code_of, planned_scenario, scenario_case  # noqa: E402
from spice_tools import (run_ngspice_ac, run_ngspice_ac_lin, run_ngspice_ac_points,  # noqa: E402
                         run_ngspice_noise)

pytestmark = pytest.mark.ngspice

ROOT = Path(__file__).resolve().parent.parent
SCENARIOS = ROOT / "scenarios"


# --- requirements and their plans ------------------------------------------------------------

def _merged(base: dict, changes: dict) -> dict:
    """`base` with `changes` laid over it, table by table (a value of None drops the key)."""
    out = copy.deepcopy(base)
    for key, value in changes.items():
        if value is None:
            out.pop(key, None)
        elif isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merged(out[key], value)
        else:
            out[key] = copy.deepcopy(value)
    return out


def _wideband(archetype: str, gain_db: float) -> dict:
    """A 100 Hz to 5 kHz channel: edges more than an octave apart, so the planner takes the
    highpass + lowpass path (Winder 2002, ch. 6); the op-amp and the gain steer which
    lowpass and highpass circuits it picks."""
    return {"passband": {"low_hz": 100.0, "high_hz": 5000.0, "max_loss_db": 0.5,
                         "gain_db": gain_db},
            "stopband": [{"freq_hz": 20.0, "min_loss_db": 40.0},
                         {"freq_hz": 20000.0, "min_loss_db": 30.0}],
            "input": {"max_vpk": 0.2, "source_ohms": 200.0, "tone": [
                {"freq_hz": 50.0, "vpk": 0.5}]},
            "supply": {"rails_v": [-12.0, 12.0]},
            "amplifier": {"archetype": archetype}}


# name -> (scenario file or None, the document or the changes laid over the scenario)
CASES: dict[str, tuple[str | None, dict]] = {
    "ultrasonic_ranging": ("ultrasonic_ranging", {}),
    "lockin_mains": ("lockin_mains", {}),
    "audio_band": ("audio_band", {}),
    # Sections of Q near 80 and 160 at 10 kHz: a 3 MHz op-amp builds none of them (the
    # planner says so); a 200 MHz one makes the multi-op-amp circuits feasible.
    "tone_detector": ("tone_detector", {"amplifier": {"archetype": "fast"}}),
    # Chebyshev, 10 dB, a 200 MHz op-amp that drives 150 Ohm: the highpass + lowpass path,
    # where a multiple-feedback highpass's capacitive input is no longer too heavy a load.
    "wideband_mix": (None, _merged(_wideband("fast", 10.0),
                                   {"design": {"family": "chebyshev"}})),
    # A 200 MHz op-amp that drives 150 Ohm from a 50 Ohm source: the planner takes a
    # multiple-feedback highpass, whose capacitive input a slower class could not drive.
    "wideband_fast": (None, {
        "passband": {"low_hz": 100.0, "high_hz": 8000.0, "max_loss_db": 1.0, "gain_db": 0.0},
        "stopband": [{"freq_hz": 20.0, "min_loss_db": 30.0},
                     {"freq_hz": 40000.0, "min_loss_db": 30.0}],
        "input": {"max_vpk": 0.2, "source_ohms": 50.0}, "supply": {"rails_v": [-12.0, 12.0]},
        "amplifier": {"archetype": "fast"}, "design": {"family": "chebyshev"}}),
    # Noise: resistor noise only (the op-amp noiseless), 40 degC, over two decades so that
    # ngspice's 200-a-decade sweep falls on the tool's 401-point noise grid.
    "ultrasonic_quiet": ("ultrasonic_ranging", {
        "amplifier": {"noise_v_per_rthz": 0.0, "noise_a_per_rthz": 0.0},
        "noise": {"band_hz": [4000.0, 400000.0]}}),
    # Noise: op-amp e_n and i_n with the 1/f corner at 2 kHz, above the 1.1 kHz band centre.
    "lockin_flicker": ("lockin_mains", {
        "amplifier": {"noise_corner_hz": 2000.0},
        "noise": {"band_hz": [200.0, 20000.0]}}),
    # Finite GBW: one bandpass section (prototype order 1: one real pole, one section at
    # f0 with Q near f0 / BW = 40) with a general-purpose 3 MHz op-amp.
    "single_high_q": (None, {
        "passband": {"center_hz": 2000.0, "bandwidth_hz": 50.0, "gain_db": 6.0},
        "design": {"family": "butterworth", "order": 1, "resistor_series": "E192"},
        "input": {"max_vpk": 0.1, "source_ohms": 0.0},
        "supply": {"rails_v": [-12.0, 12.0]},
        "amplifier": {"archetype": "general"}}),
}


def requirement(name: str):
    scenario, doc = CASES[name]
    if scenario is None:
        return spec_from_dict(copy.deepcopy(doc), path=f"<{name}>")
    path = SCENARIOS / f"{scenario}.toml"
    base = tomllib.loads(path.read_text())
    return spec_from_dict(_merged(base, doc), path=str(path))


@functools.lru_cache(maxsize=None)
def planned(name: str):
    """The plan of case `name` (planned once per test session: a plan is frozen data; an
    unchanged bundled scenario's is the session's shared one, tests/conftest.py)."""
    scenario, changes = CASES[name]
    p = planned_scenario(scenario) if scenario is not None and not changes \
        else plan(requirement(name))
    assert p.chosen.chain is not None, f"{name}: no buildable chain: {p.chosen.checks}"
    return p


@functools.lru_cache(maxsize=None)
def out_files(name: str) -> dict[str, bytes]:
    """The --out files of case `name`, the plan's JSON included."""
    scenario, changes = CASES[name]
    if scenario is not None and not changes:
        return scenario_case(scenario).files
    p = planned(name)
    return plan_files(p, dumps(plan_to_dict(p)))


def chain_cir(name: str) -> str:
    """The case's chain.cir with any trimmer set where its part has the designed value: the
    circuit the tool's analyses describe (the file itself gives trimmers at mid-travel)."""
    deck = out_files(name)["chain.cir"].decode()
    tuning = planned(name).chosen.tuning
    return deck if tuning is None else set_trimmers(deck, design_settings(tuning.plan))


def opamp_nets(chain) -> list[str]:
    """Every op-amp output net of the chain (the JSON nodes[]), as ngspice names them."""
    return [n.lower() for n in chain.output_nets]


# --- 1. response -------------------------------------------------------------------------------

AC_CASES = ["ultrasonic_ranging", "lockin_mains", "audio_band", "tone_detector",
            "wideband_mix", "wideband_fast"]
AC_POINTS_PER_DECADE = 2000
# Bandpass and wideband (lowpass, highpass) kinds; the gain stages are plain amplifiers.
KINDS_WITH_CHOICE = ("bandpass", "lowpass", "highpass")


@pytest.mark.slow
def test_planned_chains_mix_single_and_multi_opamp_bandpass_circuits():
    """The planned chains below hold both a single-op-amp and a multi-op-amp bandpass circuit
    to ngspice, and lowpass and highpass sections; every topology of the library is held to
    ngspice on its own in ``test_every_topology_matches_ngspice`` (the planner's choices move
    as it improves, the library does not)."""
    used: dict[str, set[str]] = {}
    for name in AC_CASES:
        for st in planned(name).chosen.chain.stages:
            used.setdefault(st.kind, set()).add(st.topology)
    assert {"bandpass", "lowpass", "highpass"} <= set(used), used
    bandpass_opamps = {topology(name).OPAMPS for name in used["bandpass"]}
    assert min(bandpass_opamps) == 1 and max(bandpass_opamps) > 1, used["bandpass"]


# One section per topology: f0, Q and |gain| it builds comfortably.
TOPOLOGY_SECTIONS = {
    "mfb_bandpass": ("bandpass", 2000.0, 5.0, 3.0),
    "sallen_key_bandpass": ("bandpass", 2000.0, 3.0, 2.0),
    "dual_amp_bandpass": ("bandpass", 2000.0, 20.0, 2.0),
    "tow_thomas": ("bandpass", 2000.0, 20.0, 4.0),
    "state_variable": ("bandpass", 2000.0, 20.0, 4.0),
    "sallen_key_lowpass": ("lowpass", 2000.0, 1.2, 1.0),
    "mfb_lowpass": ("lowpass", 2000.0, 0.9, 2.0),
    "sallen_key_highpass": ("highpass", 2000.0, 1.2, 1.0),
    "mfb_highpass": ("highpass", 2000.0, 0.9, 2.0),
    "noninverting_gain": ("gain", 0.0, 0.0, 3.0),
    "inverting_gain": ("gain", 0.0, 0.0, 3.0),
}


@pytest.mark.parametrize("name", sorted(TOPOLOGY_SECTIONS))
def test_every_topology_matches_ngspice(name, tmp_path):
    """Each topology's element list, designed for one section with a finite-GBW op-amp (the
    'general' archetype, 3 MHz) and written by the deck writer as a one-stage chain behind a
    600 Ohm source: ngspice-39's AC magnitude within 0.05 dB of the tool's response wherever
    it is within 40 dB of its peak (the same tolerance and reason as the chains above)."""
    from bandwright.chain import Stage, build_chain
    from bandwright.parts.catalogue import archetype
    from bandwright.sections.section import Section
    kind, f0, q, gain = TOPOLOGY_SECTIONS[name]
    topo = topology(name)
    sec = Section(kind=kind, f0_hz=f0, q=q, gain=gain)
    model = archetype("general")
    parts = topo.design(sec, c_farads=10e-9)
    els = tuple(topo.elements(parts, model))
    fig = section_figures(els, kind=kind, near_hz=f0 or 1.0)
    chain = build_chain([Stage(position=1, topology=name, target=sec,
                               components=tuple(parts.items()), elements=els, model=model,
                               built=fig)], source_ohms=600.0)
    deck = spice_deck(flatten(chain), source_ohms=600.0, temperature_c=25.0, title=name)
    sweep = run_ngspice_ac(deck, 20.0, 200_000.0, 400, ["out"], tmp_path)
    ours = net_transfers(chain, sweep["frequency"])["out"]
    our_db = 20 * np.log10(np.abs(ours))
    ng_db = 20 * np.log10(np.abs(sweep["out"]))
    near = our_db >= our_db.max() - 40.0
    worst = np.max(np.abs(ng_db - our_db)[near])
    assert worst < 0.05, f"{name}: ngspice and the tool differ by {worst:.3g} dB"


@pytest.mark.parametrize("name", AC_CASES)
@pytest.mark.slow
def test_response_matches_ngspice_ac(name, tmp_path):
    """|V(out)| of chain.cir in ngspice-39 against the tool's response, at exactly ngspice's
    frequencies: ``ac dec`` 2000 a decade over the whole report grid, and ``ac lin`` 2001
    points over the passband and one bandwidth (at most half the lower edge) either side:
    a narrow band gets few points of a log sweep.

    Tolerance 0.05 dB wherever the chain is within 40 dB of its peak: the passband and the
    skirts, where the mask and the node levels are decided (a stopband point is a floor,
    read by the mask check at its own frequency). Both solve the same element list (the
    deck carries 12 significant digits); ngspice prints 9 (1e-7 dB), and its printed
    frequencies are rounded to 9 digits too, which moves |H| by at most 2Q x 5e-9
    relative. The chains here agree to about 1e-5 dB, so anything near 0.05 dB is a
    genuine difference between the circuit the tool analyses and the deck it writes.
    """
    p = planned(name)
    d, req = p.chosen, p.requirement
    response = d.analyses.response
    # The reported response is the chain transfer to "out" on the report grid.
    np.testing.assert_allclose(net_transfers(d.chain, response.freq_hz)["out"], response.h,
                               rtol=1e-12)
    deck = chain_cir(name)
    lo, hi = float(response.freq_hz[0]), float(response.freq_hz[-1])
    pb = req.passband
    (tmp_path / "dec").mkdir()
    (tmp_path / "lin").mkdir()
    log_sweep = run_ngspice_ac(deck, lo, hi, AC_POINTS_PER_DECADE, ["out"], tmp_path / "dec")
    lin_sweep = run_ngspice_ac_lin(deck, max(pb.low_hz - pb.bandwidth_hz, pb.low_hz / 2),
                                   pb.high_hz + pb.bandwidth_hz, 2001, ["out"],
                                   tmp_path / "lin")
    f = np.concatenate([log_sweep["frequency"], lin_sweep["frequency"]])
    ng = np.concatenate([log_sweep["out"], lin_sweep["out"]])
    ours = net_transfers(d.chain, f)["out"]
    ng_db = 20 * np.log10(np.abs(ng))
    our_db = 20 * np.log10(np.abs(ours))
    near = our_db >= our_db.max() - 40.0
    assert np.count_nonzero(near & (f >= pb.low_hz) & (f <= pb.high_hz)) >= 200
    worst = np.max(np.abs(ng_db - our_db)[near])
    assert worst < 0.05, f"{name}: ngspice and the tool differ by {worst:.3g} dB"


# --- 2. node levels ----------------------------------------------------------------------------

@pytest.mark.parametrize("name", ["lockin_mains"] + [
    pytest.param(n, marks=pytest.mark.slow)
    for n in ("ultrasonic_ranging", "wideband_mix", "tone_detector")])
def test_node_levels_match_ngspice(name, tmp_path):
    """``nodes[].peak_vpk`` from ngspice's node voltages: for every op-amp output n,
    peak = max_vpk * max over the passband |V(n)| + sum over tones vpk * |V(n, f_tone)|
    (docs/methods.md, "Headroom / slew"), VIN being 1 V open circuit behind RSRC as the
    requirement's amplitudes are.

    ngspice runs one-point sweeps at the tool's passband grid (``passband_grid``: 101 log
    points, both edges) and at every tone, and a dense sweep of the passband (``ac dec``
    20000 a decade, plus both edges).

    Tolerances. On the tool's own frequencies both solve the same element list: the deck
    carries 12 significant digits and ngspice prints 9, so they agree to rel 1e-6 (measured:
    about 1e-9). The dense sweep samples the same curve on other frequencies: the two
    maxima differ by the sampling error of either grid (the tool reads the peak on its 101
    points, no interpolation; at Q 160 a 20000-a-decade step still misses the top by 2e-5),
    at most 0.11 % in these chains, hence 0.5 %.
    """
    p = planned(name)
    d, req = p.chosen, p.requirement
    nets = opamp_nets(d.chain)
    assert {n.net.lower() for n in d.analyses.nodes} == set(nets)
    pb = passband_grid(req)
    tone_f = np.array([t.freq_hz for t in req.input.tones])
    tone_v = np.array([t.vpk for t in req.input.tones])
    ng = run_ngspice_ac_points(chain_cir(name), np.concatenate([pb, tone_f]), nets, tmp_path)
    (tmp_path / "dense").mkdir()
    dense = run_ngspice_ac(chain_cir(name), float(pb[0]), float(pb[-1]), 20000, nets,
                           tmp_path / "dense")
    for node in d.analyses.nodes:
        v = np.abs(ng[node.net.lower()])
        tones = float(np.sum(tone_v * v[pb.size:]))
        peak_grid = req.input.max_vpk * float(v[: pb.size].max()) + tones
        assert peak_grid == pytest.approx(node.peak_vpk, rel=1e-6), \
            (node.net, peak_grid / node.peak_vpk - 1)
        # The in-band share alone, against the JSON signal_vpk (same grid).
        signal = req.input.max_vpk * v[: pb.size].max()
        assert signal == pytest.approx(node.signal_vpk, rel=1e-6), \
            (node.net, signal / node.signal_vpk - 1)
        inside = (dense["frequency"] >= pb[0]) & (dense["frequency"] <= pb[-1])
        sweep_max = max(float(np.abs(dense[node.net.lower()])[inside].max()),
                        float(v[0]), float(v[pb.size - 1]))
        peak_dense = req.input.max_vpk * sweep_max + tones
        assert peak_dense == pytest.approx(node.peak_vpk, rel=0.005), \
            (node.net, peak_dense / node.peak_vpk - 1)


# --- 3. noise ----------------------------------------------------------------------------------

NOISE_POINTS_PER_DECADE = 200
# Noise density on the same frequencies: the generators' constants differ from the tool's in
# the 7th digit and ngspice prints 9 (about 1e-6 dB); the margin is for float round-off in
# the diode-pair generators' scaling.
NOISE_DENSITY_DB = 0.001
# Integrated noise: ngspice's power-law segments against the tool's trapezoids on the same
# 401 points, which differ by the curvature of the density between points (measured: 0.012 dB
# over a band whose density falls by 60 dB).
NOISE_INTEGRAL_DB = 0.03


@pytest.mark.parametrize("name, opamp_noise", [("ultrasonic_quiet", False),
                                               ("lockin_flicker", True)])
@pytest.mark.slow
def test_noise_matches_ngspice(name, opamp_noise, tmp_path):
    """``.noise v(out) vin dec 200 lo hi`` on chain.cir against ``analyses.noise``.

    ngspice's noise of the resistors is its own 4kT/R at the deck's ``.temp`` (40 degC in
    the resistor-only case); the op-amp e_n, i_n and 1/f corner come from the deck's
    diode-pair generators (report/spice.py), a model the test_spice tests hold to closed
    forms. The band spans two decades, so ngspice's 200-a-decade points are the tool's
    401-point noise grid (to the 9 printed digits) and the densities compare point by
    point.

    Tolerances. The densities are compared on the same frequencies (the grid match is
    asserted first): NOISE_DENSITY_DB, set by the generators' physical constants, which
    differ from the tool's in the seventh digit, and by ngspice's 9 printed digits. The
    integral is the one place where the two read between the points -- ngspice integrates
    by power-law segments, the tool by the trapezoid rule -- hence NOISE_INTEGRAL_DB.
    """
    p = planned(name)
    d, req = p.chosen, p.requirement
    noise = d.analyses.noise
    models = {st.model for st in d.chain.stages}
    if opamp_noise:
        assert all(m.noise_v_per_rthz > 0 and m.noise_corner_hz > req.passband.center_hz
                   for m in models)
    else:
        assert all(m.noise_v_per_rthz == 0 and m.noise_a_per_rthz == 0 for m in models)
    lo, hi = noise.band_hz
    ng = run_ngspice_noise(chain_cir(name), lo, hi, NOISE_POINTS_PER_DECADE, tmp_path)
    # ngspice's points are the tool's grid.
    assert ng.freq_hz.size == noise.freq_hz.size
    np.testing.assert_allclose(ng.freq_hz, noise.freq_hz, rtol=1e-8)
    diff_db = 20 * np.log10(ng.onoise_v_per_rthz / noise.output_v_per_rthz)
    assert np.max(np.abs(diff_db)) < NOISE_DENSITY_DB, \
        f"density differs by up to {np.max(np.abs(diff_db)):.3g} dB"
    # The same at ngspice's printed frequencies, recomputed (no reliance on the grid match).
    ours = chain_noise(d.chain, ng.freq_hz, band_hz=noise.band_hz,
                       temperature_c=req.environment.temperature_c,
                       transfer_out=net_transfers(d.chain, ng.freq_hz)["out"])
    again_db = 20 * np.log10(ng.onoise_v_per_rthz / ours.output_v_per_rthz)
    assert np.max(np.abs(again_db)) < NOISE_DENSITY_DB, np.max(np.abs(again_db))
    total_db = 20 * math.log10(ng.onoise_total_vrms / noise.integrated_vrms)
    assert abs(total_db) < NOISE_INTEGRAL_DB, f"integrated noise differs by {total_db:.3g} dB"
    if opamp_noise:
        # The comparison has teeth for the op-amp model: inside the passband the op-amps
        # give over half the output noise power, carrying the 1/f factor 1 + fc/f >= 2.6
        # (fc = 2 kHz, f <= 1.21 kHz). A generator without its 1/f part, on either side,
        # would move the density there by more than 10 log10(1 - 0.5 (1 - 1/2.6)) = -1.6 dB.
        opamps = {e.name for e in flatten(d.chain) if e.kind == "opamp"}
        psd = noise.contributions_psd
        from_opamps = sum(v for k, v in psd.items() if k.split()[0] in opamps)
        inside = (noise.freq_hz >= req.passband.low_hz) & (noise.freq_hz <= req.passband.high_hz)
        share = from_opamps[inside] / noise.output_v_per_rthz[inside] ** 2
        assert np.min(share) > 0.5


# --- 4. finite GBW of one high-Q section -------------------------------------------------------

def _peak_and_q(freq_hz: np.ndarray, h: np.ndarray) -> tuple[float, float]:
    """f0 as the frequency of the |H| peak, Q as f0 over the -3 dB width, from a fine
    linear sweep: a parabola through the three points around the peak (in |H|^2), linear
    interpolation of |H|^2 at each half-power crossing. For a second-order bandpass both
    are exact: the peak is at f0 and the half-power points are f0/Q apart (Schaumann &
    Van Valkenburg 2001, ch. 4 [mem])."""
    p2 = np.abs(h) ** 2
    k = int(np.argmax(p2))
    assert 0 < k < p2.size - 1, "the peak is at the sweep's edge"
    y0, y1, y2 = p2[k - 1 : k + 2]
    step = freq_hz[k + 1] - freq_hz[k]
    offset = 0.5 * (y0 - y2) / (y0 - 2 * y1 + y2)
    f_peak = freq_hz[k] + offset * step
    peak = y1 - 0.25 * (y0 - y2) * offset
    half = peak / 2
    below = np.flatnonzero(p2[:k] < half)
    above = np.flatnonzero(p2[k:] < half) + k
    assert below.size and above.size, "the sweep does not reach the -3 dB points"
    i, j = below[-1], above[0]
    f_lo = np.interp(half, [p2[i], p2[i + 1]], [freq_hz[i], freq_hz[i + 1]])
    f_hi = np.interp(half, [p2[j], p2[j - 1]], [freq_hz[j], freq_hz[j - 1]])
    return float(f_peak), float(f_peak / (f_hi - f_lo))


def _measure(deck: str, f0_hz: float, q: float, net: str, tmp_path: Path
             ) -> tuple[float, float]:
    """ngspice's f0 and Q of `net` on a 40001-point linear sweep of f0 (1 +- 4/Q): steps of
    f0/(5000 Q), so that the interpolated crossings sit within 1e-6 of the bandwidth."""
    tmp_path.mkdir(parents=True, exist_ok=True)
    span = 4.0 * f0_hz / q
    ng = run_ngspice_ac_lin(deck, f0_hz - span, f0_hz + span, 40001, [net], tmp_path)
    return _peak_and_q(ng["frequency"], ng[net])


@pytest.mark.slow
def test_single_high_q_section_in_ngspice(tmp_path):
    """A high-Q section as built (parts rounded, GBW predistorted) measured in ngspice lands
    within 1 % of the target f0 and 5 % of its Q -- the planner's own tolerances for a
    built section (circuits/assign.py) -- and the shift ngspice sees between that element
    list with its 3 MHz op-amp and with the op-amp made ideal (GBW x 1e6) agrees with the
    shift ``section_figures`` predicts from the transfer's poles, within 10 % of the shift.

    The 10 %: ``section_figures`` reads f0 = |p| and Q = |p| / 2|Re p| of the pole pair,
    ngspice's sweep reads the |H| peak and the -3 dB width, which are exactly these for a
    second-order bandpass but are moved by the op-amps' own poles (at GBW over the noise
    gain, far above f0); that second-order difference stays well under a tenth of the
    first-order GBW shift measured here.
    """
    p = planned("single_high_q")
    d, req = p.chosen, p.requirement
    assert len(d.chain.stages) == 1
    st = d.chain.stages[0]
    assert st.kind == "bandpass"
    # One real prototype pole: the section sits at the centre with Q = (f0/BW) / alpha0
    # (docs/methods.md, "Poles -> sections"); the Butterworth pole of order 1 designed for an
    # edge loss a is alpha0 = 1/eps = 1/sqrt(10^(a/10) - 1), a being the candidate's ripple
    # (the planner keeps part of max_loss_db in reserve for the parts).
    f0_target, q_target = st.target.f0_hz, st.target.q
    alpha0 = 1 / math.sqrt(10 ** (d.candidate.ripple_db / 10) - 1)
    assert f0_target == pytest.approx(req.passband.center_hz, rel=1e-9)
    assert q_target == pytest.approx(
        req.passband.center_hz / req.passband.bandwidth_hz / alpha0, rel=1e-9)
    assert q_target > 30

    f0_ng, q_ng = _measure(chain_cir("single_high_q"), f0_target, q_target, "out",
                           tmp_path / "chain")
    assert f0_ng == pytest.approx(f0_target, rel=0.01)
    assert q_ng == pytest.approx(q_target, rel=0.05)

    model = st.model
    ideal_model = replace(model, gbw_hz=model.gbw_hz * 1e6)
    finite = st.elements
    ideal = tuple(replace(e, model=ideal_model) if e.kind == "opamp" else e for e in finite)

    def deck(elements):
        return spice_deck(elements, source_ohms=0.0, temperature_c=25.0,
                          title=f"{st.topology} section")

    f_fin, q_fin = _measure(deck(finite), f0_target, q_target, "out", tmp_path / "finite")
    f_ide, q_ide = _measure(deck(ideal), f0_target, q_target, "out", tmp_path / "ideal")
    fig_fin = section_figures(finite, kind="bandpass", near_hz=f0_target)
    fig_ide = section_figures(ideal, kind="bandpass", near_hz=f0_target)
    shift_f_ng, shift_f = f_fin / f_ide - 1, fig_fin.f0_hz / fig_ide.f0_hz - 1
    shift_q_ng, shift_q = q_fin / q_ide - 1, fig_fin.q / fig_ide.q - 1
    # The shift must be large enough to be measured: the sweep resolves ~1e-6.
    assert max(abs(shift_f), abs(shift_q)) > 1e-3, (shift_f, shift_q)
    assert shift_f_ng == pytest.approx(shift_f, abs=0.1 * abs(shift_f) + 2e-6)
    assert shift_q_ng == pytest.approx(shift_q, abs=0.1 * abs(shift_q) + 2e-6)


# --- 5. the audit round trip -------------------------------------------------------------------

# The plan runs a Monte Carlo `yield` check on its chosen design (planner.with_yield); the
# audit runs none (see test_audit_runs_the_yield_check_as_the_plan_does).
PLAN_ONLY_CHECKS = ("yield",)


def _check_key(c: dict) -> tuple:
    return (c["id"], c["stage"], c["net"], c["status"])


def _assert_close(a, b, what) -> None:
    if b is None:
        assert a is None, what
    else:
        assert a == pytest.approx(b, rel=1e-6, abs=1e-12), what


def _assert_same_figures(plan_doc: dict, audit_doc: dict, *,
                         skip_ids: tuple[str, ...] = PLAN_ONLY_CHECKS) -> None:
    """Response, stage figures and checks of two JSON objects: check ids, stages, nets and
    statuses equal; response, each stage's built f0, Q and gain, check values and limits
    within 1e-6 relative."""
    pr, ar = plan_doc["response"], audit_doc["response"]
    np.testing.assert_allclose(ar["freq_hz"], pr["freq_hz"], rtol=1e-9)
    np.testing.assert_allclose(10 ** (np.array(ar["gain_db"]) / 20),
                               10 ** (np.array(pr["gain_db"]) / 20), rtol=1e-6)
    np.testing.assert_allclose(np.radians(ar["phase_deg"]), np.radians(pr["phase_deg"]),
                               rtol=0, atol=1e-6)
    assert [s["topology"] for s in audit_doc["stages"]] == \
        [s["topology"] for s in plan_doc["stages"]]
    for a, b in zip(audit_doc["stages"], plan_doc["stages"]):
        for field in ("f0_hz", "q", "gain"):
            _assert_close(a["built"][field], b["built"][field],
                          (b["position"], b["topology"], "built", field))
    plan_checks = [c for c in plan_doc["checks"] if c["id"] not in skip_ids]
    audit_checks = [c for c in audit_doc["checks"] if c["id"] not in skip_ids]
    assert [_check_key(c) for c in audit_checks] == [_check_key(c) for c in plan_checks]
    for a, b in zip(audit_checks, plan_checks):
        for field in ("value", "limit"):
            _assert_close(a[field], b[field], (b["id"], b["stage"], b["net"], field))


def _audit_json(files: dict[str, bytes], folder: Path) -> dict:
    """Write the --out files to `folder`, run ``python -m bandwright audit chain.toml
    --json`` there and return its JSON object."""
    for fname, data in files.items():
        (folder / fname).write_bytes(data)
    r = subprocess.run([sys.executable, "-m", "bandwright", "audit",
                        str(folder / "chain.toml"), "--json"],
                       capture_output=True, text=True, cwd=folder)
    doc = json.loads(r.stdout)
    assert r.returncode == exit_code_of(doc), r.stderr
    return doc


@pytest.mark.parametrize("name", ["audio_band"])
def test_audit_of_written_chain_reproduces_the_plan(name, tmp_path):
    """plan_files written to a folder, then ``python -m bandwright audit chain.toml
    --json``: the response, every stage's built f0, Q and gain, and every check (id, stage,
    net, status; value and limit) equal the plan's JSON within 1e-6 relative (docs/design.md:
    chain.toml is written "so that `bandwright audit DIR/chain.toml` reproduces the plan's
    figures"). The parts in chain.toml are series values written to 6 digits, so they are
    the planned parts exactly, and 1e-6 leaves room only for the last digits of the same
    arithmetic done twice."""
    files = out_files(name)
    audit_doc = _audit_json(files, tmp_path)
    plan_doc = json.loads(files["plan.json"])
    _assert_same_figures(plan_doc, audit_doc)
    # The audit read back exactly the planned parts.
    assert [s["components"] for s in audit_doc["stages"]] == \
        [s["components"] for s in plan_doc["stages"]]


@pytest.mark.slow
def test_cli_plan_out_then_audit(scenario_cli_out):
    """The same round trip as a user runs it: ``bandwright plan SPEC --json --out DIR`` and
    ``bandwright audit DIR/chain.toml --json`` (scenario lockin_mains; the plan command is
    the session's shared run, tests/conftest.py)."""
    rp, out = scenario_cli_out("lockin_mains")
    plan_doc = json.loads(rp.stdout)
    assert rp.returncode == exit_code_of(plan_doc), rp.stderr
    assert json.loads((out / "plan.json").read_text()) == plan_doc
    ra = subprocess.run([sys.executable, "-m", "bandwright", "audit", str(out / "chain.toml"),
                         "--json"], capture_output=True, text=True)
    assert ra.returncode == rp.returncode, ra.stderr
    _assert_same_figures(plan_doc, json.loads(ra.stdout))


def test_audit_runs_the_yield_check_as_the_plan_does(tmp_path):
    """docs/design.md lists `yield` among the check ids and says an audit is a plan whose
    stages came from a file: the audited chain.toml should carry the plan's yield check
    (the Monte Carlo draws are seeded, so the same chain gives the same share)."""
    files = out_files("lockin_mains")
    _assert_same_figures(json.loads(files["plan.json"]), _audit_json(files, tmp_path),
                         skip_ids=())


def test_audit_reproduces_a_plan_that_absorbed_the_source(tmp_path):
    """ultrasonic_ranging: a 1 kOhm source ahead of a Tow-Thomas input resistor of under
    2 kOhm, which the planner makes part of the first stage. The audit of its chain.toml
    must report the same first-stage figures and gbw check as the plan."""
    files = out_files("ultrasonic_ranging")
    _assert_same_figures(json.loads(files["plan.json"]), _audit_json(files, tmp_path))


# --- 6. SNR and dynamic range from ngspice's own figures ---------------------------------------

def test_snr_and_dynamic_range_from_ngspice(tmp_path):
    """The report's SNR and dynamic range rebuilt from ngspice-39 alone: the in-band output
    amplitude from its AC solution at the passband grid (max_vpk x max |V(out)|, rms = /√2),
    every net's worst-case peak (signal plus tones) against the swing limit for the input
    scale at which the first net clips, and the output noise from its ``.noise`` integral.
    SNR = 20 log10(signal rms / noise rms); dynamic range = the same at the clipping scale
    (definitions in docs/methods.md). Tolerance NOISE_INTEGRAL_DB: the integral's own (see
    the noise test); the amplitudes come from the same grid and agree to rel 1e-6."""
    name = "lockin_flicker"
    p = planned(name)
    d, req = p.chosen, p.requirement
    an = d.analyses
    nets = opamp_nets(d.chain)
    band = [float(f) for f in passband_grid(req)]
    tones = [t.freq_hz for t in req.input.tones]
    (tmp_path / "ac").mkdir()
    pts = run_ngspice_ac_points(chain_cir(name), band + tones, nets, tmp_path / "ac")
    nb = len(band)
    limit = {n.net: n.limit_vpk for n in an.nodes}
    scale = math.inf
    for net in nets:
        mag = np.abs(pts[net])
        peak = req.input.max_vpk * mag[:nb].max() + sum(
            t.vpk * m for t, m in zip(req.input.tones, mag[nb:]))
        scale = min(scale, limit[net] / peak)
    signal_rms = req.input.max_vpk * np.abs(pts["out"][:nb]).max() / math.sqrt(2)
    lo, hi = an.noise.band_hz
    (tmp_path / "noise").mkdir()
    ng = run_ngspice_noise(chain_cir(name), lo, hi, NOISE_POINTS_PER_DECADE, tmp_path / "noise")
    snr = 20 * math.log10(signal_rms / ng.onoise_total_vrms)
    dr = 20 * math.log10(scale * signal_rms / ng.onoise_total_vrms)
    assert an.snr_db == pytest.approx(snr, abs=NOISE_INTEGRAL_DB), an.snr_db - snr
    assert an.dynamic_range_db == pytest.approx(dr, abs=NOISE_INTEGRAL_DB)
    assert an.clip_scale == pytest.approx(scale, rel=1e-6), an.clip_scale / scale - 1
