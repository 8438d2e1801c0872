"""Sallen-Key bandpass (one op-amp, non-inverting, positive feedback), equal-value design.

Circuit (nets in brackets)::

    [in] --R1a-- [a] --R2-- [out]          U1: + at [b], - at [fb], output [out]
                 [a] --R1b-- 0             amplifier gain K = 1 + Ra/Rb
                 [a] --C1--  0
                 [a] --C2--  [b] --R3-- 0
    [out] --Ra-- [fb] --Rb-- 0

Ideal transfer (derived by nodal analysis, see the tests; R1 = R1a ∥ R1b): with
R1 = R2 = R, R3 = 2R, C1 = C2 = C (Sallen & Key, IRE Trans. Circuit Theory CT-2, 1955
[mem]; the equal-value bandpass design)::

    w0 = 1/(R C),   Q = 1/(3 - K),   H(f0) = K Q = 3 Q - 1,   S_K^Q = 3 Q - 1.

The centre gain is tied to Q. A lower gain is reached by splitting R1 into a divider
(R1a from the input, R1b to ground, R1a ∥ R1b = R, ratio |H0|/(3Q - 1)), which leaves
f0 and Q untouched; a higher one is designed at 3Q - 1 and reported by ``limits``.

Positive feedback: the damping 3 - K is a small difference at high Q, so part tolerances
move Q by sum |S_x^Q| t = (9Q - 9/2) t in the worst case, and the section can turn into an
oscillator (common practice). ``limits`` rejects it when that shift exceeds 50 %.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from bandwright.circuits import _bandpass_common as common
from bandwright.circuits.base import Limits
from bandwright.circuits.elements import Element, capacitor, opamp, resistor
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.parts.notation import format_sig

__all__ = ["NAME", "KIND", "OPAMPS", "PARTS", "OPTIONAL_PARTS", "NETS", "REFERENCE",
           "INVERTING", "design", "elements", "limits", "amplifier_gain", "natural_gain",
           "q_sensitivities", "noise_gain", "gbw_shift", "gbw_needed_hz", "tolerance_q_max"]

NAME = "sallen_key_bandpass"
KIND = "bandpass"
OPAMPS = 1
#: Every part, in a fixed order; R1b is left out (not fitted) at the natural gain.
PARTS = ("R1a", "R1b", "R2", "R3", "C1", "C2", "Ra", "Rb")
OPTIONAL_PARTS = ("R1b",)
NETS = {"in": "in", "out": "out"}
REFERENCE = ("Sallen & Key, IRE Trans. Circuit Theory CT-2, 1955 [mem]; equal-value "
             "bandpass R1 = R2 = R, R3 = 2R, C1 = C2, Q = 1/(3 - K)")
#: The centre gain is positive.
INVERTING = False


def amplifier_gain(q: float) -> float:
    """Non-inverting amplifier gain K = 3 - 1/Q of the equal-value design.

    Parameters
    ----------
    q : float
        Pole Q (> 1/2 for K > 1).

    Returns
    -------
    float
        K, V/V.
    """
    return 3.0 - 1.0 / q


def natural_gain(q: float) -> float:
    """Largest |centre gain|: K Q = 3 Q - 1 (no input divider).

    Parameters
    ----------
    q : float
        Pole Q.

    Returns
    -------
    float
        V/V.
    """
    return 3.0 * q - 1.0


def _problems(section: Section) -> tuple[str, ...]:
    if section.q <= 0.5:
        return (f"Q {format_sig(section.q)}: needs amplifier gain K = 3 - 1/Q = "
                f"{format_sig(amplifier_gain(section.q))} V/V, below the 1 V/V a non-inverting "
                "amplifier reaches (Q must exceed 0.5)",)
    return ()


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for `section` with C1 = C2 = `c_farads`.

    Parameters
    ----------
    section : Section
        A bandpass section; |gain| is realised (the circuit does not invert), or 3Q - 1
        if |gain| is larger (see ``limits``).
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
    InfeasibleDesign
        If Q <= 1/2 (K would be <= 1).

    Notes
    -----
    R = 1/(w0 C); R1a ∥ R1b = R2 = R, R3 = 2 R; Ra/Rb = K - 1 = 2 - 1/Q, the smaller of
    the two equal to R (module docstring).
    """
    common.check_design(section, c_farads, problems=_problems)
    q = section.q
    r = 1.0 / (2 * math.pi * section.f0_hz * c_farads)
    r1a, r1b = common.divider(r, common.divider_ratio(section, natural_gain(q)))
    ratio = amplifier_gain(q) - 1.0
    ra, rb = (ratio * r, r) if ratio >= 1 else (r, r / ratio)
    return common.fitted({"R1a": r1a, "R1b": r1b, "R2": r, "R3": 2 * r, "C1": c_farads,
                          "C2": c_farads, "Ra": ra, "Rb": rb})


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """The element list of the section.

    Parameters and return as ``circuits.base.Topology.elements``.

    R1b may be absent or ``math.inf`` (not fitted). Nets "in", "a", "b", "fb", "out" and
    ground "0".
    """
    c = components
    return (*common.input_divider(c, "a"),
            resistor("R2", "a", "out", c["R2"]),
            capacitor("C1", "a", "0", c["C1"]),
            capacitor("C2", "a", "b", c["C2"]),
            resistor("R3", "b", "0", c["R3"]),
            resistor("Ra", "out", "fb", c["Ra"]),
            resistor("Rb", "fb", "0", c["Rb"]),
            opamp("U1", "b", "fb", "out", model))


