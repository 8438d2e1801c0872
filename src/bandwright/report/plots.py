"""Plots of a plan or an audit (matplotlib, Agg; PNG and SVG for ``--out DIR``).

Every figure drawn here is read from the Analyses object or the Checks; the only curves
evaluated here are reference curves: the ideal response of the sections (their standard
biquads, ``sections.split.cascade_response``) and the level each tone reaches at each net
(the analysis's own ``net_transfers`` at the tone frequencies). No pyplot: every plot is
its own ``matplotlib.figure.Figure``, so nothing leaks into global state.

Plots
-----
``response``  built chain response against the mask, ideal response beside it, passband zoom.
``levels``    worst-case level at every op-amp output across frequency against its swing
              limit, tones marked; headroom margin per net.
``noise``     output noise density, the largest contributors and the rest, band marked.
``yield``     Monte Carlo response envelope against the mask (only when yield ran).
``poles``     section poles in the s-plane, built and target; f0 against Q.
``folds``     the folded spectrum at the converter (only with a ``[converter]``).
``timing``    group delay across the passband; the centre burst's envelope, input and output,
              with its 10/90 % marks (``report.time_view``).
``diagnosis`` a measured sweep over the chain as designed and as fitted, and the residual
              (only for ``audit --measured``).
"""

from __future__ import annotations

import functools
import io
import math
import operator
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING

from bandwright.report._mpl import quiet_matplotlib

quiet_matplotlib()  # before matplotlib is imported: its config and cache folder

import matplotlib  # noqa: E402
import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle
from matplotlib.ticker import EngFormatter, MaxNLocator, NullFormatter, NullLocator

from bandwright.analysis.levels import net_transfers
from bandwright.analysis.noise import listed_sources, source_words
from bandwright.parts.notation import format_fixed, format_si, format_sig
from bandwright.parts.notation import format_hz as fmt_hz
from bandwright.report import words
from bandwright.report.subject import Subject, net_label, stage_label, subject_of
from bandwright.sections.split import cascade_response

if TYPE_CHECKING:
    from matplotlib.axes import Axes

    from bandwright.audit import Audit
    from bandwright.diagnosis import Diagnosis
    from bandwright.planner import Plan

__all__ = ["plot_files", "plot_figures", "plot_jobs", "PLOT_NAMES", "DPI", "SIZE_PX",
           "diagnosis_figure"]

#: Resolution and pixel size of every PNG.
DPI = 110
SIZE_PX = (1000, 600)
PLOT_NAMES = ("response", "levels", "noise", "yield", "poles", "folds")

# Our own plain palette: one colour per stage, fixed so a stage keeps its colour across plots.
STAGE_COLOURS = ("#1f4e79", "#c26a00", "#2e7d32", "#7b1fa2", "#00838f", "#8d5524",
                 "#b0245a", "#4e5d6c", "#8a8a00", "#3949ab")
BUILT = "#12355b"
IDEAL = "#8c8c8c"
FORBIDDEN = "#d64541"
LIMIT = "#b3261e"
STATUS_COLOUR = {"pass": "#3b7d3b", "warn": "#c98a00", "fail": "#c0392b"}
INTERNAL_DASHES = (":", "-.", (0, (6, 2)), (0, (1, 3)))
# A hollow circle reads as a zero on an s-plane plot: the target poles get a hollow diamond.
TARGET_POLE_STYLE = {"marker": "D", "markersize": 8, "markerfacecolor": "none"}
CONTRIBUTOR_COLOURS = ("#d0541f", "#2a7ab0", "#5b8c2a", "#9c4fa8", "#b8860b", "#1f8f8a")


def _figure(ncols: int = 1,
            width_ratios: Sequence[float] | None = None) -> tuple[Figure, list[Axes]]:
    fig = Figure(figsize=(SIZE_PX[0] / DPI, SIZE_PX[1] / DPI), dpi=DPI, layout="constrained")
    axes = fig.subplots(1, ncols, width_ratios=width_ratios, squeeze=False)[0]
    return fig, list(axes)


def _save(fig: Figure) -> tuple[bytes, bytes]:
    png = io.BytesIO()
    fig.savefig(png, format="png", dpi=DPI)
    # The layout is settled by the first save; the SVG reuses it (the same picture, and the
    # constrained-layout pass is a good part of the drawing time).
    fig.set_layout_engine("none")
    svg = io.BytesIO()
    # Text stays text (smaller, searchable in the HTML); a fixed salt and no date keep the
    # SVG identical from run to run.
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "bandwright"}):
        fig.savefig(svg, format="svg", metadata={"Date": None})
    return png.getvalue(), svg.getvalue()


def _stage_colour(position: int) -> str:
    return STAGE_COLOURS[(position - 1) % len(STAGE_COLOURS)]


