"""Where each part of a schematic goes: a pure function of an element list's structure.

The element list is the one description of a circuit (docs/design.md): the layout below works
from it alone, for any topology, so a new topology module draws without a line added here.
Nothing here draws (``report/schematic.py`` turns a :class:`Layout` into SVG with schemdraw),
so the layout is tested without a drawing library (tests/report/test_schematic_layout.py).

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
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING

from bandwright.circuits.elements import GROUND

if TYPE_CHECKING:
    from bandwright.circuits.elements import Element

__all__ = ["Point", "Structure", "Wire", "PlacedPart", "PlacedOpamp", "NetLabel", "Layout",
           "Score", "structure_of", "layout", "place", "opamp_pins"]

GAP = 4.4          # between adjacent buses
ROW = 2.6          # between rows of parts
PIN = 0.625        # half the op-amp's input pin spacing (schemdraw's Opamp)
OPAMP_W = 1.25 * math.sqrt(3)  # schemdraw Opamp, input pins to output (its triangle)
OUT_LEAD = 0.5     # wire from an op-amp output to its bus
STUB = 0.45        # wire from an op-amp input pin before it turns
DROP = 2.4         # length of a part hanging to ground
COMB = 2.0         # between parts to ground that share a net
COMB_DROP = 0.9    # from the bottom of a bus down to the comb they hang from
TERMINAL_LEAD = 1.2  # wire from a terminal to its bus
LABEL_OFFSET = (0.15, -0.45)  # a net label, right of and below its op-amp output
TITLE_RISE = 1.3   # the title, above the highest part
MAX_ORDERS = 5040  # column orders tried exhaustively (7 free nets); beyond, a greedy order
EPS = 1e-9         # coordinates are sums of the constants above: equal within rounding

Point = tuple[float, float]
#: What the layout depends on: each element's kind and nets, not values or names.
Structure = tuple[tuple[str, tuple[str, ...]], ...]


@dataclass(frozen=True)
class Wire:
    """A straight wire from ``start`` to ``end`` (horizontal or vertical)."""

    start: Point
    end: Point


@dataclass(frozen=True)
class PlacedPart:
    """An R or C of the element list (by ``index``) drawn from ``start`` to ``end``.

    ``to_ground``: it runs from its net downwards and ends on a ground symbol at ``end``.
    ``combed``: it shares its net with another part to ground, so it is labelled on one
    side only, and neighbours do not collide.
    """

    index: int
    start: Point
    end: Point
    to_ground: bool = False
    combed: bool = False


@dataclass(frozen=True)
class PlacedOpamp:
    """An op-amp of the element list (by ``index``), its output at ``out``; ``flip``: the
    non-inverting input on top."""

    index: int
    out: Point
    flip: bool

    def pins(self) -> dict[str, Point]:
        """"plus", "minus", "out" → (x, y) (see :func:`opamp_pins`)."""
        return opamp_pins(self.out, self.flip)


@dataclass(frozen=True)
class NetLabel:
    """The name of ``net`` written at ``at`` (the outputs of op-amps other than the last)."""

    net: str
    at: Point


@dataclass(frozen=True)
class Layout:
    """Where everything of one element list goes.

    Attributes
    ----------
    columns : dict of str to float
        Net → x of its bus, the input net first.
    parts, opamps : tuple
        Every element, each once: :class:`PlacedPart` (by index) and :class:`PlacedOpamp`.
    wires : tuple of Wire
    grounds : tuple of Point
        Ground symbols of grounded op-amp inputs.
    dots : tuple of Point
        Junctions of three or more wires.
    terminal_in, terminal_out : Point, Point or None
        Where the input and output terminals go.
    labels : tuple of NetLabel
    title_at : Point
        Left end of the title line, above everything.
    crossings : int
        Crossings of wires of different nets, and wires through an op-amp body.
    """

    columns: dict[str, float]
    parts: tuple[PlacedPart, ...]
    opamps: tuple[PlacedOpamp, ...]
    wires: tuple[Wire, ...]
    grounds: tuple[Point, ...]
    dots: tuple[Point, ...]
    terminal_in: Point
    terminal_out: Point | None
    labels: tuple[NetLabel, ...]
    title_at: Point
    crossings: int

    @property
    def input_net(self) -> str:
        return next(iter(self.columns))


@dataclass(frozen=True, order=True)
class Score:
    """Lower is better, compared field by field: crossings (a wire through an op-amp counts
    ten), then rows of parts, then total wire length."""

    penalty: int
    rows: int
    wire_length: float


def structure_of(elements: Iterable[Element]) -> Structure:
    """What the layout depends on: kinds and nets, not values or names."""
    return tuple((e.kind, tuple(e.nets)) for e in elements)


def layout(elements: Iterable[Element]) -> Layout:
    """Lay out an element list (cached by its structure).

    Parameters
    ----------
    elements : sequence of Element

    Returns
    -------
    Layout
        The best of :func:`place` over the column orders and op-amp orientations tried.
    """
    return _layout_cached(structure_of(elements))


# --------------------------------------------------------------------------- search


@lru_cache(maxsize=64)
def _layout_cached(structure: Structure) -> Layout:
    nets: list[str] = []
    for _, ns in structure:
        nets += [n for n in ns if n != GROUND and n not in nets]
    first = "in" if "in" in nets else nets[0]
    free = [n for n in nets if n != first]
    amps = _amps(structure)
    flips_choices = [_flip_choices(plus, minus) for _, (plus, minus, _out) in amps]
    best, best_score = None, None
    for constrained in (True, False):
        for order in _orders(structure, first, free):
            cols = (first, *order)
            if constrained and not _inputs_left(cols, amps):
                continue
            for flips in itertools.product(*flips_choices):
                lay, score = place(structure, cols, flips)
                if best_score is None or score < best_score:
                    best, best_score = lay, score
        if best is not None:
            break
    return best


def _amps(structure: Structure) -> list[tuple[int, tuple[str, ...]]]:
    """(index, (plus, minus, out)) of each op-amp."""
    return [(i, ns) for i, (kind, ns) in enumerate(structure) if kind == "opamp"]


def _flip_choices(plus: str, minus: str) -> tuple[bool, ...]:
    """The signal input on top: the non-inverting one unless it is grounded; when both carry
    signal, try both."""
    if plus == GROUND:
        return (False,)
    if minus == GROUND:
        return (True,)
    return (True, False)


def _orders(structure: Structure, first: str, free: list[str]) -> Iterator[tuple[str, ...]]:
    if math.factorial(len(free)) <= MAX_ORDERS:
        yield from itertools.permutations(free)
    else:
        yield tuple(_greedy_order(structure, first, free))


def _greedy_order(structure: Structure, first: str, free: list[str]) -> list[str]:
    """Nets by their distance (in parts) from the first net: a fallback for big circuits."""
    adj: dict[str, set[str]] = {}
    for _, ns in structure:
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


def _inputs_left(cols: Sequence[str], amps: list[tuple[int, tuple[str, ...]]]) -> bool:
    """Every op-amp input net (other than ground and its own output) left of its output."""
    pos = {n: i for i, n in enumerate(cols)}
    return all(pos[n] <= pos[out] for _, (plus, minus, out) in amps
               for n in (plus, minus) if n not in (GROUND, out))


# --------------------------------------------------------------------------- one placement


@dataclass(frozen=True)
class _Seg:
    """A straight wire or part: horizontal (y fixed) or vertical (x fixed), and the nets it
    joins (a part joins two)."""

    x1: float
    y1: float
    x2: float
    y2: float
    nets: frozenset[str]


@dataclass(frozen=True)
class _Piece:
    """What one step of :func:`place` adds: wires drawn, segments scored, and taps (net, y)
    where a wire or part meets a net's bus."""

    wires: tuple[Wire, ...] = ()
    segs: tuple[_Seg, ...] = ()
    taps: tuple[tuple[str, float], ...] = ()

    def __add__(self, other: _Piece) -> _Piece:
        return _Piece(self.wires + other.wires, self.segs + other.segs, self.taps + other.taps)


