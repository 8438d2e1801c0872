"""Where bandwright keeps what it may reuse between runs (and nothing it cannot rebuild).

``$BANDWRIGHT_CACHE`` when set ("", "0", "off" or "none": no cache at all), else
``$XDG_CACHE_HOME/bandwright``, else ``~/.cache/bandwright``. Two things live there, each
in a folder of its own: the circuits' monomial expansions (``circuits.expansion_cache``)
and matplotlib's font list (``report._mpl``). Deleting the folder at any time is safe.
"""

from __future__ import annotations

import os
from pathlib import Path

__all__ = ["CACHE_VARIABLE", "cache_root"]

#: Environment variable naming the cache folder ("" or "off" turns the cache off).
CACHE_VARIABLE = "BANDWRIGHT_CACHE"
_OFF = ("", "0", "off", "none")


def cache_root() -> Path | None:
    """The cache folder (not created here), or None when the cache is off."""
    env = os.environ.get(CACHE_VARIABLE)
    if env is not None:
        return None if env.strip().lower() in _OFF else Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "bandwright"
