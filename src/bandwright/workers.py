"""Independent jobs side by side on the machine's cores.

The planner's candidates (family × order × path) are built independently of one another:
each is a pure function of the requirement, and their results are ranked only once all are
in. On a platform that forks (Linux), they run in forked worker processes, one per core; a
forked child starts with the parent's memory (imports, caches, the job itself), so nothing
but the results crosses between processes, and each result is the one the same call gives
in-process. Elsewhere, with one core, in a worker already, or with ``BANDWRIGHT_WORKERS=1``
in the environment, the jobs run one after another in this process.

A job that raises in a worker is run again here, so that its exception (a ``SpecError``,
say) reaches the caller as it would without workers.
"""

from __future__ import annotations

import contextlib
import gc
import multiprocessing
import os
import signal
import sys
import warnings
from typing import Callable, Iterator, Sequence, TypeVar

__all__ = ["WORKERS_ENV", "worker_count", "run_jobs", "one_blas_thread"]

T = TypeVar("T")
R = TypeVar("R")

# Environment variable: the most worker processes a run may use (1: none, every job here).
WORKERS_ENV = "BANDWRIGHT_WORKERS"
# Candidates number four at most today; more workers than that would only wait.
_MAX_WORKERS = 4

# The job of the pool being started: set before the fork, so the children inherit it.
_JOB: tuple[Callable, Sequence] | None = None
_IN_WORKER = False
_LIMITS = None      # a worker's BLAS thread limit, kept for the worker's life


def worker_count(jobs: int) -> int:
    """How many worker processes `jobs` independent jobs get here (0: run them in-process)."""
    if _IN_WORKER or jobs < 2 or "fork" not in multiprocessing.get_all_start_methods() \
            or not sys.platform.startswith("linux"):
        return 0
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    limit = _MAX_WORKERS
    text = os.environ.get(WORKERS_ENV, "").strip()
    if text:
        try:
            limit = max(1, int(text))
        except ValueError:
            limit = 1       # an unreadable setting: the safe way, no workers
    n = min(cores, jobs, limit)
    return n if n >= 2 else 0


@contextlib.contextmanager
def one_blas_thread() -> Iterator[None]:
    """BLAS (numpy's linear algebra) on one thread for the block, as in every worker.

    The plan's matrices are small and many (a batch of 6 × 6 determinants, a 625 × 16
    product): a second BLAS thread only costs it its hand-over (measured: a two-candidate
    plan 15 % slower with two threads on two cores), and beside a worker it takes the
    other worker's core.
    """
    from threadpoolctl import threadpool_limits
    with threadpool_limits(limits=1):
        yield


def _start_worker() -> None:
    global _IN_WORKER
    _IN_WORKER = True
    # Ctrl-C reaches the whole process group: the parent alone answers it, stopping the
    # pool, which ends the workers with SIGTERM, taken the default way (the CLI's own
    # SIGTERM handler, inherited at the fork, would raise inside a job).
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    # One process per core already: a BLAS thread pool per worker would only fight the
    # other workers for the same cores.
    from threadpoolctl import threadpool_limits
    global _LIMITS
    _LIMITS = threadpool_limits(limits=1)
    # The parent may hold a console lock (a progress bar's thread) at the fork: a worker
    # never writes to the terminal, so it gets streams of its own, and no warnings.
    sys.stdout = sys.stderr = open(os.devnull, "w")
    warnings.simplefilter("ignore")


def _run(index: int):
    fn, items = _JOB
    try:
        return True, fn(items[index])
    except Exception:       # re-raised by the parent's own run of this job
        return False, None


def run_jobs(fn: Callable[[T], R], items: Sequence[T], *,
             done: Callable[[int], None] | None = None) -> list[R]:
    """``[fn(x) for x in items]``, the calls spread over worker processes where that pays.

    Parameters
    ----------
    fn : callable
        A pure function of its item (a closure is fine: workers are forked, not pickled to);
        its result must pickle.
    items : sequence
    done : callable(count), optional
        Told how many results are in, after each one (in item order).
    """
    global _JOB
    n = worker_count(len(items))
    out: list[R] = []
    if n == 0:
        for item in items:
            out.append(fn(item))
            if done is not None:
                done(len(out))
        return out
    _JOB = (fn, items)
    # Every object of this process is shared with the workers page by page until written:
    # a worker's garbage collector, walking them all, would write (and so copy) every
    # page. Frozen, they are left out of the workers' collections.
    gc.freeze()
    try:
        with multiprocessing.get_context("fork").Pool(n, initializer=_start_worker) as pool:
            gc.unfreeze()
            for k, (ok, result) in enumerate(pool.imap(_run, range(len(items)))):
                out.append(result if ok else fn(items[k]))
                if done is not None:
                    done(len(out))
    finally:
        gc.unfreeze()
        _JOB = None
    return out
