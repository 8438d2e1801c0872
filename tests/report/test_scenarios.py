"""Every bundled scenario plans cleanly: exit 0, or the expected 1 with its reason."""

from __future__ import annotations

import pytest

from bandwright.checks.base import worst_status

from report_cases import SCENARIOS, case

# Scenario → (expected exit status, the check that fails and a word of its message).
EXPECTED = {
    "acoustic_emission": (0, None, None),
    "audio_band": (0, None, None),
    "geophone_channel": (0, None, None),
    "lockin_mains": (0, None, None),
    "machine_vibration": (0, None, None),
    "ultrasonic_ranging": (0, None, None),
    # One 3.3 V rail: every output biased at the 1.65 V reference, every + input in range.
    "piezo_pump_3v3": (0, None, None),
    # Staggered sections of Q 90 to 185: not made in production untrimmed; trimmed, they are.
    "tone_detector": (0, None, None),
    # The same chain with ordinary parts and a 0.25 dB gain window: no section can trim its
    # gain without undoing f0 or Q, so even after tuning about half the boards fail.
    "tone_detector_tight_gain": (1, "yield", "after tuning"),
}


def test_every_scenario_has_an_expectation():
    assert sorted(p.stem for p in SCENARIOS) == sorted(EXPECTED)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_scenario_plans_as_expected(name):
    status, check_id, word = EXPECTED[name]
    p = case(name).plan
    assert p.chosen.chain is not None, name
    got = 1 if worst_status(p.checks) == "fail" else 0
    failing = [c for c in p.checks if c.status == "fail"]
    assert got == status, [c.message for c in failing]
    if check_id is not None:
        assert {c.id for c in failing} == {check_id}
        assert all(word in c.message for c in failing)
    # Every plan meets its mask as built, whatever else it shows.
    assert all(c.status != "fail" for c in p.checks if c.id == "mask")


def test_single_supply_scenario_sits_at_its_reference():
    """The 3.3 V scenario: every op-amp output's bias point within 20 mV of the 1.65 V
    reference (the source is biased there too, so only op-amp offsets move it), and the
    reference network is in the plan."""
    p = case("piezo_pump_3v3").plan
    an = p.chosen.analyses
    assert all(abs(n.dc_v - 1.65) < 0.02 for n in an.nodes)
    assert an.bias.reference.single and an.bias.reference.elements
    assert any(c.id == "input_range" for c in p.checks)