def _log_freq_axis(ax: Axes, lo_hz: float, hi_hz: float) -> None:
    """Log frequency axis with SI labels; within a decade or so, a few plain ticks."""
    ax.set_xscale("log")
    ax.set_xlim(lo_hz, hi_hz)
    fmt = EngFormatter(unit="Hz", sep=" ")
    if hi_hz / lo_hz < 12:
        # Round numbers, but none closer than a quarter of the axis (log) width: on a log
        # axis evenly spaced round numbers crowd at the top.
        span = math.log(hi_hz / lo_hz)
        ticks: list[float] = []
        for t in MaxNLocator(8).tick_values(lo_hz, hi_hz):
            if lo_hz <= t <= hi_hz and (not ticks or math.log(t / ticks[-1]) > span / 4.5):
                ticks.append(float(t))
        ax.xaxis.set_major_locator(matplotlib.ticker.FixedLocator(ticks))
        ax.xaxis.set_minor_locator(NullLocator())
    else:
        ax.xaxis.set_minor_formatter(NullFormatter())
    ax.xaxis.set_major_formatter(fmt)
    ax.set_xlabel("frequency (log scale)")
    ax.grid(True, which="major", color="#d0d0d0", linewidth=0.6)
    ax.grid(True, which="minor", color="#ececec", linewidth=0.4)


def _plain_log_y(ax: Axes, lo: float, hi: float) -> None:
    """Log y axis labelled with plain numbers (3, 4, 6 rather than powers of ten)."""
    ax.set_yscale("log")
    ax.set_ylim(lo, hi)
    fmt = matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:g}")

    def some(v: float, _pos: int | None) -> str:
        m = v / 10 ** math.floor(math.log10(v) + 1e-12)
        keep = (2, 3, 5) if hi / lo < 30 else (2, 5)
        return f"{v:g}" if min(abs(m - k) for k in keep) < 1e-6 else ""

    ax.yaxis.set_major_formatter(fmt)
    ax.yaxis.set_minor_formatter(fmt if hi / lo < 3 else
                                 matplotlib.ticker.FuncFormatter(some) if hi / lo < 1e3
                                 else NullFormatter())
    ax.tick_params(axis="y", which="minor", labelsize=8)


# --------------------------------------------------------------------------- response


def _mask_patches(ax: Axes, s: Subject, x_lo: float, x_hi: float, y_lo: float, y_hi: float, *,
                  label_points: bool = False) -> None:
    """Shade what the requirement forbids: below the passband floor, above its ceiling,
    and above each stopband limit from its point outward."""
    pb = s.requirement.passband
    kw = dict(facecolor=FORBIDDEN, alpha=0.16, edgecolor=FORBIDDEN, linewidth=0.0)
    floor = pb.gain_db - pb.max_loss_db
    ceiling = pb.gain_db + pb.gain_tolerance_db
    ax.add_patch(Rectangle((pb.low_hz, y_lo), pb.high_hz - pb.low_hz, floor - y_lo, **kw))
    ax.add_patch(Rectangle((pb.low_hz, ceiling), pb.high_hz - pb.low_hz, y_hi - ceiling, **kw))
    ax.hlines([floor, ceiling], pb.low_hz, pb.high_hz, colors=FORBIDDEN, linewidth=0.9)
    for sp in s.requirement.stopband:
        top = pb.gain_db - sp.min_loss_db
        a, b = (x_lo, sp.freq_hz) if sp.freq_hz < pb.low_hz else (sp.freq_hz, x_hi)
        ax.add_patch(Rectangle((a, top), b - a, y_hi - top, **kw))
        ax.plot([sp.freq_hz], [top], marker="v", color=FORBIDDEN, markersize=7, linestyle="")
        if label_points and x_lo < sp.freq_hz < x_hi:
            ax.annotate(f"{format_sig(sp.min_loss_db)} dB down\nat {fmt_hz(sp.freq_hz)}", (sp.freq_hz, top),
                        xytext=(0, -10), textcoords="offset points", fontsize=7.5,
                        ha="center", va="top", color=LIMIT,
                        bbox=dict(boxstyle="round,pad=0.15", facecolor="white", alpha=0.8,
                                  edgecolor="none"))


def _response_axes(ax: Axes, s: Subject, f: np.ndarray, built_db: np.ndarray,
                   ideal_db: np.ndarray, x_lo: float, x_hi: float, y_lo: float, y_hi: float, *,
                   label_points: bool = False) -> None:
    if s.has_mask:
        _mask_patches(ax, s, x_lo, x_hi, y_lo, y_hi, label_points=label_points)
    ax.plot(f, ideal_db, color=IDEAL, linestyle="--", linewidth=1.3)
    ax.plot(f, built_db, color=BUILT, linewidth=1.8)
    _log_freq_axis(ax, x_lo, x_hi)
    ax.set_ylim(y_lo, y_hi)
    ax.set_ylabel("gain (dB)")


