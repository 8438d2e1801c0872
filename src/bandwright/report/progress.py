"""A progress bar on stderr for long runs (rich).

Shown only when stderr is a terminal (never in a pipe, never on the ``--json`` stdout) and
only once the run in progress is expected to last more than a second: a fast plan prints
nothing extra. The planner reports through a plain callback ``(stage, done, total)``; this
module is the one place that turns it into a bar.
"""

from __future__ import annotations

import sys
import time
from contextlib import contextmanager
from typing import TYPE_CHECKING, Callable, Iterator, TextIO

if TYPE_CHECKING:  # rich is imported where a bar is really drawn
    from rich.console import Console
    from rich.progress import Progress

__all__ = ["stderr_progress", "LABELS"]

#: What each stage of a plan is called on the bar.
LABELS = {"candidates": "Designing candidates", "yield": "Monte Carlo yield"}

Callback = Callable[[str, int, int], None]


class _LazyBar:
    """Callback that opens a rich bar once a stage's predicted duration passes a threshold."""

    def __init__(self, console: Console, min_seconds: float,
                 clock: Callable[[], float] = time.perf_counter) -> None:
        self.console = console
        self.min_seconds = min_seconds
        self.clock = clock
        self.last_time = clock()
        self.start: dict[str, float] = {}
        self.done: dict[str, int] = {}
        self.progress: Progress | None = None
        self.tasks: dict[str, int] = {}

    def __call__(self, stage: str, done: int, total: int) -> None:
        now = self.clock()
        if stage not in self.start or done <= self.done.get(stage, 0):
            # A new run of this stage began right after the previous report.
            self.start[stage] = self.last_time
            if self.progress is not None and stage in self.tasks:
                self.progress.reset(self.tasks[stage], total=total)
        self.done[stage] = done
        self.last_time = now
        elapsed = now - self.start[stage]
        expected = elapsed * total / max(done, 1)
        if self.progress is None:
            if done >= total or expected <= self.min_seconds:
                return
            from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn,
                                       TimeRemainingColumn)
            self.progress = Progress(TextColumn("{task.description}"), BarColumn(),
                                     MofNCompleteColumn(), TimeRemainingColumn(),
                                     console=self.console, transient=True)
            self.progress.start()
        if stage not in self.tasks:
            self.tasks[stage] = self.progress.add_task(LABELS.get(stage, stage), total=total)
        self.progress.update(self.tasks[stage], completed=done, total=total)

    def close(self) -> None:
        if self.progress is not None:
            self.progress.stop()


@contextmanager
def stderr_progress(*, min_seconds: float = 1.0, stream: TextIO | None = None
                    ) -> Iterator[Callback | None]:
    """A progress callback for ``planner.plan(progress=...)``, or None off a terminal.

    Parameters
    ----------
    min_seconds : float
        The bar appears only when a stage is expected to take longer than this.
    stream : text stream, optional
        Where the bar goes (default ``sys.stderr``); nothing is shown unless it is a
        terminal.

    Yields
    ------
    callable(stage, done, total) or None
    """
    out = sys.stderr if stream is None else stream
    if not out.isatty():
        yield None
        return
    from rich.console import Console  # here: off a terminal (a pipe, --json) rich stays unloaded
    bar = _LazyBar(Console(file=out, force_terminal=True), min_seconds)
    try:
        yield bar
    finally:
        bar.close()
