"""Multiple-feedback bandpass (one op-amp, inverting), equal capacitors, input divider.

Circuit (nets in brackets)::

    [in] --R1a-- [a] --C1-- [out]
                 [a] --R1b-- 0
                 [a] --C2-- [inv] --R2-- [out]
    U1: + at 0, - at [inv], output [out]

Ideal transfer (derived by nodal analysis; the form printed by Williams & Taylor,
*Electronic Filter Design Handbook*, 4th ed., 2006, §5.2 [mem]), with R1 = R1a ∥ R1b::

    H(s) = -(s / (R1a C1)) / (s^2 + s (C1 + C2)/(R2 C1 C2) + 1/(R1 R2 C1 C2))

With C1 = C2 = C:  w0^2 = 1/(R1 R2 C^2),  w0/Q = 2/(R2 C),  H(f0) = -R2/(2 R1a), so

    R2 = Q/(pi f0 C),  R1a = R2/(2|H0|),  R1b = R2/(4 Q^2 - 2|H0|)   (|H0| < 2 Q^2).

Without R1b the centre gain is -2 Q^2, the section's natural gain (common practice); a
request above it is designed at 2 Q^2 and reported by ``limits``.
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
           "INVERTING", "design", "elements", "limits", "natural_gain", "q_sensitivities",
           "noise_gain", "gbw_shift", "gbw_needed_hz"]

NAME = "mfb_bandpass"
KIND = "bandpass"
OPAMPS = 1
#: Every part, in a fixed order; R1b is left out (not fitted) at the natural gain.
PARTS = ("R1a", "R1b", "R2", "C1", "C2")
OPTIONAL_PARTS = ("R1b",)
NETS = {"in": "in", "out": "out"}
REFERENCE = ("Deliyannis, Electron. Lett. 4, 1968; Friend, IEEE ISCT 1970; Williams & Taylor, "
             "Electronic Filter Design Handbook, 4th ed., McGraw-Hill 2006, §5.2 [mem]")
#: The centre gain is negative.
INVERTING = True


def natural_gain(q: float) -> float:
    """Largest |centre gain|: 2 Q^2, reached without R1b (equal capacitors).

    Parameters
    ----------
    q : float
        Pole Q.

    Returns
    -------
    float
        2 Q^2, V/V.
    """
    return 2.0 * q * q


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for `section` with C1 = C2 = `c_farads`.

    Parameters
    ----------
    section : Section
        A bandpass section; its gain sign is ignored (the circuit inverts), |gain| is
        realised, or 2 Q^2 if |gain| is larger (see ``limits``).
    c_farads : float
        Value of both capacitors, farads: the impedance level.

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
    R2 = Q/(pi f0 C) (w0/Q = 2/(R2 C)); R1a = R2/(2|H0|); R1a ∥ R1b = R2/(4 Q^2)
    (w0^2 = 1/(R1 R2 C^2)), hence R1b = R2/(4 Q^2 - 2|H0|) (Williams & Taylor 2006, §5.2
    [mem]; derived again in the tests).
    """
    common.check_design(section, c_farads)
    q = section.q
    r2 = q / (math.pi * section.f0_hz * c_farads)
    r1a, r1b = common.divider(r2 / (4 * q * q), common.divider_ratio(section, natural_gain(q)))
    return common.fitted({"R1a": r1a, "R1b": r1b, "R2": r2, "C1": c_farads, "C2": c_farads})


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """The element list of the section.

    Parameters and return as ``circuits.base.Topology.elements``.

    R1b may be absent or ``math.inf`` (not fitted). Nets "in", "a", "inv", "out" and ground
    "0".
    """
    c = components
    return (*common.input_divider(c, "a"),
            capacitor("C1", "a", "out", c["C1"]),
            capacitor("C2", "a", "inv", c["C2"]),
            resistor("R2", "inv", "out", c["R2"]),
            opamp("U1", "0", "inv", "out", model))