def _response(s: Subject) -> Figure:
    an = s.analyses
    pb = s.requirement.passband
    f = an.response.freq_hz
    built_db = an.response.gain_db
    # The reference curve: the unrounded sections with ideal op-amps.
    ideal_db = 20 * np.log10(np.maximum(np.abs(cascade_response(s.ideal_sections, f)), 1e-20))
    fig, (ax, zoom) = _figure(2, width_ratios=(1.75, 1.0))
    stops = [sp.min_loss_db for sp in s.requirement.stopband] if s.has_mask else []
    y_hi = max(pb.gain_db + 10.0, float(built_db.max()) + 5.0)
    y_lo = pb.gain_db - max(stops + [40.0]) - 30.0
    _response_axes(ax, s, f, built_db, ideal_db, f[0], f[-1], y_lo, y_hi, label_points=True)
    title = "Chain response, as built" if s.has_mask else \
        "Chain response, as built (the audit file states no mask)"
    ax.set_title(title, loc="left", fontsize=11)
    # Passband zoom: a quarter of the band's log width either side of it.
    r = (pb.high_hz / pb.low_hz) ** 0.25
    z_lo, z_hi = max(pb.low_hz / r, f[0]), min(pb.high_hz * r, f[-1])
    inside = (f >= z_lo) & (f <= z_hi)
    floor = pb.gain_db - pb.max_loss_db
    ceiling = pb.gain_db + pb.gain_tolerance_db
    band = (f >= pb.low_hz) & (f <= pb.high_hz)
    zy_hi = max(ceiling + 1.0, float(built_db[inside].max()) + 0.5)
    # Show the whole in-band curve, however far it misses, but no more than 30 dB below.
    zy_lo = max(min(floor - 2.0 * max(pb.max_loss_db, 0.5),
                    float(built_db[band].min()) - 1.0), floor - 30.0)
    _response_axes(zoom, s, f, built_db, ideal_db, z_lo, z_hi, zy_lo, zy_hi)
    zoom.set_title("Passband, zoomed", loc="left", fontsize=11)
    if s.has_mask:
        zoom.annotate(f"allowed: {format_sig(floor, 4)} to {format_sig(ceiling, 4)} dB\nfrom "
                      f"{fmt_hz(pb.low_hz)} to "
                      f"{fmt_hz(pb.high_hz)}", (0.02, 0.02), xycoords="axes fraction",
                      fontsize=8, color="#333333",
                      bbox=dict(boxstyle="round,pad=0.3", facecolor="white", alpha=0.85,
                                edgecolor="#bbbbbb"))
    handles = [Line2D([], [], color=BUILT, linewidth=1.8,
                                       label="built chain (rounded parts, finite GBW)"),
               Line2D([], [], color=IDEAL, linestyle="--", linewidth=1.3,
                                       label="ideal sections")]
    if s.has_mask:
        handles += [Patch(facecolor=FORBIDDEN, alpha=0.16, label="forbidden by the requirement"),
                    Line2D([], [], color=FORBIDDEN, marker="v", linestyle="",
                                            label="stopband point (checked there)")]
    ax.legend(handles=handles, loc="lower center", fontsize=8, framealpha=0.9)
    return fig


# --------------------------------------------------------------------------- levels


