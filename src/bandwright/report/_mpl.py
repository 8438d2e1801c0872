"""matplotlib set up to write nothing outside --out and to say nothing on stderr.

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

__all__ = ["quiet_matplotlib"]

_done = False


def quiet_matplotlib() -> None:
    """Point matplotlib's config and font cache at a temporary folder of our own, removed at
    exit, unless MPLCONFIGDIR names one already; keep its warnings and log off stderr.

    Without it the first run writes a font cache under the home folder (or warns that it
    cannot), and a figure whose layout cannot be applied warns on every run.
    """
    global _done
    if _done:
        return
    _done = True
    if "matplotlib" not in sys.modules and not os.environ.get("MPLCONFIGDIR"):
        folder = tempfile.mkdtemp(prefix="bandwright-mpl-")
        os.environ["MPLCONFIGDIR"] = folder
        atexit.register(shutil.rmtree, folder, ignore_errors=True)
    logging.getLogger("matplotlib").setLevel(logging.ERROR)
    warnings.filterwarnings("ignore", module=r"matplotlib(\.|$)")
    warnings.filterwarnings("ignore", message=r".*constrained_layout not applied.*")
