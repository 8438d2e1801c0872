"""Every bundled scenario planned once per test session, with its --out files and its
terminal report (shared by test_plots.py and test_html.py, and with every other test
through tests/conftest.py, which holds the cache).

Planning a scenario takes seconds, so the scenarios not planned yet are planned in
parallel worker processes (one per core) and kept for the session. Warnings raised while
the report files are drawn are recorded, not lost: the tests assert there are none.
"""

from __future__ import annotations

import shutil
import subprocess
import tempfile
from pathlib import Path

from conftest import SCENARIOS as _SCENARIO_DIR
from conftest import ScenarioCase as Case  # noqa: F401  (the name the tests know)
from conftest import scenario_case, scenario_cases, terminal_text  # noqa: F401

ROOT = Path(__file__).resolve().parents[2]
SCENARIOS = tuple(sorted(_SCENARIO_DIR.glob("*.toml")))
SCENARIO_NAMES = tuple(p.stem for p in SCENARIOS)


def all_cases() -> dict:
    """Name → Case for every scenario, planned in parallel (once per session)."""
    return scenario_cases(SCENARIO_NAMES)


def case(name: str) -> Case:
    all_cases()
    return scenario_case(name)


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
