"""Dual-amplifier bandpass (two op-amps, non-inverting): a parallel tank with a simulated inductor.

Circuit (nets in brackets)::

    [in] --R1a-- [x] --R1b-- 0          U1: + at [n5], - at [n3], output [gic]
                 [x] --C1--  0          U2: + at [x],  - at [n3], output [out]
                 [x] --R2--  [gic] --C2-- [n3] --R3-- [out] --R4-- [n5] --R5-- 0

The two op-amps and R2, C2, R3, R4, R5 form a generalised impedance converter (GIC) that
presents Z = s C2 R2 R3 R5/R4 (an inductor) at [x]; with C1 it makes a parallel tank
driven through R1 = R1a ∥ R1b. The virtual shorts hold [n3] and [n5] at V(x), so
V(out) = V(x) (1 + R4/R5) = 2 V(x) for R4 = R5.

Ideal transfer (derived by nodal analysis in the tests)::

    H(s) = (1 + R4/R5) (R1/R1a) (s/(R1 C1)) / (s^2 + s/(R1 C1) + R4/(R2 R3 R5 C1 C2))

Design (C1 = C2 = C, R = 1/(w0 C)): R2 = R3 = R4 = R5 = R, R1 = Q R, gain 2 at f0 without
R1b. These are the equations recalled from Williams & Taylor, *Electronic Filter Design
Handbook*, 4th ed., 2006, §5.2 [mem] (R1 = Q/(w0 C), R2 = R3 = 1/(w0 C), gain 2); the
derivation confirms them. A gain |H0| < 2 splits R1 into R1a = 2 R1/|H0| and
R1b = 2 R1/(2 - |H0|) (R1a ∥ R1b = R1); a gain above 2 is designed at 2 and reported by
``limits``.

Wiring choice. Each op-amp of the GIC must sense two of the nets [x], [n3], [n5]; of the
24 ways to connect them, 7 are stable with single-pole op-amps (checked with sympy,
A(s) = wt/s), and only the one above (both inverting inputs on [n3]) leaves Q unmoved to
first order in e = f0/GBW: df0/f0 = -2 e, dQ/Q = 0 e (the second-order Q shift is about
-4 Q e^2, seen in the numeric tests). The matched pair of op-amps cancels the Q error.
The textbook GIC wiring (U1 sensing [x]/[n3], U2 sensing [n3]/[n5]) keeps f0 but moves
Q by about +6 Q e; it is not used.

The first amplifier's output [gic] carries (derived in the tests)::

    H_gic(s) = (|H0|/(2Q)) w0 (s - w0) / (s^2 + (w0/Q) s + w0^2)

so it passes low tones with gain |H0|/(2Q) and reaches |H0|/sqrt(2) at f0.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from bandwright.circuits import _bandpass_common as common
from bandwright.circuits.base import Limits
from bandwright.circuits.elements import Element, capacitor, opamp, resistor
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section

__all__ = ["NAME", "KIND", "OPAMPS", "PARTS", "OPTIONAL_PARTS", "NETS", "REFERENCE",
           "INVERTING", "NATURAL_GAIN", "design", "elements", "limits", "q_sensitivities",
           "noise_gain", "gbw_shift", "gbw_needed_hz"]

NAME = "dual_amp_bandpass"
KIND = "bandpass"
OPAMPS = 2
#: Every part, in a fixed order; R1b is left out (not fitted) at the natural gain 2.
PARTS = ("R1a", "R1b", "R2", "R3", "R4", "R5", "C1", "C2")
OPTIONAL_PARTS = ("R1b",)
#: "gic" is the first op-amp's output (internal).
NETS = {"in": "in", "out": "out", "gic": "gic"}
REFERENCE = ("Williams & Taylor, Electronic Filter Design Handbook, 4th ed., McGraw-Hill "
             "2006, §5.2, dual-amplifier bandpass [mem; equations re-derived]")
#: The centre gain is positive.
INVERTING = False
#: Centre gain without the input divider (R4 = R5), V/V.
NATURAL_GAIN = 2.0


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for `section` with C1 = C2 = `c_farads`.

    Parameters
    ----------
    section : Section
        A bandpass section; |gain| is realised (the circuit does not invert), or 2 if
        |gain| is larger (see ``limits``).
    c_farads : float
        Value of both capacitors, farads.

    Returns
    -------
    dict of str to float
        Part name -> ohms or farads, in ``PARTS`` order; R1b is absent when not fitted.

    Raises
    ------
    ValueError
        If the section is not a bandpass with f0 > 0, Q > 0, gain != 0, or c_farads <= 0.

    Notes
    -----
    R = 1/(w0 C): R2 = R3 = R (w0^2 = R4/(R2 R3 R5 C1 C2)), R4 = R5 = R (gain 1 + R4/R5 = 2;
    their value is free, R keeps the spread set by Q alone), R1 = Q R
    (w0/Q = 1/(R1 C1)); Williams & Taylor 2006, §5.2 [mem], re-derived (module docstring).
    """
    common.check_design(section, c_farads)
    r = 1.0 / (2 * math.pi * section.f0_hz * c_farads)
    r1a, r1b = common.divider(section.q * r, common.divider_ratio(section, NATURAL_GAIN))
    return common.fitted({"R1a": r1a, "R1b": r1b, "R2": r, "R3": r, "R4": r, "R5": r,
                          "C1": c_farads, "C2": c_farads})


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """The element list of the section (both op-amps use `model`).

    Parameters and return as ``circuits.base.Topology.elements``.

    R1b may be absent or ``math.inf`` (not fitted). Nets "in", "x", "gic", "n3", "out", "n5"
    and ground "0".
    """
    c = components
    return (*common.input_divider(c, "x"),
            capacitor("C1", "x", "0", c["C1"]),
            resistor("R2", "x", "gic", c["R2"]),
            capacitor("C2", "gic", "n3", c["C2"]),
            resistor("R3", "n3", "out", c["R3"]),
            resistor("R4", "out", "n5", c["R4"]),
            resistor("R5", "n5", "0", c["R5"]),
            opamp("U1", "n5", "n3", "gic", model),
            opamp("U2", "x", "n3", "out", model))


