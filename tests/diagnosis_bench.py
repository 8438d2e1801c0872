"""ngspice as the bench for the diagnosis tests: a chain's deck with one part changed, swept,
with measurement noise added, written as the SWEEP.csv a user would bring.

The deck is the tool's ``chain.cir`` (``report.spice.spice_deck`` of the audited chain); every
change is made on the deck's text, as one would edit it by hand: a part's value scaled, an
op-amp given its own copy of the subcircuit with a slower pole, a stage bridged out by an
ideal buffer, two parts' values exchanged. The response then comes from ngspice alone.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from bandwright.audit import Audit
from bandwright.chain.graph import flatten
from bandwright.report.spice import spice_deck
from spice_tools import run_ngspice_ac

__all__ = ["chain_deck", "scale_part", "scale_gbw", "bridge_stage", "swap_parts",
           "bench_sweep", "write_sweep"]

_SUFFIX = {"t": 1e12, "g": 1e9, "meg": 1e6, "k": 1e3, "m": 1e-3, "u": 1e-6, "n": 1e-9,
           "p": 1e-12, "f": 1e-15}
_NUMBER = re.compile(r"^([-+]?(?:\d+\.?\d*|\.\d+)(?:e[-+]?\d+)?)(meg|[tgkmunpf])?$", re.I)


def _spice_number(text: str) -> float:
    """A SPICE number with its scale suffix (ngspice-39 manual, 'Scale factors' [mem])."""
    m = _NUMBER.match(text.strip())
    if not m:
        raise ValueError(text)
    return float(m.group(1)) * _SUFFIX.get((m.group(2) or "").lower(), 1.0)


def chain_deck(audit: Audit) -> str:
    """The audited chain's ngspice deck, as `--out` writes it."""
    req = audit.requirement
    return spice_deck(flatten(audit.chain), source_ohms=audit.chain.source_ohms,
                      temperature_c=req.environment.temperature_c, title="bench")


def _line_of(deck: str, name: str) -> tuple[list[str], int]:
    lines = deck.splitlines()
    for i, line in enumerate(lines):
        if line.split()[:1] == [name]:
            return lines, i
    raise KeyError(name)


def scale_part(deck: str, stage: int, part: str, factor: float) -> str:
    """`deck` with part `part` of stage `stage` (deck name ``<part>_s<stage>``) scaled."""
    lines, i = _line_of(deck, f"{part}_s{stage}")
    f = lines[i].split()
    f[3] = repr(_spice_number(f[3]) * factor)
    lines[i] = " ".join(f)
    return "\n".join(lines) + "\n"


def swap_parts(deck: str, stage: int, a: str, b: str) -> str:
    """`deck` with the values of two parts of one stage exchanged."""
    lines, i = _line_of(deck, f"{a}_s{stage}")
    _, j = _line_of(deck, f"{b}_s{stage}")
    fi, fj = lines[i].split(), lines[j].split()
    fi[3], fj[3] = fj[3], fi[3]
    lines[i], lines[j] = " ".join(fi), " ".join(fj)
    return "\n".join(lines) + "\n"


def scale_gbw(deck: str, stage: int, opamp: str, factor: float) -> str:
    """`deck` with one op-amp's GBW times `factor`: its own copy of the subcircuit whose
    pole capacitor C_P (1/(2 pi GBW), see the deck's comments) is divided by `factor`."""
    lines, i = _line_of(deck, f"X{opamp}_s{stage}")
    inst = lines[i].split()
    sub = inst[-1]
    start = next(k for k, l in enumerate(lines) if l.split()[:2] == [".subckt", sub])
    end = next(k for k in range(start, len(lines)) if lines[k].split()[:1] == [".ends"])
    copy = [l for l in lines[start:end + 1]]
    new = f"{sub}_slow"
    copy[0] = copy[0].replace(sub, new)
    copy[-1] = copy[-1].replace(sub, new)
    for k, l in enumerate(copy):
        f = l.split()
        if f[:1] == ["C_P"]:
            f[3] = repr(_spice_number(f[3]) / factor)
            copy[k] = " ".join(f)
        elif f[:1] == [".model"]:
            copy[k] = l.replace(f[1], f[1] + "_slow")
        elif f[:1] and f[0].startswith("D_"):
            copy[k] = " ".join(f[:3] + [f[3] + "_slow"])
    inst[-1] = new
    lines[i] = " ".join(inst)
    lines[end + 1:end + 1] = copy
    return "\n".join(lines) + "\n"


def bridge_stage(deck: str, stage: int, *, last: bool) -> str:
    """`deck` with every part of stage `stage` removed and its input buffered straight to
    its output net (a stage left off the board, its sockets bridged)."""
    keep = [l for l in deck.splitlines()
            if not re.match(rf"^\S+_s{stage}\s", l)]
    inp = "in" if stage == 1 else f"s{stage - 1}_out"
    out = "out" if last else f"s{stage}_out"
    end = len(keep) - 1 - keep[::-1].index(".end")
    keep.insert(end, f"E_BRIDGE {out} 0 {inp} 0 1")
    return "\n".join(keep) + "\n"


def bench_sweep(deck: str, f_lo_hz: float, f_hi_hz: float, points: int, tmp_path: Path
                ) -> tuple[np.ndarray, np.ndarray]:
    """ngspice AC sweep of v(out) per volt of VIN: (freq_hz, complex H), about `points`
    log-spaced points."""
    ppd = max(1, int(round(points / math.log10(f_hi_hz / f_lo_hz))))
    data = run_ngspice_ac(deck, f_lo_hz, f_hi_hz, ppd, ["out"], tmp_path)
    return data["frequency"], data["out"]


def write_sweep(path: Path, freq_hz: np.ndarray, h: np.ndarray, *, noise_db: float,
                seed: int, phase: bool = False, noise_deg: float = 0.0) -> Path:
    """SWEEP.csv of a bench response with uniform reading noise of ±noise_db (and ±noise_deg
    on the phase), seeded."""
    rng = np.random.default_rng(seed)
    g = 20 * np.log10(np.abs(h)) + rng.uniform(-noise_db, noise_db, size=h.size)
    rows = ["# bench sweep (ngspice) with seeded reading noise",
            "freq_hz,gain_db" + (",phase_deg" if phase else "")]
    ph = np.degrees(np.angle(h)) + rng.uniform(-noise_deg, noise_deg, size=h.size)
    for k in range(h.size):
        row = f"{float(freq_hz[k])!r},{g[k]:.5f}"
        if phase:
            row += f",{ph[k]:.4f}"
        rows.append(row)
    Path(path).write_text("\n".join(rows) + "\n")
    return Path(path)
