"""Renderers of a tuning plan: the JSON object, the numbered procedure (terminal and HTML),
the trimmers in the SPICE deck and the bill of materials. Nothing here computes a figure:
every value comes from ``analysis.tuning.TuningPlan`` and
``analysis.montecarlo.tuned.TuningResult``.
"""

from __future__ import annotations

import html
from typing import TYPE_CHECKING, Any

from bandwright.circuits.elements import Element
from bandwright.parts.notation import format_fixed, format_si, format_exact
from bandwright.report.subject import is_plan

if TYPE_CHECKING:
    from bandwright.analysis.montecarlo.tuned import TuningResult
    from bandwright.analysis.tuning import TuningPlan
    from bandwright.audit import Audit
    from bandwright.planner import Plan

__all__ = ["tuning_dict", "procedure_lines", "tuning_terminal", "tuning_html",
           "trimmed_elements", "trimmer_comments", "bom_trimmer_rows", "tuning_of",
           "toml_with_trims", "set_trimmers", "design_settings"]


def _num(x: float) -> float | None:
    import math
    return float(x) if x is not None and math.isfinite(x) else None


def tuning_of(obj: Plan | Audit) -> TuningResult | None:
    """The TuningResult of a Plan (its chosen design) or an Audit, or None."""
    return obj.chosen.tuning if is_plan(obj) else obj.tuning


def tuning_dict(t: TuningResult | None) -> dict[str, Any] | None:
    """design.md's ``tuning{steps[]{...}, yield_untrimmed, yield_tuned}`` (plus a few keys of
    our own: each step's `trims`, `why`, and the tuned run's interval and failures)."""
    if t is None:
        return None
    ty = t.tuned
    return {
        "steps": [{"stage": s.stage, "part": s.part, "net_in": s.net_in, "net_out": s.net_out,
                   "adjusts": s.adjusts, "fixed_ohms": _num(s.fixed_ohms),
                   "trimmer_ohms": _num(s.trimmer_ohms), "target": {s.target_key: _num(s.target)},
                   "reading": s.reading, "trims": s.trims, "why": s.why}
                  for s in t.plan.steps],
        "yield_untrimmed": _num(t.yield_untrimmed),
        "yield_tuned": _num(ty.yield_fraction),
        "interval_untrimmed": [_num(x) for x in t.interval_untrimmed],
        "interval_tuned": [_num(x) for x in ty.interval],
        "samples": ty.samples,
        "unrescued": ty.unrescued,
        "beyond_range": ty.beyond_range,
        "out_of_range": dict(ty.out_of_range),
        "failures_tuned": dict(ty.fail_counts),
        "reason": t.reason,
    }


def procedure_lines(t: TuningResult) -> list[str]:
    """The procedure as numbered steps, in the order they are set."""
    lines = []
    for i, s in enumerate(t.plan.steps, start=1):
        fixed = format_si(s.fixed_ohms, "Ω")
        trim = format_si(s.trimmer_ohms, "Ω")
        lines.append(
            f"{i}. stage {s.stage}: generator on {s.net_in}, analyser on {s.net_out}; set trimmer "
            f"{s.part} ({trim}, in series with {s.trims} = {fixed}) for the {s.reading}")
    return lines


def _summary(t: TuningResult) -> str:
    ty = t.tuned
    lo, hi = ty.interval
    text = (f"Yield untrimmed {format_fixed(100 * t.yield_untrimmed, 1)} %, after tuning "
            f"{format_fixed(100 * ty.yield_fraction, 1)} % (95 % interval "
            f"{format_fixed(100 * lo, 1)}–{format_fixed(100 * hi, 1)} %, {ty.samples} boards)")
    if ty.unrescued:
        text += (f"; {ty.unrescued} boards fail after tuning, {ty.beyond_range} of them with a "
                 f"trimmer at the end of its travel")
    if t.plan.untrimmable:
        text += ("; not trimmable (no part leaves the figures already set alone): "
                 + "; ".join(t.plan.untrimmable))
    return text + "."


_ORDER_NOTE = ("Within a stage f0 is set first, then Q, then gain: each later trimmer leaves "
               "the figures already set unmoved. Stages are set from the input on, each between "
               "its own op-amp output and the one before it, so a stage's setting does not "
               "depend on the stages after it.")


def tuning_terminal(t: TuningResult | None) -> list[str]:
    """Plain lines for the terminal report (the caller prints them)."""
    if t is None:
        return []
    return (["Tuning procedure (" + t.reason + ")"] + procedure_lines(t)
            + [_ORDER_NOTE, _summary(t)])


