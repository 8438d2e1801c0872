"""The requirement's part tolerances reach the topology verdicts of a plan.

A Sallen-Key bandpass (R1 = R2 = R, R3 = 2R, C1 = C2, gain K) has Q = 1/(3 - K) and, for
Q >= 1, resistor Q-sensitivities whose magnitudes sum to 8Q - 7/2 and capacitor ones to
Q - 1 (closed form; docs/methods.md, "Topology facts"; derived with sympy in
tests/circuits/test_sallen_key_bandpass.py). With every part off by its tolerance in the
worst direction Q moves by (8Q - 7/2) t_R + (Q - 1) t_C to first order (Schaumann & Van
Valkenburg 2001, ch. 3 [mem]); the topology is rejected beyond 50 %. At Q 3 that is 23 %
with 1 % parts and 113 % with 5 % parts: the same section must be accepted in the first
plan and rejected, with that figure, in the second.
"""

from __future__ import annotations

import re

import pytest

from bandwright.inputs import spec_from_dict
from bandwright.planner import plan


def _requirement(pct: float) -> dict:
    # One bandpass section at 1 kHz (prototype order 1) whose Q is near 3.
    return {"passband": {"center_hz": 1000.0, "bandwidth_hz": 240.0, "max_loss_db": 3.0103},
            "design": {"family": "butterworth", "order": 1},
            "input": {"max_vpk": 0.1}, "amplifier": {"archetype": "general"},
            "tolerance": {"resistor_pct": pct, "capacitor_pct": pct, "samples": 10}}


def _sallen_key_verdict(pct: float) -> tuple[float, str]:
    p = plan(spec_from_dict(_requirement(pct)))
    (a,) = [a for a in p.chosen.assignments if a.section.kind == "bandpass"]
    why = dict(a.rejected).get("sallen_key_bandpass", "")
    return a.section.q, why


def test_five_percent_parts_reject_the_sallen_key_bandpass_by_its_closed_form():
    q, why_1 = _sallen_key_verdict(1.0)
    assert 2.5 < q < 3.5, q
    shift_1 = (8 * q - 3.5) * 0.01 + (q - 1) * 0.01
    assert shift_1 < 0.5 and "Q may move" not in why_1, why_1
    q5, why_5 = _sallen_key_verdict(5.0)
    assert q5 == pytest.approx(q, rel=1e-12)
    shift_5 = (8 * q - 3.5) * 0.05 + (q - 1) * 0.05
    assert shift_5 > 0.5
    moved = re.search(r"with 5 % parts Q may move by (\d+) %", why_5)
    assert moved, why_5
    assert int(moved.group(1)) == round(100 * shift_5)
    # The Q the reason quotes as the most this section keeps at 5 %: (0.5 + 4.5 t) / 9t.
    kept = re.search(r"keeps up to Q ([\d.]+)", why_5)
    assert kept and float(kept.group(1)) == pytest.approx((0.5 + 4.5 * 0.05) / (9 * 0.05),
                                                          rel=1e-2)
