"""DC bias points: op-amp offsets and bias currents through the chain's element list, the
single-supply reference network, and the deck's operating point against ngspice-39 `op`."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from bandwright.audit import audit
from bandwright.circuits import TOPOLOGY_NAMES, topology
from bandwright.circuits.elements import capacitor, opamp, resistor
from bandwright.circuits.nodal import dc_solve, floating_nets
from bandwright.parts.catalogue import make_opamp
from bandwright.parts.notation import format_value
from bandwright.report.files import _deck
from bandwright.sections.section import Section

from ngspice_runner import ngspice_available
from spice_tools import run_ngspice_ac_points, run_ngspice_op

needs_ngspice = pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")

VOS, IB = 60e-6, 2e-9  # the precision-class figures of the biomedical review

BIO = """\
[passband]
low_hz = 0.5
high_hz = 5
max_loss_db = 3
gain_db = 25

[input]
max_vpk = 0.005
source_ohms = 1000
{dc}
[supply]
rails_v = {rails}

[amplifier]
archetype = "precision"
offset_v = 60e-6
bias_current_a = 2e-9

[[stage]]
topology = "mfb_highpass"
parts = {{ C1 = "1u", C2 = "1u", C3 = "1u", R1 = "30.1k", R2 = "3.32M" }}

[[stage]]
topology = "mfb_lowpass"
parts = {{ R1 = "10k", R2 = "178k", R3 = "10k", C1 = "1u", C2 = "47n" }}
"""


def _audit(tmp_path: Path, text: str, name: str = "chain.toml"):
    p = tmp_path / name
    p.write_text(text)
    return audit(p)


def test_inverting_stage_bias_matches_its_closed_form():
    """Franco 2015, §5.1-5.2 [mem]: an inverting amplifier with its + input grounded sits at
    V_out = V_os (1 + Rf/Rin) + I_b Rf (the bias current into the - pin flows through Rf)."""
    model = make_opamp(archetype="precision", overrides={"offset_v": VOS, "bias_current_a": IB,
                                                         "dc_gain_db": 200.0})
    rin, rf = 10e3, 178e3
    els = topology("inverting_gain").elements({"Rin": rin, "Rf": rf}, model)
    sol = dc_solve(els)
    want = VOS * (1 + rf / rin) + IB * rf
    # A0 = 200 dB: the finite-gain error (1 + Rf/Rin)/A0 ≈ 2e-9 sets the tolerance.
    assert sol.at("out") == pytest.approx(want, rel=1e-7)
    # Superposition: the offset's and the bias current's shares on their own.
    assert sol.at("out", "U1 offset") == pytest.approx(VOS * (1 + rf / rin), rel=1e-7)
    assert sol.at("out", "U1 bias-") == pytest.approx(IB * rf, rel=1e-7)


def test_biomedical_highpass_output_is_offset_plus_bias_current_times_r2(tmp_path):
    """The MFB highpass's - input has its only DC path through R2 = 3.32 MΩ (the caps are
    open): V = V_os + I_b R2 = 60 µV + 6.64 mV = 6.70 mV (Franco 2015, §5.2 [mem])."""
    a = _audit(tmp_path, BIO.format(dc="", rails="[-2.5, 2.5]"))
    b = a.analyses.bias.nets
    assert b["s1_out"].dc_v == pytest.approx(VOS + IB * 3.32e6, rel=1e-5)
    # The lowpass's DC gain -178k/10k carries it on: stage 1's error dominates the output.
    assert b["out"].dominant == 1
    assert abs(b["out"].dc_v) > 0.1
    head = next(c for c in a.checks if c.id == "headroom" and c.net == "out")
    assert "bias -117 mV" in head.message and "mostly stage 1's" in head.message
    node = next(n for n in a.analyses.nodes if n.net == "out")
    # Clipping is judged around the bias: the room below is the smaller one.
    assert node.limit_vpk == pytest.approx(node.dc_v - node.swing_low_v)
    assert node.lower_margin_v == pytest.approx(node.dc_v - node.peak_vpk - node.swing_low_v)


@needs_ngspice
@pytest.mark.parametrize("rails, dc", [("[-2.5, 2.5]", ""), ("[0, 5]", "dc_v = 0.3")])
def test_biomedical_chain_bias_matches_ngspice_op(tmp_path, rails, dc):
    """ngspice-39 `op` on the written deck (offset as a DC source, bias currents as DC
    current sources in the subcircuit; single supply with its rail and reference network)
    equals nodes[].dc_v within 1 mV (agreement is in fact at the µV level)."""
    a = _audit(tmp_path, BIO.format(dc=dc, rails=rails))
    deck = _deck(a.chain, a.requirement, "bio")
    op = run_ngspice_op(deck, tmp_path)
    for n in a.analyses.nodes:
        assert op[n.net] == pytest.approx(n.dc_v, abs=1e-3), n.net
        assert op[n.net] == pytest.approx(n.dc_v, abs=2e-5), n.net


def test_source_dc_level_pushing_a_dc_coupled_stage_into_a_rail_is_caught(tmp_path):
    """A 0.4 V source level through a gain-10 non-inverting stage puts its output at 4 V on
    ±5 V rails (swing limit ±4 V): bias + peak passes the upper limit, headroom fails."""
    text = """\
