"""`[time]` limits: checks `time` and the ranking of candidates.

The figures the checks read are held to scipy.signal and ngspice in
tests/analysis/test_timedomain.py; here the trade fact that a Chebyshev bandpass rings and
overshoots more than a Butterworth one of the same band (common practice: its poles sit
nearer the jw axis) decides a plan once a limit asks for it.
"""

from __future__ import annotations

import copy
import functools

import pytest

from bandwright.inputs.loader import spec_from_dict
from bandwright.planner import plan

BASE = {"passband": {"center_hz": 10000.0, "bandwidth_hz": 2000.0, "max_loss_db": 1.0},
        "stopband": [{"freq_hz": 6000.0, "min_loss_db": 26.0}],
        "input": {"max_vpk": 0.5}, "supply": {"rails_v": [-12, 12]},
        "amplifier": {"archetype": "low-noise"},
        "tolerance": {"samples": 200, "min_yield": 0.05, "resistor_pct": 0.1,
                      "capacitor_pct": 1}}


@functools.lru_cache(maxsize=None)
def _plan(limit: float | None):
    doc = copy.deepcopy(BASE)
    if limit is not None:
        doc["time"] = {"max_overshoot_pct": limit}
    return plan(spec_from_dict(doc, path="<time limits>"))


def test_overshoot_limit_turns_the_choice_from_chebyshev_to_butterworth():
    """Without a limit the lower-order Chebyshev wins (fewer op-amps); with a 10 % envelope
    overshoot limit it fails the `time` check and the Butterworth wins, the why naming the
    limit."""
    free = _plan(None)
    assert free.chosen.candidate.family == "chebyshev"
    cheb_over = max(b.overshoot_pct for b in free.chosen.analyses.time.bursts)
    assert cheb_over > 10.0
    limited = _plan(10.0)
    assert limited.chosen.candidate.family == "butterworth"
    assert "[time] limit" in limited.why and "overshoot" in limited.why
    (check,) = [c for c in limited.chosen.checks if c.id == "time"]
    assert check.status == "pass" and check.value <= 10.0 and check.limit == 10.0
    (lost,) = [c for c in limited.designs[1].checks if c.id == "time"]
    assert lost.status == "fail" and lost.value == pytest.approx(cheb_over)


def test_no_time_check_without_a_limit():
    assert not [c for c in _plan(None).chosen.checks if c.id == "time"]


SCENARIOS = __import__("pathlib").Path(__file__).resolve().parents[1] / "scenarios"


def _scenario(name: str, **input_changes):
    if not input_changes:  # the unchanged scenario: the session's shared plan (conftest.py)
        from conftest import planned_scenario
        return planned_scenario(name)
    import tomllib
    doc = tomllib.loads((SCENARIOS / f"{name}.toml").read_text())
    doc["input"].update(input_changes)
    return plan(spec_from_dict(doc, path=name))


def test_onset_check_catches_the_mains_switch_on_of_the_lockin_scenario():
    """The lock-in scenario's 2 Vpk mains tone (and 0.6 Vpk third harmonic) switched on at its
    worst phase drives the output beyond its 13.5 V swing although the steady worst case is
    about 0.5 V (ngspice-39 .tran from rest gives the same peak within 2 %:
    tests/analysis/test_timedomain.py): the onset check warns, names the recovery time and
    what would help; the headroom check passes."""
    p = _scenario("lockin_mains")
    (onset,) = [c for c in p.chosen.checks if c.id == "onset" and c.net == "out"]
    (head,) = [c for c in p.chosen.checks if c.id == "headroom" and c.net == "out"]
    assert head.status == "pass" and head.value < 1.0
    # The limit is the room the output's bias point leaves inside the 13.5 V swing (its DC
    # offset from the op-amps' offset and bias currents is a fraction of a volt).
    (node,) = [n for n in p.chosen.analyses.nodes if n.net == "out"]
    assert onset.limit == pytest.approx(13.5 - abs(node.dc_v)) and abs(node.dc_v) < 0.5
    assert onset.status == "warn" and onset.value > onset.limit
    assert "back inside after" in onset.message and "highpass" in onset.message


def test_a_named_dc_step_that_clips_fails_the_onset_check():
    """A 5 V step of the source's DC level (input.dc_step_v) through the 34 dB lock-in chain
    drives the output past its swing: onset fails there, the event is the step."""
    p = _scenario("lockin_mains", dc_step_v=5.0)
    fails = [c for c in p.chosen.checks if c.id == "onset" and c.status == "fail"]
    assert fails and all("DC step" in c.message for c in fails)
    (o,) = [o for o in p.chosen.analyses.time.onset if o.net == "out"]
    assert o.event == "dc_step" and o.recovery_s > o.at_s


def test_json_time_domain_carries_the_figures_and_the_guide_names_every_key():
    """plan_to_dict's `time_domain` holds the analysis's figures (value check: the output's
    centre group delay equals its group_delay list at the centre frequency's neighbours'
    range), and docs/user-guide.md documents every key it writes."""
    from bandwright.report.json_out import plan_to_dict
    p = _scenario("lockin_mains")
    td = plan_to_dict(p)["time_domain"]
    gd = td["group_delay"]
    assert gd["min_s"] == pytest.approx(min(gd["delay_s"]))
    assert gd["spread_s"] == pytest.approx(max(gd["delay_s"]) - min(gd["delay_s"]))
    assert [b["freq_hz"] for b in td["bursts"]] == pytest.approx(
        [p.requirement.passband.center_hz, p.requirement.passband.low_hz,
         p.requirement.passband.high_hz])
    assert {o["net"] for o in td["onset"]} == set(p.chosen.chain.output_nets)
    guide = (SCENARIOS.parent / "docs" / "user-guide.md").read_text()
    keys = set(td) | set(gd) | set(td["bursts"][0]) | set(td["step"]) | set(td["onset"][0])
    missing = [k for k in keys if f"`{k}" not in guide and f", {k}" not in guide
               and f"`{k}`" not in guide and k not in guide]
    assert not missing, missing
