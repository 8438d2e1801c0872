"""State-variable (KHN) biquad, bandpass output (three op-amps: summer, two integrators).

Circuit (nets in brackets)::

    [in] --R1a-- [p] --R1b-- 0           U1: + at [p], - at [m], output [highpass]
         [out] --RQ-- [p]                (summer)
    [highpass] --Rf-- [m] --Rg-- [lowpass]
    [highpass] --Ri1-- [i1] --C1-- [out] U2: + at 0, - at [i1], output [out] (bandpass)
    [out] --Ri2-- [i2] --C2-- [lowpass]  U3: + at 0, - at [i2], output [lowpass]

Ideal transfers (derived by nodal analysis in the tests; Kerwin, Huelsman & Newcomb, IEEE
JSSC SC-2, 1967 [mem]). With the conductances at [p] G1a, G1b, GQ, their sum G,
a = G1a/G and b = GQ/G, and Rf = Rg, Ri1 = Ri2 = R, C1 = C2 = C::

    HP = 2a s^2 / D,   BP = -2a w0 s / D,   LP = 2a w0^2 / D,
    D = s^2 + 2b w0 s + w0^2,   w0 = 1/(R C),   Q = 1/(2b),   H_BP(f0) = -a/b.

Design: the divider at [p] is scaled so that its Thevenin resistance is R/2, the
resistance U1's inverting input sees (Rf ∥ Rg), which balances the input bias currents
(common practice). Then RQ = Q R, R1a = Q R/|H0| and R1b = Q R/(2Q - 1 - |H0|): the
natural gain, reached without R1b, is 2Q - 1 (a + b = 1), and Q must exceed 1/2. A gain
above 2Q - 1 is designed at 2Q - 1 and reported by ``limits``.

At f0, |HP| = |BP| = |LP| = |H0|; the highpass and lowpass nets pass out-of-band tones with
gain 2a = |H0|/Q (the references' H_BP(f0)/Q), although the bandpass output rejects them.

Finite GBW (all three op-amps A(s) = wt/s, e = f0/GBW, derived with sympy on this element
list): df0/f0 = -(1 - 3/(2Q)) e, dQ/Q = (4Q - 3/(2Q)) e, whatever the gain.
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
           "INVERTING", "design", "elements", "limits", "natural_gain", "q_sensitivities",
           "noise_gain", "gbw_shift", "gbw_needed_hz"]

NAME = "state_variable"
KIND = "bandpass"
OPAMPS = 3
#: Every part, in a fixed order; R1b is left out (not fitted) at the natural gain.
PARTS = ("R1a", "R1b", "RQ", "Rf", "Rg", "Ri1", "Ri2", "C1", "C2")
OPTIONAL_PARTS = ("R1b",)
#: Internal op-amp outputs: the summer ("highpass") and the second integrator ("lowpass").
NETS = {"in": "in", "out": "out", "highpass": "highpass", "lowpass": "lowpass"}
REFERENCE = ("Kerwin, Huelsman & Newcomb, IEEE J. Solid-State Circuits SC-2, 1967 [mem]; "
             "non-inverting summer with Q set by the divider at its + input")
#: The centre gain (bandpass output) is negative.
INVERTING = True


def natural_gain(q: float) -> float:
    """Largest |centre gain|: 2Q - 1 (no R1b), for Rf = Rg.

    Parameters
    ----------
    q : float
        Pole Q.

    Returns
    -------
    float
        V/V.
    """
    return 2.0 * q - 1.0


def _problems(section: Section) -> tuple[str, ...]:
    if section.q <= 0.5:
        return (f"Q {format_sig(section.q)}: the summer's divider needs Q > 0.5 "
                f"(natural gain 2Q - 1 = {format_sig(natural_gain(section.q))} V/V)",)
    return ()


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for `section` with C1 = C2 = `c_farads`.

    Parameters
    ----------
    section : Section
        A bandpass section; |gain| is realised (the bandpass output inverts), or 2Q - 1 if
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
    InfeasibleDesign
        If Q <= 1/2.

    Notes
    -----
    R = 1/(w0 C): Ri1 = Ri2 = Rf = Rg = R; the divider at [p] has Thevenin resistance R/2
    with b = 1/(2Q) and a = |H0|/(2Q) (module docstring).
    """
    common.check_design(section, c_farads, problems=_problems)
    q = section.q
    r = 1.0 / (2 * math.pi * section.f0_hz * c_farads)
    gain = common.design_gain(section, natural_gain(q))
    r_p = r / 2
    g_q = 1 / (2 * q)
    g_in = gain / (2 * q)
    g_b = 1.0 - g_q - g_in
    # A remainder at round-off level means the natural gain: R1b not fitted.
    r1b = r_p / g_b if g_b > common.GAIN_RTOL else math.inf
    return common.fitted({"R1a": r_p / g_in, "R1b": r1b, "RQ": r_p / g_q, "Rf": r, "Rg": r,
                          "Ri1": r, "Ri2": r, "C1": c_farads, "C2": c_farads})


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """The element list of the section (all three op-amps use `model`).

    Parameters and return as ``circuits.base.Topology.elements``.

    R1b may be absent or ``math.inf`` (not fitted). Nets "in", "p", "m", "highpass", "i1",
    "out", "i2", "lowpass" and ground "0".
    """
    c = components
    return (*common.input_divider(c, "p"),
            resistor("RQ", "out", "p", c["RQ"]),
            resistor("Rf", "highpass", "m", c["Rf"]),
            resistor("Rg", "lowpass", "m", c["Rg"]),
            opamp("U1", "p", "m", "highpass", model),
            resistor("Ri1", "highpass", "i1", c["Ri1"]),
            capacitor("C1", "i1", "out", c["C1"]),
            opamp("U2", "0", "i1", "out", model),
            resistor("Ri2", "out", "i2", c["Ri2"]),
            capacitor("C2", "i2", "lowpass", c["C2"]),
            opamp("U3", "0", "i2", "lowpass", model))


