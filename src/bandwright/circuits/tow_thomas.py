"""Tow-Thomas biquad, bandpass output (three op-amps, inverting).

Classic three-op-amp form: a lossy integrator, an integrator and a unity inverter in one
loop. Circuit (nets in brackets)::

    [in] --Rin-- [s1] --RQ-- [out]       U1: + at 0, - at [s1], output [out]  (bandpass)
                 [s1] --C1-- [out]
    [inverter] --R4-- [s1]
    [out] --R2-- [s2] --C2-- [lowpass]   U2: + at 0, - at [s2], output [lowpass]
    [lowpass] --R5-- [s3] --R6-- [inverter]
                                         U3: + at 0, - at [s3], output [inverter]

Ideal transfer to [out] (derived by nodal analysis in the tests; Tow, Proc. IEEE 56, 1968;
Thomas, IEEE Trans. CT-18, 1971 [mem])::

    H(s) = -(s/(Rin C1)) / (s^2 + s/(RQ C1) + R6/(R2 R4 R5 C1 C2))

so with R5 = R6: w0^2 = 1/(R2 R4 C1 C2), w0/Q = 1/(RQ C1), H(f0) = -RQ/Rin. The gain is
set freely by Rin (no natural limit). The lowpass net carries
(R4 R5/(Rin R6)) w0^2/(s^2 + (w0/Q) s + w0^2): low tones pass with gain |H0|/Q and the
net reaches |H0| at f0, even though the bandpass output rejects those tones; the inverter
net is its negative.

Design (C1 = C2 = C, R = 1/(w0 C)): R2 = R4 = R5 = R6 = R, RQ = Q R, Rin = Q R/|H0|.

Finite GBW (all three op-amps A(s) = wt/s, e = f0/GBW, derived with sympy on this
element list): df0/f0 = -(1 + |H0|/(2Q)) e, dQ/Q = (4Q + |H0|/(2Q)) e, the first-order
form of the classic Q enhancement Q_a ~= Q/(1 - 4 Q e) (Thomas 1971 [mem]); at Q 10,
f0/GBW = 1e-3 the built Q is 10.417 (numeric test).
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
           "INVERTING", "design", "elements", "limits", "q_sensitivities", "noise_gain",
           "gbw_shift", "gbw_needed_hz"]

NAME = "tow_thomas"
KIND = "bandpass"
OPAMPS = 3
PARTS = ("Rin", "RQ", "R2", "R4", "R5", "R6", "C1", "C2")
OPTIONAL_PARTS: tuple[str, ...] = ()
#: Internal op-amp outputs: the integrator ("lowpass") and the inverter.
NETS = {"in": "in", "out": "out", "lowpass": "lowpass", "inverter": "inverter"}
REFERENCE = ("Tow, Proc. IEEE 56, 1968; Thomas, IEEE Trans. Circuit Theory CT-18, 1971 "
             "[mem]; three-op-amp form, bandpass at the lossy integrator")
#: The centre gain is negative.
INVERTING = True


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for `section` with C1 = C2 = `c_farads`.

    Parameters
    ----------
    section : Section
        A bandpass section; |gain| is realised (the circuit inverts).
    c_farads : float
        Value of both capacitors, farads.

    Returns
    -------
    dict of str to float
        Part name -> ohms or farads, in ``PARTS`` order.

    Raises
    ------
    ValueError
        If the section is not a bandpass with f0 > 0, Q > 0, gain != 0, or c_farads <= 0.

    Notes
    -----
    R = 1/(w0 C): R2 = R4 = R (w0^2 = 1/(R2 R4 C1 C2)), R5 = R6 = R (unity inverter),
    RQ = Q R (w0/Q = 1/(RQ C1)), Rin = RQ/|H0| (H(f0) = -RQ/Rin); module docstring.
    """
    common.check_design(section, c_farads)
    r = 1.0 / (2 * math.pi * section.f0_hz * c_farads)
    rq = section.q * r
    return {"Rin": rq / abs(section.gain), "RQ": rq, "R2": r, "R4": r, "R5": r, "R6": r,
            "C1": c_farads, "C2": c_farads}


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """The element list of the section (all three op-amps use `model`).

    Parameters and return as ``circuits.base.Topology.elements``.

    Every part is needed. Nets "in", "s1", "out", "s2", "lowpass", "s3", "inverter" and
    ground "0".
    """
    c = components
    return (resistor("Rin", "in", "s1", c["Rin"]),
            resistor("RQ", "s1", "out", c["RQ"]),
            capacitor("C1", "s1", "out", c["C1"]),
            resistor("R4", "inverter", "s1", c["R4"]),
            opamp("U1", "0", "s1", "out", model),
            resistor("R2", "out", "s2", c["R2"]),
            capacitor("C2", "s2", "lowpass", c["C2"]),
            opamp("U2", "0", "s2", "lowpass", model),
            resistor("R5", "lowpass", "s3", c["R5"]),
            resistor("R6", "s3", "inverter", c["R6"]),
            opamp("U3", "0", "s3", "inverter", model))


