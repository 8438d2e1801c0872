"""The self-contained HTML report (``report.html``): inline SVG and CSS, no scripts, no network.

It renders the same Plan / Audit, Analyses and Checks as the terminal report and the JSON,
with the same number formats (a test holds the three to the same figures); it computes
nothing of its own.

Sections (element ids): ``summary``, ``candidates``, ``chain``, ``stages``, ``levels``,
``checks``, ``plots``, ``noise``, ``bom``.
"""

from __future__ import annotations

import csv
import html
import io
import math
from typing import TYPE_CHECKING, Sequence

from bandwright import __version__
from bandwright.analysis.montecarlo import YieldResult
from bandwright.analysis.noise import listed_sources, source_words
from bandwright.checks.base import Check, worst_status
from bandwright.parts.notation import format_fixed, format_hz, format_si, format_sig, format_slew
from bandwright.report import converter_view, words, yield_text
from bandwright.report.bom import bom_for
from bandwright.report.subject import Subject, net_label, stage_label, subject_of
from bandwright.report.svg import svg_inline

if TYPE_CHECKING:
    from bandwright.audit import Audit
    from bandwright.planner import Plan

__all__ = ["html_report", "SECTION_IDS", "svg_inline", "verdict_text"]

SECTION_IDS = ("summary", "candidates", "chain", "stages", "levels", "checks", "yield",
               "plots", "noise", "bom", "time")

_CSS = """
:root { --ink: #1d2733; --muted: #5b6673; --line: #d5dbe1; --band: #f3f5f7;
        --pass: #2e6b34; --warn: #946000; --fail: #b3261e; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff;
       font: 15px/1.45 "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
main { max-width: 1120px; margin: 0 auto; padding: 18px 22px 40px; }
header.top { border-bottom: 3px solid var(--ink); padding-bottom: 8px; margin-bottom: 6px; }
header.top h1 { font-size: 24px; margin: 0 0 2px; }
header.top p { margin: 0; color: var(--muted); font-size: 13px; }
nav { font-size: 13px; margin: 8px 0 4px; }
nav a { color: var(--ink); margin-right: 12px; }
section { margin-top: 26px; }
h2 { font-size: 19px; border-bottom: 1px solid var(--line); padding-bottom: 3px; }
h3 { font-size: 16px; margin: 20px 0 6px; }
table { border-collapse: collapse; width: 100%; font-size: 13px; margin: 6px 0 10px; }
th, td { border: 1px solid var(--line); padding: 3px 7px; text-align: left;
         vertical-align: top; }
th { background: var(--band); font-weight: 600; }
td.num { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
tr.chosen td { background: #eef4fb; }
.status { font-weight: 700; white-space: nowrap; }
.status.pass { color: var(--pass); } .status.warn { color: var(--warn); }
.status.fail { color: var(--fail); }
.verdict { display: inline-block; padding: 4px 12px; border: 2px solid; font-weight: 700;
           margin: 4px 0 8px; }
.verdict.pass { color: var(--pass); } .verdict.warn { color: var(--warn); }
.verdict.fail { color: var(--fail); }
dl.req { display: grid; grid-template-columns: 170px 1fr; gap: 2px 12px; margin: 6px 0; }
dl.req dt { color: var(--muted); } dl.req dd { margin: 0; }
.figures { display: flex; flex-wrap: wrap; gap: 8px 26px; margin: 8px 0; }
.figures div { min-width: 150px; } .figures b { display: block; font-size: 18px; }
.figures span { color: var(--muted); font-size: 12px; }
figure { margin: 10px 0 22px; }
figure svg { max-width: 100%; height: auto; display: block; }
figcaption { font-size: 13px; color: var(--muted); margin-top: 4px; max-width: 960px; }
.schematic svg { max-width: 100%; height: auto; }
.stage { border-left: 4px solid var(--line); padding-left: 12px; margin-top: 18px; }
.note { color: var(--muted); font-size: 13px; }
ul.tight { margin: 4px 0; padding-left: 20px; font-size: 13px; }
footer { margin-top: 36px; color: var(--muted); font-size: 12px;
         border-top: 1px solid var(--line); padding-top: 6px; }
"""