def _levels(s: Subject) -> Figure:
    an, chain, req = s.analyses, s.chain, s.requirement
    f = an.response.freq_hz
    tones = req.input.tones
    tone_f = np.array([t.freq_hz for t in tones], dtype=float)
    tone_v = np.array([t.vpk for t in tones], dtype=float)
    # The same transfers the node-level analysis uses, at the tone frequencies.
    tone_t = net_transfers(chain, tone_f) if tones else {}
    fig, (ax, bars) = _figure(2, width_ratios=(1.75, 1.0))
    lows, limit = [], max(n.limit_vpk for n in an.nodes)
    internal: dict[int, int] = {}
    for n in an.nodes:
        colour = _stage_colour(n.stage)
        local = next(iter(chain.graph.in_edges(n.net, data=True)))[2]["local"]
        if local == "out":
            style = "-"
        else:
            # a stage's internal outputs share its colour and differ by dash pattern
            k = internal.get(n.stage, 0)
            internal[n.stage] = k + 1
            style = INTERNAL_DASHES[k % len(INTERNAL_DASHES)]
        level = req.input.max_vpk * np.abs(an.net_responses[n.net])
        ax.plot(f, level, color=colour, linestyle=style, linewidth=1.5,
                label=net_label(chain, n.net))
        lows.append(n.signal_vpk)
        if tones:
            tl = tone_v * np.abs(tone_t[n.net])
            ax.plot(tone_f, tl, linestyle="", marker="D", markersize=5, color=colour,
                    markeredgecolor="white", markeredgewidth=0.5)
            lows.extend(tl[tl > 0])
    ax.axhline(limit, color=LIMIT, linestyle="--", linewidth=1.2,
               label=f"swing limit {format_si(limit, 'Vpk')}")
    for n in an.nodes:
        if not math.isclose(n.limit_vpk, limit):
            ax.axhline(n.limit_vpk, color=LIMIT, linestyle=":", linewidth=1.0)
    for ft, vt in zip(tone_f, tone_v):
        ax.axvline(ft, color="#9a9a9a", linewidth=0.8, linestyle="-.")
        ax.annotate(f"tone {format_si(vt, 'Vpk', significant=4)}", (ft, 1.0), xycoords=("data", "axes fraction"),
                    xytext=(3, -12), textcoords="offset points", fontsize=8, color="#555555")
    if tones:
        ax.plot([], [], linestyle="", marker="D", color="#555555",
                label="each tone's level at the net")
    lo_hz = min([f[0]] + [x / 1.5 for x in tone_f])
    hi_hz = max([f[-1]] + [x * 1.5 for x in tone_f])
    _log_freq_axis(ax, lo_hz, hi_hz)
    ax.set_yscale("log")
    floor = min([limit * 1e-3] + [0.3 * v for v in lows if v > 0])
    ax.set_ylim(floor, limit * 3.0)
    ax.yaxis.set_major_formatter(EngFormatter(unit="V", sep=" "))
    ax.set_ylabel("level at the net (peak, log scale)")
    ax.set_title(f"Node levels for {format_si(req.input.max_vpk, 'Vpk', significant=4)} in at "
                 f"each frequency",
                 loc="left", fontsize=11)
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", ncols=3,
               fontsize=7.5, frameon=False)
    # Headroom per net, coloured by its check.
    status = {k.net: k.status for k in s.checks if k.id == "headroom" and k.net}
    names = [f"stage {n.stage} {next(iter(chain.graph.in_edges(n.net, data=True)))[2]['local']}"
             for n in an.nodes]
    margins = [n.margin_db if math.isfinite(n.margin_db) else 0.0 for n in an.nodes]
    y = np.arange(len(an.nodes))[::-1]
    bars.barh(y, margins, color=[STATUS_COLOUR[status.get(n.net, "pass")] for n in an.nodes],
              height=0.5)
    bars.set_yticks(y, names, fontsize=8)
    bars.axvline(0.0, color="#333333", linewidth=0.8)
    span = max([abs(m) for m in margins] + [1.0])
    bars.set_xlim(min(0.0, min(margins)) - 0.05 * span, max(0.0, max(margins)) + 0.8 * span)
    for yi, m, n in zip(y, margins, an.nodes):
        bars.annotate(f"{format_fixed(m, 1, sign=True)} dB\n{format_si(n.peak_vpk, 'Vpk')} / "
                      f"{format_si(n.limit_vpk, 'Vpk')}\nbias {format_si(n.dc_v, 'V', sign=True)}; "
                      f"room ↑{format_si(n.upper_margin_v, 'V')} "
                      f"↓{format_si(n.lower_margin_v, 'V')}",
                      (max(m, 0.0), yi), xytext=(4, 0), textcoords="offset points",
                      va="center", fontsize=7.5)
    bars.set_xlabel("headroom margin (dB)")
    bars.set_title("Headroom, worst case", loc="left", fontsize=11)
    bars.grid(True, axis="x", color="#e0e0e0")
    return fig


# --------------------------------------------------------------------------- noise


def _noise(s: Subject) -> Figure:
    nz = s.analyses.noise
    f = nz.freq_hz
    scale, unit = (1e9, "nV") if float(np.max(nz.output_v_per_rthz)) < 1e-6 else (1e6, "µV")
    fig, (ax,) = _figure(1)
    ax.plot(f, scale * nz.output_v_per_rthz, color="#111111", linewidth=2.2,
            label=f"total: {format_si(nz.integrated_vrms, 'V rms', significant=4)} over the band")
    top, rest, rest_vrms = listed_sources(nz)
    for k, (name, vrms) in enumerate(top):
        ax.plot(f, scale * np.sqrt(nz.contributions_psd[name]), linewidth=1.3,
                color=CONTRIBUTOR_COLOURS[k % len(CONTRIBUTOR_COLOURS)],
                label=f"{source_words(name)}: {format_si(vrms, 'V rms')}")
    if rest:
        psd = np.sum([nz.contributions_psd[name] for name in rest], axis=0)
        ax.plot(f, scale * np.sqrt(psd), color="#7a7a7a", linestyle=":", linewidth=1.5,
                label=f"{words.other_sources(len(rest))}: {format_si(rest_vrms, 'V rms')}")
    lo, hi = nz.band_hz
    r = (hi / lo) ** 0.06
    _log_freq_axis(ax, lo / r, hi * r)
    ax.axvspan(lo, hi, color="#2f6f9f", alpha=0.06, label="integration band")
    for edge in (lo, hi):
        ax.axvline(edge, color="#2f6f9f", linewidth=1.0, linestyle="--")
    dens = scale * nz.output_v_per_rthz
    curves = [scale * np.sqrt(nz.contributions_psd[name]) for name, _ in top]
    lo_y = min([float(np.min(c[c > 0])) for c in curves if np.any(c > 0)] + [float(dens.min())])
    _plain_log_y(ax, 0.7 * lo_y, 1.4 * float(dens.max()))
    ax.set_ylabel(f"output noise density ({unit}/√Hz, log scale)")
    ax.set_title(f"Output noise density, {format_sig(s.requirement.environment.temperature_c)} °C; "
                 "largest contributions", loc="left", fontsize=11)
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", ncols=2,
               fontsize=8, frameon=False)
    return fig