def _hseg(x1: float, x2: float, y: float, *nets: str) -> _Seg:
    return _Seg(x1, y, x2, y, frozenset(nets))


def _vseg(x: float, y1: float, y2: float, *nets: str) -> _Seg:
    return _Seg(x, y1, x, y2, frozenset(nets))


@dataclass(frozen=True)
class _Route:
    """An op-amp input pin whose net is not reachable on its own row: a stub from the pin
    at ``x_pin`` to ``x_stub``, then up or down to a free row and along it to the bus."""

    x_stub: float
    y_pin: float
    net: str
    x_pin: float
    side: str  # "above" for the upper pin, "below" for the lower


@dataclass(frozen=True)
class _Span:
    """Something that takes an x-interval of a row: a part between two nets or a route."""

    lo: float
    hi: float
    side: str  # "above" or "below" the op-amp row
    part: tuple[int, str, str] | None = None  # (index, net a, net b)
    route: _Route | None = None


@dataclass(frozen=True)
class _OpampRow:
    piece: _Piece
    opamps: tuple[PlacedOpamp, ...]
    grounds: tuple[Point, ...]
    zones: tuple[tuple[float, float], ...]  # x-intervals of op-amps and their top-pin wires
    routes: tuple[_Route, ...]
    pin_side: dict[str, str]  # net → "above"/"below": the side of its first op-amp pin