def q_sensitivities(section: Section) -> dict[str, float]:
    """S_x^Q of every fitted part of the ideal design.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    dict of str to float
        S_R2 = 1/2, S_R1a = -(1/2) R1/R1a, S_R1b = -(1/2) R1/R1b, S_C1 = S_C2 = 0.

    Notes
    -----
    Q = sqrt(R2/R1) sqrt(C1 C2)/(C1 + C2) (from the transfer above); S = x/Q dQ/dx
    (Schaumann & Van Valkenburg, *Design of Analog Filters*, 2001, ch. 3 [mem]).
    R1/R1a = |H0|/(2 Q^2) is the fraction of the input conductance in R1a.
    """
    share = common.divider_ratio(section, natural_gain(section.q))
    out = {"R1a": -0.5 * share, "R2": 0.5, "C1": 0.0, "C2": 0.0}
    if share < 1:
        out["R1b"] = -0.5 * (1 - share)
    return out


def noise_gain(section: Section) -> float:
    """Noise gain at f0: 1 + 2 Q^2, whatever the centre gain.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        |V(out)/e_n| at f0, e_n in series with the non-inverting input.

    Notes
    -----
    Common practice (the feedback factor at f0 is 1/(1 + 2 Q^2) with R1 = R2/(4 Q^2));
    derived again by nodal analysis in the tests.
    """
    return 1.0 + 2.0 * section.q**2


def gbw_shift(section: Section) -> tuple[float, float]:
    """First-order relative shifts of f0 and Q per unit e = f0/GBW.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    (float, float)
        (k_f, k_q): df0/f0 ~= k_f e and dQ/Q ~= k_q e, with k_f = -Q and k_q = +Q.

    Notes
    -----
    Perturbation of the poles of the circuit with A(s) = wt/s (derived with sympy in the
    tests); the same as listed in the project's references [calc].
    """
    return -section.q, section.q


def gbw_needed_hz(section: Section) -> float:
    """GBW keeping the first-order pole movement within 10 % of the bandwidth: 10 Q² f0.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        Hz.

    Notes
    -----
    The one criterion of ``circuits.rules`` with k_f = -Q, k_q = +Q (``gbw_shift``):
    f0 max(Q·Q, Q) / 0.1. It asks half of the loop-gain rule of thumb 10 (1 + 2Q²) f0
    (open-loop gain 20 dB above the noise gain [mem]), which is stricter than any other
    topology is held to; tests/circuits/test_gbw_rule.py shows with ngspice that a section
    designed at 10 Q² f0 moves within the stated error.
    """
    return common.gbw_needed_from_shift(section, gbw_shift(section))


def limits(section: Section, model: OpAmp, *,
           r_tolerance: float = common.DEFAULT_TOLERANCE, c_tolerance: float | None = None,
           max_spread: float = common.MAX_SPREAD,
           accept_gain_shortfall: bool = False) -> Limits:
    """What this topology can do for `section` with op-amp `model`.

    Parameters and return as ``circuits.base.BandpassTopology.limits``.

    `accept_gain_shortfall`: |gain| above 2 Q^2 is a note (the design gives 2 Q^2 and a gain
    stage makes up the rest) instead of a failure. Infeasible when the op-amp GBW is below
    ``gbw_needed_hz``, the gain is out of reach (unless accepted), the resistor spread
    exceeds `max_spread`, or the worst-case tolerance Q shift exceeds 50 %
    (``_bandpass_common``).
    """
    return common.topology_limits(
        section, model, opamps=OPAMPS, design=design, gbw_needed_hz=gbw_needed_hz,
        q_sensitivities=q_sensitivities, noise_gain=noise_gain, natural_gain=natural_gain,
        accept_gain_shortfall=accept_gain_shortfall, r_tolerance=r_tolerance,
        c_tolerance=c_tolerance, max_spread=max_spread)
