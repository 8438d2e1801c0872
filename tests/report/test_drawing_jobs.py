"""The --out drawings as independent jobs (drawn side by side in worker processes) and
matplotlib's font list kept in bandwright's cache. References: the files the same plan
gives when everything is drawn in one process (byte for byte), and the folder contents
after real processes."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import planned_scenario
from bandwright.report.files import plan_files
from bandwright.report.json_out import plan_to_dict
from bandwright.workers import WORKERS_ENV, worker_count


def _files(p, workers: str | None, monkeypatch) -> dict[str, bytes]:
    if workers is None:
        monkeypatch.delenv(WORKERS_ENV, raising=False)
    else:
        monkeypatch.setenv(WORKERS_ENV, workers)
    return plan_files(p, json.dumps(plan_to_dict(p)))


def test_drawings_side_by_side_are_the_drawings_alone(monkeypatch):
    """Every file (plots, schematics, report.html) and their order are the same whether
    the drawings are shared among worker processes or drawn one after another here."""
    monkeypatch.delenv(WORKERS_ENV, raising=False)
    if worker_count(8) < 2:
        pytest.skip("one core: the drawings are never shared")
    p = planned_scenario("lockin_mains")
    shared = _files(p, None, monkeypatch)
    alone = _files(p, "1", monkeypatch)
    assert list(shared) == list(alone)
    assert [n for n in shared if n != "report.html" and shared[n] != alone[n]] == []
    assert shared["report.html"] == alone["report.html"]
    # And each drawing is the one its own function draws, on its own.
    from bandwright.report.plots import _save, plot_figures
    from bandwright.report.schematic import schematic_files
    one_by_one = {}
    for name, fig in plot_figures(p).items():
        one_by_one[f"{name}.png"], one_by_one[f"{name}.svg"] = _save(fig)
    one_by_one.update(schematic_files(p.chosen.chain))
    assert {n: shared[n] for n in one_by_one} == one_by_one
    assert {"response.png", "response.svg", "block.svg", "schematic_stage1.svg"} <= set(shared)


_PROBE = """
import os
from bandwright.report._mpl import quiet_matplotlib
quiet_matplotlib()
import matplotlib.font_manager
print(os.environ["MPLCONFIGDIR"])
"""


def _probe(env: dict[str, str]) -> Path:
    r = subprocess.run([sys.executable, "-c", _PROBE], capture_output=True, text=True,
                       env=env, timeout=120)
    assert r.returncode == 0 and r.stderr == "", r.stderr
    return Path(r.stdout.strip())


def _env(tmp_path: Path, cache: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith("MPL")}
    env.update(BANDWRIGHT_CACHE=cache, TMPDIR=str(tmp_path / "tmp"))
    (tmp_path / "tmp").mkdir(exist_ok=True)
    return env


def test_font_list_is_kept_in_bandwrights_cache(tmp_path):
    """matplotlib lists the system's fonts once into bandwright's cache and reads the list
    back: the second run finds the same folder with its fontlist file."""
    cache = tmp_path / "cache"
    first = _probe(_env(tmp_path, str(cache)))
    assert first == cache / "matplotlib"
    listed = sorted(p.name for p in first.glob("fontlist-*.json"))
    assert listed
    assert _probe(_env(tmp_path, str(cache))) == first
    assert sorted(p.name for p in first.glob("fontlist-*.json")) == listed
    assert list((tmp_path / "tmp").iterdir()) == []


@pytest.mark.parametrize("cache", ["off", "unwritable"])
def test_without_a_usable_cache_the_font_list_goes_to_a_temporary_folder(tmp_path, cache):
    """With the cache off, or a cache folder that cannot be written, matplotlib gets a
    temporary folder of ours, removed when the run ends."""
    value = "off"
    if cache == "unwritable":
        blocked = tmp_path / "blocked"
        blocked.write_text("a file where the cache folder would be")
        value = str(blocked)
    folder = _probe(_env(tmp_path, value))
    assert folder.parent == tmp_path / "tmp" and folder.name.startswith("bandwright-mpl-")
    assert not folder.exists()
