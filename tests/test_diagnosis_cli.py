"""`bandwright audit CHAIN.toml --measured SWEEP.csv` as a user runs it, on sweeps from the
ngspice bench (``diagnosis_bench``): exit 0 when the measured chain meets the mask, 1 when
it does not; one JSON object with the ``diagnosis`` keys of docs/design.md; the terminal and the
HTML report name the suspect.

The measured chain's mask verdict is read from the measured points themselves: here it is
held to the mask read directly off the ngspice response (numpy interpolation), an outside
reading of the same sweep.
"""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pytest

from bandwright import cli

import diagnosis_bench as bench

pytestmark = pytest.mark.ngspice

CHAIN = Path(__file__).resolve().parent / "reference" / "diagnosis" / \
    "three_stage_mfb_tow_thomas.toml"


def _sweep(tmp_path: Path, edit, *, seed: int) -> tuple[Path, np.ndarray, np.ndarray]:
    from bandwright.audit import audit
    a = audit(CHAIN)
    pb = a.requirement.passband
    f, h = bench.bench_sweep(edit(bench.chain_deck(a)), pb.low_hz / 3, pb.high_hz * 3, 400,
                             tmp_path)
    return bench.write_sweep(tmp_path / "sweep.csv", f, h, noise_db=0.05, seed=seed), f, h


def _run(*args) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli.main([str(a) for a in args])
    return code, out.getvalue(), err.getvalue()


def _ngspice_meets_mask(f: np.ndarray, h: np.ndarray) -> bool:
    """The mask of the chain file (3-6 kHz, 2 dB loss, 26 dB +-1; 40 dB down at 1.2 kHz,
    30 dB at 15 kHz), read straight off the ngspice response."""
    g = 20 * np.log10(np.abs(h))
    band = np.geomspace(3000, 6000, 101)
    gb = np.interp(np.log(band), np.log(f), g)
    stop = np.interp(np.log([1200.0, 15000.0]), np.log(f), g)
    return bool(26 - gb.min() <= 2.0 and abs(gb.max() - 26) <= 1.0
                and 26 - stop[0] >= 40 and 26 - stop[1] >= 30)


@pytest.mark.slow
def test_a_changed_capacitor_fails_the_mask_and_is_named_everywhere(tmp_path):
    sweep, f, h = _sweep(tmp_path, lambda d: bench.scale_part(d, 2, "C1", 1.08), seed=1)
    assert not _ngspice_meets_mask(f, h)
    code, text, err = _run("audit", CHAIN, "--measured", sweep, "--json")
    assert code == 1, err
    doc = json.loads(text)
    d = doc["diagnosis"]
    assert set(d) >= {"suspects", "stages", "residual_db", "unexplained"}
    s = d["suspects"][0]
    assert set(s) >= {"stage", "part", "change_pct", "confidence", "equivalent"}
    assert (s["stage"], s["part"]) == (2, "C1")
    assert abs(s["change_pct"] - 8.0) <= 2.0
    assert d["unexplained"] is False
    assert [st["position"] for st in d["stages"]] == [1, 2, 3]
    assert set(d["stages"][1]["fitted"]) == {"f0_hz", "q", "gain"}
    assert d["mask"]["pass"] is False
    assert s["fix"]["value"] == pytest.approx(3.3e-9)   # the file's C1, an E12 value
    assert s["fix"]["mask_pass"] is True
    out = tmp_path / "out"
    code, text, _ = _run("audit", CHAIN, "--measured", sweep, "--out", out)
    assert code == 1
    assert "Suspects" in text and "C1" in text and "+8.0 %" in text
    page = (out / "report.html").read_text()
    assert 'id="diagnosis"' in page and 'id="plot-diagnosis"' in page and "C1" in page
    assert (out / "diagnosis.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "diagnosis" in json.loads((out / "audit.json").read_text())


def test_the_unchanged_chain_meets_the_mask_and_exits_0(tmp_path):
    sweep, f, h = _sweep(tmp_path, lambda d: d, seed=2)
    assert _ngspice_meets_mask(f, h)
    code, text, err = _run("audit", CHAIN, "--measured", sweep, "--json")
    assert code == 0, err
    d = json.loads(text)["diagnosis"]
    assert d["suspects"] == [] and d["unexplained"] is False and d["mask"]["pass"] is True


def test_an_unexplained_sweep_says_so(tmp_path):
    sweep, _, _ = _sweep(tmp_path, lambda d: bench.bridge_stage(d, 2, last=False), seed=3)
    code, text, _ = _run("audit", CHAIN, "--measured", sweep)
    assert code == 1
    assert "no change of part values explains the measurement" in text
    assert "UNEXPLAINED" in text


def test_measured_is_an_audit_option_only():
    with pytest.raises(SystemExit) as exc:
        _run("plan", CHAIN, "--measured", "x.csv")
    assert exc.value.code == 2
