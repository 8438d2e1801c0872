"""Shared fixtures: a writable requirement file, the CLI runner, and every bundled scenario
planned at most once per test run (in process, as the CLI's JSON, as an --out folder)."""

from __future__ import annotations

import atexit
import functools
import io
import os
import shutil
import subprocess
import sys
import tempfile
import textwrap
import warnings
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import pytest
from hypothesis import settings

# CI (CI=true) replays the same examples every run, so that a landing never hangs on a
# newly drawn one; at a desk the examples vary from run to run.
settings.register_profile("ci", derandomize=True, deadline=None)
settings.register_profile("dev", deadline=None)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci" if os.environ.get("CI") else "dev"))

# The expansions' disk cache (circuits.expansion_cache) goes to a folder of this run, not
# to the user's cache: every run derives them again, and the checks see the derivation.
os.environ["BANDWRIGHT_CACHE"] = tempfile.mkdtemp(prefix="bandwright-test-cache-")
atexit.register(shutil.rmtree, os.environ["BANDWRIGHT_CACHE"], True)

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


# --- every bundled scenario planned once per test run -------------------------------------
#
# A plan takes seconds; tests that need the plan of an unchanged bundled scenario share one.
# A plan, its JSON and its files are frozen data: no test may change them. Session scope is
# the widest pytest has; the caches below are module-level so that helpers of test modules
# (lru_cache'd functions) share them too.

SCENARIO_NAMES = tuple(sorted(p.stem for p in SCENARIOS.glob("*.toml")))


@dataclass(frozen=True)
class ScenarioCase:
    """One planned scenario and what the report writers made of it."""

    name: str
    plan: object
    json_text: str
    files: dict
    terminal_text: str
    warnings: tuple


def terminal_text(render, obj) -> str:
    """The terminal report as plain text, wide enough that no cell is folded."""
    from rich.console import Console
    buf = io.StringIO()
    console = Console(file=buf, width=220, no_color=True, force_terminal=False,
                      color_system=None, legacy_windows=False)
    render(obj, console)
    return buf.getvalue()


def _plan_path(path: Path):
    from bandwright.inputs import load_spec
    from bandwright.planner import plan
    return plan(load_spec(path))


def _case_of(name: str, p) -> ScenarioCase:
    """The report files (in memory), JSON and terminal text of plan `p`. Warnings raised while
    the files are drawn are recorded, not lost: the tests assert there are none."""
    from bandwright.report.files import plan_files
    from bandwright.report.json_out import dumps, plan_to_dict
    from bandwright.report.terminal import render_plan
    json_text = dumps(plan_to_dict(p))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        files = plan_files(p, json_text)
    return ScenarioCase(name=name, plan=p, json_text=json_text, files=files,
                        terminal_text=terminal_text(render_plan, p),
                        warnings=tuple(f"{w.category.__name__}: {w.message} "
                                       f"({w.filename}:{w.lineno})" for w in caught))


def _case_of_path(path: Path) -> ScenarioCase:
    return _case_of(path.stem, _plan_path(path))


_PLANS: dict[str, object] = {}
_CASES: dict[str, ScenarioCase] = {}


def planned_scenario(name: str):
    """``planner.plan(load_spec("scenarios/NAME.toml"))``, computed once per test run."""
    if name not in _PLANS:
        _PLANS[name] = _plan_path(SCENARIOS / f"{name}.toml")
    return _PLANS[name]


def scenario_case(name: str) -> ScenarioCase:
    """The scenario's plan with its --out files, JSON and terminal report, once per run."""
    if name not in _CASES:
        _CASES[name] = _case_of(name, planned_scenario(name))
    return _CASES[name]


def scenario_cases(names=SCENARIO_NAMES) -> dict[str, ScenarioCase]:
    """`scenario_case` of every name; those not yet planned are planned in parallel worker
    processes (one per core)."""
    todo = [n for n in names if n not in _PLANS]
    workers = max(1, min(len(todo), os.cpu_count() or 1))
    if len(todo) > 1 and workers > 1:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            for c in pool.map(_case_of_path, [SCENARIOS / f"{n}.toml" for n in todo]):
                _PLANS[c.name], _CASES[c.name] = c.plan, c
    return {n: scenario_case(n) for n in names}


@functools.lru_cache(maxsize=None)
def scenario_cli_json(name: str) -> subprocess.CompletedProcess:
    """``bandwright plan scenarios/NAME.toml --json`` run once per test run (a real process)."""
    return run_cli("plan", SCENARIOS / f"{name}.toml", "--json")


@pytest.fixture(scope="session")
def scenario_plan():
    """Factory: name → the bundled scenario's plan (shared, planned once per run)."""
    return planned_scenario


@pytest.fixture(scope="session")
def scenario_cli_out(tmp_path_factory):
    """Factory: name → (CompletedProcess, folder) of ``bandwright plan scenarios/NAME.toml
    --json --out FOLDER``, run once per test run. Tests only read the folder."""
    done: dict[str, tuple[subprocess.CompletedProcess, Path]] = {}

    def _run(name: str) -> tuple[subprocess.CompletedProcess, Path]:
        if name not in done:
            out = tmp_path_factory.mktemp(f"plan_{name}") / "o"
            done[name] = (run_cli("plan", SCENARIOS / f"{name}.toml", "--json", "--out", out),
                          out)
        return done[name]
    return _run
