"""The command-line surface: exit codes, one JSON object, overrides, --out safety."""

from __future__ import annotations

import json
import math

import pytest

from conftest import SCENARIOS, exit_code_of, run_cli, scenario_cli_json

SCENARIO = SCENARIOS / "ultrasonic_ranging.toml"
# The cheapest bundled scenario, for tests of the command's plumbing rather than of a plan.
QUICK = SCENARIOS / "lockin_mains.toml"


def test_plan_prints_family_order_and_sections():
    r = run_cli("plan", SCENARIO)
    assert r.returncode in (0, 1), r.stderr
    for word in ("butterworth", "Chain, input to output", "Checks", "Node levels"):
        assert word in r.stdout


def test_json_is_exactly_one_object_with_design_keys():
    r = scenario_cli_json(SCENARIO.stem)  # `plan SCENARIO --json`, run once per session
    doc = json.loads(r.stdout)  # raises on anything but exactly one JSON document
    for key in ("tool", "prototype", "stages", "checks", "response", "nodes", "noise"):
        assert key in doc
    assert doc["tool"]["name"] == "bandwright"
    assert set(doc["prototype"]) >= {"family", "order", "design_loss_db", "path"}
    st = doc["stages"][0]
    assert set(st) >= {"position", "kind", "target", "topology", "components", "nets",
                       "ideal_parts", "built"}
    for figures in ("target", "ideal_parts", "built"):
        assert set(st[figures]) == {"f0_hz", "q", "gain"}
    assert [s["position"] for s in doc["stages"]] == list(range(1, len(doc["stages"]) + 1))
    for c in doc["checks"]:
        assert set(c) >= {"id", "stage", "net", "status", "value", "limit", "unit", "message"}


def test_response_grid_meets_design_density():
    """docs/design.md: ≥ 100 points a decade, ≥ 50 inside the passband."""
    doc = json.loads(scenario_cli_json(SCENARIO.stem).stdout)
    f = doc["response"]["freq_hz"]
    decades = math.log10(f[-1] / f[0])
    assert len(f) >= 100 * decades
    inside = [x for x in f if 38049.96 <= x <= 42049.97]
    assert len(inside) >= 50
    assert f[0] <= 4000 * 1.0001 and f[-1] >= 400000 * 0.9999


def test_family_and_order_override(tmp_path):
    doc = json.loads(run_cli("plan", SCENARIO, "--json", "--family", "chebyshev",
                             "--order", "4").stdout)
    assert doc["prototype"]["family"] == "chebyshev"
    assert doc["prototype"]["order"] == 4
    assert len(doc["stages"]) == 4


def test_too_low_order_fails_the_mask_with_exit_1():
    r = run_cli("plan", SCENARIO, "--json", "--order", "1", "--family", "butterworth")
    assert r.returncode == 1
    doc = json.loads(r.stdout)
    assert any(c["id"] == "mask" and c["status"] == "fail" for c in doc["checks"])


@pytest.mark.parametrize("args", [["plan"], ["frobnicate"], ["plan", "x.toml", "--order", "x"],
                                  ["plan", "x.toml", "--order", "0"]])
def test_usage_errors_exit_2(args):
    r = run_cli(*args)
    assert r.returncode == 2
    assert "Traceback" not in r.stderr


def test_no_duplicate_flags():
    from bandwright.cli import build_parser
    parser = build_parser()
    sub = parser._subparsers._group_actions[0].choices
    for name, p in sub.items():
        flags = [o for a in p._actions for o in a.option_strings]
        assert len(flags) == len(set(flags)), name


def test_out_refuses_non_empty_folder_without_force(tmp_path):
    out = tmp_path / "o"
    out.mkdir()
    (out / "keep.txt").write_text("mine")
    r = run_cli("plan", SCENARIO, "--out", out)
    assert r.returncode == 2 and "--force" in r.stderr
    assert (out / "keep.txt").read_text() == "mine"
    # Not bandwright's folder (no manifest): --force does not make it so.
    r = run_cli("plan", SCENARIO, "--out", out, "--force")
    assert r.returncode == 2 and "manifest" in r.stderr
    assert [p.name for p in out.iterdir()] == ["keep.txt"]