_PLOT_CAPTIONS = {
    "response": "The built chain (parts as rounded, op-amp GBW included) against the mask. "
                "Shaded areas are forbidden: below the passband floor, above the passband "
                "ceiling, and above each stopband limit from its point outward (the check "
                "reads the response at the point itself, marked ▼). The dashed curve is "
                "the ideal sections; the right panel zooms into the passband.",
    "levels": "Left: the level each op-amp output would reach with the full in-band input "
              "at each frequency (V peak), tones marked ◆ at their own frequencies, against "
              "the swing limit. Right: the worst case the headroom check uses (in-band "
              "signal at its worst frequency plus every tone, amplitudes added) as a margin "
              "in dB, coloured by the check's verdict.",
    "noise": "Output noise density and its largest sources; the other sources are summed "
             "into one dotted curve. The integrated figure covers the marked band.",
    "yield": "Spread of the response over part tolerances (Monte Carlo): the shaded band "
             "holds the middle boards between the low and high percentiles named in the "
             "legend, the solid line the median board, the dashed line nominal parts.",
    "poles": "Left: each section's poles in the s-plane (built ×, target ◇). Right: the "
             "same sections as pole frequency and Q — the higher the Q, the more a small "
             "f0 error moves the band edges.",
}


def _e(text: object) -> str:
    return html.escape(str(text), quote=True)


def verdict_text(checks: Sequence[Check]) -> tuple[str, str]:
    """The verdict the summary shows.

    Parameters
    ----------
    checks : sequence of Check

    Returns
    -------
    (str, str)
        The worst status ("pass", "warn", "fail") and a sentence counting failures and
        warnings.
    """
    status = worst_status(checks)
    fails = sum(k.status == "fail" for k in checks)
    warns = sum(k.status == "warn" for k in checks)
    warnings = f"{warns} warning{'' if warns == 1 else 's'}"
    if status == "fail":
        return status, f"{fails} of {len(checks)} checks fail ({warnings})"
    if status == "warn":
        return status, f"every check passes, with {warnings}"
    return status, f"all {len(checks)} checks pass"


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]], *,
           num_cols: Sequence[int] = (), row_classes: Sequence[str] | None = None) -> str:
    out = ["<table><thead><tr>"] + [f"<th>{_e(h)}</th>" for h in headers]
    out.append("</tr></thead><tbody>")
    for k, row in enumerate(rows):
        cls = f' class="{row_classes[k]}"' if row_classes and row_classes[k] else ""
        out.append(f"<tr{cls}>")
        for j, cell in enumerate(row):
            klass = ' class="num"' if j in num_cols else ""
            out.append(f"<td{klass}>{cell}</td>")
        out.append("</tr>")
    out.append("</tbody></table>")
    return "".join(out)


def _status(s: str) -> str:
    return f'<span class="status {s}">{words.STATUS_WORD[s]}</span>'


def _db(x: float) -> str:
    # rounded first so that a gain a hair under 1 reads +0.00, not -0.00
    return format_fixed(20 * math.log10(abs(x)), 2, sign=True) if x else "—"


# --------------------------------------------------------------------------- sections