# --------------------------------------------------------------------------- yield


def _ordinal(p: float) -> str:
    """1st, 2nd, 3rd, 50th, 99th (a percentile's name)."""
    n = int(round(p))
    if not math.isclose(p, n):
        return f"{p:g}th"
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def _yield(s: Subject) -> Figure | None:
    """Monte Carlo envelope (low, median and high percentile of the gain over the boards)
    against the mask, whole range and passband."""
    yr = s.yield_result
    env = getattr(yr, "envelope_db", None)
    if yr is None or env is None:
        return None
    from bandwright.analysis.montecarlo import ENVELOPE_PERCENTILES
    f = np.asarray(yr.freq_hz)
    lo_db, mid_db, hi_db = (np.asarray(row) for row in env)
    pb = s.requirement.passband
    an = s.analyses
    fig, (ax, zoom) = _figure(2, width_ratios=(1.75, 1.0))
    stops = [sp.min_loss_db for sp in s.requirement.stopband] if s.has_mask else []
    y_hi = max(pb.gain_db + 10.0, float(hi_db.max()) + 5.0)
    y_lo = pb.gain_db - max(stops + [40.0]) - 30.0
    p_lo, p_mid, p_hi = ENVELOPE_PERCENTILES
    r = (pb.high_hz / pb.low_hz) ** 0.25
    z_lo, z_hi = max(pb.low_hz / r, f[0]), min(pb.high_hz * r, f[-1])
    inside = (f >= z_lo) & (f <= z_hi)
    floor = pb.gain_db - pb.max_loss_db
    ceiling = pb.gain_db + pb.gain_tolerance_db
    band = (f >= pb.low_hz) & (f <= pb.high_hz)
    zy_hi = max(ceiling + 1.0, float(hi_db[inside].max()) + 0.5)
    zy_lo = max(min(floor - 2.0 * max(pb.max_loss_db, 0.5), float(lo_db[band].min()) - 1.0),
                floor - 30.0)
    for axis, x0, x1, y0, y1, labels in ((ax, f[0], f[-1], y_lo, y_hi, True),
                                         (zoom, z_lo, z_hi, zy_lo, zy_hi, False)):
        if s.has_mask:
            _mask_patches(axis, s, x0, x1, y0, y1, label_points=labels)
        axis.fill_between(f, lo_db, hi_db, color=BUILT, alpha=0.28, linewidth=0,
                          label=f"{_ordinal(p_lo)} to {_ordinal(p_hi)} percentile of "
                                f"{yr.samples} boards")
        axis.plot(f, mid_db, color=BUILT, linewidth=1.2, label="median board")
        axis.plot(an.response.freq_hz, an.response.gain_db, color="#111111", linewidth=1.0,
                  linestyle="--", label="nominal parts")
        _log_freq_axis(axis, float(x0), float(x1))
        axis.set_ylim(y0, y1)
        axis.set_ylabel("gain (dB)")
    lo_i, hi_i = yr.interval
    sp = yr.spreads
    ax.set_title(f"Tolerance spread: {format_fixed(100 * yr.yield_fraction, 1)} % of boards pass "
                 f"(95 % interval {format_fixed(100 * lo_i, 1)}–{format_fixed(100 * hi_i, 1)} %)", loc="left", fontsize=11)
    zoom.set_title(f"Passband; R ±{format_sig(sp.resistor_pct)} %, C "
                   f"±{format_sig(sp.capacitor_pct)} %",
                   loc="left", fontsize=11)
    handles, labels = ax.get_legend_handles_labels()
    if s.has_mask:
        handles.append(Patch(facecolor=FORBIDDEN, alpha=0.16))
        labels.append("forbidden by the requirement")
    ax.legend(handles, labels, loc="lower center", fontsize=8, framealpha=0.9)
    return fig


# --------------------------------------------------------------------------- poles


