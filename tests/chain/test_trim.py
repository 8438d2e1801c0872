"""The chain trim keeps the whole mask: judged by ngspice-39 on the deck `--out` writes.

Case B (tests/cases/skirt_trim.toml): a Butterworth order-3 bandpass, 890.9–1122.5 Hz, E24
resistors, a bipolar precision-class op-amp, stopband points at 500 Hz and 2 kHz needing
41 dB. Its rounded parts leave the passband loss at 1.10 dB (1 dB allowed) with 41.6 and
41.8 dB at the stopband points; a trim scored by the passband alone reached 0.35 dB in band
and gave up 40.9 / 40.7 dB at the stopband points, and the planner then chose a 7-op-amp
Chebyshev chain. The outside judge is ngspice-39 (Debian package): `.ac` of the written
chain.cir at each stopband point and across the passband grid.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from bandwright.analysis.grid import passband_grid
from bandwright.inputs.loader import load_spec
from bandwright.report.tuning import set_trimmers

from spice_tools import run_ngspice_ac_points

CASE_B = Path(__file__).resolve().parent.parent / "cases" / "skirt_trim.toml"


def _plan(tmp_path: Path) -> tuple[dict, Path]:
    out = tmp_path / "out"
    proc = subprocess.run([sys.executable, "-m", "bandwright", "plan", str(CASE_B), "--json",
                           "--out", str(out)], capture_output=True, text=True,
                          timeout=600)
    assert proc.returncode in (0, 1), proc.stderr
    return json.loads(proc.stdout), out


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    return _plan(tmp_path_factory.mktemp("skirt"))


@pytest.mark.ngspice
@pytest.mark.slow
def test_trimmed_chain_keeps_both_stopband_points_in_ngspice(planned, tmp_path):
    """The chosen chain as built and trimmed, read by ngspice-39 from its own deck: at least
    41 dB below the 20 dB reference at 500 Hz and 2 kHz, and no more than 1 dB of passband
    loss on the passband grid (each within 0.01 dB, far above the deck's agreement with the
    analysis, about 1e-6 dB)."""
    doc, out = planned
    assert doc["prototype"]["family"] == "butterworth" and doc["prototype"]["order"] == 3
    req = load_spec(CASE_B)
    pb = passband_grid(req)
    stops = [p.freq_hz for p in req.stopband]
    deck = (out / "chain.cir").read_text()
    if doc.get("tuning"):
        # The deck gives trimmers at mid-travel: set each where its part has the designed
        # value, the chain the plan describes.
        comps = {st["position"]: st["components"] for st in doc["stages"]}
        deck = set_trimmers(deck, {f'{s["part"]}_s{s["stage"]}':
                                   comps[s["stage"]][s["trims"]] - s["fixed_ohms"]
                                   for s in doc["tuning"]["steps"]})
    spice = run_ngspice_ac_points(deck, list(stops) + list(pb), ["out"], tmp_path)
    gain_db = 20 * np.log10(np.abs(spice["out"]))
    loss_stop = req.passband.gain_db - gain_db[:len(stops)]
    for loss, point in zip(loss_stop, req.stopband):
        assert loss >= point.min_loss_db - 0.01, (point.freq_hz, loss)
    loss_pb = req.passband.gain_db - gain_db[len(stops):]
    assert loss_pb.max() <= req.passband.max_loss_db + 0.01
    assert abs(gain_db[len(stops):].max() - req.passband.gain_db) <= req.passband.gain_tolerance_db


def test_the_planner_keeps_the_butterworth_chain(planned):
    """With the trim keeping the stopband, the Butterworth chain (a follower and three
    bandpass sections) passes its mask checks and wins over the Chebyshev chain, which needs
    more op-amps; its trimmed stages move f0 by less than 3 % (rounding, not a redesign: each
    stage's actual f0 within 3 % of its asked f0). Which circuit builds each section depends
    on how its E24 parts round, so the test holds the family and the op-amp count against
    the runner-up rather than the topologies."""
    doc, _ = planned
    assert doc["prototype"]["family"] == "butterworth"
    assert [s["kind"] for s in doc["stages"]] == ["gain"] + ["bandpass"] * 3
    masks = [c for c in doc["checks"] if c["id"] == "mask"]
    assert len(masks) == 4 and all(c["status"] == "pass" for c in masks)
    for s in doc["stages"]:
        if s["kind"] != "gain":
            assert abs(s["built"]["f0_hz"] / s["target"]["f0_hz"] - 1) < 0.03
    assert any("trimmed for the chain's mask" in s["why"] for s in doc["stages"])


def test_a_trim_beyond_the_stated_share_is_called_a_redesign():
    """A trim is rounding only while it moves the stage's f0 by less than the stated share.
    Stage 3 of case B's chain with its capacitors made 6 % large (f0 about 3 % low, beyond
    what rounding leaves): the trim that brings the chain back inside its mask moves f0 by
    more than a 0.1 % share and is then marked a redesign, with its f0 move; with a 50 %
    share the same move is rounding. The f0 move is checked against the stage's own pole
    pair (numpy.roots of its denominator), not the trim's figure."""
    from bandwright.analysis.mask import trim_judge
    from bandwright.chain import build_chain
    from bandwright.chain.stage import with_parts
    from bandwright.chain.trim import trim_stage
    from bandwright.circuits.figures import transfer_polynomials
    from bandwright.planner import plan

    req = load_spec(CASE_B)
    chain = plan(req, family="butterworth").chosen.chain
    k = next(i for i, st in enumerate(chain.stages) if st.kind == "bandpass")
    st = chain.stages[k]
    off = {n: v * (1.06 if n.startswith("C") else 1.0) for n, v in st.components}
    stages = list(chain.stages)
    stages[k] = with_parts(st, off, source_ohms=chain.source_ohms if k == 0 else 0.0)
    bad = build_chain(stages, source_ohms=chain.source_ohms)
    judge = trim_judge(bad, req)

    def pole_hz(elements) -> float:
        _, den = transfer_polynomials(elements)
        roots = np.roots(np.trim_zeros(den, "b")[::-1])
        pair = roots[np.argsort(np.abs(roots.imag))[-1]]
        return abs(pair) / (2 * np.pi)

    tight = trim_stage(bad, k, freq_hz=judge.freq_hz, judge=judge,
                       r_series=req.design.resistor_series,
                       c_series=req.design.capacitor_series, redesign_share=0.001)
    loose = trim_stage(bad, k, freq_hz=judge.freq_hz, judge=judge,
                       r_series=req.design.resistor_series,
                       c_series=req.design.capacitor_series, redesign_share=0.5)
    assert tight is not None and loose is not None
    before = pole_hz(bad.stages[k].elements)
    after = pole_hz(with_parts(bad.stages[k], tight.components, source_ohms=0.0).elements)
    moved = after / before - 1
    assert abs(moved) > 0.001
    assert tight.redesign and not loose.redesign
    assert tight.f0_shift == pytest.approx(moved, rel=0.05, abs=1e-4)