def _summary(s: Subject) -> str:
    req = s.requirement
    pb = req.passband
    inp = req.input
    rows = []
    if s.has_mask:
        rows.append(("passband", f"{format_hz(pb.low_hz)} to {format_hz(pb.high_hz)} (centre "
                                 f"{format_hz(pb.center_hz)}, width {format_hz(pb.bandwidth_hz)})"))
        rows.append(("passband gain", f"{format_sig(pb.gain_db)} dB ± "
                                      f"{format_sig(pb.gain_tolerance_db)} dB; at most "
                                      f"{format_sig(pb.max_loss_db, 4)} dB loss across the band"))
        for sp in req.stopband:
            rows.append(("stopband", f"at least {format_sig(sp.min_loss_db)} dB down at "
                                     f"{format_hz(sp.freq_hz)}{converter_view.added_text(sp)}"))
    else:
        rows.append(("mask", words.unasked_band(pb)))
    tones = ", ".join(f"{format_si(t.vpk, 'Vpk', significant=4)} at {format_hz(t.freq_hz)}" for t in inp.tones) or "none"
    rows.append(("input", f"up to {format_si(inp.max_vpk, 'Vpk', significant=4)} in band, from "
                          f"{format_si(inp.source_ohms, 'Ω')} source"))
    rows.append(("out-of-band tones", tones))
    rows.append(("supply", f"{format_si(req.supply.rails_v[0], 'V', significant=4)} / "
                           f"{format_si(req.supply.rails_v[1], 'V', significant=4, sign=True)}"))
    if s.chain is not None:
        models = sorted({st.model.name for st in s.chain.stages})
        m = s.chain.stages[0].model
        rows.append(("op-amp", f"'{', '.join(models)}': {format_hz(m.gbw_hz, significant=3)} GBW, "
                               f"{format_sig(m.slew_v_per_us)} V/µs, "
                               f"{format_si(m.noise_v_per_rthz, 'V/√Hz')}"))
    elif s.kind == "plan":
        m = s.source.model
        rows.append(("op-amp", f"'{m.name}': {format_hz(m.gbw_hz, significant=3)} GBW"))
    band = req.noise.band_hz
    conv = getattr(req, "converter", None)
    rows.append(("noise band", f"{format_hz(band[0])} to {format_hz(band[1])}" if band
                 else "up to fs/2, what the converter sees" if conv is not None
                 else "the passband"))
    if conv is not None:
        rows.append(("converter", converter_view.requirement_text(conv)))
    if req.noise.max_output_vrms:
        rows.append(("noise budget", f"{format_si(req.noise.max_output_vrms, 'V rms', significant=4)} at the "
                                     "output"))
    rows.append(("temperature", f"{format_sig(req.environment.temperature_c)} °C"))
    status, sentence = verdict_text(s.checks)
    out = ['<section id="summary"><h2>Summary</h2>',
           f'<div class="verdict {status}">Verdict: {_e(sentence)}</div>']
    if s.kind == "plan":
        p = s.source
        c = p.chosen.candidate
        out.append(f"<p>Chosen: <b>{_e(c.family)} {_e(words.path_label(c.path))}</b>, order "
                   f"{c.order} ({_e(c.note)}) — {_e(p.why)}.</p>")
    else:
        out.append(f"<p>Audit of the chain in <code>{_e(s.path)}</code>.</p>")
    an = s.analyses
    if an is not None:
        worst = min(an.nodes, key=lambda n: n.margin_db)
        nz = an.noise
        figs = [
            (format_si(nz.integrated_vrms, 'V rms', significant=4),
             f"output noise, {format_hz(nz.band_hz[0])}–{format_hz(nz.band_hz[1])}"),
            (f"{format_fixed(an.snr_db, 1)} dB", "signal to noise at full input"),
            (f"{format_fixed(an.dynamic_range_db, 1)} dB", "dynamic range"),
            (f"{format_fixed(worst.margin_db, 1, sign=True)} dB", f"worst headroom margin "
                                                                  f"({worst.net})"),
            (f"{len(s.chain.stages)}", "stages"),
        ]
        y = s.yield_result
        if isinstance(y, YieldResult):
            figs.append((f"{format_fixed(100 * y.yield_fraction, 1)} %", f"yield, {y.samples} "
                                                                         f"boards"))
        out.append('<div class="figures">' + "".join(
            f"<div><b>{_e(v)}</b><span>{_e(k)}</span></div>" for v, k in figs) + "</div>")
    out.append("<h3>The requirement as understood</h3><dl class=\"req\">")
    out += [f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in rows]
    out.append("</dl></section>")
    return "".join(out)