def place(structure: Structure, cols: Sequence[str],
          flips: Sequence[bool]) -> tuple[Layout, Score]:
    """Place everything for one column order and op-amp orientation.

    Parameters
    ----------
    structure : Structure
        :func:`structure_of` an element list.
    cols : sequence of str
        Every net other than ground, left to right; the first is the input.
    flips : sequence of bool
        One per op-amp: the non-inverting input on top.

    Returns
    -------
    (Layout, Score)
    """
    x = {n: GAP * i for i, n in enumerate(cols)}
    first = cols[0]
    amps = _amps(structure)
    bodies = tuple((x[out] - OUT_LEAD - OPAMP_W, x[out] - OUT_LEAD) for _, (_p, _m, out) in amps)
    row = _opamp_row(amps, flips, x, bodies)
    spans = _spans(structure, x, row.pin_side, row.routes)
    packed, parts, n_rows = _pack_rows(spans, row.zones, x)
    piece = row.piece + packed
    ys_first = [y for n, y in piece.taps if n == first]
    y_in = 0.0 if not ys_first or 0.0 in ys_first else max(ys_first)
    piece += _Piece(taps=((first, y_in),))
    hung, hung_parts = _hang_to_ground(structure, x, piece.taps, bodies)
    piece += hung
    terminal_out = None
    if "out" in x:
        out_piece, terminal_out = _output_terminal(cols, x, piece)
        piece += out_piece
    terminal_in = (x[first] - TERMINAL_LEAD, y_in)
    piece += _Piece(wires=(Wire(terminal_in, (x[first], y_in)),))
    buses, dots = _buses(x, piece.taps)
    piece += buses
    crossings = _crossings(piece.segs)
    hits = _body_hits(piece.segs, bodies)
    all_parts = tuple(sorted(parts + hung_parts, key=lambda p: p.index))
    labels = {}
    for op in row.opamps:
        net = structure[op.index][1][2]
        labels[net] = NetLabel(net, (x[net] + LABEL_OFFSET[0], op.out[1] + LABEL_OFFSET[1]))
    top = max([y for p in all_parts for y in (p.start[1], p.end[1])] + [1.0])
    lay = Layout(columns=x, parts=all_parts, opamps=row.opamps, wires=piece.wires,
                 grounds=row.grounds, dots=dots, terminal_in=terminal_in,
                 terminal_out=terminal_out,
                 labels=tuple(lab for n, lab in labels.items() if n != "out"),
                 title_at=(x[first] - TERMINAL_LEAD, top + TITLE_RISE),
                 crossings=crossings + hits)
    wire_len = sum(abs(s.x2 - s.x1) + abs(s.y2 - s.y1) for s in piece.segs)
    return lay, Score(crossings + 10 * hits, n_rows, wire_len)


