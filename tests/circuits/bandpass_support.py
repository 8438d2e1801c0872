"""Shared test support for the five bandpass topology tests.

References used by the helpers: the project's nodal solver and polynomial reduction
(``circuits.nodal``, ``circuits.figures``) for numbers, and ``symbolic.py`` (sympy nodal
analysis) for formulas. The helpers compute; the tests assert.
"""

from __future__ import annotations

import math
from types import ModuleType

import numpy as np
import pytest
import sympy as sp

from bandwright.circuits import TOPOLOGY_NAMES, topology
from bandwright.circuits.elements import opamp_output_nets
from bandwright.circuits.figures import section_figures
from bandwright.circuits.nodal import transfer as nodal_transfer
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section, section_response

from symbolic import bandpass_figures, noise_gain, part_symbols, transfer

__all__ = ["make_opamp", "IDEAL", "GENERAL_PURPOSE", "check_interface", "ideal_figures",
           "built_figures", "max_response_error", "rel", "unit_parts", "exact",
           "numeric_sensitivities", "numeric_noise_gain", "C_FARADS", "bandpass_section",
           "symbolic_fixtures", "sensitivities_against_sympy", "sympy_noise_gains",
           "built_shifts_per_e"]

#: The impedance-level capacitor of the numeric checks.
C_FARADS = 10e-9


def make_opamp(gbw_hz: float, dc_gain_db: float = 120.0) -> OpAmp:
    """A test op-amp built directly (generic figures, no archetype)."""
    return OpAmp(name="test", gbw_hz=gbw_hz, dc_gain_db=dc_gain_db, slew_v_per_us=10,
                 swing_to_rail_v=1, noise_v_per_rthz=10e-9, noise_a_per_rthz=1e-12,
                 noise_corner_hz=10)


#: Ideal op-amp: infinite GBW makes the nodal solver use a nullor.
IDEAL = make_opamp(math.inf, dc_gain_db=240.0)
#: A general-purpose op-amp archetype for the trade-fact checks (typical figures).
GENERAL_PURPOSE = make_opamp(1e6, dc_gain_db=100.0)


def check_interface(mod: ModuleType, name: str, *, inverting: bool, opamps: int) -> None:
    """The module offers the ``circuits.base.Topology`` attributes, INVERTING, and nets
    named after their roles."""
    assert mod.NAME == name == mod.__name__.rsplit(".", 1)[1]
    assert name in TOPOLOGY_NAMES and topology(name) is mod
    assert mod.KIND == "bandpass"
    assert mod.INVERTING is inverting
    assert mod.OPAMPS == opamps
    assert isinstance(mod.PARTS, tuple) and len(set(mod.PARTS)) == len(mod.PARTS)
    assert set(mod.OPTIONAL_PARTS) <= set(mod.PARTS)
    assert isinstance(mod.REFERENCE, str) and mod.REFERENCE
    for exported in mod.__all__:
        assert hasattr(mod, exported)
    els = mod.elements(unit_parts(mod), IDEAL)
    outputs = opamp_output_nets(els)
    assert len(outputs) == opamps == len(set(outputs))
    assert mod.NETS["in"] == "in" and mod.NETS["out"] == "out" and "out" in outputs
    internal = {role: net for role, net in mod.NETS.items() if role not in ("in", "out")}
    # every op-amp output has a role, and internal outputs are named after theirs
    assert set(outputs) == {"out", *internal.values()}
    assert all(role == net for role, net in internal.items())
    assert {e.name for e in els if e.kind in ("R", "C")} == set(mod.PARTS)


def unit_parts(mod: ModuleType) -> dict[str, float]:
    """Every part at 1 (ohm or farad): an element list with all parts fitted."""
    return {p: 1.0 for p in mod.PARTS}


def ideal_figures(mod: ModuleType, section: Section, c_farads: float = C_FARADS):
    """Figures of the designed section with an ideal op-amp (nodal polynomial reduction)."""
    parts = mod.design(section, c_farads=c_farads)
    return section_figures(mod.elements(parts, IDEAL), kind="bandpass",
                           near_hz=section.f0_hz)


def built_figures(mod: ModuleType, section: Section, model: OpAmp,
                  c_farads: float = C_FARADS):
    """Figures of the designed (ideal-op-amp) section built with `model`."""
    parts = mod.design(section, c_farads=c_farads)
    return section_figures(mod.elements(parts, model), kind="bandpass",
                           near_hz=section.f0_hz)


