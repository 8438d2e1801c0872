"""Sallen-Key second-order highpass (one op-amp, non-inverting), equal-capacitor design.

Circuit (element list)::

    in --C1-- mid --C2-- ninp --R2-- 0        U1: + = ninp, - = fb (or out), output out
               |
               +--R1-- out                     Rf: out--fb, Rg: fb--0 (only for gain K > 1)

R1 is the feedback resistor, R2 the grounded one; the RC dual of the Sallen-Key lowpass.
With K = 1 + Rf/Rg (K = 1: follower, Rf and Rg not fitted):

    H(s) = K s^2 R1 R2 C1 C2 / (s^2 R1 R2 C1 C2 + s [R1 (C1 + C2) + R2 C2 (1 - K)] + 1)

Design
------
Equal capacitors C1 = C2 = C (``c_farads``) and a resistor ratio r = R2/R1 with
Q = sqrt(r) / (2 + r (1 - K)), solved as sqrt(r) = 4Q / (1 + sqrt(1 + 8 Q^2 (K - 1))):

* K = 1 (the usual case in the highpass + lowpass path): R2/R1 = 4 Q^2 (docs/methods.md,
  "Lowpass/highpass");
* K = 3 - 1/Q gives R1 = R2: the equal-component design (Sallen & Key 1955 [mem]), gain
  tied to Q. Other K >= 1 are allowed; the highpass + lowpass path normally runs this section at
  unity gain and gives the rest of the gain to a gain stage.

R1 = 1 / (w0 C sqrt(r)), R2 = sqrt(r) / (w0 C). |gain| below 1 is infeasible.
The sign of a section's gain is ignored: the circuit does not invert (``INVERTING``). A
|gain| within ``UNITY_RTOL`` (0.1 %) of 1 is built at unity.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from bandwright.circuits import _filter_and_gain as common
from bandwright.circuits.base import Figures, Limits
from bandwright.circuits.elements import Element, capacitor, resistor
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.parts.notation import format_sig

__all__ = ["NAME", "KIND", "OPAMPS", "PARTS", "OPTIONAL_PARTS", "NETS", "REFERENCE",
           "INVERTING", "design", "elements", "limits", "ideal_figures",
           "noise_gain_numerator"]

NAME = "sallen_key_highpass"
KIND = "highpass"
OPAMPS = 1
PARTS: tuple[str, ...] = ("C1", "C2", "R1", "R2", "Rf", "Rg")
#: Parts a design may leave out: at unity gain Rf and Rg are not fitted (follower).
OPTIONAL_PARTS: tuple[str, ...] = ("Rf", "Rg")
#: Net roles. "fb" exists only when Rf and Rg are fitted; otherwise the inverting input is "out".
NETS: Mapping[str, str] = {"in": "in", "out": "out", "mid": "mid", "ninp": "ninp", "fb": "fb"}
REFERENCE = ("R. P. Sallen, E. L. Key, 'A practical method of designing RC active filters', "
             "IRE Trans. Circuit Theory CT-2, 1955 [mem]; equal-C unity-gain design "
             "R2/R1 = 4Q^2")
INVERTING = False


def _coefficients(components: Mapping[str, float]) -> tuple[float, float, float]:
    """(a2, a1, K) of the denominator a2 s^2 + a1 s + 1 and the gain K."""
    r1, r2 = components["R1"], components["R2"]
    c1, c2 = components["C1"], components["C2"]
    k = common.amplifier_gain(components)
    return r1 * r2 * c1 * c2, r1 * (c1 + c2) + r2 * c2 * (1 - k), k


def ideal_figures(components: Mapping[str, float]) -> Figures:
    """f0, Q and high-frequency gain with an ideal op-amp.

    Parameters
    ----------
    components : mapping of str to float
        C1, C2 (farads), R1, R2 (ohms), optionally Rf, Rg (ohms).

    Returns
    -------
    Figures
        f0 = 1/(2 pi sqrt(R1 R2 C1 C2)), Q = sqrt(R1 R2 C1 C2)/[R1 (C1+C2) + R2 C2 (1-K)],
        gain K (module docstring; derived by nodal analysis, checked with sympy).
    """
    a2, a1, k = _coefficients(components)
    return Figures(f0_hz=1 / (2 * math.pi * math.sqrt(a2)), q=math.sqrt(a2) / a1, gain=k)


def noise_gain_numerator(components: Mapping[str, float]) -> tuple[float, float, float]:
    """(n2, n1, n0) of the ideal noise gain NG(s) = N(s)/(s^2 + (w0/Q) s + w0^2).

    Notes
    -----
    NG = K (s^2 R1R2C1C2 + s (R1C1 + R1C2 + R2C2) + 1) / D(s) (nodal analysis, checked with
    sympy in the tests): the same form as the Sallen-Key lowpass.
    """
    a2, _, k = _coefficients(components)
    r1, r2 = components["R1"], components["R2"]
    c1, c2 = components["C1"], components["C2"]
    return k, k * (r1 * c1 + r1 * c2 + r2 * c2) / a2, k / a2


def _require(section: Section) -> None:
    common.require(section, kind=KIND, min_gain=1.0)


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for a highpass section.

    Parameters
    ----------
    section : Section
        kind "highpass", f0_hz > 0, q > 0, |gain| >= 1 (V/V, high-frequency; sign ignored).
    c_farads : float
        C1 = C2, farads.

    Returns
    -------
    dict of str to float
        C1, C2, R1, R2 and, for gain > 1, Rf and Rg (the smaller of them 10 kOhm).

    Raises
    ------
    ValueError
        If the section is not a highpass or `c_farads` is not > 0.
    InfeasibleDesign
        If |gain| < 1, or f0 or Q is not > 0.

    Notes
    -----
    Equal C; sqrt(R2/R1) = 4Q / (1 + sqrt(1 + 8 Q^2 (K - 1))), i.e. R2/R1 = 4Q^2 at K = 1
    (docs/methods.md; Sallen & Key 1955 [mem]).
    """
    common.check_capacitor(c_farads)
    _require(section)
    k = common.design_gain(section)
    q = section.q
    # Rationalised root of (K-1) Q x^2 + x - 2Q = 0: no cancellation as K -> 1.
    x = 4 * q / (1 + math.sqrt(1 + 8 * q * q * (k - 1)))          # sqrt(R2 / R1)
    w0 = 2 * math.pi * section.f0_hz
    return {"C1": c_farads, "C2": c_farads, "R1": 1 / (w0 * c_farads * x),
            "R2": x / (w0 * c_farads), **common.gain_resistors(k)}


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """Element list of the section.

    Parameters and return as ``circuits.base.Topology.elements``.

    Parts C1, C2, R1, R2 and optionally both of Rf, Rg; only one of Rf, Rg is a ValueError.
    """
    common.check_known_parts(NAME, PARTS, components)
    has_gain = common.pair_fitted(NAME, components, "Rf", "Rg")
    return (
        capacitor("C1", "in", "mid", components["C1"]),
        capacitor("C2", "mid", "ninp", components["C2"]),
        resistor("R1", "mid", "out", components["R1"]),
        resistor("R2", "ninp", "0", components["R2"]),
        *common.amplifier_elements(components, model, plus="ninp", has_gain=has_gain),
    )


def _summary(parts: Mapping[str, float], fig: Figures) -> str:
    """The first reason of ``limits``: the design's ratios and gain."""
    return (f"R2/R1 = {format_sig(parts['R2'] / parts['R1'])}, C1 = C2, gain "
            f"{format_sig(fig.gain)} V/V"
            + (" (follower)" if "Rf" not in parts else ""))


def limits(section: Section, model: OpAmp) -> Limits:
    """What this topology needs and offers for one highpass section.

    Parameters and return as ``circuits.base.Topology.limits``.

    Infeasible for |gain| < 1, a spread (R2/R1 = 4 Q^2 at unity gain) above ``MAX_SPREAD``,
    or too little GBW. ``gbw_needed_hz`` keeps the first-order finite-GBW shifts of f0 and Q
    within 10 % (derived, ``circuits._filter_and_gain``).
    """
    return common.filter_limits(section, model, kind=KIND, opamps=OPAMPS, design=design,
                                ideal_figures=ideal_figures,
                                noise_gain_numerator=noise_gain_numerator, summary=_summary,
                                min_gain=1.0, separate=OPTIONAL_PARTS, note_unity=True)