def _opamp_row(amps: list[tuple[int, tuple[str, ...]]], flips: Sequence[bool],
               x: dict[str, float], bodies: tuple[tuple[float, float], ...]) -> _OpampRow:
    """The op-amps, their output leads, and their input pins wired straight to a bus on the
    left when nothing is in the way (else a :class:`_Route`, placed with the parts)."""
    wires: list[Wire] = []
    segs: list[_Seg] = []
    taps: list[tuple[str, float]] = []
    opamps, grounds, zones, routes = [], [], [], []
    pin_side: dict[str, str] = {}
    y_out = -PIN
    for (i, (plus, minus, out)), flip in zip(amps, flips):
        xo = x[out]
        x_pin = xo - OUT_LEAD - OPAMP_W
        top, bottom = (plus, minus) if flip else (minus, plus)
        opamps.append(PlacedOpamp(i, (xo - OUT_LEAD, y_out), flip))
        wires.append(Wire((xo - OUT_LEAD, y_out), (xo, y_out)))
        taps.append((out, y_out))
        left_edge = x_pin - STUB
        for net, y_pin, side in ((top, 0.0, "above"), (bottom, -2 * PIN, "below")):
            pin_side.setdefault(net, side)
            if net == GROUND:
                wires.append(Wire((x_pin, y_pin), (x_pin - STUB, y_pin)))
                grounds.append((x_pin - STUB, y_pin))
                continue
            blocked = any(x[net] < b1 and b0 < x_pin - EPS for b0, b1 in bodies)
            if x[net] < x_pin - STUB and not blocked:
                wires.append(Wire((x_pin, y_pin), (x[net], y_pin)))
                segs.append(_hseg(x[net], x_pin, y_pin, net))
                taps.append((net, y_pin))
                if y_pin == 0.0:
                    left_edge = min(left_edge, x[net])
            else:
                routes.append(_Route(x_pin - STUB, y_pin, net, x_pin, side))
        zones.append((left_edge, xo))
    return _OpampRow(_Piece(tuple(wires), tuple(segs), tuple(taps)), tuple(opamps),
                     tuple(grounds), tuple(zones), tuple(routes), pin_side)


def _spans(structure: Structure, x: dict[str, float], pin_side: dict[str, str],
           routes: tuple[_Route, ...]) -> list[_Span]:
    """Parts between two nets, then the routed op-amp inputs: what goes into the rows. A part
    goes below the op-amps only when a net of it meets a lower input pin and none an upper."""
    spans = []
    for i, (kind, ns) in enumerate(structure):
        if kind == "opamp" or GROUND in ns or ns[0] == ns[1]:
            continue
        a, b = ns
        sides = (pin_side.get(a), pin_side.get(b))
        side = "below" if "below" in sides and "above" not in sides else "above"
        spans.append(_Span(min(x[a], x[b]), max(x[a], x[b]), side, part=(i, a, b)))
    for r in routes:
        spans.append(_Span(min(r.x_stub, x[r.net]), max(r.x_stub, x[r.net]), r.side, route=r))
    return spans


def _overlaps(lo: float, hi: float, taken: Iterable[tuple[float, float]]) -> bool:
    return any(lo < b and a < hi for a, b in taken)


def _pack_rows(spans: list[_Span], zones: tuple[tuple[float, float], ...],
               x: dict[str, float]) -> tuple[_Piece, tuple[PlacedPart, ...], int]:
    """Each span on the op-amp row when it is a part and nothing is in the way, else on the
    nearest free row on its side; shortest spans first. Returns the wires, the parts and the
    number of rows used."""
    rows: dict[int, list[tuple[float, float]]] = {}
    wires: list[Wire] = []
    segs: list[_Seg] = []
    taps: list[tuple[str, float]] = []
    parts = []
    for s in sorted(spans, key=lambda s: (s.hi - s.lo, s.lo)):
        sign = 1 if s.side == "above" else -1
        if s.part is not None and not _overlaps(s.lo, s.hi, zones) \
                and not _overlaps(s.lo, s.hi, rows.get(0, [])):
            row = 0
        else:
            k = 1
            while _overlaps(s.lo, s.hi, rows.get(sign * k, [])):
                k += 1
            row = sign * k
        rows.setdefault(row, []).append((s.lo, s.hi))
        y = row * ROW
        if s.part is not None:
            i, a, b = s.part
            parts.append(PlacedPart(i, (x[a], y), (x[b], y)))
            segs.append(_hseg(s.lo, s.hi, y, a, b))
            taps += [(a, y), (b, y)]
        else:
            r = s.route
            wires += [Wire((r.x_pin, r.y_pin), (r.x_stub, r.y_pin)),
                      Wire((r.x_stub, r.y_pin), (r.x_stub, y)),
                      Wire((r.x_stub, y), (x[r.net], y))]
            segs += [_vseg(r.x_stub, r.y_pin, y, r.net), _hseg(s.lo, s.hi, y, r.net)]
            taps.append((r.net, y))
    return _Piece(tuple(wires), tuple(segs), tuple(taps)), tuple(parts), len(rows)


