"""A plan with a converter: the stopband points it adds, the equal margins of the gain
distribution against the converter's full scale, the outputs."""

from __future__ import annotations

import json
import math

import pytest

from bandwright.chain.graph import CONVERTER_NET
from bandwright.inputs import load_spec
from bandwright.planner import plan
from bandwright.report.json_out import dumps, plan_to_dict

SPEC = """
[passband]
center_hz = 40000
bandwidth_hz = 4000
max_loss_db = 1
gain_db = 10
[[stopband]]
freq_hz = 30000
min_loss_db = 30
[input]
max_vpk = 0.5
[[input.tone]]
freq_hz = 160000
vpk = 2.0
[supply]
rails_v = [-5, 5]
[amplifier]
archetype = "wideband"
[tolerance]
samples = 50
[converter]
sample_rate_hz = 200000
bits = 12
full_scale_vpp = 4.096
"""


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    path = tmp_path_factory.mktemp("conv") / "spec.toml"
    path.write_text(SPEC)
    return plan(load_spec(path))


@pytest.mark.slow
def test_planner_adds_the_stopband_points_the_converter_needs(planned):
    """Hand computation [calc]: limit = 1 LSB = 20 log10(2^-11) = -66.227 dBFS; gain
    10 dB = 3.1623. The image fs − f_high = 200 k − 42.05 k = 157.95 kHz of 0.5 Vpk content
    needs 20 log10(0.5·3.1623/2.048) + 66.227 = 63.98 → 64.0 dB; the 2 Vpk tone at 160 kHz
    (→ 40 kHz) needs 20 log10(2·3.1623/2.048) + 66.227 = 76.02 → 76.1 dB (rounded up)."""
    req = planned.requirement
    added = [p for p in req.stopband if p.added]
    assert [p.freq_hz for p in added] == pytest.approx(
        [200000 - req.passband.high_hz, 160000], abs=1e-6)
    assert added[0].freq_hz == pytest.approx(157950.03, abs=0.01)
    assert [p.min_loss_db for p in added] == pytest.approx([64.0, 76.1], abs=1e-9)
    assert "tone[0]" in added[1].added
    # The built chain holds them (mask checks) and the folds stay below 1 LSB.
    mask = [c for c in planned.checks if c.id == "mask" and "160 kHz" in c.message]
    assert mask and all(c.status == "pass" for c in mask)
    alias = [c for c in planned.checks if c.id == "alias"]
    assert len(alias) == 2 and all(c.status == "pass" for c in alias)
    assert alias[0].limit == pytest.approx(-66.227, abs=1e-3)


def test_internal_nets_sit_as_far_inside_their_swing_as_the_peak_inside_full_scale(planned):
    """Equal maxima with a lower limit at the last node (Schaumann & Van Valkenburg 2001,
    ch. 6 [mem]: every node reaches its limit at the same input): the op-amp nets' margins
    equal the converter's within the section model's error (0.6 dB: the ordering uses
    unit-gain shapes, the chain its built parts, whose series values move a section's gain
    by up to half a series step)."""
    an = planned.chosen.analyses
    adc = next(n for n in an.nodes if n.net == CONVERTER_NET)
    # Full scale around the signal reference, less the output's DC offset (op-amp offset
    # and bias current through the DC-coupled stages): the room the bias leaves.
    assert adc.limit_vpk == pytest.approx(2.048 - abs(adc.dc_v))
    # The sections' outputs (a dual-amplifier section's inner op-amp is not scaled).
    internal = [n for n in an.nodes if n.net.endswith("_out")]
    assert internal
    # The gain split equalises the AC swing: each net's peak against the swing around the
    # reference as the converter's against its full scale (the DC offsets each net carries
    # come on top and are judged by the headroom check).
    from bandwright.analysis.levels import swing_limit_vpk
    swing = swing_limit_vpk(planned.requirement.supply, planned.model.swing_to_rail_v)
    ac_adc = 20 * math.log10(2.048 / adc.peak_vpk)
    for n in internal:
        assert 20 * math.log10(swing / n.peak_vpk) == pytest.approx(ac_adc, abs=0.6), n.net
    # The peak itself is the asked gain's: 0.5 V × 3.162 (+ the tone's remnant).
    assert adc.peak_vpk == pytest.approx(0.5 * 10 ** 0.5, rel=0.06)


def test_json_converter_block(planned):
    doc = json.loads(dumps(plan_to_dict(planned)))
    conv = doc["converter"]
    assert set(conv) >= {"full_scale_vpk", "peak_vpk", "margin_db", "snr_db",
                         "dynamic_range_db", "dominant_noise", "folds"}
    assert conv["full_scale_vpk"] == pytest.approx(2.048)
    dc = next(n["dc_v"] for n in doc["nodes"] if n["net"] == CONVERTER_NET)
    assert conv["margin_db"] == pytest.approx(
        20 * math.log10((2.048 - abs(dc)) / conv["peak_vpk"]), abs=1e-9)
    assert [f["source"] for f in conv["folds"]] == ["tone[0]", "noise"]
    assert set(conv["folds"][0]) == {"source", "source_hz", "alias_hz", "level_dbfs",
                                     "limit_dbfs"}
    assert conv["folds"][0]["alias_hz"] == pytest.approx(40000)
    assert any(n["net"] == CONVERTER_NET for n in doc["nodes"])
    assert doc["noise"]["band_hz"][1] == pytest.approx(100000)


def test_audit_of_the_written_chain_reproduces_the_converter_figures(planned, tmp_path):
    """chain.toml carries [converter] and the added stopband points: the audit of it gives
    the plan's converter block to float precision."""
    from bandwright.audit import audit
    from bandwright.report.files import chain_toml
    from bandwright.report.json_out import converter_dict
    path = tmp_path / "chain.toml"
    path.write_text(chain_toml(planned.chosen.chain, planned.requirement, title="t"))
    assert "# added by the planner" in path.read_text()
    a = audit(path)
    got, want = converter_dict(a.analyses.converter), converter_dict(
        planned.chosen.analyses.converter)
    for key in ("peak_vpk", "margin_db", "snr_db", "dynamic_range_db", "total_vrms"):
        assert got[key] == pytest.approx(want[key], rel=1e-9), key
    assert got["folds"] == want["folds"]
