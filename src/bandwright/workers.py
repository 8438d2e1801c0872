"""Independent jobs side by side on the machine's cores.

The planner's candidates (family × order × path) are built independently of one another:
each is a pure function of the requirement, and their results are ranked only once all are
in; so are the plots and schematics of an output folder (``report.files``). On a platform that forks (Linux), this process and forked worker processes share them,
one process per core; a forked child starts with the parent's memory (imports, caches, the
job itself), so nothing but the results crosses between processes, and each result is the
one the same call gives in-process. Elsewhere, with one core, in a worker already, or with ``BANDWRIGHT_WORKERS=1``
in the environment, the jobs run one after another in this process.

A job that raises in a worker is run again here, so that its exception (a ``SpecError``,
say) reaches the caller as it would without workers.
"""

from __future__ import annotations

import contextlib
import gc
import multiprocessing
import os
import queue
import signal
import sys
import warnings
from typing import Callable, Iterator, Sequence, TypeVar

__all__ = ["WORKERS_ENV", "worker_count", "run_jobs", "one_blas_thread", "in_worker"]

T = TypeVar("T")
R = TypeVar("R")

# Environment variable: the most processes a run's jobs may use, this one included (1: this
# one alone).
WORKERS_ENV = "BANDWRIGHT_WORKERS"
# Candidates number four at most today; more processes than that would only wait.
_MAX_WORKERS = 4

# The jobs being shared: set before the fork, so the workers inherit them.
_JOB: tuple[Callable, Sequence] | None = None
_IN_WORKER = False
_SHARING = False    # this process is taking its share of a run's jobs: no pool inside one
_LIMITS = None      # a worker's BLAS thread limit, kept for the worker's life


def in_worker() -> bool:
    """Whether this is a worker process (which must not draw on the terminal)."""
    return _IN_WORKER


def worker_count(jobs: int) -> int:
    """How many processes share `jobs` independent jobs here, this one included (one per
    core; 0: all of them run in this process alone)."""
    if _IN_WORKER or _SHARING or jobs < 2 or "fork" not in multiprocessing.get_all_start_methods() \
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
    # Ctrl-C reaches the whole process group: the parent alone answers it and ends the
    # workers with SIGTERM, taken the default way (the CLI's own SIGTERM handler,
    # inherited at the fork, would raise inside a job).
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


def _claim(counter) -> int:
    """The next unclaimed job's index (shared by this process and the workers)."""
    with counter.get_lock():
        index = counter.value
        counter.value += 1
    return index


def _worker_loop(counter, results) -> None:
    """A worker: claim jobs until none is left, sending (index, ok, result) for each."""
    _start_worker()
    fn, items = _JOB
    while (index := _claim(counter)) < len(items):
        try:
            results.put((index, True, fn(items[index])))
        except Exception:       # re-raised by the parent's own run of this job
            results.put((index, False, None))


def run_jobs(fn: Callable[[T], R], items: Sequence[T], *,
             done: Callable[[int], None] | None = None) -> list[R]:
    """``[fn(x) for x in items]``, the calls spread over this process and worker processes
    where that pays.

    This process takes jobs too (the first one, then whichever is next when it is free): on
    two cores it and one worker share the jobs, and what it computed itself (a lopsided
    plan's big candidate, say) stays warm in its caches for what follows.

    Parameters
    ----------
    fn : callable
        A pure function of its item (a closure is fine: workers are forked, not pickled to);
        its result must pickle.
    items : sequence
    done : callable(count), optional
        Told how many results are in, each time that number grows.
    """
    global _JOB, _SHARING
    n = worker_count(len(items))
    out: list = [None] * len(items)
    if n == 0:
        for k, item in enumerate(items):
            out[k] = fn(item)
            if done is not None:
                done(k + 1)
        return out
    ctx = multiprocessing.get_context("fork")
    counter, results = ctx.Value("i", 0), ctx.Queue()
    have: set[int] = set()

    def receive(index: int, value) -> None:
        out[index] = value
        have.add(index)
        if done is not None:
            done(len(have))

    _JOB = (fn, items)
    # Every object of this process is shared with the workers page by page until written:
    # a worker's garbage collector, walking them all, would write (and so copy) every
    # page. Frozen, they are left out of the workers' collections.
    gc.freeze()
    procs = [ctx.Process(target=_worker_loop, args=(counter, results), daemon=True)
             for _ in range(n - 1)]
    try:
        for proc in procs:
            proc.start()
        gc.unfreeze()
        _SHARING = True
        while (index := _claim(counter)) < len(items):
            receive(index, fn(items[index]))
        _SHARING = False
        while len(have) < len(items) and any(p.is_alive() for p in procs):
            try:
                index, ok, value = results.get(timeout=0.05)
            except queue.Empty:
                continue
            receive(index, value if ok else fn(items[index]))
        while not results.empty() and len(have) < len(items):
            index, ok, value = results.get()
            receive(index, value if ok else fn(items[index]))
        for index in range(len(items)):     # a worker that died left its job undone
            if index not in have:
                receive(index, fn(items[index]))
    finally:
        gc.unfreeze()
        _JOB, _SHARING = None, False
        for proc in procs:
            if proc.is_alive():
                proc.terminate()
            proc.join()
        results.close()
    return out