def _hang_to_ground(structure: Structure, x: dict[str, float],
                    taps: tuple[tuple[str, float], ...],
                    bodies: tuple[tuple[float, float], ...]
                    ) -> tuple[_Piece, tuple[PlacedPart, ...]]:
    """A part to ground hangs from the bottom of its bus; two or more on one net hang side by
    side from a short comb below the bus (towards the free side)."""
    to_ground: dict[str, list[int]] = {}
    for i, (kind, ns) in enumerate(structure):
        if kind != "opamp" and GROUND in ns and ns[0] != ns[1]:
            to_ground.setdefault(ns[0] if ns[1] == GROUND else ns[1], []).append(i)
    wires: list[Wire] = []
    segs: list[_Seg] = []
    new_taps: list[tuple[str, float]] = []
    parts = []
    for net, idx in to_ground.items():
        y_top = min((y for n, y in taps if n == net), default=0.0)
        if len(idx) == 1:
            new_taps.append((net, y_top))
            spots = [(x[net], y_top)]
        else:
            y_c = y_top - COMB_DROP
            right = not _overlaps(x[net], x[net] + COMB * len(idx), bodies)
            step = COMB if right else -COMB
            xs = [x[net] + step * k for k in range(len(idx))]
            new_taps.append((net, y_c))
            wires.append(Wire((min(xs), y_c), (max(xs), y_c)))
            segs.append(_hseg(min(xs), max(xs), y_c, net))
            spots = [(xg, y_c) for xg in xs]
        for i, (xg, yg) in zip(idx, spots):
            parts.append(PlacedPart(i, (xg, yg), (xg, yg - DROP), to_ground=True,
                                    combed=len(idx) > 1))
            segs.append(_vseg(xg, yg - DROP, yg, net))
    return _Piece(tuple(wires), tuple(segs), tuple(new_taps)), tuple(parts)


def _output_terminal(cols: Sequence[str], x: dict[str, float],
                     so_far: _Piece) -> tuple[_Piece, Point]:
    """The output terminal: to the right at the output's height when "out" is the last
    column; otherwise on a wire below everything, which crosses nothing."""
    x_end = GAP * (len(cols) - 1) + TERMINAL_LEAD
    if cols[-1] == "out":
        ys = [y for n, y in so_far.taps if n == "out"]
        y_o = -PIN if -PIN in ys else min(ys, default=0.0)
    else:
        y_o = min([s.y1 for s in so_far.segs] + [s.y2 for s in so_far.segs] + [-2 * PIN]) - 1.0
    piece = _Piece((Wire((x["out"], y_o), (x_end, y_o)),), (_hseg(x["out"], x_end, y_o, "out"),),
                   (("out", y_o),))
    return piece, (x_end, y_o)


def _buses(x: dict[str, float],
           taps: tuple[tuple[str, float], ...]) -> tuple[_Piece, tuple[Point, ...]]:
    """Each net's bus from its lowest to its highest tap, and a dot wherever three or more
    wires meet on it."""
    wires: list[Wire] = []
    segs: list[_Seg] = []
    dots = []
    for net in x:
        pts = [y for n, y in taps if n == net]
        if not pts:
            continue
        ys = sorted(set(pts))
        if len(ys) > 1:
            wires.append(Wire((x[net], ys[0]), (x[net], ys[-1])))
            segs.append(_vseg(x[net], ys[0], ys[-1], net))
        for y in ys:
            if pts.count(y) + (y > ys[0]) + (y < ys[-1]) >= 3:
                dots.append((x[net], y))
    return _Piece(tuple(wires), tuple(segs)), tuple(dots)


def _crossings(segs: Sequence[_Seg]) -> int:
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
            if hx0 - EPS <= v.x1 <= hx1 + EPS and vy0 - EPS <= h.y1 <= vy1 + EPS:
                n += 1
    return n


def _body_hits(segs: Sequence[_Seg], bodies: Sequence[tuple[float, float]]) -> int:
    """Segments that run through an op-amp's body (its own pin wires end at its edge)."""
    y0, y1 = -3 * PIN, PIN
    n = 0
    for s in segs:
        sx0, sx1 = sorted((s.x1, s.x2))
        sy0, sy1 = sorted((s.y1, s.y2))
        for b0, b1 in bodies:
            if sx0 < b1 - EPS and b0 + EPS < sx1 or (sx0 == sx1 and b0 < sx0 < b1):
                if sy0 < y1 and y0 < sy1 or (sy0 == sy1 and y0 < sy0 < y1):
                    n += 1
    return n


def opamp_pins(out_pt: Point, flip: bool) -> dict[str, Point]:
    """Where an op-amp placed by the layout has its pins.

    Parameters
    ----------
    out_pt : (float, float)
        Its output point (``PlacedOpamp.out``).
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
