"""Shared fixtures: a writable requirement file and the CLI runner."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
from hypothesis import settings

# CI (CI=true) replays the same examples every run, so that a landing never hangs on a
# newly drawn one; at a desk the examples vary from run to run.
settings.register_profile("ci", derandomize=True, deadline=None)
settings.register_profile("dev", deadline=None)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci" if os.environ.get("CI") else "dev"))

ROOT = Path(__file__).resolve().parent.parent
SCENARIOS = ROOT / "scenarios"


@pytest.fixture
def write_spec(tmp_path):
    """Write TOML text (dedented) to a file in tmp_path and return its path."""
    def _write(text: str, name: str = "spec.toml") -> Path:
        p = tmp_path / name
        p.write_text(textwrap.dedent(text))
        return p
    return _write


def run_cli(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess:
    """Run `python -m bandwright ARGS` as a user would."""
    return subprocess.run([sys.executable, "-m", "bandwright", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd)
