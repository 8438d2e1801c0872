"""`plan --json` draws nothing, so it must not import the drawing stack (issue 14: import
cost). Checked in a fresh process through `sys.modules`; nothing here is timed."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from conftest import SCENARIOS

#: Modules only drawing and the HTML report need.
DRAWING_ONLY = ("matplotlib", "schemdraw", "PIL", "bandwright.report.plots",
                "bandwright.report.schematic", "bandwright.report.html")

_PROBE = """
import contextlib, io, json, sys
from bandwright.cli import main
with contextlib.redirect_stdout(io.StringIO()):
    code = main(["plan", sys.argv[1], "--json"])
print(json.dumps({"code": code, "modules": sorted(sys.modules)}))
"""


@pytest.mark.slow
def test_plan_json_imports_no_drawing_module():
    proc = subprocess.run([sys.executable, "-c", _PROBE, str(SCENARIOS / "tone_detector.toml")],
                          capture_output=True, text=True, check=True)
    out = json.loads(proc.stdout.strip().splitlines()[-1])
    assert out["code"] in (0, 1)  # the plan ran to its checks
    loaded = [m for m in out["modules"]
              if any(m == d or m.startswith(d + ".") for d in DRAWING_ONLY)]
    assert loaded == []
    # Nor numpy's masked arrays, which numpy's unique and percentile import and nothing
    # here needs (bandwright.arrays); this plan runs the Monte Carlo envelope and ordering.
    assert "numpy.ma" not in out["modules"]


@pytest.mark.slow
def test_plan_json_imports_no_terminal_stack():
    """`plan --json` off a terminal prints no report and no bar: rich (the terminal report
    and the progress bar) and the output-folder writers stay unloaded too."""
    proc = subprocess.run([sys.executable, "-c", _PROBE, str(SCENARIOS / "lockin_mains.toml")],
                          capture_output=True, text=True, check=True)
    modules = json.loads(proc.stdout.strip().splitlines()[-1])["modules"]
    terminal_only = ("rich", "bandwright.report.terminal", "bandwright.report.files")
    assert [m for m in modules if any(m == d or m.startswith(d + ".") for d in terminal_only)] == []