def tuning_html(t: TuningResult | None) -> str:
    """An HTML section: the procedure as an ordered list."""
    if t is None:
        return ""
    items = "".join(f"<li>{html.escape(line.split('. ', 1)[1])}</li>"
                    for line in procedure_lines(t))
    return (f'<section id="tuning"><h2>Tuning procedure</h2>'
            f"<p>Trimmed because {html.escape(t.reason)}.</p><ol>{items}</ol>"
            f"<p>{html.escape(_ORDER_NOTE)}</p><p>{html.escape(_summary(t))}</p></section>")


def trimmed_elements(elements: tuple[Element, ...], plan: TuningPlan) -> tuple[Element, ...]:
    """A flat chain element list with every trimmed part split into its fixed resistor and
    its trimmer at mid-travel (``<trims>_s<k>`` then ``<part>_s<k>``, in series)."""
    steps = {f"{s.trims}_s{s.stage}": s for s in plan.steps}
    out: list[Element] = []
    for e in elements:
        s = steps.get(e.name)
        if s is None:
            out.append(e)
            continue
        mid = f"trim{s.trims}_s{s.stage}"
        out.append(Element(name=e.name, kind="R", nets=(e.nets[0], mid), value=s.fixed_ohms))
        out.append(Element(name=f"{s.part}_s{s.stage}", kind="R", nets=(mid, e.nets[1]),
                           value=s.trimmer_ohms / 2))
    return tuple(out)


def trimmer_comments(deck: str, plan: TuningPlan) -> str:
    """The deck with a comment above each trimmer: its end-to-end value and travel."""
    notes = {}
    for s in plan.steps:
        name = f"{s.part}_s{s.stage}"
        notes[name.lower()] = (
            f"* trimmer {name}: {format_si(s.trimmer_ohms, 'Ω')} end to end, set here at "
            f"mid-travel; travel 0 … {format_si(s.trimmer_ohms, 'Ω')} ({s.trims}_s{s.stage} + "
            f"trimmer {format_si(s.fixed_ohms, 'Ω')} … "
            f"{format_si(s.fixed_ohms + s.trimmer_ohms, 'Ω')}); adjusts {s.adjusts}: {s.reading}")
    out = []
    for line in deck.splitlines():
        head = line.split(" ", 1)[0].lower()
        if head in notes:
            out.append(notes[head])
        out.append(line)
    return "\n".join(out) + "\n"


def bom_trimmer_rows(plan: TuningPlan) -> list[list[str]]:
    """BOM rows (designators, part, value, series, tolerance, dielectric, quantity) for the
    trimmers, one row per value."""
    rows: dict[float, list[str]] = {}
    for s in plan.steps:
        rows.setdefault(s.trimmer_ohms, []).append(f"{s.part}_s{s.stage}")
    return [[" ".join(refs), "trimmer (multi-turn)", format_si(v, "Ω"), "1-2-5", "", "",
             str(len(refs))] for v, refs in rows.items()]


def toml_with_trims(text: str, plan: TuningPlan) -> str:
    """chain.toml with each trimmed stage's ``trim = { part = ["fixed", "trimmer"] }``
    after its parts (the audit reads it back)."""
    by_stage: dict[int, list[str]] = {}
    for s in plan.steps:
        by_stage.setdefault(s.stage, []).append(
            f'{s.trims} = ["{format_exact(s.fixed_ohms)}", "{format_exact(s.trimmer_ohms)}"]')
    out, stage = [], 0
    for line in text.splitlines():
        out.append(line)
        if line.strip() == "[[stage]]":
            stage += 1
        elif line.startswith("parts = ") and stage in by_stage:
            out.append("trim = { " + ", ".join(by_stage[stage]) + " }")
    return "\n".join(out) + ("\n" if text.endswith("\n") else "")


def set_trimmers(deck: str, ohms: dict[str, float]) -> str:
    """The deck with each named trimmer (``R2T_s3``) set to `ohms` (its part of the travel;
    > 0). For running the written procedure on the deck: a bench in ngspice."""
    want = {k.lower(): v for k, v in ohms.items()}
    out = []
    for line in deck.splitlines():
        f = line.split()
        if f and f[0].lower() in want and len(f) == 4:
            line = f"{f[0]} {f[1]} {f[2]} {max(float(want[f[0].lower()]), 1e-6)!r}"
        out.append(line)
    return "\n".join(out) + "\n"


def design_settings(plan: TuningPlan) -> dict[str, float]:
    """Each trimmer at the setting that gives its part's designed value (the circuit the
    analyses describe)."""
    return {f"{s.part}_s{s.stage}": s.design_ohms - s.fixed_ohms for s in plan.steps}
