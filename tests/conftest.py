"""Shared fixtures: a writable requirement file and the CLI runner."""

from __future__ import annotations

import os
import shutil
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

# External programs some tests run, by marker: (executable, how to install it).
EXTERNAL_TOOLS = {
    "ngspice": ("ngspice", "apt-get install ngspice"),
    "chromium": ("chromium", "apt-get install chromium"),
}
#: Set (to anything but "" or "0") by .ci/run: a missing tool then fails its tests.
REQUIRE_TOOLS_VARIABLE = "BANDWRIGHT_REQUIRE_TOOLS"


def tools_required() -> bool:
    """True when the environment asks that ngspice and Chromium be present."""
    return os.environ.get(REQUIRE_TOOLS_VARIABLE, "") not in ("", "0")


def pytest_runtest_setup(item):
    """A test marked ``ngspice`` or ``chromium`` needs that program: skipped with the reason
    when it is missing, or failed when ``BANDWRIGHT_REQUIRE_TOOLS`` is set (as .ci/run
    does), so that a machine without it cannot pass the suite by skipping it."""
    for marker, (exe, install) in EXTERNAL_TOOLS.items():
        if item.get_closest_marker(marker) is None or shutil.which(exe) is not None:
            continue
        why = f"{exe} is not on PATH ({install})"
        if tools_required():
            pytest.fail(f"{why}; {REQUIRE_TOOLS_VARIABLE} is set, so this test must run",
                        pytrace=False)
        pytest.skip(why)


@pytest.fixture
def write_spec(tmp_path):
    """Write TOML text (dedented) to a file in tmp_path and return its path."""
    def _write(text: str, name: str = "spec.toml") -> Path:
        p = tmp_path / name
        p.write_text(textwrap.dedent(text))
        return p
    return _write


def exit_code_of(doc: dict) -> int:
    """The exit status docs/design.md gives a plan or audit JSON: 1 when a check fails, else 0."""
    return 1 if any(c["status"] == "fail" for c in doc["checks"]) else 0


def run_cli(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess:
    """Run `python -m bandwright ARGS` as a user would."""
    return subprocess.run([sys.executable, "-m", "bandwright", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd)
