"""The diagnosis of a measured sweep in the report: JSON, terminal and HTML (a renderer:
every figure comes from ``bandwright.diagnosis.Diagnosis``)."""

from __future__ import annotations

import html
import math
from typing import Any

from rich.console import Console

from bandwright.parts.notation import format_fixed, format_hz, format_si, format_sig
from bandwright.report.console_text import row as _row
from bandwright.report.console_text import say as _say
from bandwright.report.console_text import table as _table
from bandwright.report.svg import svg_inline

__all__ = ["diagnosis_dict", "render_diagnosis", "diagnosis_html"]


def _num(x) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _figures(f) -> dict[str, float | None]:
    return {"f0_hz": _num(f.f0_hz), "q": _num(f.q), "gain": _num(f.gain)}


def diagnosis_dict(d) -> dict[str, Any]:
    """The JSON ``diagnosis`` object (docs/design.md, "Audit"):
    ``{suspects[]{stage, part, change_pct, confidence, equivalent[]}, stages[], residual_db,
    unexplained}`` and the fields beside them."""
    checks = [{"id": k.id, "stage": k.stage, "net": k.net, "status": k.status,
               "value": _num(k.value), "limit": _num(k.limit), "unit": k.unit,
               "message": k.message} for k in d.mask_checks]
    return {
        "sweep": {"path": d.sweep.path, "points": int(d.sweep.freq_hz.size),
                  "has_phase": d.sweep.phase_deg is not None},
        "suspects": [{
            "stage": s.stage, "part": s.part, "change_pct": _num(s.change_pct),
            "confidence": _num(s.confidence),
            "equivalent": [{"stage": e.stage, "part": e.part, "change_pct": _num(e.change_pct)}
                           for e in s.equivalent],
            "residual_db": _num(s.residual_db),
            "fix": {"part": s.fix.part, "value": _num(s.fix.value), "series": s.fix.series,
                    "text": s.fix.text, "mask_pass": s.fix.mask_pass},
        } for s in d.suspects],
        "stages": [{"position": st.position, "topology": st.topology, "kind": st.kind,
                    "planned": _figures(st.planned), "fitted": _figures(st.fitted)}
                   for st in d.stages],
        "residual_db": _num(d.residual_db),
        "noise_db": _num(d.noise_db),
        "unexplained": bool(d.unexplained),
        "message": d.message,
        "mask": {"pass": d.mask_pass, "checks": checks},
        "changes": [{"stage": k, "part": p, "change_pct": _num(c)} for k, p, c in d.changes],
    }


def _value(part: str, value: float | None) -> str:
    if value is None:
        return "—"
    return format_si(value, "Ω" if part.startswith("R") else "F")


def _fhz(f: float) -> str:
    return format_hz(f) if f > 0 else "—"


def _verdict(ok: bool | None) -> str:
    return "—" if ok is None else ("meets the mask" if ok else "fails the mask")


def _rows(d) -> list[tuple[str, ...]]:
    rows = []
    for i, s in enumerate(d.suspects, start=1):
        eq = ", ".join(f"{e.part}{'' if e.stage == s.stage else f' (stage {e.stage})'} "
                       f"{format_fixed(e.change_pct, 1, sign=True)} %" for e in s.equivalent) or "—"
        rows.append((str(i), str(s.stage), s.part, f"{format_fixed(s.change_pct, 1, sign=True)} %",
                     f"{format_fixed(100 * s.confidence, 0)} %", f"{format_fixed(s.residual_db, 3)} dB", eq,
                     _value(s.part, s.fix.value), _verdict(s.fix.mask_pass)))
    return rows


_HEAD = ("#", "stage", "part", "change", "confidence", "residual", "cannot be told from",
         "fit instead", "with the fix")


def _suspects_title(d) -> str:
    if d.unexplained:
        return "Closest single-part changes (none explains the sweep: read them as hints only)"
    return "Suspects, most likely first"