def q_sensitivities(section: Section) -> dict[str, float]:
    """S_x^Q of every fitted part of the equal-value design.

    Parameters
    ----------
    section : Section
        The section (Q > 1/2).

    Returns
    -------
    dict of str to float
        S_R1a = rho (Q - 1/4), S_R1b = (1 - rho)(Q - 1/4), S_R2 = -(2Q - 3/4),
        S_R3 = Q - 1/2, S_C1 = -(Q - 1)/2, S_C2 = (Q - 1)/2, S_Ra = -S_Rb = 2Q - 1,
        rho = |H0|/(3Q - 1) the divider ratio. Their magnitudes sum to 9Q - 9/2.

    Notes
    -----
    Derived with sympy from the element list (tests); S = x/Q dQ/dx (Schaumann & Van
    Valkenburg, *Design of Analog Filters*, 2001, ch. 3 [mem]). The amplifier gain itself
    has S_K^Q = 3Q - 1; Ra and Rb see it through S_Ra^K = (K - 1)/K.
    """
    q = section.q
    rho = common.divider_ratio(section, natural_gain(q))
    out = {"R1a": rho * (q - 0.25), "R2": -(2 * q - 0.75), "R3": q - 0.5,
           "C1": -(q - 1) / 2, "C2": (q - 1) / 2, "Ra": 2 * q - 1, "Rb": -(2 * q - 1)}
    if rho < 1:
        out["R1b"] = (1 - rho) * (q - 0.25)
    return out


def tolerance_q_max(r_tolerance: float, c_tolerance: float | None = None) -> float:
    """Largest Q whose worst-case tolerance Q shift stays within 50 %.

    Parameters
    ----------
    r_tolerance : float
        Relative resistor tolerance (0.01 = 1 %).
    c_tolerance : float or None
        Relative capacitor tolerance (None: the same as `r_tolerance`).

    Returns
    -------
    float
        The Q at which (8Q - 7/2) t_R + (Q - 1) t_C = 0.5 (for Q >= 1 the resistor
        sensitivities sum to 8Q - 7/2 and the capacitor ones to Q - 1, see
        ``q_sensitivities``); (0.5/t + 9/2)/9 for equal tolerances.
    """
    t_c = r_tolerance if c_tolerance is None else c_tolerance
    limit = common.TOLERANCE_Q_SHIFT_LIMIT
    return (limit + 3.5 * r_tolerance + t_c) / (8 * r_tolerance + t_c)


def noise_gain(section: Section) -> float:
    """Noise gain at f0 from the op-amp's input to the output: 3 (3Q - 1) = 3 K Q.

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
    Derived by nodal analysis (tests): V(out)/e_n = K (s^2 + 3 w0 s + w0^2) /
    (s^2 + (w0/Q) s + w0^2), K = 3 - 1/Q: the positive feedback multiplies the amplifier
    gain K by 3Q at f0.
    """
    return 3.0 * natural_gain(section.q)


def gbw_shift(section: Section) -> tuple[float, float]:
    """First-order relative shifts of f0 and Q per unit e = f0/GBW: (-K^2/2, +K^2/2).

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    (float, float)
        (k_f, k_q): df0/f0 ~= k_f e, dQ/Q ~= k_q e.

    Notes
    -----
    Perturbation of the poles with A(s) = wt/s, derived with sympy on the element list
    (tests): k_f = -(3Q - 1)^2/(2Q^2) = -K^2/2, k_q = +K^2/2.
    """
    k = amplifier_gain(section.q)
    return -k * k / 2, k * k / 2


def gbw_needed_hz(section: Section) -> float:
    """GBW keeping the first-order pole movement within 10 % of the bandwidth.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        f0 max(Q |k_f|, |k_q|) / 0.1, Hz (``_bandpass_common``).
    """
    return common.gbw_needed_from_shift(section, gbw_shift(section))


def limits(section: Section, model: OpAmp, *,
           r_tolerance: float = common.DEFAULT_TOLERANCE, c_tolerance: float | None = None,
           max_spread: float = common.MAX_SPREAD,
           accept_gain_shortfall: bool = False) -> Limits:
    """What this topology can do for `section` with op-amp `model`.

    Parameters and return as ``circuits.base.BandpassTopology.limits``.

    `accept_gain_shortfall`: |gain| above 3Q - 1 is a note (the design gives 3Q - 1 and a
    gain stage makes up the rest) instead of a failure. Infeasible when Q <= 1/2, when the
    worst-case tolerance Q shift exceeds 50 % (Q above ``tolerance_q_max``; (9Q - 9/2) t for
    equal tolerances t), when the op-amp GBW is below ``gbw_needed_hz``, when the gain is
    out of reach (unless accepted) or when the resistor spread exceeds `max_spread`.
    """
    return common.topology_limits(
        section, model, opamps=OPAMPS, design=design, gbw_needed_hz=gbw_needed_hz,
        q_sensitivities=q_sensitivities, noise_gain=noise_gain, natural_gain=natural_gain,
        accept_gain_shortfall=accept_gain_shortfall, r_tolerance=r_tolerance,
        c_tolerance=c_tolerance, max_spread=max_spread, problems=_problems,
        tolerance_q_max=tolerance_q_max)
