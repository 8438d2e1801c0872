"""Multiple-feedback (MFB) second-order highpass: one op-amp, inverting.

Circuit (element list)::

    in --C1-- mid --C2-- ninv          U1: + = 0, - = ninv, output out
               |          |
               R1         R2 -- out     (R2 from ninv to out)
               |
               0          C3 from mid to out

The RC dual of the MFB lowpass. Nodal analysis (checked with sympy in the tests) gives

    H(s) = -(C1/C3) s^2 / (s^2 + s (C1 + C2 + C3) / (R2 C2 C3) + 1 / (R1 R2 C2 C3))

    w0^2 = 1 / (R1 R2 C2 C3),  w0/Q = (C1 + C2 + C3) / (R2 C2 C3),  H_inf = -C1/C3,

the textbook form of this section (Williams & Taylor, *Electronic Filter Design Handbook*,
4th ed., 2006, §4 [mem]).

Design
------
C1 = C2 = C (``c_farads``), C3 = C/K with K = |H_inf|; then
R2 = Q (2K + 1) / (w0 C) and R1 = K / (Q (2K + 1) w0 C), a resistor ratio
R2/R1 = Q^2 (2K + 1)^2 / K (9 Q^2 at unity gain). Any K > 0 is reachable. Q sensitivities
are +-1/2 for R2, R1 and at most 1/2 in magnitude for the capacitors (S_C1^Q = -K/(2K+1)),
derived with sympy in the tests.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from bandwright.circuits import _filter_and_gain as common
from bandwright.circuits.base import Figures, Limits
from bandwright.circuits.elements import Element, capacitor, opamp, resistor
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.parts.notation import format_sig

__all__ = ["NAME", "KIND", "OPAMPS", "PARTS", "OPTIONAL_PARTS", "NETS", "REFERENCE",
           "INVERTING", "design", "elements", "limits", "ideal_figures",
           "noise_gain_numerator"]

NAME = "mfb_highpass"
KIND = "highpass"
OPAMPS = 1
PARTS: tuple[str, ...] = ("C1", "C2", "C3", "R1", "R2")
OPTIONAL_PARTS: tuple[str, ...] = ()
NETS: Mapping[str, str] = {"in": "in", "out": "out", "mid": "mid", "ninv": "ninv"}
REFERENCE = ("Multiple-feedback highpass as in A. B. Williams, F. J. Taylor, Electronic "
             "Filter Design Handbook, 4th ed., 2006, §4 [mem]; design equations derived by "
             "nodal analysis (sympy, tests/circuits/test_mfb_highpass.py)")
INVERTING = True


def ideal_figures(components: Mapping[str, float]) -> Figures:
    """f0, Q and high-frequency gain with an ideal op-amp.

    Parameters
    ----------
    components : mapping of str to float
        C1, C2, C3 (farads), R1, R2 (ohms).

    Returns
    -------
    Figures
        w0^2 = 1/(R1 R2 C2 C3), w0/Q = (C1 + C2 + C3)/(R2 C2 C3), gain -C1/C3 (module
        docstring).
    """
    c1, c2, c3 = components["C1"], components["C2"], components["C3"]
    r1, r2 = components["R1"], components["R2"]
    w0 = 1 / math.sqrt(r1 * r2 * c2 * c3)
    q = w0 * r2 * c2 * c3 / (c1 + c2 + c3)
    return Figures(f0_hz=w0 / (2 * math.pi), q=q, gain=-c1 / c3)


def noise_gain_numerator(components: Mapping[str, float]) -> tuple[float, float, float]:
    """(n2, n1, n0) of the ideal noise gain NG(s) = N(s)/(s^2 + (w0/Q) s + w0^2).

    Notes
    -----
    n2 = 1 + C1/C3, n1 = w0/Q + 1/(R1 C3), n0 = w0^2 (nodal analysis, checked with sympy in
    the tests). At high frequency the noise gain is 1 + K, as for an inverting amplifier.
    """
    fig = ideal_figures(components)
    w0 = 2 * math.pi * fig.f0_hz
    c1, c3 = components["C1"], components["C3"]
    return 1 + c1 / c3, w0 / fig.q + 1 / (components["R1"] * c3), w0 * w0


def _require(section: Section) -> None:
    common.require(section, kind=KIND)


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for an inverting highpass section.

    Parameters
    ----------
    section : Section
        kind "highpass", f0_hz > 0, q > 0, gain != 0 (V/V, high-frequency). The sign is
        ignored: the circuit inverts (``INVERTING``), its gain is -|gain|.
    c_farads : float
        C1 = C2, farads (C3 = C/K).

    Returns
    -------
    dict of str to float
        C1, C2, C3 (farads), R1, R2 (ohms).

    Raises
    ------
    ValueError
        If the section is not a highpass or `c_farads` is not > 0.
    InfeasibleDesign
        If the gain is 0, or f0 or Q is not > 0.

    Notes
    -----
    From w0/Q and w0^2 above with C1 = C2 = C, C3 = C/K:
    R2 = Q (2K + 1)/(w0 C), R1 = K/(Q (2K + 1) w0 C).
    """
    common.check_capacitor(c_farads)
    _require(section)
    k = abs(section.gain)
    q, w0 = section.q, 2 * math.pi * section.f0_hz
    return {"C1": c_farads, "C2": c_farads, "C3": c_farads / k,
            "R1": k / (q * (2 * k + 1) * w0 * c_farads),
            "R2": q * (2 * k + 1) / (w0 * c_farads)}


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """Element list of the section.

    Parameters and return as ``circuits.base.Topology.elements``.

    Parts C1, C2, C3 (farads), R1, R2 (ohms), all needed.
    """
    common.check_exact_parts(NAME, PARTS, components)
    return (
        capacitor("C1", "in", "mid", components["C1"]),
        resistor("R1", "mid", "0", components["R1"]),
        capacitor("C3", "mid", "out", components["C3"]),
        capacitor("C2", "mid", "ninv", components["C2"]),
        resistor("R2", "ninv", "out", components["R2"]),
        opamp("U1", "0", "ninv", "out", model),
    )


def _summary(parts: Mapping[str, float], fig: Figures) -> str:
    """The first reason of ``limits``: the design's ratios and gain."""
    return (f"R2/R1 = {format_sig(parts['R2'] / parts['R1'])}, C1 = C2 = "
            f"{format_sig(abs(fig.gain))} C3, "
            f"gain {format_sig(fig.gain)} V/V")


def limits(section: Section, model: OpAmp) -> Limits:
    """What this topology needs and offers for one highpass section.

    Parameters and return as ``circuits.base.Topology.limits``.

    Infeasible for a spread (R2/R1 = Q^2 (2K+1)^2 / K) above ``MAX_SPREAD``, or too little
    GBW. ``gbw_needed_hz`` keeps the first-order finite-GBW shifts of f0 and Q within 10 %
    (derived, ``circuits._filter_and_gain``). The noise gain rises to 1 + K above f0, so a
    wideband op-amp noise floor passes.
    """
    return common.filter_limits(section, model, kind=KIND, opamps=OPAMPS, design=design,
                                ideal_figures=ideal_figures,
                                noise_gain_numerator=noise_gain_numerator, summary=_summary)

