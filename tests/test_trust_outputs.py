"""Outputs a user can trust: the same input gives the same bytes, plan.json records what made
it, and a failed write leaves the output folder exactly as it was.

(An existing non-empty --out folder refused without --force is tested in test_cli.py.)
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pytest
import scipy

import bandwright
from bandwright import cli
from bandwright.report.outdir import write_out_dir

from conftest import SCENARIOS, exit_code_of, run_cli, scenario_cli_json

# Two scenarios with a Monte Carlo yield (seeded by [tolerance] seed, default 1).
SAME_TWICE = ["tone_detector.toml", "machine_vibration.toml"]


@pytest.mark.parametrize("name", SAME_TWICE)
@pytest.mark.slow
def test_same_input_gives_byte_identical_json_in_two_processes(name):
    # The first process is the session's shared `plan SPEC --json` run (tests/conftest.py).
    first = scenario_cli_json(name.removesuffix(".toml"))
    second = run_cli("plan", SCENARIOS / name, "--json")
    assert first.returncode == second.returncode
    assert first.stdout == second.stdout
    doc = json.loads(first.stdout)
    assert doc["checks"]  # a real plan, not an empty object
    assert first.returncode == exit_code_of(doc), first.stderr


@pytest.mark.slow
def test_plan_json_records_versions_and_the_requirement_hash(tmp_path):
    """plan.json's `tool` names the versions and `requirement.sha256` is the SHA-256 of the
    file's bytes (hashlib as the reference)."""
    spec = SCENARIOS / "tone_detector.toml"
    out = tmp_path / "o"
    code = cli.main(["plan", str(spec), "--out", str(out)])
    doc = json.loads((out / "plan.json").read_text())
    assert code == exit_code_of(doc)
    assert doc["tool"] == {"name": "bandwright", "version": bandwright.__version__,
                           "numpy": np.__version__, "scipy": scipy.__version__}
    assert doc["requirement"]["path"] == str(spec)
    assert doc["requirement"]["sha256"] == hashlib.sha256(spec.read_bytes()).hexdigest()


class _FailingFiles(Mapping):
    """Files whose renderer raises once `fail_at` files have been handed out — a failure
    inside write_out_dir's loop, after some files are already on disk."""

    def __init__(self, fail_at: int, exc: BaseException) -> None:
        self.names = [f"f{i}.txt" for i in range(5)]
        self.fail_at, self.exc = fail_at, exc

    def __getitem__(self, name):
        return name.encode()

    def __iter__(self):
        return iter(self.names)

    def __len__(self):
        return len(self.names)

    def items(self):
        for i, n in enumerate(self.names):
            if i == self.fail_at:
                raise self.exc
            yield n, self[n]


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in folder.rglob("*") if p.is_file()}


@pytest.mark.parametrize("exc", [RuntimeError("renderer failed"), KeyboardInterrupt()],
                         ids=["error", "interrupt"])
@pytest.mark.parametrize("existing", [False, True], ids=["new", "replace"])
def test_failure_while_writing_leaves_the_folder_as_it_was(tmp_path, exc, existing):
    out = tmp_path / "out"
    if existing:  # an earlier run's folder (its manifest lists keep.txt)
        write_out_dir(out, {"keep.txt": b"the previous run"}, force=False)
    before = _snapshot(out) if existing else None
    with pytest.raises(type(exc)):
        write_out_dir(out, _FailingFiles(3, exc), force=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == (["out"] if existing else [])
    if existing:
        assert _snapshot(out) == before


@pytest.mark.slow
def test_disk_full_during_cli_write_is_one_line_and_leaves_the_folder(tmp_path, monkeypatch,
                                                                     capsys):
    """A write that fails part-way (ENOSPC on the third file) under `plan --out --force`:
    exit 2, one line naming the folder, the old contents intact, no temporary left."""
    out = tmp_path / "out"
    write_out_dir(out, {"keep.txt": b"the previous run"}, force=False)
    before = _snapshot(out)
    real = Path.write_bytes
    calls = []

    def flaky(self, data):
        calls.append(self.name)
        if len(calls) == 3:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(self, data)

    monkeypatch.setattr(Path, "write_bytes", flaky)
    spec = tmp_path / "spec.toml"
    spec.write_text("[passband]\ncenter_hz = 1000\nbandwidth_hz = 300\n[design]\norder = 1\n"
                    "[tolerance]\nsamples = 10\n")
    code = cli.main(["plan", str(spec), "--out", str(out), "--force"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert len(err) == 1 and str(out) in err[0] and "cannot write" in err[0], err
    assert len(calls) == 3
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out", "spec.toml"]
    assert _snapshot(out) == before and (out / "keep.txt").read_text() == "the previous run"