def q_sensitivities(section: Section) -> dict[str, float]:
    """S_x^Q of every fitted part.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    dict of str to float
        S_R1a = rho, S_R1b = 1 - rho (rho = |H0|/2, the divider ratio), S_C1 = S_R4 = 1/2,
        S_C2 = S_R2 = S_R3 = S_R5 = -1/2.

    Notes
    -----
    Q = R1 sqrt(C1 R4 / (C2 R2 R3 R5)) from the transfer above; S = x/Q dQ/dx
    (Schaumann & Van Valkenburg, *Design of Analog Filters*, 2001, ch. 3 [mem]).
    """
    rho = common.divider_ratio(section, NATURAL_GAIN)
    out = {"R1a": rho, "R2": -0.5, "R3": -0.5, "R4": 0.5, "R5": -0.5, "C1": 0.5, "C2": -0.5}
    if rho < 1:
        out["R1b"] = 1 - rho
    return out


def noise_gain(section: Section) -> float:
    """Noise gain at f0 to the output, largest over the two op-amps: 2 sqrt(4 Q^2 + 1).

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        |V(out)/e_n| at f0.

    Notes
    -----
    Derived by nodal analysis (tests): U1 gives 2 sqrt(4Q^2 + 1), U2 gives
    2 sqrt(2Q^2 + 2Q + 1), whatever the centre gain.
    """
    q = section.q
    return max(2 * math.sqrt(4 * q * q + 1), 2 * math.sqrt(2 * q * q + 2 * q + 1))


def gbw_shift(section: Section) -> tuple[float, float]:
    """First-order relative shifts of f0 and Q per unit e = f0/GBW: (-2, 0).

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    (float, float)
        (k_f, k_q): df0/f0 ~= -2 e; dQ/Q has no first-order term (about -4 Q e^2).

    Notes
    -----
    Perturbation of the poles with both op-amps A(s) = wt/s, derived with sympy on the
    element list (tests).
    """
    return -2.0, 0.0


def gbw_needed_hz(section: Section) -> float:
    """GBW keeping the first-order pole movement within 10 % of the bandwidth: 20 Q f0.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        f0 max(Q |k_f|, |k_q|) / 0.1 = 20 Q f0, Hz. The second-order Q shift, about
        4 Q e^2, is then at most 0.01/Q.
    """
    return common.gbw_needed_from_shift(section, gbw_shift(section))


def limits(section: Section, model: OpAmp, *,
           r_tolerance: float = common.DEFAULT_TOLERANCE, c_tolerance: float | None = None,
           max_spread: float = common.MAX_SPREAD,
           accept_gain_shortfall: bool = False) -> Limits:
    """What this topology can do for `section` with op-amp `model` (both amplifiers).

    Parameters and return as ``circuits.base.BandpassTopology.limits``.

    The resistor spread is R1a/R over Q and gain: 2Q/|H0|. `accept_gain_shortfall`: |gain|
    above 2 is a note (the design gives 2 and a gain stage makes up the rest) instead of a
    failure. Infeasible when the op-amp GBW is below ``gbw_needed_hz``, the gain is above 2
    (unless accepted) or the spread exceeds `max_spread`.
    """
    return common.topology_limits(
        section, model, opamps=OPAMPS, design=design, gbw_needed_hz=gbw_needed_hz,
        q_sensitivities=q_sensitivities, noise_gain=noise_gain,
        natural_gain=lambda q: NATURAL_GAIN,
        accept_gain_shortfall=accept_gain_shortfall, r_tolerance=r_tolerance,
        c_tolerance=c_tolerance, max_spread=max_spread)
