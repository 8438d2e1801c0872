"""What folds back onto the band when the chain's output is sampled.

A sampler at fs cannot tell a component at f from one at |f − k·fs| (k the nearest whole
number of sample rates): every input tone above fs/2, every stopband region and the chain's
own noise above fs/2 lands somewhere in 0 … fs/2 (Shannon, Proc. IRE 37, 1949; Oppenheim &
Schafer, *Discrete-Time Signal Processing*, 3rd ed., 2010, §4.2 [mem]).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from bandwright.inputs.requirement import Requirement, StopbandPoint
from bandwright.parts.notation import format_fixed, format_hz

__all__ = ["Fold", "alias_hz", "tone_label", "tone_folds", "fold_intervals",
           "folded_noise_vrms", "noise_fold_top_hz", "vrms_dbfs", "vpk_dbfs",
           "anti_alias_points", "FOLD_FALL_DB", "FOLD_SPAN"]

# The chain's noise above fs/2 is followed until its density has fallen this far below its
# largest value there (power 1e-4 of it: the rest adds well under 1 % to the fold) …
FOLD_FALL_DB = 40.0
# … or up to this many sample rates, whichever comes first.
FOLD_SPAN = 1000
_POINTS_PER_FOLD = 17


@dataclass(frozen=True, slots=True)
class Fold:
    """One component that folds onto the band (JSON ``converter.folds[]``).

    Attributes
    ----------
    source : str
        The tone's label (``tone[i]``, its key in ``[[input.tone]]``) or ``noise``.
    source_hz : float
        The tone's frequency; for noise the start of the region that folds (fs/2).
    alias_hz : float
        Where it lands; for noise the centre of the band it lands in.
    level_dbfs : float
        Its level at the converter against a full-scale sine (amplitude over full-scale
        amplitude for a tone, rms over full-scale rms for noise).
    limit_dbfs : float
        ``converter.max_alias_dbfs`` (default: 1 LSB).
    top_hz : float
        Noise only: the highest frequency whose fold was counted (equals `source_hz` for a
        tone).
    """

    source: str
    source_hz: float
    alias_hz: float
    level_dbfs: float
    limit_dbfs: float
    top_hz: float = 0.0

    @property
    def passes(self) -> bool:
        return self.level_dbfs <= self.limit_dbfs


def alias_hz(freq_hz, sample_rate_hz: float):
    """Where a component at `freq_hz` lands after sampling at `sample_rate_hz`.

    Notes
    -----
    f_alias = |f − k·fs| with k = round(f / fs), in 0 … fs/2 (Oppenheim & Schafer 2010,
    §4.2 [mem]).
    """
    f = np.asarray(freq_hz, dtype=float)
    out = np.abs(f - np.round(f / sample_rate_hz) * sample_rate_hz)
    return float(out) if out.ndim == 0 else out


def tone_label(index: int) -> str:
    """A tone's name in the report: its key in the requirement."""
    return f"tone[{index}]"


def vpk_dbfs(vpk: float, full_scale_vpk: float) -> float:
    """A sine's amplitude against the full-scale sine, dBFS."""
    return 20 * math.log10(vpk / full_scale_vpk) if vpk > 0 else -math.inf


def vrms_dbfs(vrms: float, full_scale_vpk: float) -> float:
    """A noise's rms against the full-scale sine's rms (FS/√2), dBFS."""
    return vpk_dbfs(vrms * math.sqrt(2), full_scale_vpk)


def landing_bands(req: Requirement) -> list[tuple[float, float]]:
    """Where a fold matters: the passband, and the noise band when the requirement names
    one."""
    bands = [(req.passband.low_hz, req.passband.high_hz)]
    if req.noise.band_hz is not None:
        bands.append(tuple(req.noise.band_hz))
    return bands


def _inside(f: float, bands: Sequence[tuple[float, float]]) -> bool:
    return any(lo <= f <= hi for lo, hi in bands)


def tone_folds(req: Requirement, transfer_out: Callable[[np.ndarray], np.ndarray]
               ) -> tuple[Fold, ...]:
    """Every input tone above fs/2 that lands in the passband (or the noise band), with its
    level at the converter.

    Parameters
    ----------
    req : Requirement
        With a converter.
    transfer_out : callable(freq_hz) -> complex ndarray
        Source (open circuit) to the converter input.
    """
    conv = req.converter
    tones = [(i, t) for i, t in enumerate(req.input.tones) if t.freq_hz > conv.nyquist_hz]
    if not tones:
        return ()
    f = np.array([t.freq_hz for _, t in tones])
    mag = np.abs(transfer_out(f))
    bands = landing_bands(req)
    out = []
    for (i, t), m in zip(tones, mag):
        a = alias_hz(t.freq_hz, conv.sample_rate_hz)
        if not _inside(a, bands):
            continue
        out.append(Fold(source=tone_label(i), source_hz=t.freq_hz, alias_hz=a,
                        level_dbfs=vpk_dbfs(t.vpk * float(m), conv.full_scale_vpk),
                        limit_dbfs=conv.alias_limit_dbfs, top_hz=t.freq_hz))
    return tuple(out)


