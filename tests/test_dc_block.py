"""DC blocks on a single supply (``chain.blocking``, ``circuits.dc_block``): where the
planner places them, their corner against the RC-highpass closed form, and the written deck
against ngspice-39 `op` and `ac`."""

from __future__ import annotations

import math

import numpy as np
import pytest

from bandwright.analysis import analyse
from bandwright.audit import audit
from bandwright.chain.blocking import BLOCK_SHARE, CORNER_RATIO, place_dc_blocks
from bandwright.chain.graph import net_transfers
from bandwright.inputs.loader import load_spec
from bandwright.planner import plan
from bandwright.report.files import _deck, chain_toml

from ngspice_runner import ngspice_available
from spice_tools import run_ngspice_ac_points, run_ngspice_op

needs_ngspice = pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")

# A sensor at 1.0 V on a 0/5 V board with its reference at 2.5 V, into a DC-coupled gain of
# 10 and a lowpass: 1.5 V below the reference times 10 puts the gain stage 15 V below it.
CHAIN = """\
[passband]
low_hz = 20
high_hz = 2000
max_loss_db = 1
gain_db = 20
[input]
max_vpk = 0.05
dc_v = 1.0
[supply]
rails_v = [0, 5]
reference_v = 2.5
[amplifier]
archetype = "rail-to-rail"
[tolerance]
samples = 20
[[stage]]
topology = "noninverting_gain"
parts = { Rf = "9k", Rg = "1k" }
[[stage]]
topology = "sallen_key_lowpass"
parts = { R1 = "10k", R2 = "10k", C1 = "11.3n", C2 = "5.6n" }
"""


@pytest.fixture(scope="module")
def unblocked(tmp_path_factory):
    p = tmp_path_factory.mktemp("dcb") / "chain.toml"
    p.write_text(CHAIN)
    return audit(p)


@pytest.fixture(scope="module")
def blocked(unblocked):
    chain = place_dc_blocks(unblocked.chain, unblocked.requirement)
    return chain, analyse(chain, unblocked.requirement)


def test_without_the_block_the_gain_stage_sits_in_a_rail(unblocked):
    """10 × (1.0 - 2.5) V from the reference: the gain stage's ideal output is -12.5 V, far
    below the 0 V rail; the headroom check fails."""
    node = unblocked.analyses.nodes[0]
    assert node.dc_v == pytest.approx(2.5 + 10 * (1.0 - 2.5), abs=0.01)
    assert any(c.id == "headroom" and c.status == "fail" for c in unblocked.checks)


def test_block_puts_the_bias_back_at_the_reference(unblocked, blocked):
    chain, an = blocked
    first = chain.stages[0]
    assert first.dc_block is not None and first.dc_block.r_ohms is not None  # + input
    assert chain.stages[1].dc_block is None  # its input now sits at the reference
    room = 2.5 - first.model.swing_to_rail_v
    for n in an.nodes:
        assert abs(n.dc_v - an.bias.reference_dc_v) < BLOCK_SHARE * room, n.net
    assert all(n.limit_vpk > n.peak_vpk for n in an.nodes)


def test_block_corner_matches_the_rc_highpass_closed_form(blocked):
    """A non-inverting input draws no current, so the block's C drives its shunt R alone:
    f = 1 / (2π R C) (first-order RC highpass, Horowitz & Hill 2015, §1.7.1 [mem]); C is
    the next E12 value above the one that puts f at the band's low edge / 20."""
    chain, an = blocked
    b = chain.stages[0].dc_block
    f = 1 / (2 * math.pi * b.r_ohms * b.c_farads)
    assert b.corner_hz == pytest.approx(f, rel=1e-6)
    assert b.corner_hz <= 20 / CORNER_RATIO
    assert b.corner_hz > 20 / CORNER_RATIO / 1.25  # E12 steps are at most 22 % apart
    # The response of the blocked stage alone: |H| = 1/sqrt(1 + (fc/f)^2) at the corner.
    from bandwright.circuits.nodal import ac_solve
    h = ac_solve(chain.stages[0].elements, np.array([f, 100 * f])).at("out")
    assert abs(h[0]) / abs(h[1]) == pytest.approx(1 / math.sqrt(2), rel=1e-3)


