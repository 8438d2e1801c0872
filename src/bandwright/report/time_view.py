"""The time-domain figures in every output: JSON ``time_domain``, a terminal block, the
``timing`` plot and its HTML section. Renderers only: every figure is read from
``analysis.timedomain.TimeFigures``."""

from __future__ import annotations

import html
import math
from typing import TYPE_CHECKING, Any

import numpy as np

from bandwright.parts.notation import format_hz, format_si, format_sig

if TYPE_CHECKING:  # the JSON (time_dict) needs no rich: it is imported where a table is drawn
    from rich.console import Console

__all__ = ["time_dict", "render_time", "time_figure", "time_html", "TIMING_CAPTION"]

TIMING_CAPTION = ("Left: group delay of the chain output across the passband (edges dashed). "
                  "Right: envelope of a tone burst at the band centre, input and output (output "
                  "as a share of its steady level), with the 10 % and 90 % crossings marked; "
                  "the edge bursts are drawn thin.")


def _num(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def time_dict(tf) -> dict[str, Any] | None:
    """The JSON ``time_domain`` object (docs/user-guide.md lists every key)."""
    if tf is None:
        return None
    return {
        "group_delay": {"freq_hz": [float(f) for f in tf.freq_hz],
                        "delay_s": [float(d) for d in tf.group_delay_s],
                        "min_s": _num(tf.delay_min_s), "max_s": _num(tf.delay_max_s),
                        "spread_s": _num(tf.delay_spread_s),
                        "center_s": _num(tf.delay_center_s)},
        "bursts": [{"freq_hz": b.freq_hz, "burst_s": b.burst_s, "gain": _num(b.gain),
                    "t10_s": _num(b.t10_s), "t90_s": _num(b.t90_s), "rise_s": _num(b.rise_s),
                    "delay_s": _num(b.delay_s), "overshoot_pct": _num(b.overshoot_pct),
                    "ringing_s": _num(b.ringing_s)} for b in tf.bursts],
        "step": {"settling_s": _num(tf.settling_s)},
        "onset": [{"net": o.net, "stage": o.stage, "peak_vpk": _num(o.peak_vpk),
                   "steady_vpk": _num(o.steady_vpk), "limit_vpk": _num(o.limit_vpk),
                   "event": o.event, "at_s": _num(o.at_s), "recovery_s": _num(o.recovery_s),
                   "signal_hz": o.signal_hz} for o in tf.onset],
    }


def _ms(t: float) -> str:
    return "—" if not math.isfinite(t) else format_si(t, "s")


def render_time(an, console: Console) -> None:
    """A terminal block: group delay, the three bursts, settling, onset peaks."""
    from rich.table import Table
    tf = getattr(an, "time", None)
    if tf is None:
        return
    console.print(f"Time: group delay {_ms(tf.delay_min_s)} to {_ms(tf.delay_max_s)} across the "
                  f"band (spread {_ms(tf.delay_spread_s)}, {_ms(tf.delay_center_s)} at the "
                  f"centre); step settles to 1 % in {_ms(tf.settling_s)}", markup=False)
    t = Table(title=f"Tone bursts of {_ms(tf.center.burst_s)} at the output", box=None,
              title_justify="left", pad_edge=False)
    for col in ("at", "delay 50 %", "rise 10-90 %", "overshoot", "ringing to 1 %"):
        t.add_column(col, justify="right")
    for b, name in zip(tf.bursts, ("centre", "low edge", "high edge")):
        t.add_row(f"{name} {format_hz(b.freq_hz)}", _ms(b.delay_s), _ms(b.rise_s),
                  f"{format_sig(b.overshoot_pct, 3)} %", _ms(b.ringing_s))
    console.print(t)
    worst = max(tf.onset, key=lambda o: o.peak_vpk / o.limit_vpk, default=None)
    if worst is not None:
        console.print(f"Onset: worst at {worst.net}, {format_si(worst.peak_vpk, 'Vpk')} at "
                      f"{_ms(worst.at_s)} against {format_si(worst.limit_vpk, 'Vpk')} (steady "
                      f"{format_si(worst.steady_vpk, 'Vpk')}); every net in the onset checks", markup=False)


def _crossings(ax, b, colour: str) -> None:
    for level, t in ((0.1, b.t10_s), (0.9, b.t90_s)):
        if math.isfinite(t):
            ax.plot([t * 1e3], [level], marker="o", color=colour, markersize=5)
            ax.annotate(f"{int(level * 100)} %", (t * 1e3, level), textcoords="offset points",
                        xytext=(6, -10 if level > 0.5 else 4), fontsize=8, color=colour)


def time_figure(tf, *, low_hz: float, high_hz: float, size_in: tuple[float, float],
                dpi: int, colour: str = "#12355b", grey: str = "#8c8c8c"):
    """Group delay over frequency and the centre burst's envelope, input and output.

    Returns a ``matplotlib.figure.Figure`` (imported here: ``report.plots`` configures
    matplotlib before anything imports it).
    """
    from matplotlib.figure import Figure
    fig = Figure(figsize=size_in, dpi=dpi, layout="constrained")
    gd_ax, env_ax = fig.subplots(1, 2)
    f = np.asarray(tf.freq_hz)
    gd_ax.plot(f, np.asarray(tf.group_delay_s) * 1e3, color=colour, linewidth=1.4)
    for edge in (low_hz, high_hz):
        gd_ax.axvline(edge, color=grey, linestyle="--", linewidth=0.8)
    gd_ax.set_xlabel("frequency (Hz)")
    gd_ax.set_ylabel("group delay (ms)")
    gd_ax.set_title(f"Group delay: spread {_ms(tf.delay_spread_s)}", loc="left", fontsize=11)
    gd_ax.grid(True, color="#d0d0d0", linewidth=0.6)
    b = tf.center
    t_ms = b.t_s * 1e3
    env_ax.plot(t_ms, np.where(b.t_s <= b.burst_s, 1.0, 0.0), color=grey, linewidth=1.0,
                label="input envelope")
    for i, other in enumerate(tf.bursts[1:]):
        # The edge tones' envelopes, faint: an edge burst can overshoot where the centre's
        # does not (its switch-off transient rings at the nearest pole pair).
        env_ax.plot(other.t_s * 1e3, other.envelope / other.gain, color=colour, alpha=0.35,
                    linewidth=0.8,
                    label=None if i else "output envelopes at the band edges " +
                    " and ".join(f"{format_hz(o.freq_hz)}" for o in tf.bursts[1:]))
    env_ax.plot(t_ms, b.envelope / b.gain, color=colour, linewidth=1.4,
                label=f"output envelope at {format_hz(b.freq_hz)}")
    _crossings(env_ax, b, colour)
    env_ax.set_xlabel("time (ms)")
    env_ax.set_ylabel("envelope (share of steady level)")
    env_ax.set_title(f"Burst of {_ms(b.burst_s)}: rise {_ms(b.rise_s)}, overshoot "
                     f"{format_sig(b.overshoot_pct, 3)} %,\nringing to 1 % {_ms(b.ringing_s)}", loc="left",
                     fontsize=10)
    env_ax.legend(loc="upper right", fontsize=8, framealpha=0.9)
    env_ax.grid(True, color="#d0d0d0", linewidth=0.6)
    return fig


def time_html(tf, svg_html: str | None) -> str:
    """The HTML section: the figures as a table and the inline ``timing`` plot."""
    if tf is None:
        return ('<section id="time"><h2>Time domain</h2><p class="note">No time-domain '
                'figures: no chain was built, or its output is unstable.</p></section>')
    rows = "".join(
        f"<tr><td>{name} {format_hz(b.freq_hz)}</td><td class=\"num\">{_ms(b.delay_s)}</td>"
        f"<td class=\"num\">{_ms(b.rise_s)}</td><td "
        f"class=\"num\">{format_sig(b.overshoot_pct, 3)} %</td>"
        f"<td class=\"num\">{_ms(b.ringing_s)}</td></tr>"
        for b, name in zip(tf.bursts, ("centre", "low edge", "high edge")))
    onset = "".join(
        f"<tr><td>{html.escape(o.net)}</td><td class=\"num\">{format_sig(o.peak_vpk, 3)}</td>"
        f"<td class=\"num\">{format_sig(o.steady_vpk, 3)}</td>"
        f"<td class=\"num\">{format_sig(o.limit_vpk, 3)}</td>"
        f"<td class=\"num\">{_ms(o.recovery_s) if o.peak_vpk > o.limit_vpk else '—'}</td></tr>"
        for o in tf.onset)
    figure = (f'<figure id="plot-timing"><h3>Group delay and burst envelope</h3>{svg_html}'
              f"<figcaption>{html.escape(TIMING_CAPTION)}</figcaption></figure>"
              if svg_html else "")
    return (
        '<section id="time"><h2>Time domain</h2>'
        f"<p>Group delay {_ms(tf.delay_min_s)} to {_ms(tf.delay_max_s)} across the band "
        f"(spread {_ms(tf.delay_spread_s)}); step settling to 1 % in {_ms(tf.settling_s)}.</p>"
        "<table><thead><tr><th>burst</th><th>delay 50 %</th><th>rise 10-90 %</th>"
        f"<th>overshoot</th><th>ringing to 1 %</th></tr></thead><tbody>{rows}</tbody></table>"
        "<table><thead><tr><th>net</th><th>onset peak (Vpk)</th><th>steady (Vpk)</th>"
        f"<th>limit (Vpk)</th><th>recovery</th></tr></thead><tbody>{onset}</tbody></table>"
        f"{figure}</section>")
