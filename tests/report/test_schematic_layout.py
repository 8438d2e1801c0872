"""The schematic layout (report/schematic_layout.py) of every topology's element lists, checked
on its geometry alone, without drawing: every net drawn as one connected piece and no two nets
joined, every element placed once, no two parts or op-amps on top of each other, and the same
layout in every process."""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import pytest

from bandwright.circuits import TOPOLOGY_NAMES, topology
from bandwright.circuits.elements import GROUND, Element
from bandwright.parts.catalogue import DEFAULT_ARCHETYPE, archetype
from bandwright.report.schematic_layout import OPAMP_W, PIN, layout, place, structure_of
from bandwright.sections.section import Section

EPS = 1e-9


def _variants(name: str) -> list[Section]:
    topo = topology(name)
    kind = topo.KIND
    if kind == "gain":
        gains = (1.0, 4.0, 0.5) if name.startswith("non") else (1.0, 4.0)
        return [Section(kind="gain", f0_hz=0.0, q=0.0, gain=g) for g in gains]
    if kind == "bandpass":
        return [Section(kind=kind, f0_hz=1e3, q=5.0, gain=2.0),
                Section(kind=kind, f0_hz=1e3, q=20.0, gain=1.0)]
    return [Section(kind=kind, f0_hz=1e3, q=0.7, gain=1.0),
            Section(kind=kind, f0_hz=1e3, q=0.7, gain=2.0)]


def _element_lists() -> list[tuple[str, tuple[Element, ...]]]:
    model = archetype(DEFAULT_ARCHETYPE)
    out = []
    for name in TOPOLOGY_NAMES:
        topo = topology(name)
        for k, sec in enumerate(_variants(name)):
            try:
                parts = topo.design(sec, c_farads=10e-9)
            except ValueError:
                continue
            parts = {n: v for n, v in parts.items() if v is not None and math.isfinite(v)}
            out.append((f"{name}-{k}", tuple(topo.elements(parts, model))))
    return out


ELEMENT_LISTS = _element_lists()
CASES = [pytest.param(els, id=name) for name, els in ELEMENT_LISTS]


class _Groups:
    """Union-find over drawing points (rounded to 1e-6 units)."""

    def __init__(self) -> None:
        self.parent: dict = {}

    @staticmethod
    def key(p):
        return (round(p[0], 6), round(p[1], 6))

    def find(self, p):
        k = self.key(p)
        self.parent.setdefault(k, k)
        while self.parent[k] != k:
            self.parent[k] = self.parent[self.parent[k]]
            k = self.parent[k]
        return k

    def union(self, a, b) -> None:
        self.parent[self.find(a)] = self.find(b)


def _on_segment(p, a, b) -> bool:
    (x, y), (x1, y1), (x2, y2) = p, a, b
    if abs(x1 - x2) < EPS:
        return abs(x - x1) < EPS and min(y1, y2) - EPS <= y <= max(y1, y2) + EPS
    return abs(y - y1) < EPS and min(x1, x2) - EPS <= x <= max(x1, x2) + EPS


def test_there_are_element_lists_of_every_topology():
    assert {name.rsplit("-", 1)[0] for name, _ in ELEMENT_LISTS} == set(TOPOLOGY_NAMES)


@pytest.mark.parametrize("elements", CASES)
def test_layout_connects_exactly_the_element_list(elements):
    """Rebuild the netlist from the layout's geometry: wires join every wire or part end that
    lies on them (a crossing without an end there joins nothing); each terminal must land in
    the group of its net, and different nets in different groups."""
    lay = layout(elements)
    g = _Groups()
    terminals = []  # (element index, net, point)
    for p in lay.parts:
        e = elements[p.index]
        if p.to_ground:
            net = e.nets[0] if e.nets[1] == GROUND else e.nets[1]
            terminals += [(p.index, net, p.start), (p.index, GROUND, p.end)]
        else:
            terminals += [(p.index, e.nets[0], p.start), (p.index, e.nets[1], p.end)]
    for op in lay.opamps:
        pins = op.pins()
        plus, minus, out = elements[op.index].nets
        terminals += [(op.index, plus, pins["plus"]), (op.index, minus, pins["minus"]),
                      (op.index, out, pins["out"])]
    ground_pts = list(lay.grounds) + [t[2] for t in terminals if t[1] == GROUND]
    ends = [p for w in lay.wires for p in (w.start, w.end)] + [t[2] for t in terminals] \
        + [lay.terminal_in]
    if lay.terminal_out is not None:
        ends.append(lay.terminal_out)
    for w in lay.wires:
        for p in ends:
            if _on_segment(p, w.start, w.end):
                g.union(p, w.start)
    for p in ground_pts[1:]:
        g.union(p, ground_pts[0])
    groups: dict[str, set] = {}
    for _, net, p in terminals:
        groups.setdefault(net, set()).add(g.find(p))
    for net, found in groups.items():
        assert len(found) == 1, f"net {net} drawn as {len(found)} separate pieces"
    owners: dict = {}
    for net, found in groups.items():
        (root,) = found
        assert root not in owners, f"nets {owners.get(root)} and {net} drawn joined"
        owners[root] = net
    # Terminals at the chain input and output sit on those nets.
    assert g.find(lay.terminal_in) == next(iter(groups["in"]))
    if lay.terminal_out is not None:
        assert g.find(lay.terminal_out) == next(iter(groups["out"]))
    # Every element is placed, each once.
    drawn = [p.index for p in lay.parts] + [op.index for op in lay.opamps]
    assert sorted(drawn) == list(range(len(elements)))