def _candidates(s: Subject) -> str:
    out = ['<section id="candidates"><h2>Candidates</h2>']
    if s.kind != "plan":
        out.append('<p class="note">An audit checks one given chain: no candidates.</p>'
                   "</section>")
        return "".join(out)
    rows, classes = [], []
    for i, d in enumerate(s.source.designs):
        c, an = d.candidate, d.analyses
        margin = f"{format_fixed(an.worst_margin_db, 1, sign=True)} dB" if an else "—"
        noise = format_si(an.noise.integrated_vrms, 'V') if an else "—"
        dr = f"{format_fixed(an.dynamic_range_db, 1)} dB" if an else "—"
        state = words.candidate_state(d.buildable, d.failures)
        y = getattr(d, "yield_result", None)
        yv = y.yield_fraction if isinstance(y, YieldResult) else None
        rows.append([("→ " if i == 0 else "") + str(i + 1), _e(c.family), _e(words.path_label(c.path)),
                     str(c.order), str(len(c.sections)),
                     str(d.opamps) if d.buildable else "—", format_sig(c.highest_q, 3), _e(margin),
                     _e(noise), _e(dr), "—" if yv is None else f"{format_fixed(100 * yv, 1)} %",
                     _e(state)])
        classes.append("chosen" if i == 0 else "")
    out.append(_table(["#", "family", "path", "order", "sections", "op-amps", "highest Q",
                       "worst margin", "noise out", "dyn. range", "yield", "state"], rows,
                      num_cols=(3, 4, 5, 6, 7, 8, 9, 10), row_classes=classes))
    out.append(f'<p class="note">Ranked: buildable first, then fewest failing checks (the '
               f"higher yield between two that miss it), fewest op-amps, fewest sections, lowest "
               f"highest Q, widest dynamic range. The yield is not run for a candidate that fails "
               f"other checks. {_e(s.source.why).capitalize()}.</p></section>")
    return "".join(out)


def _chain(s: Subject, schematics: dict[str, bytes]) -> str:
    out = ['<section id="chain"><h2>Chain, input to output</h2>']
    if s.chain is None:
        d = s.source.chosen
        rows = []
        for i, a in enumerate(d.assignments):
            sec = a.section
            why = "; ".join(f"{n}: {r}" for n, r in a.rejected) if a.realization is None \
                else f"built as {a.realization.topology}"
            rows.append([str(i + 1), _e(sec.kind), _e(format_hz(sec.f0_hz)), format_sig(sec.q),
                         format_sig(sec.gain, 3), _e(why)])
        out.append('<p>No circuit builds at least one section with this op-amp:</p>')
        out.append(_table(["#", "kind", "f0", "Q", "gain", "what stops it"], rows,
                          num_cols=(0, 2, 3, 4)))
        out.append("</section>")
        return "".join(out)
    if "block.svg" in schematics:
        out.append(f'<figure class="schematic">{svg_inline(schematics["block.svg"], "block")}'
                   "</figure>")
    rows = []
    for st in s.chain.stages:
        tg, b = st.target, st.built
        f0 = "—" if st.kind == "gain" else f"{format_hz(tg.f0_hz)} → {format_hz(b.f0_hz)}"
        q = "—" if st.kind == "gain" else f"{format_sig(tg.q)} → {format_sig(b.q)}"
        ops = sum(1 for e in st.elements if e.kind == "opamp")
        rows.append([str(st.position), _e(st.kind), _e(st.topology), _e(f0), _e(q),
                     _e(f"{_db(tg.gain)} → {_db(b.gain)}"), str(ops)])
    first = words.TARGET if s.kind == "plan" else words.AUDIT_IDEAL
    out.append(_table(["#", "kind", "topology", f"f0 {first} → built", f"Q {first} → built",
                       f"gain dB {first} → built", "op-amps"], rows, num_cols=(0, 3, 4, 5, 6)))
    if s.kind != "plan":
        out.append(f'<p class="note">{_e(words.AUDIT_IDEAL_NOTE)}.</p>')
    if s.kind == "plan" and s.source.chosen.ordering is not None:
        o = s.source.chosen.ordering
        out.append(f'<p class="note">{_e(yield_text.ordering_sentence(o))}</p>')
        if math.isfinite(o.built_noise_vrms):
            out.append(f'<p class="note">{_e(yield_text.ordering_built_text(o))}</p>')
    out.append("</section>")
    return "".join(out)