[input]
max_vpk = 0.05
dc_v = 0.4
[supply]
rails_v = [-5, 5]
[amplifier]
archetype = "general"
offset_v = 0
bias_current_a = 0
[[stage]]
topology = "noninverting_gain"
parts = { Rf = "9k", Rg = "1k" }
"""
    a = _audit(tmp_path, text)
    node = a.analyses.nodes[-1]
    assert node.dc_v == pytest.approx(4.0, rel=1e-4)  # 10 × 0.4 V
    head = next(c for c in a.checks if c.id == "headroom")
    assert head.status == "fail" and node.upper_margin_v < 0
    assert "bias +4 V" in head.message
    assert "block DC" in head.message and "moves it +4 V from the reference" in head.message


def test_input_with_only_capacitors_has_no_dc_return():
    """A follower fed through a series capacitor with no resistor to a reference: its +
    input has no DC path (common practice: every op-amp input needs a DC return)."""
    m = make_opamp(archetype="general")
    els = (capacitor("C1", "in", "p", 1e-6), opamp("U1", "p", "out", "out", m),
           resistor("RL", "out", "0", 10e3))
    assert floating_nets(els, held=["in"]) == ("p",)
    ok = els + (resistor("Rb", "p", "0", 1e6),)
    assert floating_nets(ok, held=["in"]) == ()


def _stage_parts(name: str) -> dict[str, float]:
    topo = topology(name)
    kind = topo.KIND
    if kind == "gain":
        sec = Section(kind="gain", f0_hz=0.0, q=0.0, gain=3.0)
        return topo.design(sec)
    q = 0.707 if kind != "bandpass" else 3.0
    gain = 1.0 if kind != "bandpass" else 2.0
    return topo.design(Section(kind=kind, f0_hz=1e3, q=q, gain=gain), c_farads=10e-9)


@needs_ngspice
@pytest.mark.parametrize("name", TOPOLOGY_NAMES)
def test_single_supply_deck_matches_bias_and_response(tmp_path, name):
    """Every topology on a 0/3.3 V supply (reference 1.65 V from its divider network):
    ngspice-39 `op` equals nodes[].dc_v within 1 mV and `ac` the analysed response within
    0.05 dB on the written deck."""
    parts = _stage_parts(name)
    body = ", ".join(f'{k} = "{format_value(v, "")}"' for k, v in parts.items()
                     if math.isfinite(v))
    text = f"""\
[input]
max_vpk = 0.05
source_ohms = 100
[supply]
rails_v = [0, 3.3]
[amplifier]
archetype = "general"
[[stage]]
topology = "{name}"
parts = {{ {body} }}
"""
    a = _audit(tmp_path, text)
    deck = _deck(a.chain, a.requirement, name)
    assert "VIN src 0 DC 0 AC 1" in deck and "VCC vcc 0 DC 3.3" in deck
    op = run_ngspice_op(deck, tmp_path)
    for n in a.analyses.nodes:
        assert op[n.net] == pytest.approx(n.dc_v, abs=1e-3), n.net
    if topology(name).KIND in ("bandpass", "highpass"):
        # No DC gain from the source to the output: it sits at the reference (offsets
        # aside), not at ground, whatever the source's level.
        assert a.analyses.nodes[-1].dc_v == pytest.approx(1.65, abs=0.05)
    f = a.analyses.response.freq_hz[::25]
    ac = run_ngspice_ac_points(deck, f, ["out"], tmp_path)
    want_db = a.analyses.response.gain_db[::25]
    got_db = 20 * np.log10(np.abs(ac["out"]))
    np.testing.assert_allclose(got_db, want_db, atol=0.05)
