"""The chain as a graph: nets are nodes, stages are edges (docs/design.md, "The chain is a graph").

Global net names: the chain input is "in", the chain output (last stage's "out") is "out",
and every other op-amp output of stage k is "s{k}_{local}" (e.g. "s2_out", "s3_lowpass").
A chain that drives a converter has one node more, "adc", after "out": the converter's
input, the same wire as "out" (an ideal op-amp output is not loaded down), with its own
limit, the converter's full scale.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import networkx as nx
import numpy as np

from bandwright.chain.stage import Stage, stage_output_nets
from bandwright.circuits.elements import GROUND, Element
from bandwright.circuits.nodal import ac_solve
from bandwright.inputs.requirement import Converter
from bandwright.circuits.reference import referenced

__all__ = ["Chain", "build_chain", "global_net", "flatten", "net_transfers", "CHAIN_INPUT",
           "CHAIN_OUTPUT", "CONVERTER_NET", "attach_converter", "converter_elements"]

CHAIN_INPUT = "in"
CHAIN_OUTPUT = "out"
CONVERTER_NET = "adc"


def global_net(stage: Stage, local: str, *, last: bool, input_net: str) -> str:
    """The chain-wide name of a stage's local net."""
    if local == GROUND:
        return GROUND
    if local == "in":
        return input_net
    if local == "out" and last:
        return CHAIN_OUTPUT
    return f"s{stage.position}_{local}"


@dataclass(frozen=True)
class Chain:
    """Stages in order and the graph that joins them.

    Attributes
    ----------
    stages : tuple of Stage
    graph : networkx.DiGraph
        Nodes are nets; an edge (input net → op-amp output net) per stage output carries
        ``stage`` (the Stage) and ``local`` (the net's local name inside the stage).
    source_ohms : float
        Source resistance ahead of the chain input.
    converter : Converter or None
        The converter the chain drives (node `CONVERTER_NET` after the output).
    """

    stages: tuple[Stage, ...]
    graph: nx.DiGraph
    source_ohms: float
    converter: Converter | None = None

    @property
    def output_nets(self) -> tuple[str, ...]:
        """Every op-amp output net, in chain order (the JSON `nodes[]`)."""
        return tuple(n for n in nx.topological_sort(self.graph)
                     if n not in (CHAIN_INPUT, CONVERTER_NET))

    def input_of(self, stage: Stage) -> str:
        """Global net that feeds `stage`."""
        for a, _, d in self.graph.edges(data=True):
            if d["stage"] is stage:
                return a
        raise KeyError(stage.position)

    def stage_of(self, net: str) -> Stage:
        (a, _, d), = self.graph.in_edges(net, data=True)
        return d["stage"]


def build_chain(stages: Sequence[Stage], *, source_ohms: float = 0.0) -> Chain:
    """Join `stages` in order: each stage's input is the previous stage's "out"."""
    g = nx.DiGraph()
    g.add_node(CHAIN_INPUT)
    prev = CHAIN_INPUT
    for i, st in enumerate(stages):
        last = i == len(stages) - 1
        for local in stage_output_nets(st):
            net = global_net(st, local, last=last, input_net=prev)
            g.add_edge(prev, net, stage=st, local=local)
        prev = global_net(st, "out", last=last, input_net=prev)
    return Chain(stages=tuple(stages), graph=g, source_ohms=float(source_ohms))


def attach_converter(chain: Chain, converter: Converter | None) -> Chain:
    """`chain` with the converter as its last node: an edge "out" → "adc" that carries the
    converter instead of a stage (``stage`` None, ``local`` "adc"); unchanged for None."""
    if converter is None:
        return chain
    g = chain.graph.copy()
    g.add_edge(CHAIN_OUTPUT, CONVERTER_NET, stage=None, local=CONVERTER_NET, converter=converter)
    return Chain(stages=chain.stages, graph=g, source_ohms=chain.source_ohms,
                 converter=converter)


def converter_elements(chain: Chain) -> tuple[Element, ...]:
    """The converter's input load on the chain output, `input_ohms` ∥ `input_farads` to
    ground (none without a converter); the drive check and the deck add these."""
    conv = chain.converter
    if conv is None:
        return ()
    out = []
    if conv.input_ohms is not None:
        out.append(Element(name="RADC", kind="R", nets=(CHAIN_OUTPUT, GROUND),
                           value=conv.input_ohms))
    if conv.input_farads > 0:
        out.append(Element(name="CADC", kind="C", nets=(CHAIN_OUTPUT, GROUND),
                           value=conv.input_farads))
    return tuple(out)


def flatten(chain: Chain, reference=None) -> tuple[Element, ...]:
    """The whole chain as one element list (global nets; names suffixed "_s{k}").

    With a single-supply `reference` (``circuits.reference.Reference``) every stage's
    ground connection goes to the reference net and the reference network is appended.
    """
    out: list[Element] = []
    for i, st in enumerate(chain.stages):
        last = i == len(chain.stages) - 1
        inp = chain.input_of(st)
        for e in st.elements:
            nets = tuple(global_net(st, n, last=last, input_net=inp) for n in e.nets)
            out.append(Element(name=f"{e.name}_s{st.position}", kind=e.kind, nets=nets,
                               value=e.value, model=e.model))
    if reference is not None and reference.single:
        out = [*referenced(out), *reference.elements]
    return tuple(out)


def net_transfers(chain: Chain, freq_hz: np.ndarray) -> dict[str, np.ndarray]:
    """Complex transfer from the source (open circuit, ahead of source_ohms) to every op-amp
    output net: the product of stage transfers along the path.

    The op-amp model has zero output impedance, so a stage does not load the one before it
    and the product is exact; only the first stage sees the source resistance.
    """
    f = np.asarray(freq_hz, dtype=float)
    out: dict[str, np.ndarray] = {CHAIN_INPUT: np.ones(f.shape, dtype=complex)}
    for st in chain.stages:
        inp = chain.input_of(st)
        rs = chain.source_ohms if inp == CHAIN_INPUT else 0.0
        sol = ac_solve(st.elements, f, source_ohms=rs)
        for _, net, d in chain.graph.out_edges(inp, data=True):
            if d["stage"] is st:
                out[net] = out[inp] * sol.at(d["local"])
    del out[CHAIN_INPUT]
    if chain.converter is not None:
        out[CONVERTER_NET] = out[CHAIN_OUTPUT]   # the same wire
    return out