def _stages(s: Subject, schematics: dict[str, bytes]) -> str:
    out = ['<section id="stages"><h2>Stages</h2>']
    if s.chain is None:
        out.append('<p class="note">No chain was built.</p></section>')
        return "".join(out)
    for st in s.chain.stages:
        out.append(f'<div class="stage" id="stage-{st.position}"><h3>'
                   f"{_e(stage_label(st).capitalize())}: {_e(st.kind)}</h3>")
        svg = schematics.get(f"schematic_stage{st.position}.svg")
        if svg is not None:
            out.append(f'<figure class="schematic">{svg_inline(svg, f"st{st.position}")}'
                       "</figure>")
        # The target's gain takes the built stage's sign, as in the JSON.
        sign = -1.0 if st.built.gain < 0 else 1.0
        first = words.TARGET if s.kind == "plan" else words.AUDIT_IDEAL
        figs = [(first, st.target.f0_hz, st.target.q, sign * abs(st.target.gain))]
        if st.ideal is not None:
            figs.append((words.IDEAL_PARTS, st.ideal.f0_hz, st.ideal.q, st.ideal.gain))
        figs.append((words.BUILT, st.built.f0_hz, st.built.q, st.built.gain))
        rows = [[_e(name), "—" if st.kind == "gain" else _e(format_hz(f0)),
                 "—" if st.kind == "gain" else format_sig(q), format_sig(g), _e(_db(g))]
                for name, f0, q, g in figs]
        out.append(_table(["", "f0", "Q", "gain (V/V)", "gain (dB)"], rows,
                          num_cols=(1, 2, 3, 4)))
        parts = [[_e(n), _e(format_si(v, "Ω" if n.startswith("R") else "F"))]
                 for n, v in st.components]
        if parts:
            out.append(_table(["part", "value"], parts, num_cols=(1,)))
        else:
            out.append('<p class="note">No passive parts: the op-amp alone, as a '
                       "follower.</p>")
        if st.reason:
            out.append(f"<p><b>Why this topology:</b> {_e(st.reason)}</p>")
        if st.rejected:
            out.append('<ul class="tight">' + "".join(
                f"<li>not {_e(n)}: {_e(r)}</li>" for n, r in st.rejected) + "</ul>")
        out.append("</div>")
    out.append("</section>")
    return "".join(out)


def _levels(s: Subject) -> str:
    out = ['<section id="levels"><h2>Node levels, worst case</h2>']
    if s.analyses is None:
        out.append('<p class="note">No chain was built.</p></section>')
        return "".join(out)
    status = {k.net: k.status for k in s.checks if k.id == "headroom" and k.net}
    rows = []
    for n in s.analyses.nodes:
        load = format_si(n.load_ohms, "Ω") if math.isfinite(n.load_ohms) else "none"
        rows.append([_e(n.net), _e(net_label(s.chain, n.net)), format_si(n.dc_v, 'V', significant=4, sign=True),
                     format_si(n.signal_vpk, 'Vpk'),
                     format_si(n.peak_vpk, 'Vpk'), format_si(n.limit_vpk, 'Vpk'),
                     f"{format_fixed(n.margin_db, 1, sign=True)} dB", _status(status.get(n.net, "pass")),
                     _e(format_slew(n.slew_needed_v_per_us)), _e(load)])
    out.append(_table(["net", "where", "bias", "in-band signal", "peak (signal + tones)",
                       "limit (room around the bias)", "margin", "verdict", "slew needed",
                       "least load"], rows,
                      num_cols=(2, 3, 4, 5, 6, 8, 9)))
    out.append('<p class="note">Worst case: the largest in-band input at its worst frequency '
               "plus every tone, amplitudes added. The level plot is in "
               '<a href="#plot-levels">Plots</a>.</p></section>')
    return "".join(out)


