"""Analyses of a built chain: response, node levels, slew, load, noise."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from bandwright.analysis.grid import noise_band, noise_grid, passband_grid, response_grid
from bandwright.analysis.levels import NodeLevel, net_transfers, node_levels
from bandwright.analysis.noise import NoiseAnalysis, chain_noise
from bandwright.analysis.response import MaskReading, Response, read_mask
from bandwright.analysis.stability import StagePoles, stage_poles
from bandwright.analysis.converter import ConverterAnalysis, converter_analysis
from bandwright.chain.graph import CHAIN_INPUT, CHAIN_OUTPUT, Chain, attach_converter
from bandwright.inputs.requirement import Requirement

__all__ = ["Analyses", "analyse", "Response", "MaskReading", "NodeLevel", "NoiseAnalysis",
           "ConverterAnalysis"]


@dataclass(frozen=True, slots=True)
class Analyses:
    """Everything the checks and the renderers read about one built chain.

    Attributes
    ----------
    response : Response
        The built chain's response on the report grid.
    net_responses : dict of str to ndarray
        Complex transfer to every op-amp output net on the same grid.
    mask : MaskReading or None
        None when the requirement states no passband (audit without a mask).
    nodes : tuple of NodeLevel
    noise : NoiseAnalysis
    signal_out_vpk : float
        Largest in-band output amplitude for `input.max_vpk`.
    clip_scale : float
        By how much the whole input (signal and tones) could grow before the first net
        reaches its limit (min over nets of limit / peak).
    snr_db : float
        In-band output signal at `input.max_vpk` (rms) over integrated output noise.
    dynamic_range_db : float
        Largest undistorted in-band output (rms, the input scaled by `clip_scale`) over
        the integrated output noise.
    stability : tuple of StagePoles
        Every stage's poles as built and whether they all lie in the left half-plane
        (``analysis.stability``); the steady-state figures above mean nothing otherwise.
    converter : ConverterAnalysis or None
        The converter's view (full scale, folds, noise to the bits); None without one.
    """

    response: Response
    net_responses: dict[str, np.ndarray]
    mask: MaskReading | None
    nodes: tuple[NodeLevel, ...]
    noise: NoiseAnalysis
    signal_out_vpk: float
    clip_scale: float
    snr_db: float
    dynamic_range_db: float
    stability: tuple[StagePoles, ...] = ()
    converter: ConverterAnalysis | None = None

    @property
    def stable(self) -> bool:
        """Every stage's poles in the open left half-plane."""
        return all(p.stable for p in self.stability)

    @property
    def worst_margin_db(self) -> float:
        """The smallest headroom margin over every op-amp output net, dB."""
        return min((n.margin_db for n in self.nodes), default=math.inf)


def _db(ratio: float) -> float:
    return 20 * math.log10(ratio) if ratio > 0 and math.isfinite(ratio) else -math.inf


def analyse(chain: Chain, requirement: Requirement, *, with_mask: bool = True) -> Analyses:
    """Run every analysis on `chain` for `requirement`'s input, supply and noise band."""
    conv = getattr(requirement, "converter", None)
    if conv is not None and chain.converter != conv:
        chain = attach_converter(chain, conv)   # the requirement's converter decides
    grid = response_grid(requirement)
    nets = net_transfers(chain, grid)
    response = Response(freq_hz=grid, h=nets[CHAIN_OUTPUT])

    def respond(f):
        return net_transfers(chain, f)[CHAIN_OUTPUT]

    mask = read_mask(respond, requirement) if with_mask else None
    nodes = node_levels(chain, passband_hz=passband_grid(requirement), signal=requirement.input,
                        supply=requirement.supply)
    band = noise_band(requirement)
    nf = noise_grid(requirement)
    noise = chain_noise(chain, nf, band_hz=band, temperature_c=requirement.environment.temperature_c,
                        transfer_out=respond(nf))
    if conv is None and requirement.noise.band_hz is None:
        # Beside the band integrated, the whole report grid: how much lies outside it.
        wide = (float(grid[0]), float(grid[-1]))
        wf = np.geomspace(wide[0], wide[1], 401)
        w = chain_noise(chain, wf, band_hz=wide, temperature_c=requirement.environment.temperature_c,
                        transfer_out=respond(wf))
        noise = replace(noise, wide_band_hz=wide, wide_vrms=w.integrated_vrms)
    out_node = next(n for n in nodes if n.net == CHAIN_OUTPUT)
    scale = min((n.limit_vpk / n.peak_vpk for n in nodes if n.peak_vpk > 0), default=math.inf)
    sig_rms = out_node.signal_vpk / math.sqrt(2)
    snr = _db(sig_rms / noise.integrated_vrms) if noise.integrated_vrms > 0 else math.inf
    dr = _db(scale * sig_rms / noise.integrated_vrms) if noise.integrated_vrms > 0 else math.inf
    poles = tuple(stage_poles(st.elements, position=st.position,
                              source_ohms=chain.source_ohms
                              if chain.input_of(st) == CHAIN_INPUT else 0.0)
                  for st in chain.stages)
    conv_an = None if conv is None else converter_analysis(
        chain, requirement, nodes=nodes, noise=noise, clip_scale=scale,
        signal_out_vpk=out_node.signal_vpk)
    return Analyses(response=response, net_responses=nets, mask=mask, nodes=nodes, noise=noise,
                    signal_out_vpk=out_node.signal_vpk, clip_scale=scale, snr_db=snr,
                    dynamic_range_db=dr, stability=poles, converter=conv_an)
