"""Schematics drawn from the element list (schemdraw, SVG), and a block diagram of the chain.

The element list is the one description of a circuit (docs/design.md): the layout below works
from it alone, for any topology, so a new topology module draws without a line added here.

Layout
------
* Every net other than ground is a vertical *bus* in its own column; the stage input is
  the first column. Which column each net takes is searched (every order for the small
  circuits a stage holds) for the fewest wire crossings, then the shortest wiring.
* Op-amps sit on one row, each just left of its output column; the input that carries the
  signal goes on top (the non-inverting one when it is not grounded).
* A resistor or capacitor between two nets is drawn horizontally between their buses, on
  the op-amp row when nothing is in the way, else on the nearest free row above the op-amps
  (below them for parts on the net of a lower op-amp input): shorter spans nearer the
  op-amps, so feedback paths nest as on paper.
* A part to ground hangs from the bottom of its net's bus.
* A dot marks every junction of three or more wires; wires that cross without a dot do not
  connect.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from functools import lru_cache

from bandwright.report._mpl import quiet_matplotlib

quiet_matplotlib()  # schemdraw imports matplotlib: set its config folder first

import schemdraw  # noqa: E402
import schemdraw.elements as elm
from schemdraw import flow

from bandwright.chain.graph import CHAIN_INPUT, Chain, global_net
from bandwright.circuits.elements import GROUND, Element
from bandwright.parts.notation import format_value
from bandwright.parts.notation import format_hz as fmt_hz

__all__ = ["stage_svg", "block_svg", "schematic_files", "elements_svg", "Layout", "layout",
           "opamp_pins"]

GAP = 4.4          # between adjacent buses
ROW = 2.6          # between rows of parts
PIN = 0.625        # half the op-amp's input pin spacing (schemdraw's Opamp)
OPAMP_W = 1.25 * math.sqrt(3)  # schemdraw Opamp, input pins to output (its triangle)
OUT_LEAD = 0.5     # wire from an op-amp output to its bus
STUB = 0.45        # wire from an op-amp input pin before it turns
DROP = 2.4         # length of a part hanging to ground
COMB = 2.0         # between parts to ground that share a net
COMB_DROP = 0.9    # from the bottom of a bus down to the comb they hang from
MAX_ORDERS = 5040  # column orders tried exhaustively (7 free nets); beyond, a greedy order


@dataclass(frozen=True)
class _Seg:
    """A straight wire or part: horizontal (y fixed) or vertical (x fixed), and the nets it
    joins (a part joins two)."""

    x1: float
    y1: float
    x2: float
    y2: float
    nets: frozenset


@dataclass(frozen=True)
class Layout:
    """Where everything of one element list goes.

    Attributes
    ----------
    columns : dict of str to float
        Net → x of its bus.
    parts : tuple of (index, (x1, y1), (x2, y2))
        Each R or C of the element list (by index) between two points; a part to ground
        runs from its net downwards and ends on a ground symbol.
    grounded : frozenset of int
        Indices of the parts that end on ground.
    combed : frozenset of int
        Those of them that share their net with another part to ground (labelled on one
        side, so that neighbours do not collide).
    opamps : tuple of (index, (x, y) of the output, flipped)
        ``flipped``: the non-inverting input on top.
    wires : tuple of ((x1, y1), (x2, y2))
    grounds : tuple of (x, y)
        Ground symbols of grounded op-amp inputs.
    dots : tuple of (x, y)
    terminal_in, terminal_out : (x, y) or None
        Where the input and output terminals go.
    crossings : int
    """

    columns: dict
    parts: tuple
    grounded: frozenset
    combed: frozenset
    opamps: tuple
    wires: tuple
    grounds: tuple
    dots: tuple
    terminal_in: tuple
    terminal_out: tuple | None
    crossings: int


def _structure(elements) -> tuple:
    """What the layout depends on: kinds and nets, not values or names."""
    return tuple((e.kind, tuple(e.nets)) for e in elements)


def layout(elements) -> Layout:
    """Lay out an element list (cached by its structure).

    Parameters
    ----------
    elements : sequence of Element

    Returns
    -------
    Layout
    """
    return _layout_cached(_structure(elements))


@lru_cache(maxsize=64)
def _layout_cached(structure: tuple) -> Layout:
    nets = []
    for kind, ns in structure:
        for n in ns:
            if n != GROUND and n not in nets:
                nets.append(n)
    first = "in" if "in" in nets else nets[0]
    free = [n for n in nets if n != first]
    opamps = [(i, ns) for i, (kind, ns) in enumerate(structure) if kind == "opamp"]
    flips_choices = []
    for _, (plus, minus, out) in opamps:
        # The signal input on top: the non-inverting one unless it is grounded; when both
        # carry signal, try both.
        if plus == GROUND:
            flips_choices.append((False,))
        elif minus == GROUND:
            flips_choices.append((True,))
        else:
            flips_choices.append((True, False))

    def orders():
        if math.factorial(len(free)) <= MAX_ORDERS:
            yield from itertools.permutations(free)
        else:
            yield tuple(_greedy_order(structure, first, free))

    best, best_score = None, None
    for constrained in (True, False):
        for order in orders():
            cols = (first,) + tuple(order)
            if constrained and not _inputs_left(cols, opamps):
                continue
            for flips in itertools.product(*flips_choices):
                lay, score = _place(structure, cols, flips)
                if best_score is None or score < best_score:
                    best, best_score = lay, score
        if best is not None:
            break
    return best


def _greedy_order(structure, first, free) -> list:
    """Nets by their distance (in parts) from the first net: a fallback for big circuits."""
    adj: dict[str, set] = {}
    for kind, ns in structure:
        real = [n for n in ns if n != GROUND]
        for a in real:
            adj.setdefault(a, set()).update(b for b in real if b != a)
    dist, queue = {first: 0}, [first]
    while queue:
        n = queue.pop(0)
        for m in sorted(adj.get(n, ())):
            if m not in dist:
                dist[m] = dist[n] + 1
                queue.append(m)
    return sorted(free, key=lambda n: (dist.get(n, 99), n == "out"))


def _inputs_left(cols, opamps) -> bool:
    """Every op-amp input net (other than ground and its own output) left of its output."""
    pos = {n: i for i, n in enumerate(cols)}
    for _, (plus, minus, out) in opamps:
        for n in (plus, minus):
            if n not in (GROUND, out) and pos[n] > pos[out]:
                return False
    return True


def _place(structure, cols, flips):
    """Place everything for one column order and op-amp orientation; return (Layout, score)."""
    x = {n: GAP * i for i, n in enumerate(cols)}
    conn: dict[str, list] = {n: [] for n in cols}  # net → [(y, side)], side "l", "r", "d"
    segs: list[_Seg] = []
    wires, grounds, opamp_pos, bodies = [], [], [], []
    pin_side: dict[str, str] = {}
    amps = [(i, ns) for i, (k, ns) in enumerate(structure) if k == "opamp"]
    for (i, (plus, minus, out)), flip in zip(amps, flips):
        xo = x[out]
        x_pin = xo - OUT_LEAD - OPAMP_W
        bodies.append((x_pin, xo - OUT_LEAD))
    zones = []  # x-intervals of the op-amp row taken by op-amps and their top-pin wires
    routes = []
    for (i, (plus, minus, out)), flip in zip(amps, flips):
        xo = x[out]
        y_out = -PIN
        x_pin = xo - OUT_LEAD - OPAMP_W
        top, bottom = (plus, minus) if flip else (minus, plus)
        opamp_pos.append((i, (xo - OUT_LEAD, y_out), flip))
        wires.append(((xo - OUT_LEAD, y_out), (xo, y_out)))
        conn[out].append((y_out, "l"))
        left_edge = x_pin - STUB
        for net, y_pin, side in ((top, 0.0, "above"), (bottom, -2 * PIN, "below")):
            pin_side.setdefault(net, side)
            if net == GROUND:
                wires.append(((x_pin, y_pin), (x_pin - STUB, y_pin)))
                grounds.append((x_pin - STUB, y_pin))
                continue
            blocked = any(x[net] < b1 and b0 < x_pin - 1e-9 for b0, b1 in bodies)
            if x[net] < x_pin - STUB and not blocked:
                wires.append(((x_pin, y_pin), (x[net], y_pin)))
                segs.append(_Seg(x[net], y_pin, x_pin, y_pin, frozenset((net,))))
                conn[net].append((y_pin, "r"))
                if y_pin == 0.0:
                    left_edge = min(left_edge, x[net])
            else:
                routes.append((x_pin - STUB, y_pin, net, side, x_pin))
        zones.append((left_edge, xo))
    # Parts between two nets, and the routed op-amp inputs, packed into rows.
    spans = []
    for i, (kind, ns) in enumerate(structure):
        if kind == "opamp" or GROUND in ns or ns[0] == ns[1]:
            continue
        a, b = ns
        sides = (pin_side.get(a), pin_side.get(b))
        side = "below" if "below" in sides and "above" not in sides else "above"
        spans.append((min(x[a], x[b]), max(x[a], x[b]), side, ("part", i, a, b)))
    for xs, y_pin, net, side, x_pin in routes:
        spans.append((min(xs, x[net]), max(xs, x[net]), side, ("route", xs, y_pin, net, x_pin)))
    rows: dict[int, list] = {}
    placed_parts = []
    for lo, hi, side, what in sorted(spans, key=lambda s: (s[1] - s[0], s[0])):
        sign = 1 if side == "above" else -1
        free0 = what[0] == "part" and not any(lo < z1 and z0 < hi for z0, z1 in zones) \
            and not any(lo < b and a < hi for a, b in rows.get(0, []))
        if free0:
            row = 0
        else:
            k = 1
            while any(lo < b and a < hi for a, b in rows.get(sign * k, [])):
                k += 1
            row = sign * k
        rows.setdefault(row, []).append((lo, hi))
        y = row * ROW
        if what[0] == "part":
            _, i, a, b = what
            placed_parts.append((i, (x[a], y), (x[b], y)))
            segs.append(_Seg(lo, y, hi, y, frozenset((a, b))))
            conn[a].append((y, "r" if x[b] > x[a] else "l"))
            conn[b].append((y, "r" if x[a] > x[b] else "l"))
        else:
            _, xs, y_pin, net, x_pin = what
            wires += [((x_pin, y_pin), (xs, y_pin)), ((xs, y_pin), (xs, y)),
                      ((xs, y), (x[net], y))]
            segs.append(_Seg(xs, y_pin, xs, y, frozenset((net,))))
            segs.append(_Seg(lo, y, hi, y, frozenset((net,))))
            conn[net].append((y, "r" if xs > x[net] else "l"))
    first = cols[0]
    if conn[first]:
        y_in = 0.0 if any(y == 0.0 for y, _ in conn[first]) else max(y for y, _ in conn[first])
    else:
        y_in = 0.0
    conn[first].append((y_in, "l"))
    # A part to ground hangs from the bottom of its bus; two or more on one net hang side by
    # side from a short comb below the bus (towards the free side).
    grounded, combs = [], []
    to_ground: dict[str, list] = {}
    for i, (kind, ns) in enumerate(structure):
        if kind != "opamp" and GROUND in ns and ns[0] != ns[1]:
            to_ground.setdefault(ns[0] if ns[1] == GROUND else ns[1], []).append(i)
    for net, idx in to_ground.items():
        y_top = min(y for y, _ in conn[net]) if conn[net] else 0.0
        if len(idx) == 1:
            conn[net].append((y_top, "d"))
            spots = [(x[net], y_top)]
        else:
            y_c = y_top - COMB_DROP
            right = not any(x[net] < b1 and b0 < x[net] + COMB * len(idx) for b0, b1 in bodies)
            step = COMB if right else -COMB
            xs = [x[net] + step * k for k in range(len(idx))]
            conn[net].append((y_c, "d"))
            wires.append(((min(xs), y_c), (max(xs), y_c)))
            segs.append(_Seg(min(xs), y_c, max(xs), y_c, frozenset((net,))))
            spots = [(xg, y_c) for xg in xs]
            combs.extend(idx)
        for i, (xg, yg) in zip(idx, spots):
            placed_parts.append((i, (xg, yg), (xg, yg - DROP)))
            grounded.append(i)
            segs.append(_Seg(xg, yg - DROP, xg, yg, frozenset((net,))))
    # The output terminal: to the right at the output's height when "out" is the last
    # column; otherwise on a wire below everything, which crosses nothing.
    terminal_out = None
    x_end = GAP * (len(cols) - 1) + 1.2
    if "out" in x:
        if cols[-1] == "out":
            y_o = -PIN if any(y == -PIN for y, _ in conn["out"]) else \
                min((y for y, _ in conn["out"]), default=0.0)
            conn["out"].append((y_o, "r"))
        else:
            y_o = min([s.y1 for s in segs] + [s.y2 for s in segs] + [-2 * PIN]) - 1.0
            conn["out"].append((y_o, "r"))
        wires.append(((x["out"], y_o), (x_end, y_o)))
        segs.append(_Seg(x["out"], y_o, x_end, y_o, frozenset(("out",))))
        terminal_out = (x_end, y_o)
    wires.append(((x[first] - 1.2, y_in), (x[first], y_in)))
    # Buses and junction dots.
    dots = []
    for net, pts in conn.items():
        if not pts:
            continue
        ys = sorted({y for y, _ in pts})
        if len(ys) > 1:
            wires.append(((x[net], ys[0]), (x[net], ys[-1])))
            segs.append(_Seg(x[net], ys[0], x[net], ys[-1], frozenset((net,))))
        for y in ys:
            n = sum(1 for yy, _ in pts if yy == y) + (y > ys[0]) + (y < ys[-1])
            if n >= 3:
                dots.append((x[net], y))
    crossings = _crossings(segs)
    hits = _body_hits(segs, bodies)
    wire_len = sum(abs(s.x2 - s.x1) + abs(s.y2 - s.y1) for s in segs)
    lay = Layout(columns=x, parts=tuple(sorted(placed_parts)), grounded=frozenset(grounded),
                 combed=frozenset(combs), opamps=tuple(opamp_pos), wires=tuple(wires), grounds=tuple(grounds),
                 dots=tuple(dots), terminal_in=(x[first] - 1.2, y_in),
                 terminal_out=terminal_out, crossings=crossings + hits)
    return lay, (crossings + 10 * hits, len(rows), wire_len)


def _crossings(segs) -> int:
    """Horizontal and vertical segments of different nets that cross or touch."""
    hs = [s for s in segs if s.y1 == s.y2 and s.x1 != s.x2]
    vs = [s for s in segs if s.x1 == s.x2 and s.y1 != s.y2]
    n = 0
    for h in hs:
        hx0, hx1 = sorted((h.x1, h.x2))
        for v in vs:
            if v.nets & h.nets:
                continue
            vy0, vy1 = sorted((v.y1, v.y2))
            if hx0 - 1e-9 <= v.x1 <= hx1 + 1e-9 and vy0 - 1e-9 <= h.y1 <= vy1 + 1e-9:
                n += 1
    return n


def _body_hits(segs, bodies) -> int:
    """Segments that run through an op-amp's body (its own pin wires end at its edge)."""
    y0, y1 = -3 * PIN, PIN
    n = 0
    for s in segs:
        sx0, sx1 = sorted((s.x1, s.x2))
        sy0, sy1 = sorted((s.y1, s.y2))
        for b0, b1 in bodies:
            if sx0 < b1 - 1e-9 and b0 + 1e-9 < sx1 or (sx0 == sx1 and b0 < sx0 < b1):
                if sy0 < y1 and y0 < sy1 or (sy0 == sy1 and y0 < sy0 < y1):
                    n += 1
    return n