def _checks(s: Subject) -> str:
    rows = []
    for k in s.checks:
        where = k.net or (f"stage {k.stage}" if k.stage else "chain")
        rows.append([_e(k.id), _e(where), _status(k.status), _e(words.check_figure(k.value, k.unit)),
                     _e(words.check_figure(k.limit, k.unit)), _e(k.message)])
    return ('<section id="checks"><h2>Checks</h2>'
            + _table(["check", "where", "verdict", "value", "limit", "reason"], rows,
                     num_cols=(3, 4))
            + f"<p>{_e(words.checks_sentence(s.checks))}</p></section>")


def _yield(s: Subject) -> str:
    """The Monte Carlo result, when the plan ran one (the same figures as the terminal)."""
    y = s.yield_result
    out = ['<section id="yield"><h2>Tolerance yield</h2>']
    if not isinstance(y, YieldResult):
        out.append('<p class="note">No Monte Carlo run for this report.</p></section>')
        return "".join(out)
    out.append(f"<p>{_e(yield_text.summary_sentence(y))}</p>")
    failing = yield_text.failing_sentence(y)
    if failing:
        out.append(f"<p>{_e(failing)}</p>")
    if y.drivers:
        rows = [[_e(c) for c in r] for r in yield_text.driver_rows(y)]
        out.append("<h3>Parts that decide the yield</h3>")
        out.append(_table(yield_text.DRIVER_HEAD, rows, num_cols=(0, 2, 3)))
        out.append(f'<p class="note">{_e(yield_text.DRIVER_NOTE)}</p>')
    advice = yield_text.advice_sentence(y)
    if advice:
        out.append(f"<p>{_e(advice)}</p>")
    out.append('<p class="note">The envelope plot is in <a href="#plot-yield">Plots</a>.</p>'
               "</section>")
    return "".join(out)


def _plots(plots: dict[str, bytes]) -> str:
    out = ['<section id="plots"><h2>Plots</h2>']
    if not plots:
        out.append('<p class="note">No plots: no chain was built.</p>')
    titles = {"response": "Response against the mask", "levels": "Node levels and headroom",
              "noise": "Output noise", "yield": "Tolerance spread", "poles": "Poles"}
    for name in ("response", "levels", "noise", "yield", "poles"):
        svg = plots.get(f"{name}.svg")
        if svg is None:
            continue
        out.append(f'<figure id="plot-{name}"><h3>{_e(titles[name])}</h3>'
                   f"{svg_inline(svg, f'plot-{name}')}"
                   f"<figcaption>{_e(_PLOT_CAPTIONS[name])}</figcaption></figure>")
    out.append("</section>")
    return "".join(out)


def _noise(s: Subject) -> str:
    out = ['<section id="noise"><h2>Noise budget</h2>']
    an = s.analyses
    if an is None:
        out.append('<p class="note">No chain was built.</p></section>')
        return "".join(out)
    nz = an.noise
    out.append(
        f"<p>Output noise {format_si(nz.integrated_vrms, 'V rms', significant=4)} over "
        f"{_e(format_hz(nz.band_hz[0]))}–{_e(format_hz(nz.band_hz[1]))}; SNR at full input "
        f"{format_fixed(an.snr_db, 1)} dB; dynamic range {format_fixed(an.dynamic_range_db, 1)} "
        f"dB (input could grow "
        f"{format_fixed(an.worst_margin_db, 1, sign=True)} dB before the first net clips).</p>")
    wide = converter_view.noise_band_text(nz, format_hz)
    if wide:
        out.append(f"<p>{_e(wide)}.</p>")
    total2 = nz.integrated_vrms ** 2
    listed, rest, rv = listed_sources(nz)
    rows = [[_e(source_words(name)), f"{v * 1e6:.3g}",
             f"{100 * v * v / total2:.1f} %"] for name, v in listed]
    if rest:
        rows.append([_e(words.other_sources(len(rest))), f"{rv * 1e6:.3g}",
                     f"{100 * rv * rv / total2:.1f} %"])
    out.append(_table(["source", "µV rms", "share of power"], rows, num_cols=(1, 2)))
    out.append('<p class="note">Sources add in power (uncorrelated); the shares add up to '
               '100 %. The density plot is in <a href="#plot-noise">Plots</a>.</p></section>')
    return "".join(out)


