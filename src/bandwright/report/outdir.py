"""Writing an output folder: all files or none, and never a file bandwright did not write.

Every folder bandwright writes holds a manifest, ``bandwright-manifest.json``, listing the
files it wrote there. ``--force`` replaces or removes only the files a manifest lists;
every other file in the folder is left as it is. A non-empty folder without a manifest is
refused, with or without ``--force``: nothing in it can be told apart from the user's own
files. The input's own folder, the current folder, a home folder and the filesystem root
are refused outright.

How a write stays whole:

* a new folder is staged as a hidden sibling and renamed into place;
* an existing folder gets a hidden staging folder inside it (the same filesystem, so a
  rename never copies); the old listed files are moved aside, the new ones moved in, the
  manifest last, and the old ones deleted. A failed rename puts every file back.

SIGINT and SIGTERM are held while the renames run: a signal that arrives then takes
effect once the folder is complete. Before that, the staging folder is removed and the
folder stays as it was. Either way nothing hidden remains.
"""

from __future__ import annotations

import json
import os
import pwd
import secrets
import shutil
import signal
import stat
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Callable, Iterable, Iterator, Mapping

__all__ = ["OutDirRefused", "check_out_dir", "write_out_dir", "MANIFEST", "read_manifest"]

#: The manifest's file name (a visible file: it tells the user what the tool wrote).
MANIFEST = "bandwright-manifest.json"
_STAGE_PREFIX = ".bandwright-"
# Rename and delete go through these names so that a test can make one fail.
_move = os.rename
_held_signals = {signal.SIGINT, signal.SIGTERM}


class OutDirRefused(Exception):
    """The output folder cannot be written without putting someone's files at risk."""


def _home_folders() -> set[Path]:
    homes = {Path.home()}
    try:
        homes |= {Path(p.pw_dir) for p in pwd.getpwall() if p.pw_dir not in ("", "/")}
    except OSError:
        pass
    resolved = set()
    for h in homes:
        try:
            resolved.add(h.resolve())
        except OSError:
            continue
    return resolved


def _refuse_special(out: Path, inputs: Iterable[Path | str]) -> None:
    """The folders that are never an output folder, whatever the options."""
    target = out.resolve()
    if target == Path(target.anchor):
        raise OutDirRefused(f"{out}: is the filesystem root; choose a folder of its own for "
                            "the output")
    if target == Path.cwd().resolve():
        raise OutDirRefused(f"{out}: is the current folder; choose a folder of its own for "
                            "the output, e.g. --out out")
    if target in _home_folders():
        raise OutDirRefused(f"{out}: is a home folder; choose a folder of its own for the "
                            "output")
    for src in inputs:
        if Path(src).resolve().parent == target:
            raise OutDirRefused(f"{out}: holds the input file {src}; choose a folder of its "
                                "own for the output")


def read_manifest(folder: Path) -> set[str] | None:
    """The file names a folder's manifest lists, or None when it has no readable manifest.

    Only plain names count (no path separator, no leading dot): a manifest never reaches
    outside its folder.
    """
    path = folder / MANIFEST
    try:
        if not stat.S_ISREG(path.lstat().st_mode):
            return None
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    names = doc.get("files") if isinstance(doc, dict) else None
    if not isinstance(names, list):
        return None
    return {n for n in names if isinstance(n, str) and _plain_name(n)}


def _plain_name(name: str) -> bool:
    return bool(name) and "/" not in name and "\\" not in name and not name.startswith(".") \
        and name != MANIFEST and "\0" not in name


def _ours(folder: Path, listed: set[str]) -> set[str]:
    """Listed names that are still regular files (a link or folder put there since is not ours)."""
    ours = set()
    for name in listed:
        try:
            if stat.S_ISREG((folder / name).lstat().st_mode):
                ours.add(name)
        except OSError:
            continue
    return ours


def check_out_dir(out: Path, *, force: bool, inputs: Iterable[Path | str] = ()) -> None:
    """Refuse, before any work, an output folder that could not be written safely.

    Raises
    ------
    OutDirRefused
        `out` is a file; the root, the current folder, a home folder or an input's folder;
        non-empty without `force`; or non-empty without a manifest.
    """
    out = Path(out)
    if out.is_symlink() and not out.exists():
        raise OutDirRefused(f"{out}: is a broken link")
    if out.exists() and not out.is_dir():
        raise OutDirRefused(f"{out}: exists and is not a folder")
    _refuse_special(out, inputs)
    if not out.is_dir():
        return
    try:
        entries = os.listdir(out)
    except OSError as exc:
        raise OutDirRefused(f"{out}: cannot read the folder: {exc.strerror or exc}") from None
    if not entries:
        return
    if not force:
        raise OutDirRefused(f"{out}: folder is not empty; add --force to replace the files "
                            f"bandwright wrote there (listed in its {MANIFEST})")
    if read_manifest(out) is None:
        raise OutDirRefused(f"{out}: folder is not empty and has no {MANIFEST}, so none of its "
                            "files is known to be bandwright's; choose a new or empty folder")


@contextmanager
def _signals_held() -> Iterator[None]:
    """Defer SIGINT and SIGTERM while the folder changes; the first one that came is acted
    on when the block ends.

    A Python-level deferral rather than a signal mask: a mask holds only the calling
    thread, and a signal sent to the process may land on a BLAS worker thread.
    """
    pending: list[int] = []

    def defer(signum, frame) -> None:
        pending.append(signum)

    old = {}
    try:
        for s in _held_signals:
            old[s] = signal.signal(s, defer)
    except ValueError:  # not the main thread: signals are not ours to hold
        for s, h in old.items():
            signal.signal(s, h)
        yield
        return
    try:
        yield
    finally:
        for s, h in old.items():
            signal.signal(s, h)
        if pending:
            _deliver(pending[0], old[pending[0]])


