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

from ngspice_runner import ngspice_available
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


@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
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


def test_the_planner_keeps_the_four_op_amp_butterworth_chain(planned):
    """With the trim keeping the stopband, the Butterworth chain (a follower and three
    multiple-feedback sections: four op-amps) passes its mask checks and wins over the
    Chebyshev chain of seven; its trimmed stages move f0 by less than 3 % (rounding, not a
    redesign: each stage's actual f0 within 3 % of its asked f0)."""
    doc, _ = planned
    assert [s["topology"] for s in doc["stages"]] == ["noninverting_gain"] + ["mfb_bandpass"] * 3
    masks = [c for c in doc["checks"] if c["id"] == "mask"]
    assert len(masks) == 4 and all(c["status"] == "pass" for c in masks)
    for s in doc["stages"]:
        if s["kind"] != "gain":
            assert abs(s["actual"]["f0_hz"] / s["f0_hz"] - 1) < 0.03
    assert any("trimmed for the chain's mask" in s["why"] for s in doc["stages"])


def test_a_trim_beyond_the_stated_share_is_called_a_redesign(monkeypatch):
    """With the share a trim may move f0 set to 0.1 %, the trim that case B's passband needs
    (about 1 % on two stages) is taken only as a redesign, and the stage's reasons say so
    with the figure: the planner does not pass it off as rounding."""
    from bandwright import planner
    from bandwright.chain import trim
    monkeypatch.setattr(trim, "REDESIGN_SHARE", 0.001)
    req = load_spec(CASE_B)
    p = planner.plan(req, family="butterworth")
    notes = [st.reason for st in p.chosen.chain.stages if "redesign" in st.reason]
    assert notes, [st.reason for st in p.chosen.chain.stages]
    moved = [float(n.split("f0 moved ")[1].split(" %")[0]) for n in notes]
    assert all(abs(m) > 0.1 for m in moved)