def render_diagnosis(a, console: Console) -> None:
    """The diagnosis paragraph, suspects and stage tables on the terminal (nothing when the
    audit ran without ``--measured``)."""
    d = getattr(a, "diagnosis", None)
    if d is None:
        return
    _say(console, f"Measured sweep {d.sweep.path}: {d.sweep.freq_hz.size} points, "
                  f"{_fhz(d.sweep.freq_hz[0])} to {_fhz(d.sweep.freq_hz[-1])}"
                  f"{', gain and phase' if d.sweep.phase_deg is not None else ', gain only'}",
         style="bold")
    _say(console, f"Diagnosis: {d.message}.")
    _say(console, f"Residual {format_fixed(d.residual_db, 3)} dB rms (measured − fitted) against a "
                  f"noise of {format_fixed(d.noise_db, 3)} dB (the sweep's point-to-point "
                  f"roughness); {'UNEXPLAINED' if d.unexplained else 'explained'}. The measured "
                  f"chain {_verdict(d.mask_pass) if d.mask_pass is not None else 'has no mask'}.")
    if d.suspects:
        t = _table(_suspects_title(d), *_HEAD, wrap=("cannot be told from",))
        for r in _rows(d):
            _row(t, *r)
        _say(console, t)
        _say(console, "change: the part's fitted deviation from the file's value; confidence: "
                      "its share among single-part explanations, lowered when it explains the "
                      "sweep only partly; residual: rms left with that part alone changed.")
    st = _table("Stages, as designed → as fitted", "#", "topology", "f0", "Q", "gain dB")
    for s in d.stages:
        f0 = "—" if s.kind == "gain" else f"{_fhz(s.planned.f0_hz)} → {_fhz(s.fitted.f0_hz)}"
        q = "—" if s.kind == "gain" else f"{format_sig(s.planned.q)} → {format_sig(s.fitted.q)}"
        g = f"{_db(s.planned.gain)} → {_db(s.fitted.gain)}"
        _row(st, str(s.position), s.topology, f0, q, g)
    _say(console, st)


def _db(x: float) -> str:
    return format_fixed(20 * math.log10(abs(x)), 2, sign=True) if x and math.isfinite(x) else "—"


def diagnosis_html(a, plots: dict | None) -> str:
    """The report's diagnosis section ("" without ``--measured``)."""
    d = getattr(a, "diagnosis", None)
    if d is None:
        return ""
    e = html.escape
    status = "fail" if d.unexplained or d.mask_pass is False else "pass"
    out = ['<section id="diagnosis"><h2>Measured sweep</h2>',
           f"<p>{e(d.sweep.path)}: {d.sweep.freq_hz.size} points, "
           f"{e(_fhz(d.sweep.freq_hz[0]))} to {e(_fhz(d.sweep.freq_hz[-1]))}.</p>",
           f'<div class="verdict {status}">{e(d.message[:1].upper() + d.message[1:])}.</div>',
           f"<p>Residual {format_fixed(d.residual_db, 3)} dB rms (measured − fitted) against a "
           f"noise of {format_fixed(d.noise_db, 3)} dB; the measured chain "
           f"{e(_verdict(d.mask_pass)) if d.mask_pass is not None else 'has no mask'}.</p>"]
    if d.suspects:
        out.append(f"<h3>{e(_suspects_title(d))}</h3>")
        out.append("<table><thead><tr>" + "".join(f"<th>{e(h)}</th>" for h in _HEAD)
                   + "</tr></thead><tbody>")
        for r in _rows(d):
            out.append("<tr>" + "".join(f"<td>{e(c)}</td>" for c in r) + "</tr>")
        out.append("</tbody></table>")
    svg = (plots or {}).get("diagnosis.svg")
    if svg is not None:
        out.append('<figure id="plot-diagnosis"><h3>Measured, designed and fitted</h3>'
                   f"{svg_inline(svg, 'plot-diagnosis')}<figcaption>The measured sweep over "
                   "the chain as designed and as fitted; below, measured minus fitted against "
                   "the measurement's noise.</figcaption></figure>")
    out.append("</section>")
    return "".join(out)
