"""Non-inverting flat gain stage: follower, amplifier or buffered divider (one op-amp).

Three forms, chosen by the gain and told apart by the parts present (absent parts are not
fitted, so every form's element list is valid for the nodal solver without zero-ohm or
infinite resistors)::

    gain = 1      follower            U1: + = in,  - = out
    gain > 1      amplifier           U1: + = in,  - = fb;  Rf: out--fb, Rg: fb--0
    0 < gain < 1  buffered divider    Ra: in--div, Rb: div--0;  U1: + = div, - = out

gain = (Rb / (Ra + Rb)) · (1 + Rf/Rg), each factor 1 when its pair is absent (a combined
divider and amplifier is also a valid element list). A |gain| within ``UNITY_RTOL``
(0.1 %) of 1 is the follower (``limits`` notes the difference). The sign of a section's
gain is ignored: the stage does not invert (``INVERTING``).

Resistors: the smaller of each pair is 10 kOhm (``BASE_R_OHMS``, common practice): it keeps
the output load light and the Johnson noise modest; ``c_farads`` is ignored.
"""

from __future__ import annotations

from collections.abc import Mapping

from bandwright.circuits import _filter_and_gain as common
from bandwright.circuits.base import Figures, Limits
from bandwright.circuits.elements import Element, resistor
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.parts.notation import format_sig

__all__ = ["NAME", "KIND", "OPAMPS", "PARTS", "OPTIONAL_PARTS", "NETS", "REFERENCE",
           "INVERTING", "design", "elements", "limits", "ideal_figures", "noise_gain",
           "bandwidth_hz", "gbw_needed_for_hz"]

NAME = "noninverting_gain"
KIND = "gain"
OPAMPS = 1
PARTS: tuple[str, ...] = ("Rf", "Rg", "Ra", "Rb")
#: Every part is optional: a follower has none, an amplifier Rf and Rg, a divider Ra and Rb.
OPTIONAL_PARTS: tuple[str, ...] = PARTS
#: Net roles. "fb" exists only with Rf/Rg fitted, "div" only with Ra/Rb fitted.
NETS: Mapping[str, str] = {"in": "in", "out": "out", "fb": "fb", "div": "div"}
REFERENCE = ("Non-inverting amplifier, gain 1 + Rf/Rg; closed-loop bandwidth GBW / noise "
             "gain: S. Franco, Design with Operational Amplifiers and Analog Integrated "
             "Circuits, 4th ed., 2015, §1.4, §6.2 [mem]")
INVERTING = False


def _pairs(components: Mapping[str, float]) -> tuple[bool, bool]:
    common.check_known_parts(NAME, PARTS, components, subset=True)
    has_fb = common.pair_fitted(NAME, components, "Rf", "Rg")
    return has_fb, common.pair_fitted(NAME, components, "Ra", "Rb")


def noise_gain(components: Mapping[str, float]) -> float:
    """Noise gain 1 + Rf/Rg (1 for the follower and the divider), V/V.

    Parameters
    ----------
    components : mapping of str to float
        The fitted parts (ohms).

    Returns
    -------
    float
        1/beta of the loop (Franco 2015, §1.2 [mem]).
    """
    _pairs(components)  # raises on an unknown part or half a pair
    return common.amplifier_gain(components)


def ideal_figures(components: Mapping[str, float]) -> Figures:
    """Flat gain with an ideal op-amp (f0 and Q are 0 for a gain stage).

    Parameters
    ----------
    components : mapping of str to float
        The fitted parts (ohms).

    Returns
    -------
    Figures
        gain = Rb/(Ra + Rb) · (1 + Rf/Rg).
    """
    _, has_div = _pairs(components)
    div = components["Rb"] / (components["Ra"] + components["Rb"]) if has_div else 1.0
    return Figures(f0_hz=0.0, q=0.0, gain=div * noise_gain(components))


