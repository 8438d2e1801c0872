"""The chain graph: product along a path equals the whole chain solved as one element list."""

from __future__ import annotations


import networkx as nx
import numpy as np
import pytest

from bandwright.analysis.levels import net_transfers
from bandwright.chain import CHAIN_INPUT, CHAIN_OUTPUT, Stage, build_chain, flatten
from bandwright.circuits import topology
from bandwright.circuits.figures import section_figures
from bandwright.circuits.nodal import ac_solve
from bandwright.parts.catalogue import archetype
from bandwright.sections.section import Section


def _stage(position, name, section, model, c_farads=10e-9):
    topo = topology(name)
    sec = Section(section.kind, section.f0_hz, section.q,
                  -abs(section.gain) if topo.INVERTING else abs(section.gain))
    comps = topo.design(sec, c_farads=c_farads)
    els = tuple(topo.elements(comps, model))
    fig = section_figures(els, kind=sec.kind, near_hz=sec.f0_hz or 1.0)
    return Stage(position=position, topology=name, target=sec, components=tuple(comps.items()),
                 elements=els, model=model, built=fig)


@pytest.fixture
def chain():
    model = archetype("general")
    stages = [
        _stage(1, "sallen_key_highpass", Section("highpass", 100.0, 0.707, 2.0), model),
        _stage(2, "mfb_lowpass", Section("lowpass", 5000.0, 1.3, 1.5), model, 1e-9),
        _stage(3, "noninverting_gain", Section("gain", 0.0, 0.0, 3.0), model),
    ]
    return build_chain(stages, source_ohms=600.0)


def test_nodes_are_every_opamp_output(chain):
    assert list(nx.topological_sort(chain.graph))[0] == CHAIN_INPUT
    assert chain.output_nets == ("s1_out", "s2_out", CHAIN_OUTPUT)
    assert all(chain.graph.edges[e]["stage"] for e in chain.graph.edges)


def test_product_along_path_equals_whole_chain_solve(chain):
    """Design.md: the response at any net is the product along its path; the op-amp model's
    zero output impedance makes it exact. Checked against one nodal solve of the whole
    chain (source resistance included) to 1e-9."""
    f = np.geomspace(10, 1e5, 300)
    prod = net_transfers(chain, f)
    sol = ac_solve(flatten(chain), f, source_ohms=chain.source_ohms)
    for net in chain.output_nets:
        np.testing.assert_allclose(prod[net], sol.at(net), rtol=1e-9, atol=1e-15)


def test_branching_input_feeds_two_channels():
    """One input may feed several channels: two stages off the same input net."""
    model = archetype("general")
    a = _stage(1, "mfb_lowpass", Section("lowpass", 1000.0, 0.7, 1.0), model)
    b = _stage(2, "sallen_key_highpass", Section("highpass", 1000.0, 0.7, 1.0), model)
    g = nx.DiGraph()
    g.add_edge(CHAIN_INPUT, "lp_out", stage=a, local="out")
    g.add_edge(CHAIN_INPUT, "hp_out", stage=b, local="out")
    from bandwright.chain.graph import Chain
    ch = Chain(stages=(a, b), graph=g, source_ohms=0.0)
    f = np.array([100.0, 1000.0, 10000.0])
    tr = net_transfers(ch, f)
    assert abs(tr["lp_out"][0]) == pytest.approx(1.0, rel=0.02)
    assert abs(tr["hp_out"][2]) == pytest.approx(1.0, rel=0.02)
