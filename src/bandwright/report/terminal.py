"""The terminal report (rich): what was understood, the candidates, the chain, the checks."""

from __future__ import annotations

from rich.console import Console
from rich.table import Table
from rich import box

from bandwright.planner import Plan

__all__ = ["render_plan", "fmt_hz"]


def fmt_hz(f: float) -> str:
    """Frequency with an SI prefix: 40.0 kHz, 3.16 Hz, 1.20 MHz."""
    for scale, unit in ((1e6, "MHz"), (1e3, "kHz"), (1.0, "Hz")):
        if abs(f) >= scale:
            return f"{f / scale:.4g} {unit}"
    return f"{f * 1e3:.4g} mHz"


def render_plan(p: Plan, console: Console) -> None:
    """Print the plan to `console` (100 columns suffice; readable without colour)."""
    req = p.requirement
    pb = req.passband
    console.print(f"[bold]bandwright plan[/bold]  {req.path}")
    console.print(
        f"Band asked: {fmt_hz(pb.low_hz)} to {fmt_hz(pb.high_hz)} (centre {fmt_hz(pb.center_hz)}, "
        f"width {fmt_hz(pb.bandwidth_hz)}, fractional {pb.bandwidth_hz / pb.center_hz:.3g}); "
        f"gain {pb.gain_db:g} dB; at most {pb.max_loss_db:.4g} dB loss in band")
    for sp in req.stopband:
        console.print(f"  stop: at least {sp.min_loss_db:g} dB down at {fmt_hz(sp.freq_hz)}")

    cand = Table(title="Ways to meet it", box=box.SIMPLE_HEAD, title_justify="left")
    for col in ("rank", "family", "path", "order", "sections", "highest Q", "how the order came"):
        cand.add_column(col, overflow="fold")
    for i, c in enumerate(p.candidates):
        mark = "→" if c is p.chosen else ""
        cand.add_row(f"{mark}{i + 1}", c.family, c.path, str(c.order), str(len(c.sections)),
                     f"{c.highest_q:.3g}", c.note)
    console.print(cand)
    console.print(f"Chosen: {p.chosen.family} {p.chosen.path}, because {p.why}.")

    secs = Table(title="Sections", box=box.SIMPLE_HEAD, title_justify="left")
    for col in ("#", "kind", "f0", "Q", "gain V/V", "gain dB"):
        secs.add_column(col, justify="right" if col != "kind" else "left")
    import math
    for i, s in enumerate(p.chosen.sections):
        secs.add_row(str(i + 1), s.kind, fmt_hz(s.f0_hz), f"{s.q:.4g}", f"{s.gain:.4g}",
                     f"{20 * math.log10(abs(s.gain)):.2f}")
    console.print(secs)

    chk = Table(title="Checks", box=box.SIMPLE_HEAD, title_justify="left")
    for col in ("check", "verdict", "value", "limit", "why"):
        chk.add_column(col, overflow="fold")
    for k in p.checks:
        verdict = {"pass": "ok", "warn": "WARN", "fail": "FAIL"}[k.status]
        chk.add_row(k.id, verdict, _fmt(k.value, k.unit), _fmt(k.limit, k.unit), k.message)
    console.print(chk)


def _fmt(x: float | None, unit: str) -> str:
    return "—" if x is None else f"{x:.4g} {unit}".strip()
