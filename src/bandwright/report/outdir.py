"""Writing an output folder atomically: all files or none."""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path
from typing import Mapping

__all__ = ["OutDirRefused", "check_out_dir", "write_out_dir"]


class OutDirRefused(Exception):
    """The output folder exists, is not empty, and --force was not given."""


def check_out_dir(out: Path, *, force: bool) -> None:
    """Refuse a non-empty existing folder without `force`, or a path that is a file."""
    if out.exists() and not out.is_dir():
        raise OutDirRefused(f"{out}: exists and is not a folder")
    if out.is_dir() and any(out.iterdir()) and not force:
        raise OutDirRefused(f"{out}: folder is not empty; add --force to replace its contents")


def write_out_dir(out: Path, files: Mapping[str, bytes], *, force: bool) -> None:
    """Write `files` (name → bytes) into a temporary folder beside `out`, then swap it in.

    An interrupted or failed run leaves `out` as it was.
    """
    check_out_dir(out, force=force)
    out = out.resolve()
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", dir=out.parent))
    try:
        for name, data in files.items():
            target = tmp / name
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(data)
        if out.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{out.name}.old.", dir=out.parent))
            os.rename(out, old / "x")
            os.rename(tmp, out)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.rename(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