def q_sensitivities(section: Section) -> dict[str, float]:
    """S_x^Q of every part.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    dict of str to float
        S_RQ = 1, S_C1 = S_R6 = 1/2, S_C2 = S_R2 = S_R4 = S_R5 = -1/2, S_Rin = 0.

    Notes
    -----
    Q = RQ sqrt(C1 R6 / (C2 R2 R4 R5)) from the transfer above; S = x/Q dQ/dx
    (Schaumann & Van Valkenburg, *Design of Analog Filters*, 2001, ch. 3 [mem]).
    """
    return {"Rin": 0.0, "RQ": 1.0, "R2": -0.5, "R4": -0.5, "R5": -0.5, "R6": 0.5,
            "C1": 0.5, "C2": -0.5}


def noise_gain(section: Section) -> float:
    """Noise gain at f0 to the output, largest over the three op-amps.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        max(sqrt((|H0| + Q + 1)^2 + Q^2), sqrt(2) Q, 2 Q): U1, U2 and U3 in turn.

    Notes
    -----
    Derived by nodal analysis (tests): e_n in series with each non-inverting input, the
    stage input grounded.
    """
    q, g = section.q, abs(section.gain)
    return max(math.hypot(g + q + 1, q), math.sqrt(2) * q, 2 * q)


def gbw_shift(section: Section) -> tuple[float, float]:
    """First-order relative shifts of f0 and Q per unit e = f0/GBW.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    (float, float)
        (k_f, k_q) = (-(1 + |H0|/(2Q)), 4Q + |H0|/(2Q)).

    Notes
    -----
    Perturbation of the poles with all three op-amps A(s) = wt/s, derived with sympy on
    the element list (tests); k_q = 4Q matches Q_a ~= Q/(1 - 4Qe) (Thomas 1971 [mem]).
    """
    q, g = section.q, abs(section.gain)
    return -(1 + g / (2 * q)), 4 * q + g / (2 * q)


def gbw_needed_hz(section: Section) -> float:
    """GBW keeping the first-order pole movement within 10 % of the bandwidth.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        f0 max(Q |k_f|, |k_q|)/0.1 Hz: about 40 Q f0, i.e. 4 Q e <= 0.1.
    """
    return common.gbw_needed_from_shift(section, gbw_shift(section))


def limits(section: Section, model: OpAmp, *,
           r_tolerance: float = common.DEFAULT_TOLERANCE, c_tolerance: float | None = None,
           max_spread: float = common.MAX_SPREAD,
           accept_gain_shortfall: bool = False) -> Limits:
    """What this topology can do for `section` with op-amp `model` (all three amplifiers).

    Parameters and return as ``circuits.base.BandpassTopology.limits``.

    The resistor spread is Q and Q/|H0| over 1. `accept_gain_shortfall` is accepted for a
    uniform interface: the gain has no limit here. Infeasible when the op-amp GBW is below
    ``gbw_needed_hz`` or the spread exceeds `max_spread`.
    """
    return common.topology_limits(
        section, model, opamps=OPAMPS, design=design, gbw_needed_hz=gbw_needed_hz,
        q_sensitivities=q_sensitivities, noise_gain=noise_gain,
        natural_gain=lambda q: math.inf,
        accept_gain_shortfall=accept_gain_shortfall, r_tolerance=r_tolerance,
        c_tolerance=c_tolerance, max_spread=max_spread)
