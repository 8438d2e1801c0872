"""Command line: `bandwright plan` and `bandwright audit`.

Exit 0: every check passes (warnings allowed); 1: it ran and some check failed;
2: bad input or usage, or a failed write of --out or stdout (one line on stderr, nothing
written); 130 / 143: stopped by SIGINT / SIGTERM (one line); 141: stdout closed early (quiet).
"""

from __future__ import annotations

import argparse
import atexit
import errno
import os
import signal
import sys
import warnings
from pathlib import Path

from bandwright import __version__
from bandwright.checks.base import worst_status
from bandwright.errors import SpecError
from bandwright.report.outdir import OutDirRefused, check_out_dir, write_out_dir
from bandwright.inputs.reader import with_line
from bandwright.vocabulary import FAMILIES

__all__ = ["main", "build_parser"]


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # usage errors: one line, exit 2
        self.exit(2, f"bandwright: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="bandwright",
                description="Plan and audit multi-stage active bandpass filter chains.")
    p.add_argument("--version", action="version", version=f"bandwright {__version__}")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)
    pl = sub.add_parser("plan", help="design a chain from a requirement file")
    pl.add_argument("spec", metavar="SPEC.toml")
    pl.add_argument("--family", choices=FAMILIES, help="override design.family")
    pl.add_argument("--order", type=int, help="override design.order (1 to 20)")
    _common(pl)
    au = sub.add_parser("audit", help="analyse and check a chain someone designed")
    au.add_argument("chain", metavar="CHAIN.toml")
    au.add_argument("--measured", metavar="SWEEP.csv", type=Path,
                    help="a measured sweep (CSV: freq_hz, gain_db, phase_deg): find the part "
                    "that is off")
    _common(au)
    return p


def _common(p: argparse.ArgumentParser) -> None:
    p.add_argument("--json", action="store_true", help="print one JSON object instead of the report")
    p.add_argument("--out", metavar="DIR", type=Path, help="write plan.json and the other files here")
    p.add_argument("--force", action="store_true",
                   help="replace the files an earlier run wrote in --out (its manifest lists them)")


class _Stopped(BaseException):
    """SIGTERM, raised where the program is (SIGINT raises KeyboardInterrupt)."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum


class _StdoutFailed(Exception):
    """Writing the report or the JSON to stdout failed (a full disk, a closed pipe)."""


#: Exit status after a closed stdout pipe (`| head -1`): 128 + SIGPIPE, as a program
#: killed by the signal gives.
EXIT_BROKEN_PIPE = 128 + 13


def _on_term(signum, frame) -> None:
    raise _Stopped(signum)


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    err = _ErrorLines()
    previous = _install_term_handler()
    # stderr carries our own lines only: library warnings (numpy on a degenerate design,
    # matplotlib on a crowded figure) are not the user's to read. `python -W ...` still
    # shows them.
    quiet = warnings.catch_warnings()
    quiet.__enter__()
    if not sys.warnoptions:
        warnings.simplefilter("ignore")
    try:
        if args.command == "plan" and args.order is not None and not 1 <= args.order <= 20:
            raise SpecError("--order", "", f"order {args.order} outside 1 to 20")
        if args.out is not None:
            check_out_dir(args.out, force=args.force, inputs=_inputs(args))
        return _run_plan(args) if args.command == "plan" else _run_audit(args)
    except SpecError as exc:
        err.print(f"bandwright: {with_line(exc)}", markup=False)
        return 2
    except OutDirRefused as exc:
        err.print(f"bandwright: {exc}", markup=False)
        return 2
    except (KeyboardInterrupt, _Stopped) as exc:
        signum = exc.signum if isinstance(exc, _Stopped) else signal.SIGINT
        _quiet_stdout()
        if args.out is None:
            where = ""
        elif getattr(args, "written", False):
            where = f" after writing {args.out}/ in full"
        else:
            where = f"; {args.out} left as it was"
        err.print(f"bandwright: stopped by {signal.Signals(signum).name}{where}", markup=False)
        return 128 + signum
    except _StdoutFailed as exc:
        _quiet_stdout()
        cause = exc.__cause__
        if isinstance(cause, BrokenPipeError) or getattr(cause, "errno", None) == errno.EPIPE:
            return EXIT_BROKEN_PIPE  # the reader stopped reading: nothing to say
        err.print(f"bandwright: cannot write to standard output: "
                  f"{getattr(cause, 'strerror', None) or cause}", markup=False)
        return 2
    finally:
        quiet.__exit__(None, None, None)
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


def run() -> None:
    """The console entry point (``bandwright``, ``python -m bandwright``): `main`, then out
    without the interpreter's teardown.

    Freeing every module, cache and design a run loaded takes about a tenth of a second,
    a tenth of a whole ``plan --json``, and buys nothing at that point: every file the run
    writes is written atomically and closed, the worker processes are joined, and here
    the exit handlers run and both streams are flushed before the process ends with
    `main`'s status. (Tests call `main` itself and keep their interpreter.)"""
    code = main()
    run_exit_handlers = getattr(atexit, "_run_exitfuncs", None)
    if run_exit_handlers is None:        # not CPython: the ordinary exit
        sys.exit(code)
    run_exit_handlers()
    for stream in (sys.stdout, sys.stderr):
        try:
            if stream is not None:       # None: started with the stream closed
                stream.flush()
        except (OSError, ValueError):    # a reader gone or a stream closed: nothing to keep
            pass
    os._exit(code)