@pytest.mark.slow
def test_out_into_existing_empty_folder(tmp_path):
    out = tmp_path / "empty"
    out.mkdir()
    r = run_cli("plan", QUICK, "--out", out)
    assert r.returncode == exit_code_of(json.loads((out / "plan.json").read_text()))
    assert [p.name for p in tmp_path.iterdir()] == ["empty"]  # no temporary left behind


@pytest.mark.slow
def test_stdout_on_a_full_disk_is_one_line_and_exit_2(tmp_path):
    """`> /dev/full`: every write fails with ENOSPC (Linux's full device)."""
    import subprocess
    import sys
    for extra in ([], ["--json"]):
        with open("/dev/full", "w") as full:
            r = subprocess.run([sys.executable, "-m", "bandwright", "plan", str(QUICK),
                                *extra], stdout=full, stderr=subprocess.PIPE, text=True)
        assert r.returncode == 2, r.stderr
        assert r.stderr.strip().splitlines() == [
            "bandwright: cannot write to standard output: No space left on device"]


@pytest.mark.slow
def test_closed_stdout_pipe_exits_quietly_with_141(tmp_path):
    """A reader that has gone (`| head -1` once head exits): no message, status 128 + SIGPIPE
    as a program killed by that signal reports."""
    import os
    import subprocess
    import sys
    for extra in ([], ["--json"]):
        read, write = os.pipe()
        os.close(read)
        try:
            r = subprocess.run([sys.executable, "-m", "bandwright", "plan", str(QUICK),
                                *extra], stdout=write, stderr=subprocess.PIPE, text=True)
        finally:
            os.close(write)
        assert r.returncode == 141, r.stderr
        assert r.stderr == ""


@pytest.mark.slow
def test_closed_stdout_is_one_line_and_exit_2():
    """Started with stdout closed (`>&-`): Python has no sys.stdout at all."""
    import subprocess
    import sys
    r = subprocess.run(f'"{sys.executable}" -m bandwright plan "{SCENARIO}" --json >&-',
                       shell=True, stderr=subprocess.PIPE, text=True)
    assert r.returncode == 2, r.stderr
    assert r.stderr.strip().splitlines() == [
        "bandwright: cannot write to standard output: it is closed"]


def test_the_process_ends_with_mains_status_and_every_byte_of_its_output(capsys):
    """`python -m bandwright` ends through ``cli.run`` (exit handlers, both streams
    flushed, then ``os._exit``, skipping the interpreter's teardown): what a reader of its
    pipe gets is byte for byte what `main` prints in-process, and the status is main's."""
    from bandwright.cli import main
    r = run_cli("plan", QUICK, "--json")
    code = main(["plan", str(QUICK), "--json"])
    assert (r.returncode, r.stdout, r.stderr) == (code, capsys.readouterr().out, "")
    bad = run_cli("plan", QUICK, "--order", "0")
    assert bad.returncode == 2 and bad.stderr.startswith("bandwright: ")


def test_run_flushes_both_streams_runs_exit_handlers_and_keeps_the_status():
    """``cli.run``'s own contract, with a stand-in `main` that leaves its output in the
    buffers: os._exit would drop unflushed text and skip atexit handlers, so run must flush
    and call them first, and end with main's status."""
    import subprocess
    import sys
    probe = ("import atexit, sys\n"
             "from bandwright import cli\n"
             "atexit.register(lambda: sys.stderr.write('handler ran'))\n"
             "def fake():\n"
             "    sys.stdout.write('unflushed out')\n"
             "    sys.stderr.write('unflushed err;')\n"
             "    return 3\n"
             "cli.main = fake\n"
             "cli.run()\n")
    import os
    env = {k: v for k, v in os.environ.items() if k != "PYTHONUNBUFFERED"}  # buffers kept
    r = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, env=env)
    assert (r.returncode, r.stdout, r.stderr) == (3, "unflushed out", "unflushed err;handler ran")
