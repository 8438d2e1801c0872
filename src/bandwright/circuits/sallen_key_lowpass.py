"""Sallen-Key second-order lowpass (one op-amp, non-inverting), equal-resistor design.

Circuit (element list)::

    in --R1-- mid --R2-- ninp --C2-- 0        U1: + = ninp, - = fb (or out), output out
               |
               +--C1-- out                     Rf: out--fb, Rg: fb--0 (only for gain K > 1)

C1 is the feedback capacitor, C2 the grounded one. With K = 1 + Rf/Rg (K = 1: the op-amp is
a follower, Rf and Rg are not fitted and the inverting input is tied to out):

    H(s) = K / (s^2 R1 R2 C1 C2 + s [C2 (R1 + R2) + R1 C1 (1 - K)] + 1)

Design
------
Equal resistors R1 = R2 = R and a capacitor ratio m = C1/C2 that gives Q at gain K:
Q = sqrt(m) / (2 + m (1 - K)), solved as sqrt(m) = 4Q / (1 + sqrt(1 + 8 Q^2 (K - 1))).

* K = 1 (the usual case in the highpass + lowpass path): m = 4 Q^2 (docs/methods.md, "Lowpass/highpass").
* K = 3 - 1/Q gives m = 1: the equal-component design (Sallen & Key 1955 [mem]), with the
  gain tied to Q. Any other K >= 1 is allowed; its Q sensitivity to Rf/Rg grows with K, so
  the highpass + lowpass path normally runs this section at unity gain and gives the rest of the
  gain to a gain stage.
* |gain| below 1 is infeasible (``limits`` says why). The sign of a section's gain is
  ignored: the circuit does not invert (``INVERTING``), and the chain's gains are
  magnitudes. A |gain| within ``UNITY_RTOL`` (0.1 %) of 1 is built at unity.

``c_farads`` is the **smaller** of the two capacitors: C2 when m >= 1, else C1. The other
is m (or 1/m) times larger and is not an E-series value; when parts are rounded, the ratio
C1/C2 must stay >= the ideal one at unity gain (below 4 Q^2 no resistor pair reaches Q),
and ``resistors_for_capacitors`` re-solves R1, R2 exactly for the rounded capacitors.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from bandwright.circuits import _filter_and_gain as common
from bandwright.circuits.base import Figures, Limits
from bandwright.circuits.elements import Element, capacitor, resistor
from bandwright.errors import InfeasibleDesign
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.parts.notation import format_sig

__all__ = ["NAME", "KIND", "OPAMPS", "PARTS", "OPTIONAL_PARTS", "NETS", "REFERENCE",
           "INVERTING", "design", "elements", "limits", "ideal_figures",
           "resistors_for_capacitors", "noise_gain_numerator"]

NAME = "sallen_key_lowpass"
KIND = "lowpass"
OPAMPS = 1
PARTS: tuple[str, ...] = ("R1", "R2", "C1", "C2", "Rf", "Rg")
#: Parts a design may leave out: at unity gain Rf and Rg are not fitted (follower).
OPTIONAL_PARTS: tuple[str, ...] = ("Rf", "Rg")
#: Net roles. "fb" exists only when Rf and Rg are fitted; otherwise the inverting input is "out".
NETS: Mapping[str, str] = {"in": "in", "out": "out", "mid": "mid", "ninp": "ninp", "fb": "fb"}
REFERENCE = ("R. P. Sallen, E. L. Key, 'A practical method of designing RC active filters', "
             "IRE Trans. Circuit Theory CT-2, 1955 [mem]; equal-R unity-gain design "
             "C1/C2 = 4Q^2")
INVERTING = False


def _coefficients(components: Mapping[str, float]) -> tuple[float, float, float]:
    """(a2, a1, K) of the denominator a2 s^2 + a1 s + 1 and the gain K."""
    r1, r2 = components["R1"], components["R2"]
    c1, c2 = components["C1"], components["C2"]
    k = common.amplifier_gain(components)
    return r1 * r2 * c1 * c2, c2 * (r1 + r2) + r1 * c1 * (1 - k), k


def ideal_figures(components: Mapping[str, float]) -> Figures:
    """f0, Q and DC gain with an ideal op-amp.

    Parameters
    ----------
    components : mapping of str to float
        R1, R2 (ohms), C1, C2 (farads), optionally Rf, Rg (ohms).

    Returns
    -------
    Figures
        f0 = 1/(2 pi sqrt(R1 R2 C1 C2)), Q = sqrt(R1 R2 C1 C2)/[C2 (R1+R2) + R1 C1 (1-K)],
        gain K (module docstring; Sallen & Key 1955 [mem], derived by nodal analysis).
        Q is negative when the denominator's middle term is (an unstable design).
    """
    a2, a1, k = _coefficients(components)
    return Figures(f0_hz=1 / (2 * math.pi * math.sqrt(a2)), q=math.sqrt(a2) / a1, gain=k)


def noise_gain_numerator(components: Mapping[str, float]) -> tuple[float, float, float]:
    """(n2, n1, n0) of the ideal noise gain NG(s) = N(s)/(s^2 + (w0/Q) s + w0^2).

    Notes
    -----
    NG = K (s^2 R1R2C1C2 + s (R1C1 + R1C2 + R2C2) + 1) / D(s): a voltage in series with the
    + input sees the passive network's own poles in its numerator (nodal analysis, checked
    with sympy in the tests).
    """
    a2, _, k = _coefficients(components)
    r1, r2 = components["R1"], components["R2"]
    c1, c2 = components["C1"], components["C2"]
    return k, k * (r1 * c1 + r1 * c2 + r2 * c2) / a2, k / a2


def _require(section: Section) -> None:
    common.require(section, kind=KIND, min_gain=1.0)


def design(section: Section, *, c_farads: float) -> dict[str, float]:
    """Ideal-op-amp part values for a lowpass section.

    Parameters
    ----------
    section : Section
        kind "lowpass", f0_hz > 0, q > 0, |gain| >= 1 (V/V, DC; sign ignored).
    c_farads : float
        The smaller of C1 and C2, farads.

    Returns
    -------
    dict of str to float
        R1, R2, C1, C2 and, for gain > 1, Rf and Rg (the smaller of them 10 kOhm).

    Raises
    ------
    ValueError
        If the section is not a lowpass or `c_farads` is not > 0.
    InfeasibleDesign
        If |gain| < 1, or f0 or Q is not > 0.

    Notes
    -----
    Equal R; sqrt(C1/C2) = 4Q / (1 + sqrt(1 + 8 Q^2 (K - 1))), i.e. C1/C2 = 4Q^2 at K = 1
    (docs/methods.md; Sallen & Key 1955 [mem]); R = 1 / (w0 sqrt(C1 C2)).
    """
    common.check_capacitor(c_farads)
    _require(section)
    k = common.design_gain(section)
    q = section.q
    # Rationalised root of (K-1) Q x^2 + x - 2Q = 0: no cancellation as K -> 1.
    x = 4 * q / (1 + math.sqrt(1 + 8 * q * q * (k - 1)))
    m = x * x                                                    # C1 / C2
    c1, c2 = (m * c_farads, c_farads) if m >= 1 else (c_farads, c_farads / m)
    r_ohms = 1 / (2 * math.pi * section.f0_hz * math.sqrt(c1 * c2))
    return {"R1": r_ohms, "R2": r_ohms, "C1": c1, "C2": c2, **common.gain_resistors(k)}


def resistors_for_capacitors(section: Section, *, c1_farads: float,
                             c2_farads: float) -> dict[str, float]:
    """R1, R2 (and Rf, Rg) that give the section exactly with the given capacitors.

    Parameters
    ----------
    section : Section
        kind "lowpass", |gain| >= 1 (sign ignored).
    c1_farads, c2_farads : float
        Feedback and grounded capacitor, farads (e.g. already rounded to a series).

    Returns
    -------
    dict of str to float
        R1, R2, C1, C2 (and Rf, Rg for gain > 1). Of two solutions the one with the
        smaller R1/R2 spread.

    Raises
    ------
    InfeasibleDesign
        If no positive R1, R2 exist (at unity gain: C1/C2 < 4 Q^2).

    Notes
    -----
    With u = R1 and R2 = 1/(w0^2 C1 C2 u), matching the middle coefficient gives
    [C2 + C1 (1-K)] u^2 - u/(w0 Q) + 1/(w0^2 C1) = 0 (from the transfer function above).
    """
    _require(section)
    k = common.design_gain(section)
    w0 = 2 * math.pi * section.f0_hz
    c1, c2 = c1_farads, c2_farads
    a, b, c = c2 + c1 * (1 - k), -1 / (w0 * section.q), 1 / (w0 * w0 * c1)
    if abs(a) < 1e-12 * c2:
        roots = [-c / b]
    else:
        disc = b * b - 4 * a * c
        if -1e-9 * b * b < disc < 0:
            disc = 0.0  # round-off at exactly the minimum ratio (the design's own point)
        if disc < 0:
            raise InfeasibleDesign(
                f"C1/C2 = {format_sig(c1 / c2)} is below the {format_sig(4 * section.q ** 2)} "
                f"needed for "
                f"Q = {format_sig(section.q)} at gain {format_sig(k)}" if common.is_unity(k) else
                f"no resistor pair reaches Q = {format_sig(section.q)} with C1/C2 = "
                f"{format_sig(c1 / c2)}")
        sq = math.sqrt(disc)
        roots = [(-b + sq) / (2 * a), (-b - sq) / (2 * a)]
    best = None
    for r1 in roots:
        if r1 > 0:
            r2 = 1 / (w0 * w0 * c1 * c2 * r1)
            ratio = max(r1, r2) / min(r1, r2)
            if best is None or ratio < best[0]:
                best = (ratio, r1, r2)
    if best is None:
        raise InfeasibleDesign(f"no positive resistors reach Q = {format_sig(section.q)} with "
                               f"C1/C2 = {format_sig(c1 / c2)}")
    return {"R1": best[1], "R2": best[2], "C1": c1, "C2": c2, **common.gain_resistors(k)}


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """Element list of the section.

    Parameters and return as ``circuits.base.Topology.elements``.

    Parts R1, R2, C1, C2 and optionally both of Rf, Rg; only one of Rf, Rg is a ValueError.
    """
    common.check_known_parts(NAME, PARTS, components)
    has_gain = common.pair_fitted(NAME, components, "Rf", "Rg")
    return (
        resistor("R1", "in", "mid", components["R1"]),
        resistor("R2", "mid", "ninp", components["R2"]),
        capacitor("C1", "mid", "out", components["C1"]),
        capacitor("C2", "ninp", "0", components["C2"]),
        *common.amplifier_elements(components, model, plus="ninp", has_gain=has_gain),
    )


def _summary(parts: Mapping[str, float], fig: Figures) -> str:
    """The first reason of ``limits``: the design's ratios and gain."""
    return (f"C1/C2 = {format_sig(parts['C1'] / parts['C2'])}, R1 = R2, gain "
            f"{format_sig(fig.gain)} V/V"
            + (" (follower)" if "Rf" not in parts else ""))


def limits(section: Section, model: OpAmp) -> Limits:
    """What this topology needs and offers for one lowpass section.

    Parameters and return as ``circuits.base.Topology.limits``.

    Infeasible for |gain| < 1, a spread above ``MAX_SPREAD`` or too little GBW.
    ``gbw_needed_hz`` keeps the first-order finite-GBW shifts of f0 and Q within 10 %
    (derived, see ``circuits._filter_and_gain``; at unity gain it is 10 Q f0, a tenth of the
    common-practice 100 Q f0 that assumes no predistortion). ``spread`` is the larger of
    C1/C2 (the resistors are equal) and Rf/Rg. ``noise_gain`` is |NG(j w0)|, 1 + 2 Q^2 at
    unity gain: far above K near f0.
    """
    return common.filter_limits(section, model, kind=KIND, opamps=OPAMPS, design=design,
                                ideal_figures=ideal_figures,
                                noise_gain_numerator=noise_gain_numerator, summary=_summary,
                                min_gain=1.0, separate=OPTIONAL_PARTS, note_unity=True)

