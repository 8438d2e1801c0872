"""Schematics drawn from the element list (schemdraw, SVG), and a block diagram of the chain.

Where each part goes is decided in ``report/schematic_layout.py`` (a pure function of the
element list's structure, documented there); this module only draws that layout.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable
from typing import TYPE_CHECKING

from bandwright.report._mpl import quiet_matplotlib

quiet_matplotlib()  # schemdraw imports matplotlib: set its config folder first

import schemdraw  # noqa: E402
import schemdraw.elements as elm
from schemdraw import flow

from bandwright.chain.graph import CHAIN_INPUT, Chain, global_net
from bandwright.circuits.elements import GROUND, Element
from bandwright.parts.notation import format_fixed, format_si, format_sig
from bandwright.parts.notation import format_hz as fmt_hz
from bandwright.report.schematic_layout import Layout, layout, opamp_pins

if TYPE_CHECKING:
    from collections.abc import Sequence

    from bandwright.analysis.tuning import TuningPlan
    from bandwright.chain.stage import Stage

__all__ = ["stage_svg", "block_svg", "schematic_files", "schematic_jobs", "elements_svg", "Layout", "layout",
           "opamp_pins"]


# --------------------------------------------------------------------------- drawing


def _value(e: Element) -> str:
    return format_si(e.value, "Ω" if e.kind == "R" else "F")


def elements_svg(elements: Sequence[Element], *, net_names: dict[str, str] | None = None,
                 title: str = "",
                 trims: dict[str, str] | None = None) -> bytes:
    """Draw an element list as a schematic.

    Parameters
    ----------
    elements : sequence of Element
        Local nets; ground "0".
    net_names : dict of str to str, optional
        Labels for the input terminal, the output terminal and other op-amp outputs
        (local net → shown name); by default the local names.
    title : str, optional
        A line of text above the drawing.
    trims : dict of str to str, optional
        Trimmed parts (name → value text, "1.27kΩ = 1.21kΩ + 200Ω trim": the value set,
        the fixed part and the trimmer): drawn as variable resistors with that text.

    Returns
    -------
    bytes
        SVG.
    """
    names = net_names or {}
    lay = layout(elements)
    d = schemdraw.Drawing(canvas="svg", show=False, fontsize=10, lw=1.4, margin=0.7)
    for p in lay.parts:
        e = elements[p.index]
        trimmed = trims is not None and e.name in trims
        part = (elm.ResistorVar() if trimmed else elm.Resistor()) if e.kind == "R" \
            else elm.Capacitor()
        part = part.at(p.start).to(p.end)
        name = f"{e.name} (trim)" if trimmed else e.name
        value = trims[e.name] if trimmed else _value(e)
        if p.combed:
            part.label(f"{name}\n{value}", loc="bottom")
        else:
            part.label(name, loc="top").label(value, loc="bottom")
        d.add(part)
        if p.to_ground:
            d.add(elm.Ground().theta(0).at(p.end))
    for op in lay.opamps:
        # Explicit direction: a drawing otherwise carries on in the direction of the last part.
        sym = elm.Opamp(leads=False).right()
        if op.flip:
            sym = sym.flip()
        sym = sym.anchor("out").at(op.out)
        sym.label(elements[op.index].name, loc="center", ofst=(-0.35, 0), fontsize=9)
        d.add(sym)
    for w in lay.wires:
        if w.start != w.end:
            d.add(elm.Line().at(w.start).to(w.end))
    for pt in lay.grounds:
        d.add(elm.Ground().theta(0).at(pt))
    for pt in lay.dots:
        d.add(elm.Dot(radius=0.09).at(pt))
    first = lay.input_net
    d.add(elm.Dot(open=True).at(lay.terminal_in).label(names.get(first, first), loc="left"))
    if lay.terminal_out is not None:
        d.add(elm.Dot(open=True).at(lay.terminal_out)
              .label(names.get("out", "out"), loc="right"))
    for lab in lay.labels:
        d.add(elm.Label().at(lab.at)
              .label(names.get(lab.net, lab.net), loc="right", fontsize=9, color="#1f4e79"))
    if title:
        d.add(elm.Label().at(lay.title_at).label(title, halign="left", fontsize=11))
    return d.get_imagedata("svg")


def _local_names(chain: Chain, stage: Stage) -> dict[str, str]:
    """Local net → chain-wide name, for the nets a schematic labels."""
    last = stage is chain.stages[-1]
    inp = chain.input_of(stage)
    out = {}
    for e in stage.elements:
        for n in e.nets:
            if n != GROUND:
                out[n] = global_net(stage, n, last=last, input_net=inp)
    if "in" in out:
        out["in"] = "chain input" if inp == CHAIN_INPUT else f"from {inp}"
    return out


def stage_svg(chain: Chain, stage: Stage, *, trims: dict[str, str] | None = None) -> bytes:
    """The schematic of one stage with its part values, nets named as in the chain.

    Parameters
    ----------
    chain : Chain
    stage : Stage

    Returns
    -------
    bytes
        SVG.
    """
    names = _local_names(chain, stage)
    t = stage.built
    what = "" if stage.kind == "gain" else f", f0 {fmt_hz(t.f0_hz)}, Q {format_sig(t.q, 3)}"
    title = (f"Stage {stage.position}: {stage.kind}, {stage.topology}{what}, gain "
             f"{format_sig(t.gain, 3)} (as built)")
    return elements_svg(stage.elements, net_names=names, title=title, trims=trims)


def _db(gain: float) -> str:
    # a gain a hair below 1 shows as +0.0 dB, not -0.0 dB
    return f"{format_fixed(20 * math.log10(abs(gain)), 1, sign=True)} dB"


def _box_text(stage: Stage) -> str:
    b = stage.built
    lines = [f"stage {stage.position}", stage.topology, stage.kind]
    if stage.kind != "gain":
        lines.append(f"f0 {fmt_hz(b.f0_hz)}, Q {format_sig(b.q, 3)}")
    lines.append(f"gain {format_sig(b.gain, 3)} ({_db(b.gain)})" if b.gain else "gain 0")
    return "\n".join(lines)


def block_svg(chain: Chain, *, per_row: int = 4) -> bytes:
    """Block diagram of the chain: one box per stage (position, topology, built f0, Q, gain).

    Parameters
    ----------
    chain : Chain
    per_row : int, optional
        Boxes per row before the diagram wraps.

    Returns
    -------
    bytes
        SVG.
    """
    w, h, gap = 5.0, 3.4, 1.8
    d = schemdraw.Drawing(canvas="svg", show=False, fontsize=12, lw=1.3, margin=0.7)
    src = format_si(chain.source_ohms, "Ω") if chain.source_ohms else "0 Ω"
    d.add(elm.Dot(open=True).at((-gap, 0)).label(f"in\n(source {src})", loc="left"))
    prev = (-gap, 0.0)
    for k, st in enumerate(chain.stages):
        row, col = divmod(k, per_row)
        x0 = col * (w + gap)
        y0 = -row * (h + 2.2)
        if col == 0 and row > 0:
            # Wrap: down from the previous box, back to the left, into this row.
            mid_y = y0 + h / 2 + 1.1
            d.add(elm.Line().at(prev).to((prev[0] + gap / 2, prev[1])))
            d.add(elm.Line().at((prev[0] + gap / 2, prev[1])).to((prev[0] + gap / 2, mid_y)))
            d.add(elm.Line().at((prev[0] + gap / 2, mid_y)).to((-gap, mid_y)))
            d.add(elm.Line().at((-gap, mid_y)).to((-gap, y0)))
            prev = (-gap, y0)
        d.add(elm.Arrow().at(prev).to((x0, y0)))
        box = flow.Box(w=w, h=h).anchor("W").at((x0, y0)).label(_box_text(st), fontsize=12)
        d.add(box)
        prev = (x0 + w, y0)
    d.add(elm.Arrow().at(prev).to((prev[0] + gap, prev[1])))
    d.add(elm.Dot(open=True).at((prev[0] + gap, prev[1])).label("out", loc="right"))
    return d.get_imagedata("svg")


def schematic_files(chain: Chain | None, *,
                    tuning_plan: TuningPlan | None = None) -> dict[str, bytes]:
    """{"schematic_stage1.svg": ..., …, "block.svg": ...} for a built chain ({} if none).

    Parameters
    ----------
    chain : Chain or None
    tuning_plan : TuningPlan, optional
        Its trimmed parts are drawn as variable resistors, "set = fixed + trimmer".
    """
    out: dict[str, bytes] = {}
    for job in schematic_jobs(chain, tuning_plan=tuning_plan):
        out.update(job())
    return out


def schematic_jobs(chain: Chain | None, *, tuning_plan: TuningPlan | None = None
                   ) -> list[Callable[[], dict[str, bytes]]]:
    """``schematic_files`` as independent jobs, one per drawing, in its order (each returns
    {file name: SVG bytes}): the output folder draws them beside the plots."""
    if chain is None:
        return []
    trims: dict[int, dict[str, str]] = {}
    for s in (tuning_plan.steps if tuning_plan is not None else ()):
        trims.setdefault(s.stage, {})[s.trims] = (
            f"{format_si(s.design_ohms, 'Ω')} = {format_si(s.fixed_ohms, 'Ω')} + "
            f"{format_si(s.trimmer_ohms, 'Ω')} trim")

    def stage(st) -> dict[str, bytes]:
        return {f"schematic_stage{st.position}.svg": stage_svg(chain, st,
                                                               trims=trims.get(st.position))}

    def block() -> dict[str, bytes]:
        return {"block.svg": block_svg(chain)}
    return [functools.partial(stage, st) for st in chain.stages] + [block]
