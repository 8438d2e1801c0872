"""matplotlib set up to write nothing outside --out and bandwright's cache, and to say
nothing on stderr.

Call `quiet_matplotlib()` right before the first import of matplotlib (or of schemdraw, which
imports it): matplotlib reads its config and cache folder once, at import.
"""

from __future__ import annotations

import atexit
import logging
import os
import shutil
import sys
import tempfile
import warnings

from bandwright.cache import cache_root

__all__ = ["quiet_matplotlib"]

_done = False


def _kept_folder() -> str | None:
    """bandwright's own cache folder for matplotlib (``bandwright.cache``), made if need be
    and writable; None when the cache is off or the folder cannot be used."""
    root = cache_root()
    if root is None:
        return None
    folder = root / "matplotlib"
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError:
        return None
    return str(folder) if os.access(folder, os.W_OK | os.X_OK) else None


def quiet_matplotlib() -> None:
    """Point matplotlib's config and font cache at a folder of our own, unless MPLCONFIGDIR
    names one already; keep its warnings and log off stderr.

    The folder is ``matplotlib`` in bandwright's cache (``bandwright.cache``): matplotlib
    then lists the system's fonts once and reads that list back on later runs (listing them
    costs about 0.1 s with a few dozen fonts, seconds with thousands). With the cache off
    or not writable, a temporary folder removed at exit instead. Without any, the first
    run writes a font cache under the home folder (or warns that it cannot), and a user's
    matplotlibrc would change the plots; a figure whose layout cannot be applied warns on
    every run.
    """
    global _done
    if _done:
        return
    _done = True
    if "matplotlib" not in sys.modules and not os.environ.get("MPLCONFIGDIR"):
        folder = _kept_folder()
        if folder is None:
            folder = tempfile.mkdtemp(prefix="bandwright-mpl-")
            atexit.register(shutil.rmtree, folder, ignore_errors=True)
        os.environ["MPLCONFIGDIR"] = folder
    logging.getLogger("matplotlib").setLevel(logging.ERROR)
    warnings.filterwarnings("ignore", module=r"matplotlib(\.|$)")
    warnings.filterwarnings("ignore", message=r".*constrained_layout not applied.*")