def _box(lo, hi) -> tuple[float, float, float, float]:
    (x1, y1), (x2, y2) = lo, hi
    return min(x1, x2), max(x1, x2), min(y1, y2), max(y1, y2)


def _overlap(a, b) -> bool:
    """Two boxes (x0, x1, y0, y1) share more than an edge or a point; a segment is a box of
    no width, so two segments overlap only when collinear and sharing a stretch."""
    ax0, ax1, ay0, ay1 = a
    bx0, bx1, by0, by1 = b
    xs = min(ax1, bx1) - max(ax0, bx0)
    ys = min(ay1, by1) - max(ay0, by0)
    if xs < -EPS or ys < -EPS:
        return False
    flat_a, flat_b = ax1 - ax0 < EPS or ay1 - ay0 < EPS, bx1 - bx0 < EPS or by1 - by0 < EPS
    if flat_a and flat_b:  # two segments: collinear and sharing a stretch
        return (xs > EPS and abs(ay0 - by0) < EPS and ay1 - ay0 < EPS and by1 - by0 < EPS) \
            or (ys > EPS and abs(ax0 - bx0) < EPS and ax1 - ax0 < EPS and bx1 - bx0 < EPS)
    return xs > EPS and ys > EPS or (flat_a != flat_b and max(xs, ys) > EPS and min(xs, ys) >= 0
                                     and _strictly_inside(a if flat_a else b, b if flat_a else a))


def _strictly_inside(seg, box) -> bool:
    """A segment runs through the interior of a box."""
    sx0, sx1, sy0, sy1 = seg
    bx0, bx1, by0, by1 = box
    if sy1 - sy0 < EPS:  # horizontal
        return by0 + EPS < sy0 < by1 - EPS and sx0 < bx1 - EPS and bx0 + EPS < sx1
    return bx0 + EPS < sx0 < bx1 - EPS and sy0 < by1 - EPS and by0 + EPS < sy1


def _opamp_box(op) -> tuple[float, float, float, float]:
    """The op-amp's triangle within its bounding box: input pins to output, ±2·PIN about the
    output (as report/schematic_layout._body_hits scores it)."""
    x, y = op.out
    return x - OPAMP_W, x, y - 2 * PIN, y + 2 * PIN


@pytest.mark.parametrize("elements", CASES)
def test_no_two_parts_or_op_amps_overlap(elements):
    lay = layout(elements)
    things = [(f"part {elements[p.index].name}", _box(p.start, p.end)) for p in lay.parts]
    things += [(f"op-amp {elements[op.index].name}", _opamp_box(op)) for op in lay.opamps]
    for k, (name_a, a) in enumerate(things):
        for name_b, b in things[k + 1:]:
            assert not _overlap(a, b), f"{name_a} and {name_b} overlap"


@pytest.mark.parametrize("elements", CASES)
def test_single_amplifier_layouts_have_no_crossings(elements):
    """One op-amp: the column search finds a layout with no crossing and no wire through an
    op-amp; with several, at most one crossing (none through an op-amp)."""
    lay = layout(elements)
    amps = sum(e.kind == "opamp" for e in elements)
    assert lay.crossings <= (0 if amps == 1 else 1)


_PROBE = """
import json, sys
sys.path.insert(0, sys.argv[1])
import test_schematic_layout as t
from bandwright.report.schematic_layout import layout
out = {name: repr(layout(els)) for name, els in t.ELEMENT_LISTS}
print(json.dumps({"layouts": out, "schemdraw": "schemdraw" in sys.modules}))
"""


@pytest.mark.slow
def test_layout_is_the_same_in_every_process_and_needs_no_drawing_library():
    """Fresh processes with different hash seeds (set and dict order of strings) give the
    same layouts, and laying out never imports schemdraw."""
    here = str(Path(__file__).parent)
    runs = []
    for seed in ("1", "2"):
        proc = subprocess.run([sys.executable, "-c", _PROBE, here], capture_output=True,
                              text=True, check=True, env={**os.environ, "PYTHONHASHSEED": seed})
        runs.append(json.loads(proc.stdout.strip().splitlines()[-1]))
    assert runs[0]["layouts"] == runs[1]["layouts"]
    assert runs[0]["schemdraw"] is False
    here_layouts = {name: repr(layout(els)) for name, els in ELEMENT_LISTS}
    assert runs[0]["layouts"] == here_layouts


def test_layout_depends_on_structure_not_values_or_names():
    _, els = ELEMENT_LISTS[0]
    renamed = tuple(replace(e, name=f"X{k}", value=e.value * 3) for k, e in enumerate(els))
    assert layout(renamed) is layout(els)
    assert place(structure_of(els), tuple(layout(els).columns),
                 [op.flip for op in layout(els).opamps])[0] == layout(els)
