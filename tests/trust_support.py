"""Helpers for the trust tests: an independent recomputation of a plan's mask from its element
lists, and walks over its outputs for NaN, infinity and missing figures.

The recomputation does not use the planner's response path (a product of per-stage
transfers in ``chain.graph.net_transfers``): it flattens the whole chain into one element
list and solves it as one circuit with ``circuits.nodal.ac_solve``, source resistance
included, so inter-stage loading would show and so would any error in the product.
"""

from __future__ import annotations

import io
import math
import re
from dataclasses import dataclass
from typing import Any, Iterator

import numpy as np
from rich.console import Console

from bandwright.analysis.grid import passband_grid
from bandwright.chain.graph import CHAIN_INPUT, CHAIN_OUTPUT, flatten
from bandwright.circuits.nodal import ac_solve

__all__ = ["MaskFigures", "recompute_mask", "non_finite_paths", "missing_figures",
           "terminal_text", "NON_FINITE_WORD"]

# "nan", "inf", "infinity" as words in rendered text (not inside "infeasible").
NON_FINITE_WORD = re.compile(r"(?<![A-Za-z])(nan|[+-]?inf(inity)?)(?![A-Za-z])", re.IGNORECASE)


@dataclass(frozen=True)
class MaskFigures:
    """The mask's figures of a built chain, recomputed.

    Attributes
    ----------
    passband_freq_hz, passband_gain_db : ndarray
    worst_loss_db : float
        gain_db minus the least passband gain.
    peak_error_db : float
        Passband maximum minus gain_db.
    stop_loss_db : ndarray
        gain_db minus the gain at each stopband point.
    """

    passband_freq_hz: np.ndarray
    passband_gain_db: np.ndarray
    worst_loss_db: float
    peak_error_db: float
    stop_loss_db: np.ndarray

    def meets(self, req, *, slack_db: float = 1e-6) -> bool:
        pb = req.passband
        return (self.worst_loss_db <= pb.max_loss_db + slack_db
                and abs(self.peak_error_db) <= pb.gain_tolerance_db + slack_db
                and all(a >= p.min_loss_db - slack_db
                        for a, p in zip(self.stop_loss_db, req.stopband)))


def recompute_mask(chain, req, passband_hz: np.ndarray | None = None) -> MaskFigures:
    """Solve the flattened chain at the mask points (the passband grid the check uses,
    or `passband_hz`, and every stopband point)."""
    pf = passband_grid(req) if passband_hz is None else np.asarray(passband_hz, dtype=float)
    sf = np.array([p.freq_hz for p in req.stopband], dtype=float)
    sol = ac_solve(flatten(chain), np.concatenate([pf, sf]), input_net=CHAIN_INPUT,
                   source_ohms=chain.source_ohms)
    g = 20 * np.log10(np.abs(sol.at(CHAIN_OUTPUT)))
    gp, gs = g[: pf.size], g[pf.size:]
    pb = req.passband
    return MaskFigures(passband_freq_hz=pf, passband_gain_db=gp,
                       worst_loss_db=float(pb.gain_db - gp.min()),
                       peak_error_db=float(gp.max() - pb.gain_db),
                       stop_loss_db=pb.gain_db - gs)


def non_finite_paths(doc: Any, path: str = "") -> Iterator[str]:
    """Every place in a JSON-like document holding a NaN or an infinity."""
    if isinstance(doc, float) and not math.isfinite(doc):
        yield path or "<root>"
    elif isinstance(doc, dict):
        for k, v in doc.items():
            yield from non_finite_paths(v, f"{path}.{k}")
    elif isinstance(doc, (list, tuple)):
        for i, v in enumerate(doc):
            yield from non_finite_paths(v, f"{path}[{i}]")


# Figures that a built chain always has: a null there is a NaN or infinity that json_out.num
# turned into null, i.e. a figure the tool failed to compute.
_ARRAYS = (("response", ("freq_hz", "gain_db", "phase_deg")),
           ("noise", ("freq_hz", "output_v_per_rthz")))
_STAGE = ("f0_hz", "q", "gain")
_NODE = ("peak_vpk", "limit_vpk", "margin_db", "signal_vpk")


def missing_figures(doc: dict) -> list[str]:
    """Paths of nulls where a plan JSON of a built chain must have numbers."""
    out = []
    if doc.get("response") is None:  # an unbuildable design: no chain figures at all
        return out
    for table, keys in _ARRAYS:
        for k in keys:
            out += [f"{table}.{k}[{i}]" for i, v in enumerate(doc[table][k]) if v is None]
    if doc["noise"]["integrated_vrms"] is None:
        out.append("noise.integrated_vrms")
    for i, st in enumerate(doc["stages"]):
        for k in _STAGE:
            if st["kind"] != "gain" and st["target"][k] is None:
                out.append(f"stages[{i}].target.{k}")
            if st["kind"] != "gain" and st["built"][k] is None:
                out.append(f"stages[{i}].built.{k}")
        out += [f"stages[{i}].components.{n}" for n, v in st["components"].items() if v is None]
    for i, n in enumerate(doc["nodes"]):
        out += [f"nodes[{i}].{k}" for k in _NODE if n[k] is None]
    return out


def terminal_text(render, result) -> str:
    """What a terminal renderer prints for `result`, as plain text."""
    buf = io.StringIO()
    render(result, Console(file=buf, width=120, no_color=True, highlight=False))
    return buf.getvalue()
