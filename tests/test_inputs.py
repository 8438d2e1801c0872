"""Requirement loading: every error case exits 2 naming the file and the key, writes nothing."""

from __future__ import annotations


import pytest

from bandwright.errors import SpecError
from bandwright.inputs import load_spec

from conftest import SCENARIOS, run_cli

GOOD = """
[passband]
center_hz = 1000
bandwidth_hz = 100
max_loss_db = 1
gain_db = 20
[[stopband]]
freq_hz = 700
min_loss_db = 30
"""

# (name, file text, the key the message must name, a word the message must contain)
BAD = [
    ("no passband", "[design]\norder = 2\n", "passband", "missing"),
    ("wrong type", GOOD.replace("center_hz = 1000", 'center_hz = "1000"'),
     "passband.center_hz", "expected a number"),
    ("unit in number", GOOD.replace("center_hz = 1000", 'center_hz = "1kHz"'),
     "passband.center_hz", "did you mean 1000"),
    ("negative", GOOD.replace("bandwidth_hz = 100", "bandwidth_hz = -100"),
     "passband.bandwidth_hz", "> 0"),
    ("non-finite", GOOD.replace("center_hz = 1000", "center_hz = inf"),
     "passband.center_hz", "finite"),
    ("nan", GOOD.replace("gain_db = 20", "gain_db = nan"), "passband.gain_db", "finite"),
    ("low >= high", "[passband]\nlow_hz = 500\nhigh_hz = 400\n[design]\norder = 2\n",
     "passband.high_hz", "above"),
    ("both band forms", GOOD.replace("[passband]", "[passband]\nlow_hz = 900"), "passband",
     "not both"),
    ("stop inside band", GOOD.replace("freq_hz = 700", "freq_hz = 1010"), "stopband[0].freq_hz",
     "inside the passband"),
    ("max_loss zero", GOOD.replace("max_loss_db = 1", "max_loss_db = 0"),
     "passband.max_loss_db", "> 0"),
    ("min_loss <= max_loss", GOOD.replace("min_loss_db = 30", "min_loss_db = 0.5"),
     "stopband[0].min_loss_db", "exceed"),
    ("unknown family", GOOD + "[design]\nfamily = 'butterwurth'\n", "design.family",
     "did you mean 'butterworth'"),
    ("order zero", GOOD + "[design]\norder = 0\n", "design.order", "1 to 20"),
    ("order 21", GOOD + "[design]\norder = 21\n", "design.order", "1 to 20"),
    ("order not whole", GOOD + "[design]\norder = 2.5\n", "design.order", "whole number"),
    ("rails reversed", GOOD + "[supply]\nrails_v = [5, -5]\n", "supply.rails_v", "reversed"),
    ("rails not a pair", GOOD + "[supply]\nrails_v = [5]\n", "supply.rails_v", "two numbers"),
    ("unknown key", GOOD.replace("gain_db = 20", "gain_db = 20\nmax_los_db = 1"),
     "passband.max_los_db", "did you mean 'max_loss_db'"),
    ("unknown table", GOOD + "[suply]\nrails_v = [-5, 5]\n", "suply", "did you mean 'supply'"),
    ("bad series", GOOD + "[design]\nresistor_series = 'E95'\n", "design.resistor_series",
     "one of"),
    ("stopband not array", GOOD.replace("[[stopband]]", "[stopband]"), "stopband",
     "array of tables"),
    ("missing stop key", GOOD.replace("min_loss_db = 30", ""), "stopband[0].min_loss_db",
     "missing"),
    ("no order, no stop", "[passband]\ncenter_hz = 1000\nbandwidth_hz = 100\n", "stopband",
     "order"),
    ("negative tone", GOOD + "[input]\n[[input.tone]]\nfreq_hz = 50\nvpk = -1\n",
     "input.tone[0].vpk", ">= 0"),
    ("bad temperature", GOOD + "[environment]\ntemperature_c = -300\n",
     "environment.temperature_c", ">="),
    ("noise band reversed", GOOD + "[noise]\nband_hz = [2000, 100]\n", "noise.band_hz", "low"),
    ("amplifier zero gbw", GOOD + "[amplifier]\ngbw_hz = 0\n", "amplifier.gbw_hz", "> 0"),
    ("amplifier unknown key", GOOD + "[amplifier]\ngbw = 1e6\n", "amplifier.gbw",
     "did you mean 'gbw_hz'"),
]


@pytest.mark.parametrize("name,text,key,word", BAD, ids=[b[0] for b in BAD])
def test_bad_requirement_is_named_by_file_and_key(name, text, key, word, tmp_path):
    spec = tmp_path / "req.toml"
    spec.write_text(text)
    with pytest.raises(SpecError) as info:
        load_spec(spec)
    assert info.value.key == key
    assert str(spec) in str(info.value)
    assert word in str(info.value)


@pytest.mark.parametrize("name,text,key,word", BAD[:6] + BAD[-6:],
                         ids=[b[0] for b in BAD[:6] + BAD[-6:]])
@pytest.mark.slow
def test_bad_requirement_cli_exits_2_one_line_nothing_written(name, text, key, word, tmp_path):
    spec = tmp_path / "req.toml"
    spec.write_text(text)
    out = tmp_path / "out"
    r = run_cli("plan", spec, "--out", out)
    assert r.returncode == 2
    assert r.stdout == ""
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1, r.stderr
    assert key in lines[0] and "Traceback" not in r.stderr
    assert not out.exists()


def test_toml_syntax_error_gives_the_line(tmp_path):
    spec = tmp_path / "req.toml"
    spec.write_text("[passband]\ncenter_hz = 1000\nbandwidth_hz = = 5\n")
    r = run_cli("plan", spec)
    assert r.returncode == 2
    assert f"{spec}:3:" in r.stderr and "syntax" in r.stderr


def test_missing_file_exits_2(tmp_path):
    r = run_cli("plan", tmp_path / "nope.toml")
    assert r.returncode == 2 and "cannot read" in r.stderr


def test_edges_form_gives_geometric_centre(write_spec):
    req = load_spec(write_spec("[passband]\nlow_hz = 100\nhigh_hz = 400\n[design]\norder = 2\n"))
    assert req.passband.center_hz == pytest.approx(200.0)
    assert req.passband.bandwidth_hz == pytest.approx(300.0)


def test_every_scenario_loads():
    for path in sorted(SCENARIOS.glob("*.toml")):
        assert load_spec(path).passband.center_hz > 0
