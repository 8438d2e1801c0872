"""Candidates built side by side (``bandwright.workers``) give the plan built one by one."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from bandwright import workers
from bandwright.errors import SpecError
from bandwright.inputs.loader import load_spec
from bandwright.planner import plan
from bandwright.report.json_out import dumps, plan_to_dict

from conftest import SCENARIOS

needs_fork = pytest.mark.skipif(workers.worker_count(2) == 0,
                                reason="this machine gives no worker processes (one core, or no fork)")


@pytest.fixture
def two_workers(monkeypatch):
    monkeypatch.setenv(workers.WORKERS_ENV, "2")


def _square(x):
    return x * x


def test_one_worker_setting_runs_in_process(monkeypatch):
    monkeypatch.setenv(workers.WORKERS_ENV, "1")
    assert workers.worker_count(4) == 0
    monkeypatch.setenv(workers.WORKERS_ENV, "many")   # unreadable: the safe way
    assert workers.worker_count(4) == 0
    monkeypatch.delenv(workers.WORKERS_ENV)
    assert workers.worker_count(1) == 0               # one job: nothing to share


@needs_fork
def test_results_in_item_order_and_progress_counted(two_workers):
    seen = []
    out = workers.run_jobs(lambda x: (x, np.arange(x).sum()), list(range(7)), done=seen.append)
    assert out == [(x, np.arange(x).sum()) for x in range(7)]
    assert seen == list(range(1, 8))


@needs_fork
def test_a_failing_job_raises_its_own_error_here(two_workers):
    # SpecError does not survive pickling (keyword-only fields): the job is run again here,
    # so the caller gets the error itself, file and key included.
    def job(x):
        if x == 2:
            raise SpecError("spec.toml", "passband.center_hz", "must be > 0", value=-1)
        return x

    with pytest.raises(SpecError) as err:
        workers.run_jobs(job, [1, 2, 3])
    assert err.value.key == "passband.center_hz"


@needs_fork
def test_no_nested_workers(two_workers):
    # A job's own jobs run where the job runs (a worker, or this process taking its share):
    # no pool inside a pool.
    inner = workers.run_jobs(lambda x: workers.worker_count(3), [1, 2])
    assert inner == [0, 0]


@needs_fork
def test_plan_with_workers_is_the_plan_without(monkeypatch):
    """The same JSON, byte for byte, from the candidates built side by side and one by one
    (the planner's result must not depend on the machine's cores)."""
    req = load_spec(SCENARIOS / "lockin_mains.toml")
    monkeypatch.setenv(workers.WORKERS_ENV, "1")
    alone = dumps(plan_to_dict(plan(req)))
    monkeypatch.setenv(workers.WORKERS_ENV, "2")
    side_by_side = dumps(plan_to_dict(plan(req)))
    assert side_by_side == alone


@needs_fork
@pytest.mark.slow
@pytest.mark.parametrize("signum, status", [(signal.SIGINT, 130), (signal.SIGTERM, 143)])
def test_stopped_while_workers_build(signum, status):
    """Ctrl-C (SIGINT to the whole process group) or SIGTERM while the candidates are being
    built: one line on stderr, the signal's exit status, nothing on stdout, and no worker
    process left behind."""
    proc = subprocess.Popen([sys.executable, "-m", "bandwright", "plan",
                             str(SCENARIOS / "acoustic_emission.toml"), "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)
    try:
        deadline = time.monotonic() + 60
        while len(_group(proc.pid)) < 2:        # the parent and its worker
            assert proc.poll() is None and time.monotonic() < deadline, "no workers started"
            time.sleep(0.02)
        os.killpg(proc.pid, signum)
        out, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
    assert proc.returncode == status
    assert out == ""
    assert err.strip() == f"bandwright: stopped by {signal.Signals(signum).name}"
    time.sleep(0.2)
    assert _group(proc.pid) == []


def _group(pgid: int) -> list[str]:
    """Processes of process group `pgid` still running (zombies are not)."""
    rows = subprocess.run(["ps", "-e", "-o", "pgid=,stat="], capture_output=True,
                          text=True).stdout.split("\n")
    return [r for r in rows if r.split() and r.split()[0] == str(pgid)
            and not r.split()[1].startswith("Z")]


@needs_fork
def test_this_process_takes_its_share(two_workers):
    """The jobs are shared between this process and a worker (on two cores: one worker)."""
    pids = workers.run_jobs(lambda x: (time.sleep(0.2), os.getpid())[1], list(range(4)))
    assert os.getpid() in pids and len(set(pids)) == 2


@needs_fork
def test_a_job_knows_where_it_runs(two_workers):
    """``in_worker`` tells a job in a worker from one in this process: the planner's yield
    progress is reported only where it is False (a fork of a terminal's progress bar would
    draw on the terminal, or wait for its lock)."""
    where = workers.run_jobs(lambda x: (time.sleep(0.2), workers.in_worker())[1], [1, 2, 3, 4])
    assert set(where) == {True, False}
    assert workers.in_worker() is False