def bandwidth_hz(components: Mapping[str, float], model: OpAmp) -> float:
    """-3 dB bandwidth of the stage with the single-pole op-amp model, Hz.

    Parameters
    ----------
    components : mapping of str to float
        The fitted parts (ohms).
    model : OpAmp
        The op-amp model.

    Returns
    -------
    float
        GBW (1 + NG/A0) / NG; ~= GBW/NG (Franco 2015, §6.2 [mem]). Exact for
        A(s) = A0/(1 + s A0/wt): the closed loop A/(1 + A/NG) has its one pole there.
    """
    return common.closed_loop_bandwidth_hz(noise_gain(components), model)


def gbw_needed_for_hz(section: Section, max_freq_hz: float) -> float:
    """GBW keeping the gain error within ``GAIN_ERROR_LIMIT`` (1 %) up to `max_freq_hz`.

    Parameters
    ----------
    section : Section
        The gain section.
    max_freq_hz : float
        Highest signal frequency the stage must pass, Hz.

    Returns
    -------
    float
        NG · f_max / sqrt(1/(1 - 0.01)^2 - 1) ~= 7.02 NG f_max, Hz: the single-pole closed
        loop falls as 1/sqrt(1 + (f/f_b)^2), f_b = GBW/NG (Franco 2015, §6.2 [mem]).
    """
    return common.gain_stage_gbw_needed_hz(noise_gain(design(section)), max_freq_hz)


def design(section: Section, *, c_farads: float | None = None) -> dict[str, float]:
    """Part values for a non-inverting gain.

    Parameters
    ----------
    section : Section
        kind "gain", gain != 0 (V/V); the sign is ignored (the stage does not invert).
    c_farads : float, optional
        Ignored (no capacitors); accepted for the common topology interface.

    Returns
    -------
    dict of str to float
        {} for unity gain; Rf, Rg for gain > 1 (Rf/Rg = gain - 1); Ra, Rb for gain < 1
        (Rb/(Ra+Rb) = gain). The smaller resistor of a pair is 10 kOhm.

    Raises
    ------
    ValueError
        If the section is not of kind "gain".
    InfeasibleDesign
        If the gain is 0.
    """
    common.require(section, kind=KIND)
    g = common.design_gain(section)
    if g == 1.0:
        return {}
    if g > 1:
        return common.gain_resistors(g)
    ra, rb = common.ratio_pair((1.0 - g) / g)
    return {"Ra": ra, "Rb": rb}


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """Element list of the stage (see the module docstring for the three forms).

    Parameters and return as ``circuits.base.Topology.elements``.

    Parts: a subset of PARTS, pairs Rf/Rg and Ra/Rb each fitted whole or not at all (a half-
    fitted pair is a ValueError).
    """
    has_fb, has_div = _pairs(components)
    out: list[Element] = []
    plus = "in"
    if has_div:
        plus = "div"
        out += [resistor("Ra", "in", "div", components["Ra"]),
                resistor("Rb", "div", "0", components["Rb"])]
    out += common.amplifier_elements(components, model, plus=plus, has_gain=has_fb)
    return tuple(out)


def _form(parts: Mapping[str, float]) -> str:
    """The start of the first reason of ``limits``: which form, with its ratio."""
    if not parts:
        return "follower"
    if "Rf" in parts:
        return f"amplifier, Rf/Rg = {format_sig(parts['Rf'] / parts['Rg'])}"
    return f"buffered divider, Rb/(Ra+Rb) = {format_sig(parts['Rb'] / (parts['Ra'] + parts['Rb']))}"


def limits(section: Section, model: OpAmp, *, max_freq_hz: float | None = None) -> Limits:
    """What this stage needs and offers.

    Parameters and return as ``circuits.base.GainStageTopology.limits``.

    Infeasible for a zero gain, a resistor ratio above ``MAX_SPREAD`` or, with
    `max_freq_hz`, too little GBW (``gbw_needed_for_hz``). ``noise_gain`` is 1 + Rf/Rg,
    ``q_sensitivity`` 0 (no Q).
    """
    return common.gain_stage_limits(section, model, kind=KIND, opamps=OPAMPS, design=design,
                                    noise_gain=noise_gain, summary=_form,
                                    max_freq_hz=max_freq_hz, note_unity=True)
