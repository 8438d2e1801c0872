"""Inverting flat gain stage (one op-amp): gain -Rf/Rin, any magnitude.

Circuit (element list)::

    in --Rin-- ninv --Rf-- out        U1: + = 0, - = ninv, output out

gain = -Rf/Rin, noise gain 1 + Rf/Rin, input resistance Rin (it loads the stage ahead).
Attenuation (|gain| < 1) needs nothing extra. The sign of a section's gain is ignored: the
stage always gives -|gain| (``INVERTING``).

Resistors: the smaller of Rf, Rin is 10 kOhm (``BASE_R_OHMS``, common practice), so the
input resistance is never below 10 kOhm; ``c_farads`` is ignored.
"""

from __future__ import annotations

from collections.abc import Mapping

from bandwright.circuits import _filter_and_gain as common
from bandwright.circuits.base import Figures, Limits
from bandwright.circuits.elements import Element, opamp, resistor
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.parts.notation import format_si, format_sig

__all__ = ["NAME", "KIND", "OPAMPS", "PARTS", "OPTIONAL_PARTS", "NETS", "REFERENCE",
           "INVERTING", "design", "elements", "limits", "ideal_figures", "noise_gain",
           "bandwidth_hz", "gbw_needed_for_hz"]

NAME = "inverting_gain"
KIND = "gain"
OPAMPS = 1
PARTS: tuple[str, ...] = ("Rin", "Rf")
OPTIONAL_PARTS: tuple[str, ...] = ()
NETS: Mapping[str, str] = {"in": "in", "out": "out", "ninv": "ninv"}
REFERENCE = ("Inverting amplifier, gain -Rf/Rin, noise gain 1 + Rf/Rin; closed-loop "
             "bandwidth GBW / noise gain: S. Franco, Design with Operational Amplifiers and "
             "Analog Integrated Circuits, 4th ed., 2015, §1.3, §6.2 [mem]")
INVERTING = True


def _check_parts(components: Mapping[str, float]) -> None:
    if set(components) != set(PARTS):
        raise ValueError(f"{NAME}: parts must be exactly {PARTS}; got {sorted(components)}")


def noise_gain(components: Mapping[str, float]) -> float:
    """Noise gain 1 + Rf/Rin, V/V.

    Parameters
    ----------
    components : mapping of str to float
        Rin, Rf (ohms).

    Returns
    -------
    float
        1/beta of the loop (Franco 2015, §1.3 [mem]).
    """
    _check_parts(components)
    return 1.0 + components["Rf"] / components["Rin"]


def ideal_figures(components: Mapping[str, float]) -> Figures:
    """Flat gain -Rf/Rin with an ideal op-amp (f0 and Q are 0 for a gain stage).

    Parameters
    ----------
    components : mapping of str to float
        Rin, Rf (ohms).

    Returns
    -------
    Figures
    """
    _check_parts(components)
    return Figures(f0_hz=0.0, q=0.0, gain=-components["Rf"] / components["Rin"])


def bandwidth_hz(components: Mapping[str, float], model: OpAmp) -> float:
    """-3 dB bandwidth of the stage with the single-pole op-amp model, Hz.

    Parameters
    ----------
    components : mapping of str to float
        Rin, Rf (ohms).
    model : OpAmp
        The op-amp model.

    Returns
    -------
    float
        GBW (1 + NG/A0) / NG ~= GBW/NG, NG = 1 + Rf/Rin (Franco 2015, §6.2 [mem]). Exact
        for A(s) = A0/(1 + s A0/wt): -(Rf/Rin) A/(A + NG) has its one pole there.
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
        NG · f_max / sqrt(1/(1 - 0.01)^2 - 1) ~= 7.02 NG f_max, Hz (single-pole closed
        loop, Franco 2015, §6.2 [mem]).
    """
    return common.gain_stage_gbw_needed_hz(noise_gain(design(section)), max_freq_hz)


def design(section: Section, *, c_farads: float | None = None) -> dict[str, float]:
    """Part values for an inverting gain.

    Parameters
    ----------
    section : Section
        kind "gain", gain != 0 (V/V); the sign is ignored (the stage gives -|gain|).
    c_farads : float, optional
        Ignored (no capacitors); accepted for the common topology interface.

    Returns
    -------
    dict of str to float
        Rin, Rf with Rf/Rin = |gain|, the smaller 10 kOhm.

    Raises
    ------
    ValueError
        If the section is not of kind "gain".
    InfeasibleDesign
        If the gain is 0.
    """
    common.require(section, kind=KIND)
    rf, rin = common.ratio_pair(abs(section.gain))
    return {"Rin": rin, "Rf": rf}


def elements(components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]:
    """Element list of the stage.

    Parameters and return as ``circuits.base.Topology.elements``.

    Parts Rin, Rf (ohms), both needed.
    """
    _check_parts(components)
    return (
        resistor("Rin", "in", "ninv", components["Rin"]),
        resistor("Rf", "ninv", "out", components["Rf"]),
        opamp("U1", "0", "ninv", "out", model),
    )


def _summary(parts: Mapping[str, float]) -> str:
    """The start of the first reason of ``limits``: the ratio and the input resistance."""
    return (f"Rf/Rin = {format_sig(parts['Rf'] / parts['Rin'])}; input resistance "
            f"{format_si(parts['Rin'], 'Ω', significant=4)}")


def limits(section: Section, model: OpAmp, *, max_freq_hz: float | None = None) -> Limits:
    """What this stage needs and offers.

    Parameters and return as ``circuits.base.GainStageTopology.limits``.

    Infeasible for a zero gain, a resistor ratio above ``MAX_SPREAD`` or, with
    `max_freq_hz`, too little GBW. ``noise_gain`` is 1 + |gain| -- one more than the non-
    inverting stage of the same |gain| -- and ``q_sensitivity`` 0 (no Q).
    """
    return common.gain_stage_limits(section, model, kind=KIND, opamps=OPAMPS, design=design,
                                    noise_gain=noise_gain, summary=_summary,
                                    max_freq_hz=max_freq_hz)
