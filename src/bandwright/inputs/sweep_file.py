"""The measured sweep (SWEEP.csv of ``bandwright audit --measured``): a header line naming
the columns, then one row per frequency; every problem is a SpecError naming the file, the
line and the column.

Format (docs/design.md, "Audit"): comma-separated; a header naming ``freq_hz`` and ``gain_db``
and optionally ``phase_deg``, in any order (other columns are ignored); lines starting
with ``#`` (after white space) and blank lines are skipped anywhere. Gain is the output
over the source's open-circuit voltage, in dB, as everywhere in the tool.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from bandwright.errors import SpecError
from bandwright.inputs.reader import read_input_bytes
from bandwright.parts.notation import format_hz

__all__ = ["Sweep", "load_sweep", "check_covers", "MIN_POINTS", "COLUMNS"]

#: Fewest measured points a diagnosis accepts: fewer cannot tell a part's effect on f0, Q
#: and gain apart from the measurement's own scatter.
MIN_POINTS = 10
#: Column names (fixed: other programs write them).
COLUMNS = ("freq_hz", "gain_db", "phase_deg")
_REQUIRED = ("freq_hz", "gain_db")


@dataclass(frozen=True)
class Sweep:
    """A measured frequency sweep.

    Attributes
    ----------
    path : str
    freq_hz : ndarray of float
        Strictly increasing, > 0.
    gain_db : ndarray of float
        Output over the source's open-circuit voltage, dB.
    phase_deg : ndarray of float or None
        Phase of the same ratio, degrees (any multiple of 360 may be added), when measured.
    lines : tuple of int
        The file's line number of every point (for messages).
    """

    path: str
    freq_hz: np.ndarray
    gain_db: np.ndarray
    phase_deg: np.ndarray | None
    lines: tuple[int, ...]


def _cells(text: str) -> list[str]:
    return [c.strip() for c in text.split(",")]


def _number(path: str, line: int, column: str, cell: str) -> float:
    try:
        x = float(cell)
    except ValueError:
        raise SpecError(path, column, f"not a number: {cell!r}" if cell else
                        "not a number: an empty cell", line=line) from None
    if math.isnan(x):
        raise SpecError(path, column, "NaN is not a measurement", value=cell, line=line)
    if not math.isfinite(x):
        raise SpecError(path, column, "must be a finite number", value=cell, line=line)
    return x


def load_sweep(path: str | Path) -> Sweep:
    """Read and validate a measured sweep.

    Parameters
    ----------
    path : str or Path
        The CSV file.

    Returns
    -------
    Sweep

    Raises
    ------
    SpecError
        Unreadable file; no header, or a header without ``freq_hz`` or ``gain_db``; a row
        with too few cells; a cell that is not a finite number (NaN included); a frequency
        that is not > 0 or not above the one before it; fewer than `MIN_POINTS` rows. The
        message names the file, the line and the column.
    """
    p = str(path)
    raw = read_input_bytes(path)  # a regular file of bounded size, as every input
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise SpecError(p, "", f"not a UTF-8 text file (byte {raw[exc.start]:#04x})",
                        line=line) from None
    rows = [(n, t) for n, t in enumerate(text.splitlines(), start=1)
            if t.strip() and not t.lstrip().startswith("#")]
    if not rows:
        raise SpecError(p, "", "no header line: expected one naming freq_hz, gain_db "
                        "(and optionally phase_deg)")
    head_line, head = rows[0]
    names = [c.lower() for c in _cells(head)]
    for need in _REQUIRED:
        if need not in names:
            raise SpecError(p, need, f"missing column: the header names {', '.join(names)}; "
                            f"it needs {', '.join(_REQUIRED)} (phase_deg optional)",
                            line=head_line)
    for name in COLUMNS:
        if names.count(name) > 1:
            raise SpecError(p, name, "column named twice in the header", line=head_line)
    index = {name: names.index(name) for name in COLUMNS if name in names}
    cols: dict[str, list[float]] = {name: [] for name in index}
    lines: list[int] = []
    for n, t in rows[1:]:
        cells = _cells(t)
        for name, k in index.items():
            if k >= len(cells):
                raise SpecError(p, name, f"the row has {len(cells)} cells, the header "
                                f"{len(names)}", line=n)
            cols[name].append(_number(p, n, name, cells[k]))
        lines.append(n)
    f = np.array(cols["freq_hz"], dtype=float)
    g = np.array(cols["gain_db"], dtype=float)
    for k, (x, n) in enumerate(zip(f, lines)):
        if not x > 0:
            raise SpecError(p, "freq_hz", "must be > 0", value=float(x), line=n)
        if k and not x > f[k - 1]:
            raise SpecError(p, "freq_hz", f"must increase from row to row (the row before "
                            f"has {f[k - 1]:g})", value=float(x), line=n)
    if f.size < MIN_POINTS:
        raise SpecError(p, "freq_hz", f"{f.size} points; a diagnosis needs at least "
                        f"{MIN_POINTS}", line=lines[-1] if lines else head_line)
    ph = np.array(cols["phase_deg"], dtype=float) if "phase_deg" in cols else None
    return Sweep(path=p, freq_hz=f, gain_db=g, phase_deg=ph, lines=tuple(lines))


def check_covers(sweep: Sweep, low_hz: float, high_hz: float, *, min_inside: int = 3) -> None:
    """Refuse a sweep that misses the passband.

    Parameters
    ----------
    sweep : Sweep
    low_hz, high_hz : float
        The chain's passband (the audit file's, or the -3 dB band read off the built
        response when the file states none).
    min_inside : int
        Fewest points that must fall inside [low_hz, high_hz].

    Raises
    ------
    SpecError
        Naming the file and the ``freq_hz`` column (the line of the sweep's last point).
    """
    inside = int(np.count_nonzero((sweep.freq_hz >= low_hz) & (sweep.freq_hz <= high_hz)))
    if inside < min_inside:
        raise SpecError(sweep.path, "freq_hz",
                        f"the sweep ({format_hz(sweep.freq_hz[0], significant=6)} to "
                        f"{format_hz(sweep.freq_hz[-1], significant=6)}) "
                        f"has {inside} point{'s' if inside != 1 else ''} inside the passband "
                        f"{format_hz(low_hz, significant=6)} to "
                        f"{format_hz(high_hz, significant=6)}; it needs "
                        f"at least {min_inside}",
                        line=sweep.lines[-1])
