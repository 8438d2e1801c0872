"""Shared test support for the lowpass, highpass and gain-stage topology tests.

The helpers compute; the tests assert. References: the project's nodal solver and
polynomial reduction (``circuits.nodal``, ``circuits.figures``) for numbers, and
``symbolic_lp.py`` (sympy nodal analysis of the element list) for formulas.
"""

from __future__ import annotations

import math
from types import ModuleType

import numpy as np
import sympy as sp

from bandwright.circuits import TOPOLOGY_NAMES, topology
from bandwright.circuits import _filter_and_gain as common
from bandwright.circuits.figures import section_figures
from bandwright.circuits.nodal import transfer
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section, section_response

from symbolic_lp import S, biquad_figures, dominant_pair_shift, element_symbols, noise_gain
from symbolic_lp import transfer as sympy_transfer

__all__ = ["make_opamp", "IDEAL", "check_interface", "numeric_figures", "max_response_error",
           "rational_parts", "rel", "sympy_design_figures", "noise_gain_coefficients",
           "first_order_shift", "exact_and_first_order_shifts", "sympy_q_sensitivities",
           "FLAT_FREQS_HZ", "gain_section", "SALLEN_KEY_CASES"]

#: (f0_hz, Q, gain) for both Sallen-Key sections: Butterworth/Chebyshev-like Qs, a Q below
#: 1/2 (the smaller part swaps), the equal-component gain 3 - 1/Q, and large gains.
SALLEN_KEY_CASES = [
    (1e3, 0.5412, 1.0),
    (40e3, 1.3065, 1.0),
    (100.0, 0.3, 1.0),
    (5e3, 2.0, 1.5),
    (5e3, 5.0, 3 - 1 / 5.0),
    (2e3, 0.7071, 10.0),
    (300.0, 8.0, 1.0),
]
#: Frequencies at which a flat gain stage is checked, DC to 10 MHz.
FLAT_FREQS_HZ = np.array([0.0, 10.0, 1e3, 1e5, 1e7])


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


def gain_section(gain: float) -> Section:
    """A gain section (f0 and Q are 0 for a gain stage)."""
    return Section("gain", 0.0, 0.0, gain)


def sympy_design_figures(mod: ModuleType, parts: dict) -> tuple[float, float, float]:
    """(f0_hz, Q, gain) of the designed values in the sympy-derived H(s) of the element list.

    The gain is H(0) for a lowpass and H(s -> oo) for a highpass (``biquad_figures``).
    """
    w0_sq, bw, k = biquad_figures(sympy_transfer(mod.elements(parts, IDEAL),
                                                 values=rational_parts(parts)), mod.KIND)
    w0 = math.sqrt(float(w0_sq))
    return w0 / (2 * math.pi), w0 / float(bw), float(k)


def noise_gain_coefficients(mod: ModuleType, parts: dict) -> tuple[sp.Expr, list[float]]:
    """[sympy] NG(s) of a source in series with U1's + input, and its numerator's
    coefficients (highest power first) over a monic denominator."""
    ng = noise_gain(mod.elements(parts, IDEAL), "U1", values=rational_parts(parts))
    num, den = sp.fraction(sp.cancel(ng))
    lead = sp.Poly(den, S).all_coeffs()[0]
    return ng, [float(c / lead) for c in sp.Poly(num, S).all_coeffs()]


def first_order_shift(mod: ModuleType, parts: dict) -> tuple[float, float]:
    """(k_f, k_q) of the module's figures by ``_filter_and_gain.finite_gbw_shift``."""
    fig = mod.ideal_figures(parts)
    return common.finite_gbw_shift(fig.f0_hz, fig.q, mod.noise_gain_numerator(parts))


def exact_and_first_order_shifts(mod: ModuleType, parts: dict, f0_hz: float, q: float):
    """e, the exact pole shifts (df0/f0, dQ/Q) and the first-order (k_f, k_q).

    The exact shifts are those of the sympy poles with every op-amp A = wt/s at
    e = f0/GBW = 1e-7 (``dominant_pair_shift``); e is returned as a sympy Rational.
    """
    e = sp.Rational(1, 10**7)
    h = sympy_transfer(mod.elements(parts, IDEAL), values=rational_parts(parts),
                       opamp_gain=2 * sp.pi * sp.Rational(f0_hz) / e / S)
    return e, dominant_pair_shift(h, f0_hz, q), first_order_shift(mod, parts)


def sympy_q_sensitivities(mod: ModuleType, parts: dict) -> dict[str, float]:
    """[sympy] S_x^Q = x/Q dQ/dx of every part of the element list, at the given values."""
    els = mod.elements(parts, IDEAL)
    sym = element_symbols(els)
    w0_sq, bw, _ = biquad_figures(sympy_transfer(els), mod.KIND)
    q_expr = sp.sqrt(w0_sq) / bw
    at = {sym[k]: sp.Rational(v) for k, v in parts.items()}
    return {k: float((x / q_expr * sp.diff(q_expr, x)).subs(at)) for k, x in sym.items()}
