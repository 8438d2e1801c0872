"""Circuit topologies, one module each, and the nodal solver.

``TOPOLOGY_NAMES`` lists the topologies; ``topology(name)`` imports a topology's module on
first use (its protocol: ``circuits.base.Topology``).
"""

from __future__ import annotations

import importlib
from types import ModuleType

__all__ = ["TOPOLOGY_NAMES", "topology", "topologies_of_kind", "all_topologies"]

# Order matters only for ties: cheaper and simpler first.
TOPOLOGY_NAMES: tuple[str, ...] = (
    "mfb_bandpass",
    "sallen_key_bandpass",
    "dual_amp_bandpass",
    "tow_thomas",
    "state_variable",
    "sallen_key_lowpass",
    "mfb_lowpass",
    "sallen_key_highpass",
    "mfb_highpass",
    "noninverting_gain",
    "inverting_gain",
)


def topology(name: str) -> ModuleType:
    """The module of topology `name` (KeyError if unknown)."""
    if name not in TOPOLOGY_NAMES:
        raise KeyError(name)
    return importlib.import_module(f"bandwright.circuits.{name}")


def all_topologies() -> tuple[ModuleType, ...]:
    """Every topology module, in TOPOLOGY_NAMES order."""
    return tuple(topology(n) for n in TOPOLOGY_NAMES)


def topologies_of_kind(kind: str) -> tuple[ModuleType, ...]:
    """Every topology module whose KIND is `kind`."""
    return tuple(m for m in all_topologies() if m.KIND == kind)