def _converter(s: Subject, plots: dict[str, bytes]) -> str:
    """The converter section, when the chain drives one (``report.converter_view``)."""
    an = s.analyses
    if an is None or getattr(an, "converter", None) is None:
        return ""
    svg = plots.get("folds.svg")
    return converter_view.html_section(
        an.converter, plot_svg=None if svg is None else svg_inline(svg, "plot-folds"))


def _bom(bom_text: str | None) -> str:
    out = ['<section id="bom"><h2>Bill of materials</h2>']
    if not bom_text:
        out.append('<p class="note">No chain was built.</p></section>')
        return "".join(out)
    rows = list(csv.reader(io.StringIO(bom_text)))
    head, body = rows[0], rows[1:]
    qty = head.index("quantity") if "quantity" in head else -1
    out.append(_table(head, [[_e(c) for c in r] for r in body],
                      num_cols=(qty,) if qty >= 0 else ()))
    out.append("</section>")
    return "".join(out)


def _tuning_section(obj: Plan | Audit) -> str:
    from bandwright.report.tuning import tuning_html, tuning_of
    return tuning_html(tuning_of(obj))


def _diagnosis_section(s: Subject, plots: dict[str, bytes]) -> str:
    from bandwright.report.diagnosis_view import diagnosis_html
    return diagnosis_html(s.source, plots)


def _time_section(s: Subject, plots: dict[str, bytes]) -> str:
    from bandwright.report.time_view import time_html
    svg = plots.get("timing.svg")
    return time_html(getattr(s.analyses, "time", None),
                     svg_inline(svg, "plot-timing") if svg is not None else None)


def html_report(obj: Plan | Audit, *, plots: dict[str, bytes] | None = None,
                schematics: dict[str, bytes] | None = None,
                bom_text: str | None = None) -> str:
    """The whole report as one HTML document.

    Parameters
    ----------
    obj : Plan or Audit
    plots : dict of str to bytes, optional
        ``plots.plot_files`` output (its ".svg" entries are inlined); rendered here when
        not given.
    schematics : dict of str to bytes, optional
        ``schematic.schematic_files`` output; rendered here when not given.
    bom_text : str, optional
        ``bom.bom_csv`` output; made here when not given.

    Returns
    -------
    str
        A complete HTML5 document: inline CSS and SVG, no scripts, no external resources.
    """
    s = subject_of(obj)
    if plots is None:
        from bandwright.report.plots import plot_files
        plots = plot_files(s)
    if schematics is None:
        from bandwright.report.schematic import schematic_files
        from bandwright.report.tuning import tuning_of
        tuning = tuning_of(obj)
        schematics = schematic_files(s.chain,
                                     tuning_plan=None if tuning is None else tuning.plan)
    if bom_text is None and s.chain is not None:
        from bandwright.report.tuning import tuning_of
        bom_text = bom_for(s.chain, s.requirement, planned=s.kind == "plan",
                           tuning=tuning_of(obj))
    title = f"bandwright {s.kind} — {s.path}"
    nav = "".join(f'<a href="#{i}">{i}</a>' for i in SECTION_IDS)
    body = [
        '<header class="top">', f"<h1>bandwright {_e(s.kind)}</h1>",
        f"<p>{_e(s.path)} · bandwright {_e(__version__)}</p></header>",
        f"<nav>{nav}</nav>",
        _summary(s), _diagnosis_section(s, plots), _candidates(s), _chain(s, schematics), _stages(s, schematics),
        _levels(s) if s.analyses is not None else
        '<section id="levels"><h2>Node levels</h2><p class="note">No chain was built.</p>'
        "</section>",
        _checks(s), _yield(s), _tuning_section(obj), _plots(plots), _noise(s),
        _converter(s, plots), _time_section(s, plots), _bom(bom_text),
        f"<footer>Written by bandwright {_e(__version__)}. Every figure is for the chain as "
        "built: parts rounded to their series, finite op-amp GBW, source resistance."
        "</footer>",
    ]
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{_e(title)}</title><style>{_CSS}</style></head>\n<body><main>"
            + "\n".join(body) + "</main></body></html>\n")
