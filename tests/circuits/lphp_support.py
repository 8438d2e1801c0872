"""Shared test support for the lowpass, highpass and gain-stage topology tests."""

from __future__ import annotations

import math
from types import ModuleType

import numpy as np
import sympy as sp

from bandwright.circuits import TOPOLOGY_NAMES, topology
from bandwright.circuits.figures import section_figures
from bandwright.circuits.nodal import transfer
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section, section_response

__all__ = ["make_opamp", "IDEAL", "check_interface", "numeric_figures", "max_response_error",
           "rational_parts", "rel"]


def make_opamp(gbw_hz: float, dc_gain_db: float = 120.0) -> OpAmp:
    """A test op-amp built directly (generic figures, no archetype)."""
    return OpAmp(name="test", gbw_hz=gbw_hz, dc_gain_db=dc_gain_db, slew_v_per_us=10,
                 swing_to_rail_v=1, noise_v_per_rthz=10e-9, noise_a_per_rthz=1e-12,
                 noise_corner_hz=10)


#: Ideal op-amp: infinite GBW makes the nodal solver use a nullor; A0 is irrelevant then.
IDEAL = make_opamp(math.inf, dc_gain_db=240.0)


def check_interface(mod: ModuleType, name: str, kind: str, inverting: bool) -> None:
    """The module offers every attribute of ``circuits.base.Topology`` plus INVERTING."""
    assert mod.NAME == name == mod.__name__.rsplit(".", 1)[1]
    assert name in TOPOLOGY_NAMES and topology(name) is mod
    assert mod.KIND == kind
    assert mod.INVERTING is inverting
    assert mod.OPAMPS == 1
    assert isinstance(mod.PARTS, tuple) and len(set(mod.PARTS)) == len(mod.PARTS)
    assert set(mod.OPTIONAL_PARTS) <= set(mod.PARTS)
    assert mod.NETS["in"] == "in" and mod.NETS["out"] == "out"
    assert isinstance(mod.REFERENCE, str) and mod.REFERENCE
    for fn in ("design", "elements", "limits"):
        assert callable(getattr(mod, fn))
    for exported in mod.__all__:
        assert hasattr(mod, exported)


def numeric_figures(mod: ModuleType, parts: dict, model: OpAmp, near_hz: float):
    """Figures of the element list from the project's polynomial reduction."""
    return section_figures(mod.elements(parts, model), kind=mod.KIND, near_hz=near_hz)


def max_response_error(mod: ModuleType, parts: dict, section: Section) -> float:
    """Largest |H_nodal - H_biquad| / max|H_biquad| over two decades around f0.

    H_biquad is the standard second-order response (``sections.section_response``,
    Schaumann & Van Valkenburg 2001, ch. 4 [mem]); H_nodal the nodal solver's.
    """
    f = section.f0_hz * np.logspace(-1, 1, 201)
    h_nodal = transfer(mod.elements(parts, IDEAL), f)
    h_ref = section_response(section, f)
    return float(np.max(np.abs(h_nodal - h_ref)) / np.max(np.abs(h_ref)))


def rational_parts(parts: dict) -> dict:
    """Part values as exact sympy rationals."""
    return {k: sp.Rational(v) for k, v in parts.items()}


def rel(a: float, b: float) -> float:
    """Relative difference |a - b| / |b|."""
    return abs(a - b) / abs(b)
