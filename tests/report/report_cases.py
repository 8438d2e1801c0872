"""Every bundled scenario planned once per test session, with its --out files and its
terminal report (shared by test_plots.py and test_html.py).

Planning a scenario takes seconds, so the scenarios are planned in parallel worker
processes (one per core) and kept for the session. Warnings raised while the report files
are drawn are recorded, not lost: the tests assert there are none.
"""

from __future__ import annotations

import io
import os
import shutil
import subprocess
import tempfile
import warnings
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from rich.console import Console

from bandwright.planner import plan
from bandwright.report.files import plan_files
from bandwright.report.json_out import dumps, plan_to_dict
from bandwright.report.terminal import render_plan
from bandwright.inputs.loader import load_spec

ROOT = Path(__file__).resolve().parents[2]
SCENARIOS = tuple(sorted((ROOT / "scenarios").glob("*.toml")))
SCENARIO_NAMES = tuple(p.stem for p in SCENARIOS)


@dataclass(frozen=True)
class Case:
    """One planned scenario and what the report writers made of it."""

    name: str
    plan: object
    json_text: str
    files: dict
    terminal_text: str
    warnings: tuple


def terminal_text(render, obj) -> str:
    """The terminal report as plain text, wide enough that no cell is folded."""
    buf = io.StringIO()
    console = Console(file=buf, width=220, no_color=True, force_terminal=False,
                      color_system=None, legacy_windows=False)
    render(obj, console)
    return buf.getvalue()


def run_scenario(path: Path) -> Case:
    """Plan one scenario and write its report files (in memory)."""
    p = plan(load_spec(path))
    json_text = dumps(plan_to_dict(p))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        files = plan_files(p, json_text)
    return Case(name=path.stem, plan=p, json_text=json_text, files=files,
                terminal_text=terminal_text(render_plan, p),
                warnings=tuple(f"{w.category.__name__}: {w.message} ({w.filename}:{w.lineno})"
                               for w in caught))


@lru_cache(maxsize=None)
def all_cases() -> dict:
    """Name → Case for every scenario, planned in parallel."""
    workers = max(1, min(len(SCENARIOS), os.cpu_count() or 1))
    if workers == 1:
        return {p.stem: run_scenario(p) for p in SCENARIOS}
    with ProcessPoolExecutor(max_workers=workers) as pool:
        return {c.name: c for c in pool.map(run_scenario, SCENARIOS)}


def case(name: str) -> Case:
    return all_cases()[name]


def chromium() -> str | None:
    """Debian's chromium, if installed."""
    return shutil.which("chromium")


def chromium_render(html_path: Path, work: Path, *, size=(1200, 3000)) -> tuple[str, Path]:
    """Open `html_path` in headless Chromium: (the DOM after loading, a screenshot path)."""
    exe = chromium()
    common = [exe, "--headless", "--no-sandbox", "--disable-gpu",
              "--disable-background-networking", "--disable-component-update",
              "--disable-sync", "--no-first-run", "--hide-scrollbars"]
    url = html_path.resolve().as_uri()
    shot = work / "shot.png"
    with tempfile.TemporaryDirectory(dir=work) as profile:
        dom = subprocess.run(common + [f"--user-data-dir={profile}", "--dump-dom", url],
                             capture_output=True, text=True, timeout=180)
    with tempfile.TemporaryDirectory(dir=work) as profile:
        subprocess.run(common + [f"--user-data-dir={profile}", f"--screenshot={shot}",
                                 f"--window-size={size[0]},{size[1]}", url],
                       capture_output=True, text=True, timeout=180)
    return dom.stdout, shot