def _poles_of(f0_hz: float, q: float) -> np.ndarray:
    """p = −ω0/(2Q) ± jω0 √(1 − 1/(4Q²)), in Hz (divided by 2π): the roots of
    s² + (ω0/Q)s + ω0² (Schaumann & Van Valkenburg 2001, ch. 4 [mem])."""
    w0 = 2 * math.pi * f0_hz
    root = np.sqrt(complex(1 - 1 / (4 * q * q)))
    return np.array([-w0 / (2 * q) + 1j * w0 * root, -w0 / (2 * q) - 1j * w0 * root]) / (2 * math.pi)


def _poles(s: Subject) -> Figure | None:
    # An unstable stage's pair figures mirror its poles: it is drawn from its own roots.
    unstable = {sp.position: sp for sp in s.analyses.stability if not sp.stable}
    stages = [st for st in s.chain.stages if st.kind != "gain" and st.built.q > 0
              and st.position not in unstable]
    if not stages and not unstable:
        return None
    rhp = [sp.poles_rad_s / (2 * math.pi) for sp in unstable.values()]
    fmax = max([max(st.built.f0_hz, st.target.f0_hz) for st in stages]
               + [float(np.max(np.abs(p))) for p in rhp if p.size])
    scale, unit = (1e3, "kHz") if fmax >= 2e3 else (1.0, "Hz")
    fig, (ax, fq) = _figure(2, width_ratios=(1.0, 1.2))
    for st in stages:
        c = _stage_colour(st.position)
        built = _poles_of(st.built.f0_hz, st.built.q) / scale
        target = _poles_of(st.target.f0_hz, st.target.q) / scale
        ax.plot(target.real, target.imag, linestyle="", **TARGET_POLE_STYLE, markeredgecolor=c)
        ax.plot(built.real, built.imag, linestyle="", marker="x", markersize=8, color=c,
                label=f"{stage_label(st)}: f0 {fmt_hz(st.built.f0_hz)}, "
                      f"Q {format_sig(st.built.q, 3)}")
        fq.plot([st.target.f0_hz], [st.target.q], linestyle="", **TARGET_POLE_STYLE,
                markeredgecolor=c)
        fq.plot([st.built.f0_hz], [st.built.q], linestyle="", marker="x", markersize=8,
                color=c)
        fq.annotate(f"{st.position}", (st.built.f0_hz, st.built.q), xytext=(6, 4),
                    textcoords="offset points", fontsize=8, color=c)
    for sp, p in zip(unstable.values(), rhp):
        ax.plot(p.real / scale, p.imag / scale, linestyle="", marker="x", markersize=9,
                color="#c0392b", label=f"stage {sp.position}: unstable, "
                f"{sp.unstable_poles.size} pole(s) in the right half-plane")
    ax.axvline(0.0, color="#555555", linewidth=0.8)
    ax.axhline(0.0, color="#555555", linewidth=0.8)
    ax.plot([], [], linestyle="", **TARGET_POLE_STYLE, markeredgecolor="#555555",
            label="target (◇), built (×)")
    lim = 1.15 * fmax / scale
    ax.set_ylim(-lim, lim)
    reals = [_poles_of(st.built.f0_hz, st.built.q).real.min() for st in stages]
    reals += [float(p.real.min()) for p in rhp if p.size]
    left = min(min(reals) / scale, -0.05 * lim)
    right = max([0.15 * lim] + [1.15 * float(p.real.max()) / scale for p in rhp if p.size])
    ax.set_xlim(1.15 * left, right)
    ax.set_xlabel(f"real part σ/2π ({unit})")
    ax.set_ylabel(f"imaginary part ω/2π ({unit})")
    ax.set_title("Section poles (s-plane)", loc="left", fontsize=11)
    ax.grid(True, color="#e6e6e6")
    f_all = [st.built.f0_hz for st in stages] + [st.target.f0_hz for st in stages] or [fmax]
    q_all = [st.built.q for st in stages] + [st.target.q for st in stages] or [0.5]
    _log_freq_axis(fq, min(f_all) / 1.6, max(f_all) * 1.6)
    fq.set_xlabel("pole frequency f0 (log scale)")
    _plain_log_y(fq, min(q_all) / 1.6, max(q_all) * 1.6)
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", ncols=2,
               fontsize=8, frameon=False)
    fq.set_ylabel("pole Q (log scale)")
    fq.set_title("f0 and Q of each section", loc="left", fontsize=11)
    return fig


# --------------------------------------------------------------------------- files

# --------------------------------------------------------------------------- folds


