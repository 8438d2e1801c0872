"""The --out folder: a user's files are never touched, a write is whole or absent, and an
interrupted run (SIGINT, SIGTERM) leaves the folder as it was or complete.

The contract is docs/design.md's ("--force replaces only files the tool wrote (a manifest in the
folder); never the input's folder, the cwd, a home folder or the root") and the exit
statuses of a process stopped by a signal, 128 + the signal's number (POSIX shells'
convention: SIGINT 130, SIGTERM 143).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from bandwright.report import outdir
from bandwright.report.outdir import MANIFEST, OutDirRefused, read_manifest, write_out_dir

from conftest import run_cli

FAST = """\
[passband]
center_hz = 1000
bandwidth_hz = 200
[design]
family = "butterworth"
order = 1
[tolerance]
samples = 10
"""


def _snapshot(folder: Path) -> dict[str, bytes | None]:
    """Every entry under `folder` (hidden ones too): files with their bytes, folders None."""
    got = {}
    for p in sorted(folder.rglob("*")):
        got[str(p.relative_to(folder))] = p.read_bytes() if p.is_file() else None
    return got


def _hidden(folder: Path) -> list[str]:
    return [p.name for p in folder.iterdir() if p.name.startswith(".")]


@pytest.fixture
def spec(tmp_path):
    d = tmp_path / "specs"
    d.mkdir()
    p = d / "fast.toml"
    p.write_text(FAST)
    return p


def _files(**names) -> dict[str, bytes]:
    return {n: v.encode() for n, v in names.items()}


# --- in-process: what --force may and may not touch -------------------------------------

def test_force_replaces_only_listed_files_and_removes_stale_ones(tmp_path):
    out = tmp_path / "o"
    write_out_dir(out, _files(**{"plan.json": "1", "old.svg": "x"}), force=False)
    assert read_manifest(out) == {"plan.json", "old.svg"}
    (out / "notes.txt").write_text("mine")
    (out / "sub").mkdir()
    (out / "sub" / "data.csv").write_text("a,b\n")
    write_out_dir(out, _files(**{"plan.json": "2", "bom.csv": "b"}), force=True)
    assert (out / "plan.json").read_text() == "2" and (out / "bom.csv").read_text() == "b"
    assert not (out / "old.svg").exists()          # listed, not written again: removed
    assert (out / "notes.txt").read_text() == "mine"
    assert (out / "sub" / "data.csv").read_text() == "a,b\n"
    assert read_manifest(out) == {"plan.json", "bom.csv"}
    assert _hidden(out) == []


def test_an_unlisted_file_with_an_output_name_is_refused(tmp_path):
    out = tmp_path / "o"
    write_out_dir(out, _files(**{"plan.json": "1"}), force=False)
    (out / "bom.csv").write_text("my own parts list")
    before = _snapshot(out)
    with pytest.raises(OutDirRefused, match="bom.csv.*not written by bandwright"):
        write_out_dir(out, _files(**{"plan.json": "2", "bom.csv": "b"}), force=True)
    assert _snapshot(out) == before


def test_a_listed_name_that_became_a_folder_or_link_is_not_ours(tmp_path):
    out = tmp_path / "o"
    write_out_dir(out, _files(**{"a.svg": "1", "b.svg": "1"}), force=False)
    (out / "a.svg").unlink()
    (out / "a.svg").mkdir()
    (out / "a.svg" / "inside.txt").write_text("mine")
    (out / "b.svg").unlink()
    (tmp_path / "target.txt").write_text("mine too")
    (out / "b.svg").symlink_to(tmp_path / "target.txt")
    write_out_dir(out, _files(**{"plan.json": "2"}), force=True)
    assert (out / "a.svg" / "inside.txt").read_text() == "mine"
    assert (out / "b.svg").is_symlink() and (tmp_path / "target.txt").read_text() == "mine too"


def test_a_manifest_never_reaches_outside_its_folder(tmp_path):
    out = tmp_path / "o"
    out.mkdir()
    (tmp_path / "victim.txt").write_text("mine")
    (out / ".hidden").write_text("mine")
    (out / MANIFEST).write_text(json.dumps({"files": ["../victim.txt", ".hidden", "/etc/x",
                                                      "plan.json"]}))
    assert read_manifest(out) == {"plan.json"}
    write_out_dir(out, _files(**{"plan.json": "2"}), force=True)
    assert (tmp_path / "victim.txt").read_text() == "mine"
    assert (out / ".hidden").read_text() == "mine"


def test_a_non_empty_folder_without_a_manifest_is_refused_even_with_force(tmp_path):
    out = tmp_path / "old"
    (out / "sub").mkdir(parents=True)
    (out / "notes.txt").write_text("mine")
    (out / "sub" / "data.csv").write_text("1,2\n")
    before = _snapshot(out)
    with pytest.raises(OutDirRefused, match=f"no {MANIFEST}"):
        write_out_dir(out, _files(**{"plan.json": "1"}), force=True)
    assert _snapshot(out) == before


def test_an_unreadable_manifest_counts_as_none(tmp_path):
    out = tmp_path / "o"
    out.mkdir()
    (out / MANIFEST).write_text("{not json")
    (out / "plan.json").write_text("mine")
    with pytest.raises(OutDirRefused):
        write_out_dir(out, _files(**{"plan.json": "1"}), force=True)
    assert (out / "plan.json").read_text() == "mine"


def test_new_folder_gets_the_umask_mode_and_an_existing_one_keeps_its_own(tmp_path):
    old = os.umask(0o022)
    try:
        write_out_dir(tmp_path / "new" / "deep", _files(**{"plan.json": "1"}), force=False)
    finally:
        os.umask(old)
    assert (tmp_path / "new" / "deep").stat().st_mode & 0o777 == 0o755  # 0o777 & ~0o022
    assert (tmp_path / "new" / "deep" / "plan.json").stat().st_mode & 0o777 == 0o644
    kept = tmp_path / "kept"
    kept.mkdir()
    kept.chmod(0o751)
    write_out_dir(kept, _files(**{"plan.json": "1"}), force=False)
    write_out_dir(kept, _files(**{"plan.json": "2"}), force=True)
    assert kept.stat().st_mode & 0o777 == 0o751


@pytest.mark.parametrize("where", ["root", "cwd", "home", "input"])
def test_special_folders_are_refused_with_and_without_force(where, tmp_path, monkeypatch, spec):
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    (tmp_path / "home").mkdir()
    monkeypatch.chdir(tmp_path)
    folder = {"root": Path("/"), "cwd": Path("."), "home": tmp_path / "home",
              "input": spec.parent}[where]
    word = {"root": "filesystem root", "cwd": "current folder", "home": "home folder",
            "input": "holds the input file"}[where]
    before = _snapshot(tmp_path)
    for force in (False, True):
        with pytest.raises(OutDirRefused, match=word):
            write_out_dir(folder, _files(**{"plan.json": "1"}), force=force, inputs=[spec])
    assert _snapshot(tmp_path) == before


@pytest.mark.slow
def test_cli_force_never_touches_the_input_or_planted_files(tmp_path, spec):
    """The issue's cases through the real command: the input's folder, a folder of the
    user's, and the folder a chain file came from."""
    specs = spec.parent
    (specs / "notes.txt").write_text("mine")
    old = tmp_path / "old"
    (old / "sub").mkdir(parents=True)
    (old / "notes.txt").write_text("mine")
    (old / "sub" / "data.csv").write_text("1,2\n")
    before = _snapshot(tmp_path)
    for out in (specs, old):
        r = run_cli("plan", spec, "--out", out, "--force")
        assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1, r.stderr
        assert "Traceback" not in r.stderr and r.stdout == ""
    assert _snapshot(tmp_path) == before
    # A folder bandwright wrote, with the user's files and the input itself planted in it.
    out = tmp_path / "run"
    assert run_cli("plan", spec, "--out", out).returncode in (0, 1)
    (out / "notes.txt").write_text("mine")
    (out / "sub").mkdir()
    (out / "sub" / "data.csv").write_text("1,2\n")
    (out / "fast.toml").write_text(FAST)
    planted = {k: v for k, v in _snapshot(out).items()
               if k in ("notes.txt", "sub", "sub/data.csv", "fast.toml")}
    r = run_cli("plan", spec, "--out", out, "--force")
    assert r.returncode in (0, 1), r.stderr
    after = _snapshot(out)
    assert {k: after[k] for k in planted} == planted
    assert set(after) - set(planted) == read_manifest(out) | {MANIFEST}
    # audit DIR/chain.toml --out DIR: the folder the chain file sits in is refused.
    r = run_cli("audit", out / "chain.toml", "--out", out, "--force")
    assert r.returncode == 2 and "holds the input file" in r.stderr
    assert _snapshot(out) == after


