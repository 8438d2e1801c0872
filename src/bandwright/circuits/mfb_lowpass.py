"""Multiple-feedback (MFB) second-order lowpass: one op-amp, inverting.

Circuit (element list)::

    in --R1-- mid --R3-- ninv          U1: + = 0, - = ninv, output out
               |          |
               C1         C2 -- out     (C2 from ninv to out)
               |
               0          R2 from mid to out

Nodal analysis (checked with sympy in the tests) gives

    H(s) = -(R2/R1) / (s^2 R2 R3 C1 C2 + s R2 R3 C2 (1/R1 + 1/R2 + 1/R3) + 1)

    w0^2 = 1 / (R2 R3 C1 C2),  w0/Q = (1/R1 + 1/R2 + 1/R3) / C1,  H0 = -R2/R1,

the textbook form of this section (Williams & Taylor, *Electronic Filter Design Handbook*,
4th ed., 2006, §3 [mem]).

Design
------
With K = |H0| (so 1/R1 = K/R2) and the capacitors fixed, Q is largest, at
Q_max = sqrt(C1/C2) / (2 sqrt(1 + K)), when R3 = R2/(1 + K). The design takes that
stationary point: C1/C2 = 4 Q^2 (1 + K) (the smallest capacitor ratio that reaches Q at all),
R2 = 1 / (2 Q w0 C2), R3 = R2 / (1 + K), R1 = R2 / K. At this point S^Q is 0 for R3,
+-1/2 for C1, C2 and +-K / (2 (1 + K)) for R1, R2: no part moves Q by more than half its
own error (derived with sympy in the tests).

``c_farads`` is the **smaller** capacitor: C2 when 4 Q^2 (1 + K) >= 1, else C1. C1/C2 is the
minimum ratio, so a rounded C1/C2 must not fall below it; ``resistors_for_capacitors``
re-solves the resistors exactly for rounded capacitors (with some ratio to spare).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from bandwright.circuits import _filter_and_gain as common
from bandwright.circuits.base import Figures, Limits
from bandwright.circuits.elements import Element, capacitor, opamp, resistor
from bandwright.errors import InfeasibleDesign
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.parts.notation import format_sig

__all__ = ["NAME", "KIND", "OPAMPS", "PARTS", "OPTIONAL_PARTS", "NETS", "REFERENCE",
           "INVERTING", "design", "elements", "limits", "ideal_figures",
           "resistors_for_capacitors", "noise_gain_numerator"]

NAME = "mfb_lowpass"
KIND = "lowpass"
OPAMPS = 1
PARTS: tuple[str, ...] = ("R1", "R2", "R3", "C1", "C2")
OPTIONAL_PARTS: tuple[str, ...] = ()
NETS: Mapping[str, str] = {"in": "in", "out": "out", "mid": "mid", "ninv": "ninv"}
REFERENCE = ("Multiple-feedback lowpass as in A. B. Williams, F. J. Taylor, Electronic Filter "
             "Design Handbook, 4th ed., 2006, §3 [mem]; design equations derived by nodal "
             "analysis (sympy, tests/circuits/test_mfb_lowpass.py)")
INVERTING = True


def ideal_figures(components: Mapping[str, float]) -> Figures:
    """f0, Q and DC gain with an ideal op-amp.

    Parameters
    ----------
    components : mapping of str to float
        R1, R2, R3 (ohms), C1, C2 (farads).

    Returns
    -------
    Figures
        w0^2 = 1/(R2 R3 C1 C2), w0/Q = (1/R1 + 1/R2 + 1/R3)/C1, gain -R2/R1 (module
        docstring).
    """
    r1, r2, r3 = components["R1"], components["R2"], components["R3"]
    c1, c2 = components["C1"], components["C2"]
    w0 = 1 / math.sqrt(r2 * r3 * c1 * c2)
    q = w0 * c1 / (1 / r1 + 1 / r2 + 1 / r3)
    return Figures(f0_hz=w0 / (2 * math.pi), q=q, gain=-r2 / r1)


def noise_gain_numerator(components: Mapping[str, float]) -> tuple[float, float, float]:
    """(n2, n1, n0) of the ideal noise gain NG(s) = N(s)/(s^2 + (w0/Q) s + w0^2).

    Notes
    -----
    NG = 1/beta, beta the transfer from out to the inverting input with the input grounded:
    n2 = 1, n1 = w0/Q + 1/(R3 C2), n0 = w0^2 (1 + R2/R1) (nodal analysis, checked with sympy
    in the tests). At DC the noise gain is 1 + K, as for an inverting amplifier.
    """
    fig = ideal_figures(components)
    w0 = 2 * math.pi * fig.f0_hz
    k = components["R2"] / components["R1"]
    return 1.0, w0 / fig.q + 1 / (components["R3"] * components["C2"]), w0 * w0 * (1 + k)


def _require(section: Section) -> None:
    common.require(section, kind=KIND)


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for an inverting lowpass section.

    Parameters
    ----------
    section : Section
        kind "lowpass", f0_hz > 0, q > 0, gain != 0 (V/V, DC). The sign is ignored: the
        circuit inverts (``INVERTING``), its DC gain is -|gain|.
    c_farads : float
        The smaller of C1 and C2, farads.

    Returns
    -------
    dict of str to float
        R1, R2, R3 (ohms), C1, C2 (farads).

    Raises
    ------
    ValueError
        If the section is not a lowpass or `c_farads` is not > 0.
    InfeasibleDesign
        If the gain is 0, or f0 or Q is not > 0.

    Notes
    -----
    C1/C2 = 4 Q^2 (1 + K), R2 = 1/(2 Q w0 C2), R3 = R2/(1 + K), R1 = R2/K with K = |H0|:
    the stationary (largest-Q) point of the equations in the module docstring.
    """
    common.check_capacitor(c_farads)
    _require(section)
    k = abs(section.gain)
    q = section.q
    ratio = 4 * q * q * (1 + k)                                    # C1 / C2
    c1, c2 = (ratio * c_farads, c_farads) if ratio >= 1 else (c_farads, c_farads / ratio)
    w0 = 2 * math.pi * section.f0_hz
    r2 = 1 / (2 * q * w0 * c2)
    return {"R1": r2 / k, "R2": r2, "R3": r2 / (1 + k), "C1": c1, "C2": c2}