def fold_intervals(band_hz: tuple[float, float], sample_rate_hz: float, top_hz: float
                   ) -> np.ndarray:
    """The frequency intervals above fs/2 that fold into `band_hz`, up to `top_hz`.

    Notes
    -----
    f lands in [a, b] when |f − k·fs| ∈ [a, b]: f ∈ [k·fs − b, k·fs − a] ∪ [k·fs + a,
    k·fs + b], k = 1, 2, … (``alias_hz``); each interval is clipped to [fs/2, top_hz].

    Returns
    -------
    ndarray, shape (m, 2)
        Interval edges in Hz, empty ones dropped.
    """
    a, b = band_hz
    fs = sample_rate_hz
    k = np.arange(1, int(math.ceil((top_hz + b) / fs)) + 1, dtype=float)
    lo = np.concatenate([k * fs - b, k * fs + a])
    hi = np.concatenate([k * fs - a, k * fs + b])
    lo = np.clip(lo, fs / 2, top_hz)
    hi = np.clip(hi, fs / 2, top_hz)
    keep = hi > lo
    return np.stack([lo[keep], hi[keep]], axis=1)


def noise_fold_top_hz(freq_hz: np.ndarray, psd: np.ndarray) -> float:
    """Where the noise above fs/2 has fallen far enough: the last grid point whose density
    is within `FOLD_FALL_DB` of its largest value over the grid (the grid's end if it never
    falls that far)."""
    floor = psd.max() * 10 ** (-FOLD_FALL_DB / 10)
    above = np.nonzero(psd >= floor)[0]
    k = int(above[-1]) if above.size else 0
    return float(freq_hz[min(k + 1, freq_hz.size - 1)])


def folded_noise_vrms(freq_hz: np.ndarray, psd: np.ndarray, *, band_hz: tuple[float, float],
                      sample_rate_hz: float, top_hz: float) -> float:
    """The chain's output noise above fs/2 that folds into `band_hz`, V rms.

    Parameters
    ----------
    freq_hz, psd : ndarray
        Output noise PSD (V²/Hz) on a log grid from fs/2 to at least `top_hz`.
    band_hz : (float, float)
        The band it lands in.
    sample_rate_hz, top_hz : float

    Notes
    -----
    Sampling adds every fold's power at the frequency it lands on (Oppenheim & Schafer
    2010, §4.2 [mem]): P = Σ_k ∫ S(f) df over ``fold_intervals``. S is interpolated in
    log-log between grid points (it is smooth well above the band) and each interval is
    integrated by the trapezoid rule.
    """
    iv = fold_intervals(band_hz, sample_rate_hz, top_hz)
    if iv.size == 0:
        return 0.0
    t = np.linspace(0.0, 1.0, _POINTS_PER_FOLD)
    f = iv[:, :1] + (iv[:, 1:] - iv[:, :1]) * t             # (m, points)
    with np.errstate(divide="ignore"):
        log_s = np.interp(np.log(f), np.log(freq_hz), np.log(np.maximum(psd, 1e-300)))
    power = np.trapezoid(np.exp(log_s), f, axis=1).sum()
    return float(math.sqrt(power))


def _mask_loss_at(req: Requirement, freq_hz: float) -> float:
    """The least loss the mask promises at `freq_hz` above the band: the largest loss of an
    upper stopband point at or below it (the response falls monotonically beyond the band's
    last point for the families planned here); 0 when none."""
    high = req.passband.high_hz
    return max((p.min_loss_db for p in req.stopband if high < p.freq_hz <= freq_hz),
               default=0.0)


def anti_alias_points(req: Requirement) -> tuple[StopbandPoint, ...]:
    """Stopband points the converter needs that the mask does not already hold.

    A tone above fs/2 that lands in the band must reach the converter below
    ``converter.max_alias_dbfs``: at the passband gain G it needs a loss of
    20 log10(V_t·G / FS) − limit at its frequency. A stopband region may carry content as
    large as the in-band signal; its lowest frequency that lands in the band is fs − f_high
    (k = 1), which then needs 20 log10(V_in,max·G / FS) − limit. A point is added where the
    mask promises less (``_mask_loss_at``), each saying why.
    """
    conv = req.converter
    if conv is None:
        return ()
    pb = req.passband
    lim = conv.alias_limit_dbfs
    fs_vpk = conv.full_scale_vpk
    wanted: list[tuple[float, float, str]] = []
    bands = landing_bands(req)
    for i, t in enumerate(req.input.tones):
        if t.freq_hz <= conv.nyquist_hz or t.vpk <= 0:
            continue
        a = alias_hz(t.freq_hz, conv.sample_rate_hz)
        if not _inside(a, bands):
            continue
        need = vpk_dbfs(t.vpk * pb.gain, fs_vpk) - lim
        wanted.append((t.freq_hz, need,
                       f"{tone_label(i)} at {format_hz(t.freq_hz, significant=6)} folds to "
                       f"{format_hz(a, significant=6)} and must "
                       f"reach the converter below {format_fixed(lim, 1)} dBFS"))
    f_image = conv.sample_rate_hz - pb.high_hz
    need = vpk_dbfs(req.input.max_vpk * pb.gain, fs_vpk) - lim
    wanted.append((f_image, need,
                   f"content as large as the in-band signal at fs − f_high = "
                   f"{format_hz(f_image, significant=6)} "
                   f"folds onto the band edge and must reach the converter below "
                   f"{format_fixed(lim, 1)} dBFS"))
    out: list[StopbandPoint] = []
    for f, need, why in sorted(wanted):
        need = math.ceil(need * 10) / 10
        if f <= pb.high_hz * (1 + 1e-9) or need <= pb.max_loss_db or need > 300.0:
            continue   # at the band edge itself, any stopband holds it, or beyond any mask
        held = max(_mask_loss_at(req, f),
                   max((p.min_loss_db for p in out if p.freq_hz <= f), default=0.0))
        if held >= need:
            continue
        out.append(StopbandPoint(freq_hz=float(f), min_loss_db=float(need), added=why))
    return tuple(out)
