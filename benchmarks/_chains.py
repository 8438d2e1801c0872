"""Chains and requirements the benchmarks share (built through the project's own pipeline:
candidates → topology assignment → series parts; no timing here)."""

from __future__ import annotations

import math

import numpy as np

from bandwright.analysis.grid import passband_grid
from bandwright.analysis.levels import net_transfers
from bandwright.candidates import make_candidates
from bandwright.chain.graph import CHAIN_OUTPUT, Chain, build_chain
from bandwright.chain.stage import Stage
from bandwright.circuits.assign import assign
from bandwright.parts.catalogue import archetype
from bandwright.inputs.loader import spec_from_dict
from bandwright.inputs.requirement import Requirement

__all__ = ["six_section_chain", "grid_for_ngspice"]


def _stage(position: int, a, model) -> Stage:
    r = a.realization
    return Stage(position=position, topology=r.topology, target=r.target,
                 components=r.components, elements=r.elements, model=model, built=r.built,
                 ideal=r.ideal)


def six_section_chain() -> tuple[Chain, Requirement]:
    """A sixth-order Butterworth bandpass (10 kHz, 4 kHz wide): six sections, each built
    with series parts by the topology assignment, finite-GBW op-amps ('wideband'
    archetype), 100 Ω source; and a requirement around its nominal response (1 % resistors,
    2 % capacitors, ±20 % GBW, one out-of-band tone for headroom)."""
    doc = {"passband": {"center_hz": 10e3, "bandwidth_hz": 4e3, "max_loss_db": 0.5},
           "design": {"order": 6, "family": "butterworth"}}
    req0 = spec_from_dict(doc)
    model = archetype("wideband")
    (cand, *_) = make_candidates(req0)
    stages = [_stage(i + 1, assign(s, model), model) for i, s in enumerate(cand.sections)]
    chain = build_chain(stages, source_ohms=100.0)
    pb = passband_grid(req0)
    h = np.abs(net_transfers(chain, pb)[CHAIN_OUTPUT])
    peak_db = 20 * math.log10(h.max())
    loss_db = peak_db - 20 * math.log10(h.min())
    f_stop = 20e3
    stop_db = 20 * math.log10(abs(net_transfers(chain, np.array([f_stop]))[CHAIN_OUTPUT][0]))
    doc["passband"].update(max_loss_db=round(loss_db + 0.5, 3), gain_db=round(peak_db, 3),
                           gain_tolerance_db=1.0)
    doc["stopband"] = [{"freq_hz": f_stop, "min_loss_db": round(peak_db - stop_db - 1.0, 2)}]
    doc["design"] = {"resistor_series": "E96", "capacitor_series": "E12"}
    doc["input"] = {"max_vpk": 0.2, "source_ohms": 100.0,
                    "tone": [{"freq_hz": 50e3, "vpk": 0.5}]}
    doc["supply"] = {"rails_v": [-12, 12]}
    doc["tolerance"] = {"resistor_pct": 1, "capacitor_pct": 2, "gbw_spread_pct": 20,
                        "samples": 2000, "seed": 1}
    return chain, spec_from_dict(doc)


def grid_for_ngspice(center_hz: float, points: int = 512, per_decade: int = 128
                     ) -> tuple[np.ndarray, int]:
    """`points` log-spaced frequencies around `center_hz` that an ngspice-39 ``ac dec``
    sweep reproduces exactly: it takes floor(ppd log10(stop/start)) + 1 points spread evenly
    in log, so a span of (points - 1/2)/ppd decades gives exactly `points`."""
    decades = (points - 0.5) / per_decade
    lo = center_hz * 10 ** (-decades / 2)
    return np.geomspace(lo, lo * 10 ** decades, points), per_decade
