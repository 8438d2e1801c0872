"""`[converter]` in the requirement and in chain.toml: values, defaults and the round trip."""

from __future__ import annotations

import math

import pytest

from bandwright.errors import SpecError
from bandwright.inputs import load_spec
from bandwright.inputs.chain_file import load_chain

SPEC = """
[passband]
center_hz = 40000
bandwidth_hz = 4000
max_loss_db = 1
gain_db = 10
[[stopband]]
freq_hz = 30000
min_loss_db = 30
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


def test_converter_values_and_defaults(write_spec):
    conv = load_spec(write_spec(SPEC)).converter
    assert conv.sample_rate_hz == 200000 and conv.bits == 12
    assert conv.full_scale_vpk == pytest.approx(2.048)
    # 1 LSB = FS / 2^N (common practice): 4.096 V / 4096 = 1 mV exactly.
    assert conv.lsb_v == pytest.approx(1e-3, rel=1e-12)
    # Default limit: a sine of 1 LSB amplitude, 20 log10(1 mV / 2.048 V) = -66.227 dB [calc].
    assert conv.alias_limit_dbfs == pytest.approx(20 * math.log10(1e-3 / 2.048), abs=1e-9)
    assert conv.alias_limit_dbfs == pytest.approx(-66.227, abs=1e-3)
    assert conv.headroom_db == 1.0 and conv.effective_bits == 12
    assert conv.input_ohms is None and conv.input_farads == 0.0


def test_no_converter_table_means_none(write_spec):
    text = SPEC.split("[converter]")[0]
    assert load_spec(write_spec(text)).converter is None


def test_full_scale_exactly_at_the_rails_is_accepted(write_spec):
    conv = load_spec(write_spec(SPEC.replace("4.096", "10"))).converter
    assert conv.full_scale_vpk == 5.0
    with pytest.raises(SpecError) as e:
        load_spec(write_spec(SPEC.replace("4.096", "10.01")))
    assert e.value.key == "converter.full_scale_vpp"


def test_sample_rate_at_exactly_twice_the_edge_is_accepted(write_spec):
    spec = load_spec(write_spec(SPEC))
    edge = spec.passband.high_hz
    ok = load_spec(write_spec(SPEC.replace("200000", repr(2 * edge))))
    assert ok.converter.sample_rate_hz == 2 * edge
    with pytest.raises(SpecError) as e:
        load_spec(write_spec(SPEC.replace("200000", repr(2 * edge * 0.999))))
    assert e.value.key == "converter.sample_rate_hz"


@pytest.mark.slow
def test_chain_toml_writes_the_converter_back(write_spec, tmp_path):
    from bandwright.report.files import chain_toml
    from bandwright.planner import plan
    text = SPEC + "enob = 10.5\ninput_ohms = 2000\ninput_farads = 15e-12\nheadroom_db = 2\n"
    req = load_spec(write_spec(text))
    p = plan(req)
    assert p.chosen.chain is not None
    out = tmp_path / "chain.toml"
    out.write_text(chain_toml(p.chosen.chain, p.requirement, title="t"))
    back, common, _ = load_chain(out)
    assert back.converter == req.converter
    assert common["converter"].enob == 10.5