def opamp_pins(out_pt, flip: bool) -> dict:
    """Where an op-amp placed by the layout has its pins.

    Parameters
    ----------
    out_pt : (float, float)
        Its output point (``Layout.opamps``).
    flip : bool
        True when the non-inverting input is on top.

    Returns
    -------
    dict
        "plus", "minus", "out" → (x, y), as schemdraw's Opamp places them.
    """
    x, y = out_pt
    top, bottom = (x - OPAMP_W, y + PIN), (x - OPAMP_W, y - PIN)
    return {"plus": top if flip else bottom, "minus": bottom if flip else top, "out": (x, y)}


# --------------------------------------------------------------------------- drawing


def _value(e: Element) -> str:
    return format_value(e.value, "Ω" if e.kind == "R" else "F")


def elements_svg(elements, *, net_names: dict | None = None, title: str = "",
                 trims: dict | None = None) -> bytes:
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
    for i, p1, p2 in lay.parts:
        e = elements[i]
        trimmed = trims is not None and e.name in trims
        part = (elm.ResistorVar() if trimmed else elm.Resistor()) if e.kind == "R" \
            else elm.Capacitor()
        part = part.at(p1).to(p2)
        name = f"{e.name} (trim)" if trimmed else e.name
        value = trims[e.name] if trimmed else _value(e)
        if i in lay.combed:
            part.label(f"{name}\n{value}", loc="bottom")
            d.add(part)
            d.add(elm.Ground().theta(0).at(p2))
        elif i in lay.grounded:
            part.label(name, loc="top").label(value, loc="bottom")
            d.add(part)
            d.add(elm.Ground().theta(0).at(p2))
        else:
            part.label(name, loc="top").label(value, loc="bottom")
            d.add(part)
    outs = {}
    for i, out_pt, flip in lay.opamps:
        e = elements[i]
        # Explicit direction: a drawing otherwise carries on in the direction of the last part.
        op = elm.Opamp(leads=False).right()
        if flip:
            op = op.flip()
        op = op.anchor("out").at(out_pt)
        op.label(e.name, loc="center", ofst=(-0.35, 0), fontsize=9)
        d.add(op)
        outs[e.nets[2]] = out_pt
    for a, b in lay.wires:
        if a != b:
            d.add(elm.Line().at(a).to(b))
    for p in lay.grounds:
        d.add(elm.Ground().theta(0).at(p))
    for p in lay.dots:
        d.add(elm.Dot(radius=0.09).at(p))
    x = lay.columns
    first = next(iter(x))
    d.add(elm.Dot(open=True).at(lay.terminal_in).label(names.get(first, first), loc="left"))
    if lay.terminal_out is not None:
        d.add(elm.Dot(open=True).at(lay.terminal_out)
              .label(names.get("out", "out"), loc="right"))
    for net, pt in outs.items():
        if net != "out":
            d.add(elm.Label().at((x[net] + 0.15, pt[1] - 0.45))
                  .label(names.get(net, net), loc="right", fontsize=9, color="#1f4e79"))
    if title:
        top = max([p[1] for _, p1, p2 in lay.parts for p in (p1, p2)] + [1.0])
        d.add(elm.Label().at((x[first] - 1.2, top + 1.3)).label(title, halign="left",
                                                               fontsize=11))
    return d.get_imagedata("svg")