@needs_ngspice
def test_blocked_deck_matches_ngspice_op_and_ac(unblocked, blocked, tmp_path):
    """ngspice-39 `op` on chain.cir equals nodes[].dc_v within 1 mV and `ac` equals the
    nodal response within 0.05 dB at the block's corner, the band edges and between."""
    chain, an = blocked
    deck = _deck(chain, unblocked.requirement, "blocked")
    assert "CB_s1" in deck and "RB_s1" in deck
    op = run_ngspice_op(deck, tmp_path)
    for n in an.nodes:
        assert op[n.net] == pytest.approx(n.dc_v, abs=1e-3), n.net
    freqs = [chain.stages[0].dc_block.corner_hz, 5.0, 20.0, 200.0, 2000.0]
    nets = [n.net for n in an.nodes]
    sp = run_ngspice_ac_points(deck, freqs, nets, tmp_path)
    ours = net_transfers(chain, np.array(freqs))
    for net in nets:
        db = 20 * np.log10(np.abs(sp[net]) / np.abs(ours[net]))
        assert np.max(np.abs(db)) < 0.05, net


def test_chain_file_round_trip_keeps_the_block(unblocked, blocked, tmp_path):
    chain, an = blocked
    text = chain_toml(chain, unblocked.requirement, title="round trip")
    assert "dc_block = { C = " in text
    p = tmp_path / "again.toml"
    p.write_text(text)
    again = audit(p)
    b0, b1 = chain.stages[0].dc_block, again.chain.stages[0].dc_block
    assert b1 is not None
    assert b1.c_farads == pytest.approx(b0.c_farads) and b1.r_ohms == pytest.approx(b0.r_ohms)
    assert b1.corner_hz == pytest.approx(b0.corner_hz, rel=1e-9)
    for n0, n1 in zip(an.nodes, again.analyses.nodes):
        assert n1.dc_v == pytest.approx(n0.dc_v, abs=1e-9)


def test_planner_blocks_a_dc_coupled_first_stage(tmp_path):
    """A planned chain whose first section is a lowpass with gain: the planner adds the block
    (an inverting input: no shunt), the bias sits at the reference, the mask still passes,
    and the JSON stage entry carries it."""
    p = tmp_path / "s.toml"
    p.write_text(SPEC)
    result = plan(load_spec(p))
    d = result.chosen
    blocks = [st.dc_block for st in d.chain.stages if st.dc_block is not None]
    assert blocks and "from the reference" in blocks[0].reason
    for n in d.analyses.nodes:
        assert n.dc_v == pytest.approx(2.5, abs=0.05), n.net
    assert all(c.status == "pass" for c in d.checks if c.id in ("mask", "headroom"))
    from bandwright.report.json_out import _stage_dict
    entry = _stage_dict(next(st for st in d.chain.stages if st.dc_block), d.chain)
    assert set(entry["dc_block"]) == {"c_farads", "r_ohms", "corner_hz", "reason"}


SPEC = """\
[passband]
low_hz = 20
high_hz = 2000
max_loss_db = 1.0
gain_db = 20
[[stopband]]
freq_hz = 0.5
min_loss_db = 6
[[stopband]]
freq_hz = 20000
min_loss_db = 6
[input]
max_vpk = 0.05
dc_v = 1.0
[supply]
rails_v = [0, 5]
reference_v = 2.5
[amplifier]
archetype = "rail-to-rail"
[tolerance]
samples = 50
"""


def test_planner_blocks_a_dc_source_on_split_rails(tmp_path):
    """Split rails with a source at 1 V DC: the same DC-coupled first stage gets a block, and
    every output then sits near 0 V (the split-rail reference)."""
    p = tmp_path / "s.toml"
    p.write_text(SPEC.replace("rails_v = [0, 5]\nreference_v = 2.5", "rails_v = [-5, 5]"))
    d = plan(load_spec(p)).chosen
    assert any(st.dc_block is not None for st in d.chain.stages)
    for n in d.analyses.nodes:
        assert abs(n.dc_v) < 0.05, n.net