def resistors_for_capacitors(section: Section, *, c1_farads: float,
                             c2_farads: float) -> dict[str, float]:
    """R1, R2, R3 that give the section exactly with the given capacitors.

    Parameters
    ----------
    section : Section
        kind "lowpass", gain != 0 (sign ignored).
    c1_farads, c2_farads : float
        Grounded and feedback capacitor, farads (e.g. already rounded to a series).

    Returns
    -------
    dict of str to float
        R1, R2, R3, C1, C2. Of the two solutions, the one with the smaller resistor spread.

    Raises
    ------
    InfeasibleDesign
        If C1/C2 < 4 Q^2 (1 + K): no resistors reach Q.

    Notes
    -----
    With G = 1/R2 and 1/R1 = K G: (1 + K) G^2 - (w0 C1 / Q) G + w0^2 C1 C2 = 0, and
    R3 = 1 / (w0^2 C1 C2 R2) (module docstring).
    """
    _require(section)
    k = abs(section.gain)
    q, w0 = section.q, 2 * math.pi * section.f0_hz
    c1, c2 = c1_farads, c2_farads
    disc = (w0 * c1 / q) ** 2 - 4 * (1 + k) * w0 * w0 * c1 * c2
    if -1e-9 * (w0 * c1 / q) ** 2 < disc < 0:
        disc = 0.0  # round-off at exactly the minimum ratio (the design's own point)
    if disc < 0:
        raise InfeasibleDesign(f"C1/C2 = {format_sig(c1 / c2)} is below the {format_sig(4 * q * q * (1 + k))} "
                               f"needed for Q = {format_sig(q)} at gain {format_sig(-k)}")
    best = None
    for g in ((w0 * c1 / q + math.sqrt(disc)) / (2 * (1 + k)),
              (w0 * c1 / q - math.sqrt(disc)) / (2 * (1 + k))):
        r2 = 1 / g
        parts = {"R1": r2 / k, "R2": r2, "R3": 1 / (w0 * w0 * c1 * c2 * r2), "C1": c1, "C2": c2}
        rs = [parts["R1"], parts["R2"], parts["R3"]]
        key = max(rs) / min(rs)
        if best is None or key < best[0]:
            best = (key, parts)
    return best[1]


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """Element list of the section.

    Parameters and return as ``circuits.base.Topology.elements``.

    Parts R1, R2, R3 (ohms), C1, C2 (farads), all needed.
    """
    common.check_exact_parts(NAME, PARTS, components)
    return (
        resistor("R1", "in", "mid", components["R1"]),
        capacitor("C1", "mid", "0", components["C1"]),
        resistor("R2", "mid", "out", components["R2"]),
        resistor("R3", "mid", "ninv", components["R3"]),
        capacitor("C2", "ninv", "out", components["C2"]),
        opamp("U1", "0", "ninv", "out", model),
    )


def _summary(parts: Mapping[str, float], fig: Figures) -> str:
    """The first reason of ``limits``: the design's ratios and gain."""
    return f"C1/C2 = {format_sig(parts['C1'] / parts['C2'])} = 4Q^2(1+K), gain {format_sig(fig.gain)} V/V"


def limits(section: Section, model: OpAmp) -> Limits:
    """What this topology needs and offers for one lowpass section.

    Parameters and return as ``circuits.base.Topology.limits``.

    Infeasible for a spread (C1/C2 = 4 Q^2 (1 + K), or the resistors) above ``MAX_SPREAD``,
    or too little GBW. ``gbw_needed_hz`` keeps the first-order finite-GBW shifts of f0 and Q
    within 10 % (derived, ``circuits._filter_and_gain``).
    """
    return common.filter_limits(section, model, kind=KIND, opamps=OPAMPS, design=design,
                                ideal_figures=ideal_figures,
                                noise_gain_numerator=noise_gain_numerator, summary=_summary)

