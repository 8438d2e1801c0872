"""Run ngspice in batch mode from a test and read what it wrote.

Generic helper for any test that cross-checks against ngspice (Debian package, version 39).
A deck's ``.control`` block must end in ``quit 0``: in batch mode ngspice otherwise exits 1
with "no simulations run" (docs/methods.md). Errors are read from ngspice's output rather
than from its exit status.

Typical use::

    from ngspice_runner import WRDATA_SETUP, ngspice_available, read_wrdata, run_ngspice

    if not ngspice_available():
        pytest.skip("ngspice not installed")
    deck = f'''title
    V1 in 0 AC 1
    R1 in out 1k
    C1 out 0 1u
    .control
    {WRDATA_SETUP}
    ac dec 10 10 100k
    wrdata ac.txt v(out)
    quit 0
    .endc
    .end
    '''
    run_ngspice(deck, tmp_path)
    data = read_wrdata(tmp_path / "ac.txt")   # {"frequency": ..., "v(out)": complex ...}
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import numpy as np

__all__ = ["NgspiceError", "WRDATA_SETUP", "ngspice_available", "run_ngspice", "read_wrdata",
           "read_wrdata_columns"]

# One scale column and a header line of vector names: what read_wrdata expects. Values
# come out with 9 significant digits (relative resolution 1e-8).
WRDATA_SETUP = "set wr_singlescale\nset wr_vecnames"

_ERROR_LINE = re.compile(r"^\s*(\*+\s*)?error\b.*$", re.IGNORECASE | re.MULTILINE)


class NgspiceError(RuntimeError):
    """ngspice reported an error (the message holds its output)."""


def ngspice_available() -> bool:
    """True if an ``ngspice`` executable is on PATH."""
    return shutil.which("ngspice") is not None


def run_ngspice(deck_text: str, tmp_path: Path, *, name: str = "deck.cir",
                timeout_s: float = 60.0) -> str:
    """Write `deck_text` to ``tmp_path / name``, run ``ngspice -b`` there, return stdout.

    Files the deck writes with relative names (``wrdata out.txt ...``) land in `tmp_path`.

    Raises
    ------
    NgspiceError
        If the output contains an error line, or ngspice exits non-zero.
    """
    tmp_path = Path(tmp_path)
    deck = tmp_path / name
    deck.write_text(deck_text if deck_text.endswith("\n") else deck_text + "\n")
    proc = subprocess.run(["ngspice", "-b", name], cwd=tmp_path, capture_output=True, text=True,
                          timeout=timeout_s, check=False)
    output = proc.stdout + proc.stderr
    errors = _ERROR_LINE.findall(output)
    if errors or proc.returncode != 0:
        raise NgspiceError(f"ngspice exit {proc.returncode}; errors {errors}\n{output}")
    return proc.stdout


def read_wrdata_columns(path: Path) -> np.ndarray:
    """All numeric columns of a ``wrdata`` file as a float array (rows, columns).

    A header line (``set wr_vecnames``) is skipped if present.
    """
    lines = Path(path).read_text().splitlines()
    rows = [line.split() for line in lines if line.strip()]
    if rows and not _is_number(rows[0][0]):
        rows = rows[1:]
    return np.array([[float(x) for x in row] for row in rows], dtype=float)


def read_wrdata(path: Path) -> dict[str, np.ndarray]:
    """Vectors of a ``wrdata`` file written with ``WRDATA_SETUP`` (header, one scale).

    Returns
    -------
    dict of str to ndarray
        The scale (e.g. "frequency") and each vector by the name in the header. A complex
        vector is written as two columns under the same name (real, imaginary) and is
        returned as one complex array.
    """
    lines = [line for line in Path(path).read_text().splitlines() if line.strip()]
    if not lines or _is_number(lines[0].split()[0]):
        raise ValueError(f"{path}: no header line; write it after 'set wr_vecnames'")
    names = lines[0].split()
    data = read_wrdata_columns(path)
    if data.shape[1] != len(names):
        raise ValueError(f"{path}: {len(names)} names but {data.shape[1]} columns")
    out: dict[str, np.ndarray] = {}
    col = 0
    while col < len(names):
        name = names[col]
        if col + 1 < len(names) and names[col + 1] == name:
            out[name] = data[:, col] + 1j * data[:, col + 1]
            col += 2
        else:
            out[name] = data[:, col]
            col += 1
    return out


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True