def _folds(s: Subject) -> Figure | None:
    """The folded spectrum at the converter: every fold where it lands in 0 … fs/2 at its
    level (dBFS), the alias limit, the noise levels and the peak (all from
    ``Analyses.converter``)."""
    c = getattr(s.analyses, "converter", None)
    if c is None:
        return None
    conv = c.converter
    nyq = conv.nyquist_hz
    pb = s.requirement.passband
    fig, (ax,) = _figure(1)
    ax.axvspan(pb.low_hz, pb.high_hz, color="#2f6f9f", alpha=0.08, label="passband")
    ax.axhline(c.folds[0].limit_dbfs if c.folds else conv.alias_limit_dbfs, color=LIMIT,
               linewidth=1.4, linestyle="--",
               label=f"alias limit {format_fixed(conv.alias_limit_dbfs, 1)} dBFS")
    ax.axhline(-c.margin_db, color=BUILT, linewidth=1.2,
               label=f"peak at the converter {format_fixed(-c.margin_db, 1, sign=True)} dBFS")
    levels = [-c.margin_db, conv.alias_limit_dbfs]

    def rms_dbfs(v: float) -> float:
        return 20 * math.log10(v * math.sqrt(2) / c.full_scale_vpk) if v > 0 else -300.0

    q_db, n_db = rms_dbfs(c.quantisation_vrms), rms_dbfs(c.chain_vrms)
    ax.axhline(q_db, color="#7b1fa2", linewidth=1.0, linestyle=":",
               label=f"converter noise {format_fixed(q_db, 1)} dBFS "
                     f"({format_sig(conv.effective_bits)} bits, band)")
    ax.axhline(n_db, color="#5b8c2a", linewidth=1.0, linestyle="-.",
               label=f"chain noise to fs/2 {format_fixed(n_db, 1)} dBFS")
    levels += [q_db, n_db]
    for k, f in enumerate(c.folds):
        colour = STATUS_COLOUR["pass" if f.passes else "fail"]
        if f.source == "noise":
            ax.hlines(f.level_dbfs, pb.low_hz, pb.high_hz, color=colour, linewidth=4,
                      label=f"noise above fs/2 folded onto the passband "
                            f"{format_fixed(f.level_dbfs, 1)} dBFS")
            levels.append(f.level_dbfs)
            continue
        ax.vlines(f.alias_hz, -400, f.level_dbfs, color=colour, linewidth=2)
        ax.plot([f.alias_hz], [f.level_dbfs], marker="D", color=colour, markersize=6)
        # Folds that land together are labelled on alternate sides.
        twin = sum(math.isclose(g.alias_hz, f.alias_hz) for g in c.folds[:k])
        ax.annotate(f"{f.source} {fmt_hz(f.source_hz)} → {fmt_hz(f.alias_hz)}",
                    (f.alias_hz, f.level_dbfs), textcoords="offset points",
                    xytext=(-5 if twin % 2 else 5, 3), ha="right" if twin % 2 else "left",
                    fontsize=8)
        levels.append(f.level_dbfs)
    finite = [v for v in levels if math.isfinite(v) and v > -300]
    ax.set_ylim(min(finite) - 12, 6)
    ax.set_xlim(0, nyq)
    ax.xaxis.set_major_formatter(EngFormatter(unit="Hz", sep=" "))
    ax.set_xlabel(f"where it lands after sampling, 0 … fs/2 = {fmt_hz(nyq)} (linear)")
    ax.set_ylabel("level at the converter (dBFS)")
    ax.grid(True, color="#d0d0d0", linewidth=0.6)
    ax.set_title(f"Folded spectrum at the {conv.bits}-bit converter, fs = "
                 f"{fmt_hz(conv.sample_rate_hz)}", loc="left", fontsize=11)
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", ncols=2,
               fontsize=8, frameon=False)
    return fig


_BUILDERS = {"response": _response, "levels": _levels, "noise": _noise, "yield": _yield,
             "poles": _poles, "folds": _folds}


def _plot_makers(obj: Plan | Audit | Subject) -> list[tuple[str, Callable[[], Figure | None]]]:
    """(name, maker) for every plot that may apply, in ``PLOT_NAMES`` order: each maker
    builds its Figure (None where the plot does not apply). ``plot_figures`` calls them all;
    ``plot_files`` may call them in worker processes."""
    s = obj if isinstance(obj, Subject) else subject_of(obj)
    if s.chain is None or s.analyses is None:
        return []
    out: list[tuple[str, Callable[[], Figure | None]]] = [
        (name, functools.partial(build, s)) for name, build in _BUILDERS.items()]
    if getattr(s.analyses, "time", None) is not None:
        def timing() -> Figure:
            from bandwright.report.time_view import time_figure
            pb = s.requirement.passband
            return time_figure(s.analyses.time, low_hz=pb.low_hz, high_hz=pb.high_hz,
                               size_in=(SIZE_PX[0] / DPI, SIZE_PX[1] / DPI), dpi=DPI,
                               colour=BUILT, grey=IDEAL)
        out.append(("timing", timing))
    if getattr(s.source, "diagnosis", None) is not None:
        out.append(("diagnosis", functools.partial(diagnosis_figure, s.source.diagnosis)))
    return out