# --- a failure between renames puts everything back --------------------------------------

def _failing_move(monkeypatch, k: int):
    calls = {"n": 0}
    real = os.rename

    def move(src, dst):
        calls["n"] += 1
        if calls["n"] == k:
            raise OSError(28, "No space left on device")
        real(src, dst)
    monkeypatch.setattr(outdir, "_move", move)
    return calls


@pytest.mark.parametrize("k", [1, 2, 3, 4, 5])
def test_a_failed_rename_restores_an_existing_folder(k, tmp_path, monkeypatch):
    out = tmp_path / "o"
    write_out_dir(out, _files(**{"a.txt": "1", "b.txt": "1"}), force=False)
    (out / "notes.txt").write_text("mine")
    before = _snapshot(out)
    # Two old files and a manifest move aside (calls 1-3), then three new files (4-6).
    _failing_move(monkeypatch, k)
    with pytest.raises(OSError):
        write_out_dir(out, _files(**{"a.txt": "2", "c.txt": "2"}), force=True)
    assert _snapshot(out) == before


def test_a_failed_rename_of_a_new_folder_leaves_nothing(tmp_path, monkeypatch):
    _failing_move(monkeypatch, 1)
    with pytest.raises(OSError):
        write_out_dir(tmp_path / "a" / "b" / "o", _files(**{"plan.json": "1"}), force=False)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.slow
