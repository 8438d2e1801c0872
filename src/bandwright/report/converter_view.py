"""The converter block of the terminal and HTML reports: full scale, the folds table, the
noise budget to the bits. Reads ``Analyses.converter``; computes nothing."""

from __future__ import annotations

import html
import math

from rich import box
from rich.table import Table
from rich.text import Text

from bandwright.parts.notation import format_fixed, format_hz, format_si, format_sig

__all__ = ["requirement_text", "terminal_blocks", "html_section", "added_text",
           "noise_band_text"]


def _hz(f: float) -> str:
    return format_hz(f, significant=3)


def _uv(v: float) -> str:
    return format_si(v, "V", significant=4)


def requirement_text(conv) -> str:
    """The `[converter]` as understood, one line."""
    parts = [f"{conv.bits}-bit at {_hz(conv.sample_rate_hz)} (fs/2 = {_hz(conv.nyquist_hz)})",
             f"full scale {format_si(conv.full_scale_vpp, 'Vpp', significant=4)} "
             f"(±{format_si(conv.full_scale_vpk, 'V', significant=4)})"]
    if conv.enob is not None:
        parts.append(f"ENOB {format_sig(conv.enob)}")
    load = []
    if conv.input_ohms is not None:
        load.append(format_si(conv.input_ohms, "Ω"))
    if conv.input_farads > 0:
        load.append(format_si(conv.input_farads, "F"))
    parts.append("input " + (" ∥ ".join(load) if load else "unloaded"))
    lim = "1 LSB" if conv.max_alias_dbfs is None else "asked"
    parts.append(f"folds below {format_fixed(conv.alias_limit_dbfs, 1)} dBFS ({lim})")
    parts.append(f"peak aimed {format_sig(conv.headroom_db)} dB below full scale")
    return "; ".join(parts)


def added_text(point) -> str:
    """What a stopband point the planner added says (empty for the requirement's own)."""
    why = getattr(point, "added", "")
    return f" — added for the converter: {why}" if why else ""


def noise_band_text(nz, fmt_hz) -> str | None:
    """Without a converter: the band integrated and the whole grid's figure beside it."""
    if nz.wide_band_hz is None:
        return None
    lo, hi = nz.wide_band_hz
    ratio = 20 * math.log10(nz.wide_vrms / nz.integrated_vrms) if nz.integrated_vrms > 0 \
        else math.inf
    return (f"Noise integrated over {fmt_hz(nz.band_hz[0])}–{fmt_hz(nz.band_hz[1])} (the noise "
            f"band); over the report's whole span {fmt_hz(lo)}–{fmt_hz(hi)} it is "
            f"{_uv(nz.wide_vrms)} rms ({format_fixed(ratio, 1, sign=True)} dB): what a converter "
            f"with no filter after it would see")


def _lines(c) -> list[str]:
    conv = c.converter
    tau = "" if c.load_time_constant_s is None else \
        f"; its input RC (input_ohms · input_farads) is {format_si(c.load_time_constant_s, 's')}"
    return [
        f"Peak at the converter {format_si(c.peak_vpk, 'Vpk', significant=4)} of "
        f"±{format_si(c.full_scale_vpk, 'V', significant=4)} full scale: "
        f"margin {format_fixed(c.margin_db, 1, sign=True)} dB (aim {format_sig(conv.headroom_db)} "
        f"dB); {format_fixed(c.fill_gain_db, 1)} dB "
        f"of passband gain would put the peak at the aim",
        f"Noise at the converter over {_hz(c.band_hz[0])}–{_hz(c.band_hz[1])}: chain "
        f"{_uv(c.chain_vrms)}, folded from above fs/2 (to {_hz(c.folds[-1].top_hz)}) "
        f"{_uv(c.folded_vrms)}, converter ({format_sig(conv.effective_bits)} bits: FS/2^N/√12 in "
        f"band) {_uv(c.quantisation_vrms)}; total {_uv(c.total_vrms)} rms, "
        f"{_uv(c.input_referred_vrms)} referred to the input; the {c.dominant_noise} dominates",
        f"SNR at full input {format_fixed(c.snr_db, 1)} dB; dynamic range "
        f"{format_fixed(c.dynamic_range_db, 1)} dB "
        f"(largest in-band signal before any node, the converter included, runs out of room)",
        f"Drive: settling a full-scale kick to 1 LSB in half a sample period needs about "
        f"{_hz(c.settle_gbw_hz)} GBW (a first-order estimate), the op-amp at the output has "
        f"{_hz(c.last_gbw_hz)}{tau}",
    ]


def _fold_rows(c) -> list[tuple[str, ...]]:
    rows = []
    for f in c.folds:
        src = f"{_hz(f.source_hz)}–{_hz(f.top_hz)}" if f.source == "noise" else _hz(f.source_hz)
        lands = "the passband" if f.source == "noise" else _hz(f.alias_hz)
        rows.append((f.source, src, lands, f"{f.level_dbfs:.1f}", f"{f.limit_dbfs:.1f}",
                     "ok" if f.passes else "FAIL"))
    return rows


def terminal_blocks(c) -> list:
    """Renderables for the terminal: a heading line, the figures, the folds table."""
    out: list = [Text("Converter", style="bold")]
    out += [Text(line) for line in _lines(c)]
    t = Table(title="Folds onto the band at the converter", box=box.SIMPLE_HEAD,
              title_justify="left", title_style="bold", pad_edge=False, padding=(0, 1))
    for col in ("source", "from", "lands at", "dBFS", "limit dBFS", "verdict"):
        t.add_column(col, no_wrap=True)
    for row in _fold_rows(c):
        t.add_row(*(Text(x) for x in row))
    out.append(t)
    return out


def html_section(c, *, plot_svg: str | None = None) -> str:
    """The converter section of the HTML report (`plot_svg`: the folds plot, inlined)."""
    e = html.escape
    out = ['<section id="converter"><h2>Converter</h2>']
    out += [f"<p>{e(line)}.</p>" for line in _lines(c)]
    head = ["source", "from", "lands at", "dBFS", "limit dBFS", "verdict"]
    out.append("<table><thead><tr>" + "".join(f"<th>{e(h)}</th>" for h in head)
               + "</tr></thead><tbody>")
    for row in _fold_rows(c):
        cls = ' class="fail"' if row[-1] == "FAIL" else ""
        out.append(f"<tr{cls}>" + "".join(f"<td>{e(x)}</td>" for x in row) + "</tr>")
    out.append("</tbody></table>")
    if plot_svg:
        out.append(f'<figure id="plot-folds"><h3>Folded spectrum at the converter</h3>'
                   f"{plot_svg}<figcaption>Each tone above fs/2 drawn where it lands after "
                   "sampling, at its level at the converter (dBFS), against the alias limit; "
                   "the chain's noise density below fs/2 and the folded density beside it. "
                   "The passband is shaded.</figcaption></figure>")
    out.append("</section>")
    return "".join(out)