def q_sensitivities(section: Section) -> dict[str, float]:
    """S_x^Q of every fitted part.

    Parameters
    ----------
    section : Section
        The section (Q > 1/2).

    Returns
    -------
    dict of str to float
        S_RQ = 1 - 1/(2Q), S_R1a = -|H0|/(2Q), S_R1b = -(2Q - 1 - |H0|)/(2Q),
        S_Ri1 = S_C1 = 1/2, S_Ri2 = S_C2 = -1/2, S_Rf = S_Rg = 0.

    Notes
    -----
    Derived with sympy from the element list (tests); S = x/Q dQ/dx (Schaumann & Van
    Valkenburg, *Design of Analog Filters*, 2001, ch. 3 [mem]).
    """
    q = section.q
    g = common.design_gain(section, natural_gain(q))
    out = {"R1a": -g / (2 * q), "RQ": 1 - 1 / (2 * q), "Rf": 0.0, "Rg": 0.0,
           "Ri1": 0.5, "Ri2": -0.5, "C1": 0.5, "C2": -0.5}
    if "R1b" in design(section, c_farads=1e-9):
        out["R1b"] = -(2 * q - 1 - g) / (2 * q)
    return out


def noise_gain(section: Section) -> float:
    """Noise gain at f0 to the output, largest over the three op-amps: 2Q.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        |V(out)/e_n| at f0: U1 2Q, U2 and U3 sqrt(2) Q (derived by nodal analysis, tests).
    """
    return 2.0 * section.q


def gbw_shift(section: Section) -> tuple[float, float]:
    """First-order relative shifts of f0 and Q per unit e = f0/GBW.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    (float, float)
        (k_f, k_q) = (3/(2Q) - 1, 4Q - 3/(2Q)).

    Notes
    -----
    Perturbation of the poles with all three op-amps A(s) = wt/s, derived with sympy on
    the element list (tests). The project's references recall (4.5 ... 6) Q e for the
    state-variable Q error; this wiring gives 4 Q e.
    """
    q = section.q
    return 1.5 / q - 1.0, 4.0 * q - 1.5 / q


def gbw_needed_hz(section: Section) -> float:
    """GBW keeping the first-order pole movement within 10 % of the bandwidth.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        f0 max(Q |k_f|, |k_q|)/0.1 Hz: about 40 Q f0.
    """
    return common.gbw_needed_from_shift(section, gbw_shift(section))


def limits(section: Section, model: OpAmp, *,
           r_tolerance: float = common.DEFAULT_TOLERANCE, c_tolerance: float | None = None,
           max_spread: float = common.MAX_SPREAD,
           accept_gain_shortfall: bool = False) -> Limits:
    """What this topology can do for `section` with op-amp `model` (all three amplifiers).

    Parameters and return as ``circuits.base.BandpassTopology.limits``.

    `accept_gain_shortfall`: |gain| above 2Q - 1 is a note (the design gives 2Q - 1 and a
    gain stage makes up the rest) instead of a failure. Infeasible when Q <= 1/2, the op-amp
    GBW is below ``gbw_needed_hz``, the gain is out of reach (unless accepted) or the
    resistor spread exceeds `max_spread`.
    """
    return common.topology_limits(
        section, model, opamps=OPAMPS, design=design, gbw_needed_hz=gbw_needed_hz,
        q_sensitivities=q_sensitivities, noise_gain=noise_gain, natural_gain=natural_gain,
        accept_gain_shortfall=accept_gain_shortfall, r_tolerance=r_tolerance,
        c_tolerance=c_tolerance, max_spread=max_spread, problems=_problems)
