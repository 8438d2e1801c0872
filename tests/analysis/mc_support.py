"""Small built chains and requirements for the Monte Carlo tests (no planner: fast)."""

from __future__ import annotations

import math

import numpy as np

from bandwright.analysis.grid import passband_grid
from bandwright.analysis.levels import net_transfers
from bandwright.chain.graph import CHAIN_OUTPUT, Chain, build_chain
from bandwright.chain.stage import Stage
from bandwright.circuits import mfb_bandpass, tow_thomas
from bandwright.circuits.figures import section_figures
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.inputs.loader import spec_from_dict
from bandwright.inputs.requirement import Requirement

MODEL = OpAmp(name="mc-test", gbw_hz=5e6, dc_gain_db=100.0, slew_v_per_us=5.0,
              swing_to_rail_v=1.0, noise_v_per_rthz=1e-8, noise_a_per_rthz=1e-12,
              noise_corner_hz=0.0)

__all__ = ["MODEL", "stage_of", "mfb_chain", "mixed_chain", "requirement_around"]


def stage_of(topo, position: int, f0_hz: float, q: float, gain: float,
             model: OpAmp = MODEL, c_farads: float = 10e-9) -> Stage:
    """A stage built from a topology's design equations (exact values, finite GBW)."""
    sign = -1.0 if topo.INVERTING else 1.0
    target = Section(kind="bandpass", f0_hz=f0_hz, q=q, gain=sign * gain)
    comps = topo.design(target, c_farads=c_farads)
    els = tuple(topo.elements(comps, model))
    built = section_figures(els, kind="bandpass", near_hz=f0_hz)
    return Stage(position=position, topology=topo.NAME, target=target,
                 components=tuple(comps.items()), elements=els, model=model, built=built)


def mfb_chain(sections, *, source_ohms: float = 0.0, model: OpAmp = MODEL) -> Chain:
    """MFB bandpass stages for (f0_hz, q, gain) triples, in order."""
    return build_chain([stage_of(mfb_bandpass, i + 1, *s, model=model)
                        for i, s in enumerate(sections)], source_ohms=source_ohms)


def mixed_chain(f0_hz: float = 10e3, *, source_ohms: float = 100.0) -> Chain:
    """A stagger-tuned pair: an MFB bandpass, then a Tow-Thomas (whose lowpass and
    inverter nets are op-amp outputs of their own)."""
    return build_chain([stage_of(mfb_bandpass, 1, f0_hz / 1.06, 5.0, 2.0),
                        stage_of(tow_thomas, 2, f0_hz * 1.06, 5.0, 1.5)],
                       source_ohms=source_ohms)


def requirement_around(chain: Chain, *, half_width_dec: float = 0.05,
                       loss_margin_db: float = 0.2, gain_tolerance_db: float = 0.5,
                       stop_ratio: float = 2.0, stop_margin_db: float = 1.0,
                       tone: tuple[float, float] | None = None, max_vpk: float = 0.5,
                       headroom_margin: float | None = None, tolerance: dict | None = None,
                       ) -> Requirement:
    """A requirement the nominal `chain` meets with the given margins.

    The passband spans ±`half_width_dec` decades around the chain's peak (so that
    ``passband_grid`` falls on an ngspice ``dec`` sweep with 50/half_width_dec points a
    decade), its gain is the nominal peak, its loss the nominal worst loss plus
    `loss_margin_db`; one stopband point `stop_ratio` above the band with `stop_margin_db` of
    margin; rails put the most loaded net `headroom_margin` (a factor) below its limit.
    """
    f = np.geomspace(1e2, 1e6, 4001)
    h = np.abs(net_transfers(chain, f)[CHAIN_OUTPUT])
    f_peak = float(f[np.argmax(h)])
    low, high = f_peak * 10 ** -half_width_dec, f_peak * 10 ** half_width_dec
    doc = {"passband": {"low_hz": low, "high_hz": high, "max_loss_db": 1.0, "gain_db": 0.0},
           "design": {"order": 2}}
    req = spec_from_dict(doc)
    h_pb = np.abs(net_transfers(chain, passband_grid(req))[CHAIN_OUTPUT])
    peak_db = 20 * math.log10(h_pb.max())
    loss_db = peak_db - 20 * math.log10(h_pb.min())
    f_stop = high * stop_ratio
    h_stop = abs(net_transfers(chain, np.array([f_stop]))[CHAIN_OUTPUT][0])
    doc["passband"].update(max_loss_db=loss_db + loss_margin_db, gain_db=peak_db,
                           gain_tolerance_db=gain_tolerance_db)
    doc["stopband"] = [{"freq_hz": f_stop,
                        "min_loss_db": peak_db - 20 * math.log10(h_stop) - stop_margin_db}]
    doc["design"] = {}
    doc["input"] = {"max_vpk": max_vpk, "source_ohms": chain.source_ohms}
    if tone is not None:
        doc["input"]["tone"] = [{"freq_hz": tone[0], "vpk": tone[1]}]
    if headroom_margin is not None:
        nets = net_transfers(chain, np.concatenate([passband_grid(req),
                                                    [tone[0]] if tone else []]))
        n_pb = passband_grid(req).size
        peak = max(max_vpk * np.abs(t[:n_pb]).max()
                   + (tone[1] * abs(t[n_pb]) if tone else 0.0) for t in nets.values())
        rail = peak * headroom_margin + chain.stages[0].model.swing_to_rail_v
        doc["supply"] = {"rails_v": [-rail, rail]}
    if tolerance is not None:
        doc["tolerance"] = tolerance
    return spec_from_dict(doc)