def max_response_error(mod: ModuleType, section: Section, gain: float) -> float:
    """Largest |H_nodal - H_biquad| / max|H_biquad| over two decades around f0.

    H_biquad is the standard bandpass biquad with centre gain `gain` (signed)
    (``sections.section_response``; Schaumann & Van Valkenburg 2001, ch. 4 [mem]).
    """
    f = section.f0_hz * np.logspace(-1, 1, 201)
    parts = mod.design(section, c_farads=C_FARADS)
    h_nodal = nodal_transfer(mod.elements(parts, IDEAL), f)
    ref = Section(kind="bandpass", f0_hz=section.f0_hz, q=section.q, gain=gain)
    h_ref = section_response(ref, f)
    return float(np.max(np.abs(h_nodal - h_ref)) / np.max(np.abs(h_ref)))


def exact(parts: dict[str, float]) -> dict[str, sp.Expr]:
    """Part values as exact sympy rationals (of the binary floats)."""
    return {k: sp.Rational(v) for k, v in parts.items()}


def numeric_sensitivities(q_expr: sp.Expr, parts: dict[str, float]) -> dict[str, float]:
    """S_x^Q = (x/Q) dQ/dx of a sympy Q(parts) at the given values, every part."""
    syms = {s.name: s for s in q_expr.free_symbols}
    at = {syms[k]: sp.Float(v, 30) for k, v in parts.items() if k in syms}
    out = {}
    for name, x in syms.items():
        out[name] = float((x / q_expr * sp.diff(q_expr, x)).subs(at))
    return out


def numeric_noise_gain(ng: sp.Expr, f0_hz: float) -> float:
    """|NG(j 2 pi f0)| of a sympy noise gain in s."""
    s = sp.Symbol("s")
    return float(abs(complex(ng.subs(s, 2j * math.pi * f0_hz))))


def rel(a: float, b: float) -> float:
    """Relative difference |a - b| / |b|."""
    return abs(a - b) / abs(b)


def bandpass_section(f0_hz: float, q: float, gain: float) -> Section:
    """A bandpass section."""
    return Section(kind="bandpass", f0_hz=f0_hz, q=q, gain=gain)


def symbolic_fixtures(mod: ModuleType):
    """Module-scoped fixtures ``p`` and ``h_symbolic`` of topology `mod`, to assign in a
    test module: ``p, h_symbolic = symbolic_fixtures(mod)``."""

    @pytest.fixture(scope="module")
    def p():
        """A positive sympy symbol per part, named after it."""
        return part_symbols(mod.elements(unit_parts(mod), IDEAL))

    @pytest.fixture(scope="module")
    def h_symbolic():
        """[sympy] V(out)/V(in) of the element list, every part a symbol."""
        return transfer(mod.elements(unit_parts(mod), IDEAL))

    return p, h_symbolic


def sensitivities_against_sympy(mod: ModuleType, section: Section, h_symbolic: sp.Expr):
    """(parts, derived, mine) for `section` designed at 1 nF.

    ``derived`` is S_x^Q = (x/Q) dQ/dx of the Q of `h_symbolic` (``bandpass_figures``) at
    the designed values, with R1b taken to infinity when the topology has one and it is not
    fitted; ``mine`` is the module's ``q_sensitivities(section)``.
    """
    parts = mod.design(section, c_farads=1e-9)
    _, q_expr, _ = bandpass_figures(h_symbolic)
    if "R1b" in mod.PARTS and "R1b" not in parts:
        q_expr = sp.limit(q_expr, sp.Symbol("R1b", positive=True), sp.oo)
    return parts, numeric_sensitivities(q_expr, parts), mod.q_sensitivities(section)


def sympy_noise_gains(mod: ModuleType, section: Section,
                      opamps: tuple[str, ...] = ("U1",)) -> list[float]:
    """[sympy] |V(out)/e_n| at f0 for e_n in series with each op-amp's + input, in order,
    of `section` designed at 1 nF (exact part values)."""
    parts = mod.design(section, c_farads=1e-9)
    els = mod.elements(parts, IDEAL)
    vals = exact(parts)
    return [numeric_noise_gain(noise_gain(els, u, values=vals), section.f0_hz) for u in opamps]


def built_shifts_per_e(mod: ModuleType, section: Section, e: float) -> tuple[float, float]:
    """[nodal] (df0/f0, dQ/Q) per e of the section built with GBW = f0/e (A0 240 dB)."""
    fig = built_figures(mod, section, make_opamp(section.f0_hz / e, dc_gain_db=240))
    return (fig.f0_hz / section.f0_hz - 1) / e, (fig.q / section.q - 1) / e