def _local_names(chain: Chain, stage) -> dict:
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


def stage_svg(chain: Chain, stage, *, trims: dict | None = None) -> bytes:
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
    what = "" if stage.kind == "gain" else f", f0 {fmt_hz(t.f0_hz)}, Q {t.q:.3g}"
    title = (f"Stage {stage.position}: {stage.kind}, {stage.topology}{what}, gain {t.gain:.3g} "
             f"(as built)")
    return elements_svg(stage.elements, net_names=names, title=title, trims=trims)


def _db(gain: float) -> str:
    # round first so that a gain a hair below 1 shows as +0.0 dB, not -0.0 dB
    return f"{round(20 * math.log10(abs(gain)), 1) + 0.0:+.1f} dB"


def _box_text(stage) -> str:
    b = stage.built
    lines = [f"stage {stage.position}", stage.topology, stage.kind]
    if stage.kind != "gain":
        lines.append(f"f0 {fmt_hz(b.f0_hz)}, Q {b.q:.3g}")
    lines.append(f"gain {b.gain:.3g} ({_db(b.gain)})" if b.gain else "gain 0")
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
    src = format_value(chain.source_ohms, "Ω") if chain.source_ohms else "0 Ω"
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


def schematic_files(chain: Chain | None, *, tuning_plan=None) -> dict[str, bytes]:
    """{"schematic_stage1.svg": ..., …, "block.svg": ...} for a built chain ({} if none).

    Parameters
    ----------
    chain : Chain or None
    tuning_plan : TuningPlan, optional
        Its trimmed parts are drawn as variable resistors, "set = fixed + trimmer".
    """
    if chain is None:
        return {}
    trims: dict[int, dict[str, str]] = {}
    for s in (tuning_plan.steps if tuning_plan is not None else ()):
        trims.setdefault(s.stage, {})[s.trims] = (
            f"{format_value(s.design_ohms, 'Ω')} = {format_value(s.fixed_ohms, 'Ω')} + "
            f"{format_value(s.trimmer_ohms, 'Ω')} trim")
    out = {f"schematic_stage{st.position}.svg": stage_svg(chain, st,
                                                          trims=trims.get(st.position))
           for st in chain.stages}
    out["block.svg"] = block_svg(chain)
    return out