def test_cli_reports_a_failed_write_in_one_line(tmp_path, monkeypatch, spec, capsys):
    from bandwright import cli
    _failing_move(monkeypatch, 1)
    code = cli.main(["plan", str(spec), "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert code == 2 and len(err.strip().splitlines()) == 1 and "No space left" in err
    assert not (tmp_path / "o").exists() and _hidden(tmp_path) == []


# --- signals sent to a real process at the writing moment ----------------------------------

CASES = [  # signal, where the writer pauses, whether --out already holds an earlier run
    (signal.SIGINT, "staged", True),
    (signal.SIGTERM, "staged", False),
    (signal.SIGINT, "commit", False),
    (signal.SIGTERM, "commit", True),
]


@pytest.mark.parametrize("signum,point,existing", CASES,
                         ids=[f"{s.name}-{p}-{'existing' if e else 'new'}" for s, p, e in CASES])
@pytest.mark.slow
def test_signal_at_the_writing_moment(signum, point, existing, tmp_path, spec):
    """`staged`: the files are written to the hidden staging folder, nothing renamed yet —
    the folder must end as it was. `commit`: inside the renames — the signal waits until
    the folder is complete. Either way: 128 + signal, one line on stderr, nothing hidden."""
    out = tmp_path / "o"
    if existing:
        write_out_dir(out, _files(**{"plan.json": "earlier", "old.svg": "x"}), force=False)
        (out / "notes.txt").write_text("mine")
    before = _snapshot(tmp_path)
    marker = tmp_path.parent / f"{tmp_path.name}.marker"
    env = {**os.environ, "BANDWRIGHT_PAUSE_WRITE": f"{point}:{marker}"}
    proc = subprocess.Popen([sys.executable, "-m", "bandwright", "plan", str(spec), "--out",
                             str(out), "--force"], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 120
        while not marker.exists():
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline
            time.sleep(0.02)
        proc.send_signal(signum)
        if point == "commit":
            time.sleep(0.2)  # the signal is in; let the writer go on
            Path(f"{marker}.go").write_text("")
        _, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
        marker.unlink(missing_ok=True)
        Path(f"{marker}.go").unlink(missing_ok=True)
    assert proc.returncode == 128 + signum, err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err, err
    assert signal.Signals(signum).name in err
    assert _hidden(tmp_path) == []
    if point == "staged":
        assert _snapshot(tmp_path) == before and "left as it was" in err
    else:
        assert "in full" in err and _hidden(out) == []
        listed = read_manifest(out)
        assert "plan.json" in listed and "chain.cir" in listed and "old.svg" not in listed
        assert {p.name for p in out.iterdir()} == listed | {MANIFEST} | (
            {"notes.txt"} if existing else set())
        json.loads((out / "plan.json").read_text())
        if existing:
            assert (out / "notes.txt").read_text() == "mine"
