"""Every topology module provides what ``circuits.base.Topology`` lists (docs/design.md,
"Topologies"): the protocol is the one place a newcomer reads the interface from."""

import inspect

import pytest

from bandwright.circuits import all_topologies
from bandwright.circuits.base import BandpassTopology, GainStageTopology, Topology


@pytest.mark.parametrize("mod", all_topologies(), ids=lambda m: m.NAME)
def test_module_has_every_protocol_attribute(mod):
    for name in Topology.__annotations__:
        assert hasattr(mod, name), f"{mod.NAME} lacks {name}"
    assert isinstance(mod.INVERTING, bool)
    assert set(mod.OPTIONAL_PARTS) <= set(mod.PARTS)


@pytest.mark.parametrize("mod", all_topologies(), ids=lambda m: m.NAME)
def test_limits_takes_the_options_of_its_kind(mod):
    protocol = {"bandpass": BandpassTopology, "gain": GainStageTopology}.get(mod.KIND, Topology)
    want = set(inspect.signature(protocol.limits).parameters) - {"self"}
    got = set(inspect.signature(mod.limits).parameters)
    assert got == want, mod.NAME