def plot_figures(obj: Plan | Audit | Subject) -> dict[str, Figure]:
    """Every plot that applies, as matplotlib Figures (name → Figure).

    Parameters
    ----------
    obj : Plan, Audit or Subject

    Returns
    -------
    dict of str to Figure
        Keys from ``PLOT_NAMES``; "yield" only when a Monte Carlo result exists, none when
        the plan could not build a chain.
    """
    out = {}
    for name, make in _plot_makers(obj):
        fig = make()
        if fig is not None:
            out[name] = fig
    return out


def plot_jobs(obj: Plan | Audit | Subject) -> list[Callable[[], dict[str, bytes]]]:
    """One job per plot: each builds its Figure and returns {"<name>.png": ..., "<name>.svg":
    ...} ({} where the plot does not apply). Jobs are independent: ``plot_files`` runs them
    side by side (``bandwright.workers``)."""
    def job(name: str, make: Callable[[], Figure | None]) -> dict[str, bytes]:
        fig = make()
        if fig is None:
            return {}
        png, svg = _save(fig)
        return {f"{name}.png": png, f"{name}.svg": svg}
    return [functools.partial(job, name, make) for name, make in _plot_makers(obj)]


MEASURED = "#c0392b"


def diagnosis_figure(d: Diagnosis) -> Figure:
    """The measured sweep over the chain as designed and as fitted, and the residual.

    Parameters
    ----------
    d : bandwright.diagnosis.Diagnosis

    Returns
    -------
    Figure
        Top: gain (dB) against frequency, measured points over the designed and fitted
        curves; bottom: measured minus fitted, with the ±noise band.
    """
    f = d.sweep.freq_hz
    fig = Figure(figsize=(SIZE_PX[0] / DPI, SIZE_PX[1] / DPI), dpi=DPI, layout="constrained")
    ax, res = fig.subplots(2, 1, sharex=True, height_ratios=(2.6, 1.0))
    ax.plot(f, d.sweep.gain_db, color=MEASURED, marker=".", markersize=3, linestyle="",
            label="measured")
    ax.plot(f, d.planned_db, color=IDEAL, linestyle="--", linewidth=1.3,
            label="as designed (the chain file)")
    ax.plot(f, d.fitted_db, color=BUILT, linewidth=1.1, label="as fitted")
    top = float(max(d.sweep.gain_db.max(), d.planned_db.max()))
    ax.set_ylim(max(float(min(d.sweep.gain_db.min(), d.planned_db.min())), top - 80) - 3,
                top + 5)
    ax.set_ylabel("gain (dB)")
    lead = d.suspects[0] if d.suspects and not d.unexplained else None
    title = "Measured sweep: " + (f"stage {lead.stage} {lead.part} "
                                  f"{format_fixed(lead.change_pct, 1, sign=True)} %"
                                  if lead else "unexplained" if d.unexplained
                                  else "as designed")
    ax.set_title(title, loc="left", fontsize=11)
    ax.legend(loc="lower center", fontsize=8, framealpha=0.9)
    r = d.sweep.gain_db - d.fitted_db
    res.axhspan(-d.noise_db, d.noise_db, color=IDEAL, alpha=0.25, linewidth=0,
                label=f"± noise ({format_fixed(d.noise_db, 3)} dB)")
    res.plot(f, r, color=MEASURED, marker=".", markersize=2.5, linestyle="",
             label=f"measured − fitted ({format_fixed(d.residual_db, 3)} dB rms)")
    lim = max(5 * d.noise_db, float(np.max(np.abs(r))) * 1.1)
    res.set_ylim(-lim, lim)
    res.set_ylabel("residual (dB)")
    res.legend(loc="upper right", fontsize=8, framealpha=0.9, ncols=2)
    _log_freq_axis(res, float(f[0]), float(f[-1]))
    ax.grid(True, which="major", color="#d0d0d0", linewidth=0.6)
    return fig


def plot_files(obj: Plan | Audit | Subject) -> dict[str, bytes]:
    """Every plot as PNG and SVG bytes: {"response.png": ..., "response.svg": ..., ...}.

    Parameters
    ----------
    obj : Plan, Audit or Subject

    Returns
    -------
    dict of str to bytes
        PNGs are ``SIZE_PX`` pixels at ``DPI``; in ``PLOT_NAMES`` order. The plots are drawn
        side by side, one worker process per core (``bandwright.workers.run_jobs``): each
        is drawn exactly as it would be alone.
    """
    from bandwright.workers import run_jobs
    out: dict[str, bytes] = {}
    for part in run_jobs(operator.call, plot_jobs(obj)):
        out.update(part)
    return out
