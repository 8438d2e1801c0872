"""Run analyses on a written deck (``report.spice.spice_deck``) with ngspice and read them back.

A deck as written holds no analysis (docs/design.md: no ``.control`` block). These helpers copy
it, insert a ``.control`` block before the final ``.end`` -- ending in ``quit 0``, without
which ``ngspice -b`` exits 1 (docs/methods.md) -- run it with ``ngspice_runner.run_ngspice``
(which reads errors from ngspice's output) and parse what it wrote.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

from ngspice_runner import WRDATA_SETUP, read_wrdata, run_ngspice

__all__ = ["NgspiceNoise", "with_control", "run_ngspice_ac", "run_ngspice_noise",
           "run_ngspice_op", "run_ngspice_ac_points", "run_ngspice_ac_lin"]

_PRINTED = re.compile(r"^\s*(\S+)\s*=\s*([-+0-9.eE]+)\s*$", re.MULTILINE)


def with_control(deck: str, commands: Sequence[str]) -> str:
    """`deck` with a ``.control`` block of `commands` (then ``quit 0``) before its ``.end``."""
    lines = deck.rstrip("\n").splitlines()
    if not lines or lines[-1].strip().lower() != ".end":
        raise ValueError("the deck does not end in .end")
    block = [".control", *commands, "quit 0", ".endc"]
    return "\n".join(lines[:-1] + block + [lines[-1]]) + "\n"


def _sweep(points_per_decade: int, freq_hz_start: float, freq_hz_stop: float) -> str:
    return f"dec {int(points_per_decade)} {freq_hz_start!r} {freq_hz_stop!r}"


def run_ngspice_ac(deck: str, freq_hz_start: float, freq_hz_stop: float,
                   points_per_decade: int, nets: Sequence[str], tmp_path: Path
                   ) -> dict[str, np.ndarray]:
    """AC analysis of `deck`: {"frequency": Hz, net: complex V(net) per volt of VIN}."""
    probes = " ".join(f"v({n})" for n in nets)
    text = with_control(deck, [WRDATA_SETUP,
                               f"ac {_sweep(points_per_decade, freq_hz_start, freq_hz_stop)}",
                               f"wrdata ac.txt {probes}"])
    run_ngspice(text, tmp_path, name="ac.cir")
    data = read_wrdata(Path(tmp_path) / "ac.txt")
    return {"frequency": data["frequency"].real,
            **{n: np.asarray(data[f"v({n})"], dtype=complex) for n in nets}}


@dataclass(frozen=True)
class NgspiceNoise:
    """What ``.noise`` printed: output density per frequency and its integral."""

    freq_hz: np.ndarray
    onoise_v_per_rthz: np.ndarray
    onoise_total_vrms: float


def run_ngspice_noise(deck: str, freq_hz_start: float, freq_hz_stop: float,
                      points_per_decade: int, tmp_path: Path, *, out_net: str = "out",
                      source: str = "vin") -> NgspiceNoise:
    """``.noise`` at `out_net` referred to `source`: onoise_spectrum and onoise_total."""
    text = with_control(deck, [
        WRDATA_SETUP,
        f"noise v({out_net}) {source} {_sweep(points_per_decade, freq_hz_start, freq_hz_stop)}",
        "setplot noise1",
        "wrdata noise.txt onoise_spectrum",
        "setplot noise2",
        "print onoise_total"])
    stdout = run_ngspice(text, tmp_path, name="noise.cir")
    data = read_wrdata(Path(tmp_path) / "noise.txt")
    printed = dict(_PRINTED.findall(stdout))
    return NgspiceNoise(freq_hz=data["frequency"], onoise_v_per_rthz=data["onoise_spectrum"],
                        onoise_total_vrms=float(printed["onoise_total"]))


def run_ngspice_op(deck: str, tmp_path: Path) -> dict[str, float]:
    """DC operating point: every vector ``print all`` shows (node voltages, branch currents)."""
    stdout = run_ngspice(with_control(deck, ["op", "print all"]), tmp_path, name="op.cir")
    return {name: float(value) for name, value in _PRINTED.findall(stdout)}


def run_ngspice_ac_points(deck: str, freq_hz: Sequence[float], nets: Sequence[str],
                          tmp_path: Path) -> dict[str, np.ndarray]:
    """AC analysis at exactly the frequencies `freq_hz`: {"frequency": Hz, net: complex V}.

    ngspice's ``.ac`` sweeps take no list of frequencies, so every frequency is its own
    one-point sweep ``ac lin 1 f f`` (a new plot each), written to its own file. Frequencies
    are written as their Python repr, which reads back as the same float.
    """
    probes = " ".join(f"v({n})" for n in nets)
    freqs = [float(f) for f in freq_hz]
    commands = [WRDATA_SETUP]
    for k, f in enumerate(freqs):
        commands += [f"ac lin 1 {f!r} {f!r}", f"wrdata point{k}.txt {probes}"]
    run_ngspice(with_control(deck, commands), tmp_path, name="ac_points.cir")
    rows = [read_wrdata(Path(tmp_path) / f"point{k}.txt") for k in range(len(freqs))]
    return {"frequency": np.array([r["frequency"].real[0] for r in rows]),
            **{n: np.array([complex(r[f"v({n})"][0]) for r in rows]) for n in nets}}


def run_ngspice_ac_lin(deck: str, freq_hz_start: float, freq_hz_stop: float, points: int,
                       nets: Sequence[str], tmp_path: Path) -> dict[str, np.ndarray]:
    """AC analysis on a linear sweep of `points` frequencies: {"frequency": Hz, net: V}."""
    probes = " ".join(f"v({n})" for n in nets)
    start, stop = float(freq_hz_start), float(freq_hz_stop)  # a numpy scalar's repr is no number
    text = with_control(deck, [WRDATA_SETUP,
                               f"ac lin {int(points)} {start!r} {stop!r}",
                               f"wrdata aclin.txt {probes}"])
    run_ngspice(text, tmp_path, name="ac_lin.cir")
    data = read_wrdata(Path(tmp_path) / "aclin.txt")
    return {"frequency": data["frequency"].real,
            **{n: np.asarray(data[f"v({n})"], dtype=complex) for n in nets}}
