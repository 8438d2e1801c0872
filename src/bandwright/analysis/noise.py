"""Output noise of the chain with every source's share (docs/design.md, "Noise")."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.chain.graph import CHAIN_OUTPUT, Chain, flatten
from bandwright.circuits.nodal import NoiseResult, noise as nodal_noise

__all__ = ["NoiseAnalysis", "chain_noise", "source_words", "listed_sources", "LISTED_SOURCES"]

# How many sources the terminal, the HTML and the plot name one by one; the rest are summed
# in power into one line, the same in all three.
LISTED_SOURCES = 6


@dataclass(frozen=True, slots=True)
class NoiseAnalysis:
    """Noise at the chain output.

    Attributes
    ----------
    freq_hz : ndarray
        Grid over `band_hz`, edges included.
    output_v_per_rthz : ndarray
        Output noise density, V/√Hz.
    contributions_vrms : tuple of (source, vrms)
        Each source's integrated output noise over the band, largest first; the squares add
        up to `integrated_vrms` squared.
    contributions_psd : dict of str to ndarray
        Each source's output PSD, V²/Hz.
    integrated_vrms : float
    band_hz : (float, float)
    input_referred_v_per_rthz : ndarray
        Output density over |T(f)| to the output (source open-circuit voltage).
    wide_band_hz : (float, float) or None
        Without a converter: the whole report grid's span, beside the band integrated.
    wide_vrms : float or None
        The output noise integrated over `wide_band_hz`.
    """

    freq_hz: np.ndarray
    output_v_per_rthz: np.ndarray
    contributions_vrms: tuple[tuple[str, float], ...]
    contributions_psd: dict[str, np.ndarray]
    integrated_vrms: float
    band_hz: tuple[float, float]
    input_referred_v_per_rthz: np.ndarray
    wide_band_hz: tuple[float, float] | None = None
    wide_vrms: float | None = None


def chain_noise(chain: Chain, freq_hz: np.ndarray, *, band_hz: tuple[float, float],
                temperature_c: float, transfer_out: np.ndarray,
                reference=None) -> NoiseAnalysis:
    """Adjoint noise analysis of the whole chain as one element list.

    Notes
    -----
    Every resistor's 4kTR (source resistance included), every op-amp's e_n (white + 1/f) and
    i_n into each input; output PSD S = Σ |G_i|² S_i (docs/methods.md, "Noise"; Motchenbacher &
    Connelly 1993, ch. 2 [mem]); integrated by the trapezoid rule over `band_hz`. On a
    single supply the `reference` network is part of the list: its divider's 4kTR and its
    follower's noise count.
    """
    res = nodal_noise(flatten(chain, reference), freq_hz, out_net=CHAIN_OUTPUT,
                      source_ohms=chain.source_ohms, temperature_c=temperature_c)
    total = float(res.integrated_vrms(band_hz))
    shares = []
    for name, psd in res.contributions.items():
        if not np.any(psd):
            continue
        part = float(NoiseResult(res.freq_hz, psd, {}).integrated_vrms(band_hz))
        shares.append((name, part))
    shares.sort(key=lambda t: -t[1])
    density = res.density()
    with np.errstate(divide="ignore", invalid="ignore"):
        referred = density / np.abs(transfer_out)
    return NoiseAnalysis(freq_hz=res.freq_hz, output_v_per_rthz=density,
                         contributions_vrms=tuple(shares),
                         contributions_psd={k: v for k, v in res.contributions.items()
                                            if np.any(v)},
                         integrated_vrms=total, band_hz=(float(band_hz[0]), float(band_hz[1])),
                         input_referred_v_per_rthz=referred)


def source_words(name: str) -> str:
    """A noise source key in an engineer's words.

    "R2_s1" -> "stage 1 R2, thermal"; "U1_s2 voltage" -> "stage 2 U1, voltage noise";
    "U1_s2 current-" -> "stage 2 U1, current noise into −"; "Rsource" -> "source resistance,
    thermal". A key of another form (a reference network's part) comes back as it is.
    """
    if name == "Rsource":
        return "source resistance, thermal"
    part, _, what = name.partition(" ")
    ref, _, pos = part.rpartition("_s")
    if not pos.isdigit() or not ref:
        return name
    where = f"stage {pos} {ref}"
    return {"": f"{where}, thermal", "voltage": f"{where}, voltage noise",
            "current+": f"{where}, current noise into +",
            "current-": f"{where}, current noise into −"}.get(what, f"{where} {what}")


def listed_sources(nz: NoiseAnalysis, count: int = LISTED_SOURCES
                   ) -> tuple[tuple[tuple[str, float], ...], tuple[str, ...], float]:
    """The `count` largest sources, the names of the rest and the rest's power sum, V rms.

    Uncorrelated sources add in power, so the rest's figure is the root of the sum of squares.
    """
    top = nz.contributions_vrms[:count]
    rest = nz.contributions_vrms[count:]
    return top, tuple(n for n, _ in rest), float(np.sqrt(sum(v * v for _, v in rest)))