def _deliver(signum: int, handler) -> None:
    if callable(handler):
        handler(signum, None)
    elif handler == signal.SIG_DFL:
        signal.raise_signal(signum)


def _pause(point: str) -> None:
    """Test hook: with BANDWRIGHT_PAUSE_WRITE=<point>:<marker>, write <marker> at `point`
    ('staged' or 'commit') and wait until <marker>.go exists (at most 60 s)."""
    spec = os.environ.get("BANDWRIGHT_PAUSE_WRITE", "")
    where, _, marker = spec.partition(":")
    if where != point or not marker:
        return
    Path(marker).write_text(point)
    go = Path(marker + ".go")
    deadline = time.monotonic() + 60
    while not go.exists() and time.monotonic() < deadline:
        time.sleep(0.01)


def _hidden_dir(parent: Path, tag: str) -> Path:
    """A new hidden folder in `parent`, made with the umask's mode (mkdtemp's is 0700)."""
    while True:
        path = parent / f"{_STAGE_PREFIX}{tag}-{secrets.token_hex(4)}"
        try:
            os.mkdir(path)
            return path
        except FileExistsError:
            continue


def _manifest_bytes(names: Iterable[str]) -> bytes:
    from bandwright import __version__
    doc = {"tool": "bandwright", "version": __version__,
           "about": "the files bandwright wrote in this folder; --force replaces only these",
           "files": sorted(names)}
    return (json.dumps(doc, indent=2) + "\n").encode()


def _stage(folder: Path, files: Mapping[str, bytes]) -> None:
    for name, data in files.items():
        (folder / name).write_bytes(data)
    (folder / MANIFEST).write_bytes(_manifest_bytes(files))


def write_out_dir(out: Path, files: Mapping[str, bytes], *, force: bool,
                  inputs: Iterable[Path | str] = (),
                  on_done: Callable[[], None] | None = None) -> None:
    """Write `files` (plain name → bytes) and a manifest into `out`, whole or not at all.

    `on_done` is called once the folder is complete, before a held signal is let through.

    Raises
    ------
    OutDirRefused
        As `check_out_dir`, or when a file to be written has the name of a file the
        manifest does not list.
    OSError
        A write or rename failed; `out` is as it was.
    """
    bad = [n for n in files if not _plain_name(n)]
    if bad:
        raise ValueError(f"not a plain file name: {bad[0]!r}")
    out = Path(out)
    inputs = tuple(inputs)
    check_out_dir(out, force=force, inputs=inputs)
    done = on_done or (lambda: None)
    if out.is_dir():
        _write_into(out, files, inputs, done)
    else:
        _write_new(out.absolute(), files, done)


def _write_new(target: Path, files: Mapping[str, bytes], done: Callable[[], None]) -> None:
    missing = [p for p in (target.parent, *target.parent.parents) if not p.exists()]
    stage = None
    try:
        with _signals_held():
            target.parent.mkdir(parents=True, exist_ok=True)
            stage = _hidden_dir(target.parent, target.name)
        _stage(stage, files)
        _pause("staged")
        with _signals_held():
            _pause("commit")
            _move(stage, target)
            stage = None
            done()
    except BaseException:
        with _signals_held():
            if stage is not None:
                shutil.rmtree(stage, ignore_errors=True)
            for p in missing:  # the parents this run made, innermost first
                try:
                    p.rmdir()
                except OSError:
                    break
        raise


def _write_into(target: Path, files: Mapping[str, bytes], inputs: tuple,
                done: Callable[[], None]) -> None:
    listed = read_manifest(target)
    ours = _ours(target, listed or set())
    if listed is not None:
        ours.add(MANIFEST)
    elif (target / MANIFEST).exists() or (target / MANIFEST).is_symlink():
        raise OutDirRefused(f"{target}: {MANIFEST} is not one bandwright can read; "
                            "choose a new or empty folder")
    protected = []
    for src in inputs:
        try:
            protected.append(Path(src).resolve())
        except OSError:
            continue
    ours = {n for n in ours if (target / n).resolve() not in protected}
    for name in files:
        p = target / name
        if name not in ours and (p.exists() or p.is_symlink()):
            raise OutDirRefused(f"{p}: not written by bandwright (not in {MANIFEST}); move it "
                                "or choose another folder")
    stage = backup = None
    try:
        with _signals_held():
            stage = _hidden_dir(target, "new")
        _stage(stage, files)
        _pause("staged")
        with _signals_held():
            _pause("commit")
            backup = _hidden_dir(target, "old")
            _swap(target, stage, backup, ours, [*files, MANIFEST])
            done()
    finally:
        with _signals_held():
            for d in (stage, backup):
                if d is not None:
                    shutil.rmtree(d, ignore_errors=True)


def _swap(target: Path, stage: Path, backup: Path, old: set[str], new: list[str]) -> None:
    """Move `old` into `backup` and `new` out of `stage`; on a failure, undo every move."""
    moved: list[str] = []
    placed: list[str] = []
    try:
        for name in sorted(old):
            _move(target / name, backup / name)
            moved.append(name)
        for name in new:  # the manifest comes last: a listed file is always in place
            _move(stage / name, target / name)
            placed.append(name)
    except BaseException:
        for name in reversed(placed):
            try:
                os.rename(target / name, stage / name)
            except OSError:
                pass
        for name in reversed(moved):
            try:
                os.rename(backup / name, target / name)
            except OSError:
                pass
        raise
