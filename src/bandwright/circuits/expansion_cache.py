"""The monomial expansions kept on disk between runs.

``expansion._moebius`` is a pure function of two integer arrays (the constant MNA matrix
and the variable stamps of one wiring): its 2^n determinants cost 0.1–0.2 s for a
fifteen-variable section, every run, for the same few wirings. Its result is kept here,
keyed by a hash of exactly those arrays, so a change to a wiring (or to the stamping code)
gives a new key and the element list stays the one truth; an unreadable or inconsistent
entry is derived again and rewritten.

Where: the folder ``expansions`` of ``bandwright.cache.cache_root()`` (``$BANDWRIGHT_CACHE``,
else ``$XDG_CACHE_HOME/bandwright`` or ``~/.cache/bandwright``; "off": no cache); a folder
that cannot be written only means no cache. Entries are small (.npz, a few kB) and written
atomically.
"""

from __future__ import annotations

import hashlib
import os
import tempfile
from pathlib import Path

import numpy as np

from bandwright.cache import CACHE_VARIABLE, cache_root

__all__ = ["cache_dir", "load", "store", "key_of", "CACHE_VARIABLE"]

# Bumped whenever the stored layout or the meaning of an entry changes.
_FORMAT = b"bandwright-expansion-1"


def cache_dir() -> Path | None:
    """The folder entries go to, or None when the cache is off."""
    root = cache_root()
    return None if root is None else root / "expansions"


def key_of(f_const: np.ndarray, stamps: np.ndarray) -> str:
    """Hash of the arrays ``_moebius`` reads (shapes, dtype and every entry)."""
    h = hashlib.sha256(_FORMAT)
    for a in (f_const, stamps):
        a = np.ascontiguousarray(a, dtype=float)
        h.update(repr(a.shape).encode())
        h.update(a.tobytes())
    return h.hexdigest()[:40]


def load(key: str, n_vars: int) -> tuple[np.ndarray, np.ndarray] | None:
    """(masks, coefs) stored under `key`, or None (no cache, no entry, or a bad entry)."""
    folder = cache_dir()
    if folder is None:
        return None
    try:
        with np.load(folder / f"{key}.npz", allow_pickle=False) as z:
            masks, coefs = z["masks"], z["coefs"]
    except (OSError, ValueError, KeyError, EOFError):
        return None
    if (masks.dtype != bool or coefs.dtype != np.int64 or masks.ndim != 2
            or masks.shape[1] != n_vars or coefs.shape != (masks.shape[0],)):
        return None
    return masks, coefs


def store(key: str, masks: np.ndarray, coefs: np.ndarray) -> None:
    """Write one entry atomically (a temporary file renamed into place); any failure to
    write is ignored: the cache only saves time."""
    folder = cache_dir()
    if folder is None:
        return
    tmp = None
    try:
        folder.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=folder, prefix=".tmp-", suffix=".npz")
        with os.fdopen(fd, "wb") as fh:
            np.savez(fh, masks=np.asarray(masks, dtype=bool),
                     coefs=np.asarray(coefs, dtype=np.int64))
        os.replace(tmp, folder / f"{key}.npz")
        tmp = None
    except OSError:
        pass
    finally:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
