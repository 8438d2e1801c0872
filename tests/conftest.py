"""Shared fixtures: a writable requirement file and the CLI runner."""

from __future__ import annotations

import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

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
