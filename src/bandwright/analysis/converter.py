"""The chain as the converter sees it: full scale, folds, noise to the bits, drive.

Everything here is a figure a check uses and a report shows (JSON ``converter{…}``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bandwright.analysis.aliasing import (FOLD_SPAN, Fold, folded_noise_vrms,
                                          noise_fold_top_hz, tone_folds, vrms_dbfs)
from bandwright.analysis.grid import converter_band_low_hz
from bandwright.analysis.levels import NodeLevel
from bandwright.analysis.noise import NoiseAnalysis
from bandwright.chain.graph import CHAIN_OUTPUT, CONVERTER_NET, Chain, flatten, net_transfers
from bandwright.circuits.nodal import noise as nodal_noise
from bandwright.inputs.loader import FREQ_RANGE_HZ
from bandwright.inputs.requirement import Converter, Requirement

__all__ = ["ConverterAnalysis", "converter_analysis", "quantisation_vrms",
           "settling_gbw_hz", "FOLD_POINTS_PER_DECADE"]

FOLD_POINTS_PER_DECADE = 40


@dataclass(frozen=True, slots=True)
class ConverterAnalysis:
    """The converter's view of the chain.

    Attributes
    ----------
    converter : Converter
    full_scale_vpk, peak_vpk : float
        Full scale (full_scale_vpp / 2) and the worst-case peak at the converter input
        (in-band signal plus every tone at its worst phase), V.
    margin_db : float
        20 log10(full scale / peak).
    fill_gain_db : float
        The passband gain that would put the peak at full scale less ``headroom_db``.
    folds : tuple of Fold
        Tones that fold into the band, then the broadband noise's fold into the passband.
    band_hz : (float, float)
        The band the converter's noise is counted over (response grid's low end to fs/2).
    chain_vrms : float
        The chain's output noise over `band_hz`.
    folded_vrms : float
        The chain's noise above fs/2 that folds into `band_hz` (counted up to
        ``folds[-1].top_hz``).
    quantisation_vrms : float
        The converter's own noise in `band_hz`: FS/2^ENOB/√12 times √(its share of 0 … fs/2).
    total_vrms : float
        Root-sum-square of the three.
    input_referred_vrms : float
        `total_vrms` over the passband gain (source open-circuit volts).
    snr_db : float
        In-band signal at ``input.max_vpk`` (rms) over `total_vrms`.
    dynamic_range_db : float
        The largest in-band signal before any node (the converter included) runs out of
        room, over `total_vrms`.
    dominant_noise : {"chain", "converter"}
        Which is larger: the chain's noise (folds included) or the converter's own.
    load_time_constant_s : float or None
        input_ohms · input_farads, the RC of the converter's input (None without both).
    settle_gbw_hz : float
        The least GBW that settles a full-scale kick to 1 LSB in half a sample period
        (a first-order estimate, ``settling_gbw_hz``).
    last_gbw_hz : float
        GBW of the op-amp driving the converter.
    """

    converter: Converter
    full_scale_vpk: float
    peak_vpk: float
    margin_db: float
    fill_gain_db: float
    folds: tuple[Fold, ...]
    band_hz: tuple[float, float]
    chain_vrms: float
    folded_vrms: float
    quantisation_vrms: float
    total_vrms: float
    input_referred_vrms: float
    snr_db: float
    dynamic_range_db: float
    dominant_noise: str
    load_time_constant_s: float | None
    settle_gbw_hz: float
    last_gbw_hz: float

    @property
    def headroom_db(self) -> float:
        return self.converter.headroom_db


def quantisation_vrms(full_scale_vpp: float, bits: float) -> float:
    """Quantisation noise of an ideal converter, V rms.

    Notes
    -----
    q = FS / 2^N; a uniform error over ±q/2 has rms q/√12 (Bennett, BSTJ 27, 1948 [mem];
    the 6.02 N + 1.76 dB rule follows from it). With an ENOB, N is the ENOB: the noise a
    converter of that many ideal bits would have (IEEE Std 1241-2010, ENOB definition [mem]).
    """
    return full_scale_vpp / 2.0 ** bits / math.sqrt(12.0)


def settling_gbw_hz(sample_rate_hz: float, bits: int) -> float:
    """The least op-amp GBW that settles a full-scale kick to 1 LSB in half a sample period
    — a first-order estimate.

    Notes
    -----
    A single-pole loop settles as e^(−t/τ), τ = 1/(2π f_c) with f_c ≤ GBW (at best the
    follower's, noise gain 1; Franco 2015, §6.1 [mem]). Within 2^−N of the step after
    t = 1/(2 fs) needs t/τ ≥ N ln 2, so GBW ≥ N ln2 · fs / π (common practice for
    converter drivers). Slew, the kick's real size and the loop's phase margin are left out.
    """
    return bits * math.log(2) * sample_rate_hz / math.pi


def _db(ratio: float) -> float:
    return 20 * math.log10(ratio) if ratio > 0 and math.isfinite(ratio) else -math.inf


def _above_nyquist_noise(chain: Chain, conv: Converter, temperature_c: float
                         ) -> tuple[np.ndarray, np.ndarray]:
    """Output noise PSD from fs/2 to FOLD_SPAN·fs (capped at the planned range)."""
    lo = conv.nyquist_hz
    hi = min(FOLD_SPAN * conv.sample_rate_hz, FREQ_RANGE_HZ[1])
    n = int(math.ceil(FOLD_POINTS_PER_DECADE * math.log10(hi / lo))) + 1
    f = np.geomspace(lo, hi, max(n, 2))
    res = nodal_noise(flatten(chain), f, out_net=CHAIN_OUTPUT, source_ohms=chain.source_ohms,
                      temperature_c=temperature_c)
    return res.freq_hz, res.total_psd


def converter_analysis(chain: Chain, req: Requirement, *, nodes: tuple[NodeLevel, ...],
                       noise: NoiseAnalysis, clip_scale: float, signal_out_vpk: float
                       ) -> ConverterAnalysis:
    """Full scale, folds, the noise budget to the bits and the drive estimate.

    Parameters
    ----------
    chain : Chain
    req : Requirement
        With a converter.
    nodes : tuple of NodeLevel
        With the converter's node (``CONVERTER_NET``).
    noise : NoiseAnalysis
        The chain's output noise; reused when it covers the converter's band.
    clip_scale, signal_out_vpk : float
        As in ``Analyses``.
    """
    conv = req.converter
    node = next(n for n in nodes if n.net == CONVERTER_NET)
    band = (converter_band_low_hz(req), conv.nyquist_hz)
    t_c = req.environment.temperature_c
    if noise.band_hz == band:
        chain_vrms = noise.integrated_vrms
    else:
        f = np.geomspace(band[0], band[1], 401)
        chain_vrms = float(nodal_noise(flatten(chain), f, out_net=CHAIN_OUTPUT,
                                       source_ohms=chain.source_ohms,
                                       temperature_c=t_c).integrated_vrms(band))
    fn, psd = _above_nyquist_noise(chain, conv, t_c)
    top = noise_fold_top_hz(fn, psd)
    folded = folded_noise_vrms(fn, psd, band_hz=band, sample_rate_hz=conv.sample_rate_hz,
                               top_hz=top)
    pb = req.passband
    in_band = folded_noise_vrms(fn, psd, band_hz=(pb.low_hz, pb.high_hz),
                                sample_rate_hz=conv.sample_rate_hz, top_hz=top)

    def respond(f):
        return net_transfers(chain, f)[CHAIN_OUTPUT]

    folds = tone_folds(req, respond) + (Fold(
        source="noise", source_hz=conv.nyquist_hz, alias_hz=pb.center_hz,
        level_dbfs=vrms_dbfs(in_band, conv.full_scale_vpk), limit_dbfs=conv.alias_limit_dbfs,
        top_hz=top),)
    share = (band[1] - band[0]) / conv.nyquist_hz
    q_vrms = quantisation_vrms(conv.full_scale_vpp, conv.effective_bits) * math.sqrt(share)
    chain_all = math.hypot(chain_vrms, folded)
    total = math.hypot(chain_all, q_vrms)
    gain = signal_out_vpk / req.input.max_vpk
    sig_rms = signal_out_vpk / math.sqrt(2)
    load_tau = (conv.input_ohms * conv.input_farads
                if conv.input_ohms is not None and conv.input_farads > 0 else None)
    last = chain.stages[-1].model
    return ConverterAnalysis(
        converter=conv, full_scale_vpk=conv.full_scale_vpk, peak_vpk=node.peak_vpk,
        margin_db=node.margin_db,
        fill_gain_db=pb.gain_db + node.margin_db - conv.headroom_db,
        folds=folds, band_hz=band, chain_vrms=chain_vrms, folded_vrms=folded,
        quantisation_vrms=q_vrms, total_vrms=total,
        input_referred_vrms=total / gain if gain > 0 else math.inf,
        snr_db=_db(sig_rms / total), dynamic_range_db=_db(clip_scale * sig_rms / total),
        dominant_noise="chain" if chain_all >= q_vrms else "converter",
        load_time_constant_s=load_tau,
        settle_gbw_hz=settling_gbw_hz(conv.sample_rate_hz, conv.bits),
        last_gbw_hz=last.gbw_hz)
