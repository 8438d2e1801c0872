"""Slew, load and input-referred noise of a chain against closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest

from bandwright.analysis import analyse
from bandwright.chain import Stage, build_chain
from bandwright.circuits import topology
from bandwright.circuits.figures import section_figures
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.inputs import spec_from_dict

IDEAL = OpAmp(name="ideal", gbw_hz=math.inf, dc_gain_db=300.0, slew_v_per_us=10.0,
              swing_to_rail_v=1.0, noise_v_per_rthz=5e-9, noise_a_per_rthz=0.0,
              noise_corner_hz=0.0, min_load_ohms=600.0)


def _stage(position: int, name: str, parts: dict, gain: float) -> Stage:
    els = tuple(topology(name).elements(parts, IDEAL))
    fig = section_figures(els, kind="gain", near_hz=1.0)
    return Stage(position=position, topology=name, target=Section("gain", 0.0, 0.0, gain),
                 components=tuple(parts.items()), elements=els, model=IDEAL, built=fig)


def _req(low_hz: float, high_hz: float, max_vpk: float, tones=()):
    return spec_from_dict({"passband": {"low_hz": low_hz, "high_hz": high_hz},
                           "design": {"order": 1},
                           "input": {"max_vpk": max_vpk, "tone": [
                               {"freq_hz": f, "vpk": v} for f, v in tones]},
                           "supply": {"rails_v": [-12, 12]}})


def test_slew_needed_matches_full_power_bandwidth_check_value():
    """docs/methods.md [calc] from SR = 2π f V (Franco 2015 [mem]): 1 Vpk at 40 kHz needs
    0.2513 V/µs. A follower passing a band whose top is 40 kHz, with 1 Vpk in; a tone adds
    its own 2π f V."""
    chain = build_chain([_stage(1, "noninverting_gain", {}, 1.0)])
    an = analyse(chain, _req(39_000.0, 40_000.0, 1.0), with_mask=False)
    (node,) = an.nodes
    assert node.slew_needed_v_per_us == pytest.approx(0.2513, abs=1e-4)
    an = analyse(chain, _req(39_000.0, 40_000.0, 1.0, tones=[(100_000.0, 0.5)]),
                 with_mask=False)
    assert an.nodes[0].slew_needed_v_per_us == pytest.approx(
        0.2513 + 2 * math.pi * 1e5 * 0.5 / 1e6, abs=1e-4)


def test_least_load_is_feedback_network_parallel_next_input():
    """An inverting stage (Rin 10 kΩ, Rf 20 kΩ) feeding another (Rin 5 kΩ): with the
    inverting inputs at virtual ground the first output drives Rf ∥ Rin2 = 4 kΩ, the last
    only its own Rf = 20 kΩ (Ohm's law; ideal op-amps)."""
    first = _stage(1, "inverting_gain", {"Rin": 10e3, "Rf": 20e3}, 2.0)
    second = _stage(2, "inverting_gain", {"Rin": 5e3, "Rf": 20e3}, 4.0)
    an = analyse(build_chain([first, second]), _req(900.0, 1100.0, 0.1), with_mask=False)
    loads = {n.net: n.load_ohms for n in an.nodes}
    assert loads["s1_out"] == pytest.approx(4e3, rel=1e-9)
    assert loads["out"] == pytest.approx(20e3, rel=1e-9)


def test_input_referred_noise_is_output_noise_over_gain():
    """A non-inverting gain of 3 (Rf 20 kΩ, Rg 10 kΩ), op-amp e_n 5 nV/√Hz: the feedback
    pair's thermal noise acts as 4kT(Rf ∥ Rg) at the inverting input (its Thévenin
    equivalent; Johnson/Nyquist 1928), so the output density is 3·√(e_n² + 4kT(Rf ∥ Rg))
    and the input-referred density, output over gain, √(e_n² + 4kT(Rf ∥ Rg))."""
    stage = _stage(1, "noninverting_gain", {"Rf": 20e3, "Rg": 10e3}, 3.0)
    an = analyse(build_chain([stage]), _req(900.0, 1100.0, 0.1), with_mask=False)
    k_t = 1.380649e-23 * (25.0 + 273.15)
    expected = math.sqrt(5e-9**2 + 4 * k_t * (20e3 * 10e3 / 30e3))
    np.testing.assert_allclose(an.noise.input_referred_v_per_rthz, expected, rtol=1e-6)
