"""Single-supply plans: the op-amp's input common-mode range, and the advice when a chain
cannot fit its rails (each fix planned again to show it works)."""

from __future__ import annotations

import re

import pytest

from bandwright.audit import audit
from bandwright.inputs.loader import load_spec
from bandwright.planner import plan

FOLLOWER = """\
[input]
max_vpk = 1.2
dc_v = 2.5
[supply]
rails_v = [0, 5]
[amplifier]
archetype = "{arch}"
[[stage]]
topology = "noninverting_gain"
parts = {{ Rf = "1k", Rg = "1M" }}
"""


@pytest.mark.parametrize("arch, ok", [("general", False), ("rail-to-rail", True)])
def test_non_inverting_input_outside_the_common_mode_range_fails_with_figures(tmp_path, arch, ok):
    """The + input of a non-inverting stage carries the source itself: 2.5 V ± 1.2 Vpk spans
    1.3 … 3.7 V. A class whose inputs stop 1.5 V from each rail works from 1.5 V to 3.5 V on
    0/5 V and fails; a rail-to-rail input (0.1 V beyond each rail) passes (input common-mode
    range, common practice)."""
    p = tmp_path / "c.toml"
    p.write_text(FOLLOWER.format(arch=arch))
    a = audit(p)
    (chk,) = [c for c in a.checks if c.id == "input_range" and c.stage == 1]
    assert (chk.status == "pass") is ok
    assert "spans 1.3 … 3.7 V" in chk.message
    if not ok:
        assert "from 1.5 V to 3.5 V" in chk.message and "rail-to-rail" in chk.message
        assert chk.value == pytest.approx(-0.2, abs=1e-3)  # 3.5 - 3.7 V


SPEC = """\
[passband]
center_hz = 1000
bandwidth_hz = 300
gain_db = {gain}
[[stopband]]
freq_hz = 400
min_loss_db = 20
[input]
max_vpk = 0.05
[supply]
rails_v = [0, 3.3]
[amplifier]
archetype = "general"
[tolerance]
samples = 200
"""


def test_gain_that_cannot_fit_a_single_supply_says_why_and_plans_the_fixes(tmp_path):
    """28 dB on 50 mV is 1.26 Vpk at the output (1.27 as built); around the 1.65 V reference of 0/3.3 V a class
    that needs 1 V from each rail swings min(3.3 - 1.65, 1.65) - 1 = 0.65 Vpk (the swing
    formula of docs/methods.md, "Headroom / slew"). The message names both figures and the fixes;
    each fix, planned here again, passes every headroom check."""
    p = tmp_path / "s.toml"
    p.write_text(SPEC.format(gain=28))
    result = plan(load_spec(p))
    head = [c for c in result.chosen.checks if c.id == "headroom" and c.status == "fail"]
    assert head
    msg = next(c.message for c in head if "reference is" in c.message)
    assert "the swing around the 1.65 V reference is 650 mVpk on 0/3.3 V" in msg
    # Built gain a little above 28 dB: the chosen series parts decide the last digit.
    built_vpk = float(re.search(r"gain 28 dB puts (\d+\.\d+) Vpk on out", msg).group(1))
    assert 1.256 <= built_vpk <= 1.30
    assert "rail-to-rail class ('rail-to-rail', 20 mV from each rail) fits: planned" in msg
    # 2 (1.26 + 1) = 4.5 V: the next common supply is 5 V.
    assert "a 5 V supply (reference 2.5 V) fits: planned" in msg
    # The rail-to-rail fix, planned independently.
    q = tmp_path / "rr.toml"
    q.write_text(SPEC.format(gain=28).replace('"general"', '"rail-to-rail"'))
    rr = plan(load_spec(q)).chosen
    assert all(c.status != "fail" for c in rr.checks if c.id == "headroom")