def _install_term_handler():
    """SIGTERM (timeout, kill) stops the run as SIGINT does; the old handler is returned."""
    try:
        return signal.signal(signal.SIGTERM, _on_term)
    except ValueError:  # not the main thread: leave signals alone
        return None


def _inputs(args: argparse.Namespace) -> tuple[str, ...]:
    return (args.spec,) if args.command == "plan" else (args.chain,)


def _quiet_stdout() -> None:
    """Point stdout at /dev/null, so that the flush at exit cannot fail a second time."""
    if sys.stdout is None:
        return
    try:
        sys.stdout.flush()
    except (OSError, ValueError):
        pass
    try:
        fd = os.open(os.devnull, os.O_WRONLY)
        os.dup2(fd, sys.stdout.fileno())
        os.close(fd)
    except (OSError, ValueError, AttributeError):
        pass


def _emit(show) -> None:
    """Run `show()`, which writes to stdout, and flush; a write error becomes _StdoutFailed."""
    try:
        if sys.stdout is None:  # started with stdout closed (`>&-`)
            raise OSError(errno.EBADF, "it is closed")
        show()
        sys.stdout.flush()
    except OSError as exc:
        raise _StdoutFailed() from exc


def _run_plan(args: argparse.Namespace) -> int:
    # Imported here so that `--help` and usage errors stay fast.
    from bandwright.planner import plan
    from bandwright.report.json_out import dumps, plan_to_dict
    from bandwright.inputs import load_spec

    from bandwright.report.progress import stderr_progress

    req = load_spec(args.spec)
    # The bar goes to stderr and only on a terminal: --json stdout stays one object.
    with stderr_progress() as progress:
        result = plan(req, family=args.family, order=args.order, progress=progress)
    text = dumps(plan_to_dict(result))
    if args.out is not None:
        from bandwright.report.files import plan_files
        _write(args, plan_files(result, text))
    _emit(lambda: _show(args, text, "render_plan", result))
    return 1 if worst_status(result.checks) == "fail" else 0


def _show(args: argparse.Namespace, text: str, render: str, result) -> None:
    """The JSON, or the terminal report (`render`: the function of ``report.terminal``,
    imported only for a report: `--json` leaves rich and the report stack unloaded)."""
    if args.json:
        sys.stdout.write(text + "\n")
    else:
        from bandwright.report import terminal
        console = _console()
        getattr(terminal, render)(result, console)
        if args.out is not None:
            console.print(f"Wrote {args.out}/")


def _write(args: argparse.Namespace, files) -> None:
    """Write the --out folder; a full disk or a missing permission is one line, exit 2
    (write_out_dir leaves the folder as it was)."""
    try:
        write_out_dir(args.out, files, force=args.force, inputs=_inputs(args),
                      on_done=lambda: setattr(args, "written", True))
    except OSError as exc:
        raise OutDirRefused(f"{args.out}: cannot write: {exc.strerror or exc}") from None


class _ErrorLines:
    """bandwright's one-line messages on stderr, through rich: imported when a line is
    printed (a clean `plan --json` never pays for it)."""

    def print(self, text: str, **kw) -> None:
        from rich.console import Console
        Console(stderr=True, highlight=False, soft_wrap=True).print(text, **kw)


def _console():
    from rich.console import Console

    class _ReportConsole(Console):
        def on_broken_pipe(self) -> None:
            # rich would exit with status 1, which here means "a check failed".
            self.quiet = True
            raise BrokenPipeError(errno.EPIPE, "Broken pipe")

    # markup=False: requirement text and check messages may hold brackets ("[tolerance]").
    return _ReportConsole(width=max(100, Console().width), no_color="NO_COLOR" in os.environ,
                          highlight=False, markup=False)


def _run_audit(args: argparse.Namespace) -> int:
    from bandwright.audit import audit
    from bandwright.report.json_out import audit_to_dict, dumps

    from bandwright.report.progress import stderr_progress

    with stderr_progress() as bar:
        result = audit(args.chain, measured=args.measured,
                       progress=None if bar is None else
                       (lambda done, total: bar("yield", done, total)))
    text = dumps(audit_to_dict(result))
    if args.out is not None:
        from bandwright.report.files import audit_files
        _write(args, audit_files(result, text))
    _emit(lambda: _show(args, text, "render_audit", result))
    if result.diagnosis is not None and result.diagnosis.mask_pass is not None:
        return 0 if result.diagnosis.mask_pass else 1  # the measured chain decides
    return 1 if worst_status(result.checks) == "fail" else 0


if __name__ == "__main__":
    sys.exit(main())
