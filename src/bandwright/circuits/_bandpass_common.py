"""Helpers of the five bandpass topologies.

Private helpers for ``mfb_bandpass``, ``sallen_key_bandpass``, ``dual_amp_bandpass``,
``tow_thomas`` and ``state_variable``: argument checks, the input divider that lowers a
section's natural centre gain (its values and its two resistors in the element list), the
GBW need from a topology's first-order shifts, and the assembly of a ``Limits`` record from
the figures each topology computes in closed form. The rules every topology shares -- the
finite-GBW criterion, spread, nominal scale, capacitor check -- are in ``circuits.rules``.

The bandpass criteria
---------------------
*Finite GBW.* Each topology states the first-order relative shifts of f0 and Q caused by
single-pole op-amps, per unit e = f0/GBW (derived with sympy on its element list, see its
``gbw_shift``: df0/f0 ~= k_f e, dQ/Q ~= k_q e); ``gbw_needed_from_shift`` applies the one
criterion of ``circuits.rules`` to them.

*Tolerance.* With every part off by the tolerance t in its worst direction, Q moves by
about ``sum_x |S_x^Q| t`` (first order; Schaumann & Van Valkenburg, *Design of Analog
Filters*, 2001, ch. 3 [mem]). A section is accepted while that worst-case shift stays at
or below ``TOLERANCE_Q_SHIFT_LIMIT`` (50 %): beyond it the damping of a positive-feedback
section can approach zero and the section ring or oscillate (common practice; the exact
bound is our choice and is stated in every reason).

*Spread.* Largest over smallest resistor at most ``rules.MAX_SPREAD``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping

from bandwright.circuits import rules
from bandwright.circuits.base import Limits
from bandwright.circuits.elements import Element, resistor
from bandwright.circuits.rules import (MAX_SPREAD, NOMINAL_C_FARADS, check_capacitor,
                                       gbw_reason, infeasible_limits)
from bandwright.errors import InfeasibleDesign
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.parts.notation import format_sig

__all__ = ["TOLERANCE_Q_SHIFT_LIMIT", "MAX_SPREAD", "DEFAULT_TOLERANCE",
           "GAIN_RTOL", "tolerance_shift", "check_section", "divider",
           "design_gain", "is_fitted", "resistor_spread", "assemble_limits",
           "check_design", "fitted",
           "divider_ratio", "input_divider", "gbw_needed_from_shift", "topology_limits"]

#: Largest worst-case first-order relative Q shift from part tolerances accepted.
TOLERANCE_Q_SHIFT_LIMIT = 0.5
#: Part tolerance assumed by ``limits`` when the caller gives none (E96, 1 %; common
#: practice). The planner passes the requirement's own (``[tolerance]``, or the tolerance
#: customary for its series).
DEFAULT_TOLERANCE = 0.01


def tolerance_shift(sensitivities: Mapping[str, float], r_tolerance: float,
                    c_tolerance: float) -> float:
    """Worst-case first-order relative Q shift: sum of |S_x^Q| t_x over the parts.

    Parameters
    ----------
    sensitivities : mapping of str to float
        S_x^Q by part name ("R..." resistors, "C..." capacitors).
    r_tolerance, c_tolerance : float
        Relative tolerances of the resistors and of the capacitors.

    Returns
    -------
    float
        sum |S_x^Q| t_x (Schaumann & Van Valkenburg 2001, ch. 3 [mem]).
    """
    return sum(abs(v) * (c_tolerance if k.startswith("C") else r_tolerance)
               for k, v in sensitivities.items())
#: A requested gain within this relative distance of the natural one is the natural one:
#: the difference is float round-off and would otherwise ask for a teraohm divider leg.
GAIN_RTOL = 1e-9


def check_section(section: Section) -> None:
    """Raise ValueError unless `section` is a bandpass with finite f0 > 0, Q > 0, gain != 0.

    Parameters
    ----------
    section : Section
        The section to check.
    """
    if section.kind != "bandpass":
        raise ValueError(f"section kind {section.kind!r}: these topologies build 'bandpass'")
    if not (math.isfinite(section.f0_hz) and section.f0_hz > 0):
        raise ValueError(f"f0 = {section.f0_hz!r} Hz: must be finite and > 0")
    if not (math.isfinite(section.q) and section.q > 0):
        raise ValueError(f"Q = {section.q!r}: must be finite and > 0")
    if not (math.isfinite(section.gain) and section.gain != 0):
        raise ValueError(f"gain = {section.gain!r} V/V: must be finite and non-zero")


def design_gain(section: Section, natural_gain: float) -> float:
    """The |gain| a topology designs for: |section.gain|, or its natural gain if that is less.

    Parameters
    ----------
    section : Section
        The section.
    natural_gain : float
        The largest |centre gain| the topology reaches for this Q (> 0).

    Returns
    -------
    float
        min(|gain|, natural_gain); a request within ``GAIN_RTOL`` of the natural gain is
        returned as the natural gain. The shortfall, if any, is reported by ``limits``.
    """
    g = abs(section.gain)
    if g >= natural_gain * (1 - GAIN_RTOL):
        return natural_gain
    return g


def divider(r_ohms: float, ratio: float) -> tuple[float, float]:
    """Two resistors that divide by `ratio` and have Thevenin resistance `r_ohms`.

    Parameters
    ----------
    r_ohms : float
        Resistance the divider presents to the node it drives (r_top ∥ r_bottom), ohms.
    ratio : float
        Wanted r_bottom / (r_top + r_bottom), in (0, 1].

    Returns
    -------
    (float, float)
        (r_top, r_bottom) in ohms; r_bottom is ``math.inf`` (not fitted) when `ratio` is 1
        within ``GAIN_RTOL``.

    Notes
    -----
    Thevenin equivalent of a divider: V = ratio · V_in behind r_top ∥ r_bottom, so
    r_top = r / ratio and r_bottom = r / (1 - ratio).
    """
    if not 0 < ratio <= 1 + GAIN_RTOL:
        raise ValueError(f"divider ratio {ratio!r}: must be in (0, 1]")
    if ratio >= 1 - GAIN_RTOL:
        return r_ohms, math.inf
    return r_ohms / ratio, r_ohms / (1 - ratio)


def is_fitted(components: Mapping[str, float], name: str) -> bool:
    """True when part `name` is present with a finite value (absent or inf: not fitted)."""
    return name in components and math.isfinite(components[name])


def resistor_spread(components: Mapping[str, float]) -> float:
    """Largest over smallest fitted resistor (names starting with "R").

    Parameters
    ----------
    components : mapping of str to float
        Part name -> value; infinite values (parts not fitted) are skipped.

    Returns
    -------
    float
        The spread, >= 1.
    """
    values = [v for k, v in components.items() if k.startswith("R") and math.isfinite(v)]
    return max(values) / min(values) if values else 1.0


def assemble_limits(section: Section, model_gbw_hz: float, *, opamps: int,
                    gbw_needed_hz: float, gbw_rule: str, spread: float,
                    sensitivities: Mapping[str, float], noise_gain: float,
                    natural_gain: float, accept_gain_shortfall: bool, r_tolerance: float,
                    c_tolerance: float | None, max_spread: float,
                    tolerance_q_max: float | None = None,
                    problems: tuple[str, ...] = ()) -> Limits:
    """Build the Limits record of a section from a topology's figures.

    Parameters
    ----------
    section : Section
        The section asked for.
    model_gbw_hz : float
        GBW of the op-amp, Hz.
    opamps : int
        Number of op-amps of the topology.
    gbw_needed_hz : float
        GBW the topology needs for this section, Hz.
    gbw_rule : str
        The criterion behind `gbw_needed_hz`, quoted in the reason.
    spread : float
        Resistor spread of the ideal design.
    sensitivities : mapping of str to float
        S_x^Q of every passive part at the design point.
    noise_gain : float
        Noise gain at f0 (largest over op-amps).
    natural_gain : float
        Largest |centre gain| the topology reaches at this Q.
    accept_gain_shortfall : bool
        When True, a requested gain above `natural_gain` is a note, not a failure.
    r_tolerance : float
        Relative resistor tolerance (0.01 for 1 %).
    c_tolerance : float or None
        Relative capacitor tolerance; None: the same as `r_tolerance`.
    max_spread : float
        Largest spread accepted.
    tolerance_q_max : float, optional
        Largest Q the topology keeps within the tolerance criterion, quoted
        in the reason when the criterion fails.
    problems : tuple of str
        Reasons found by the topology itself that make it infeasible.

    Returns
    -------
    Limits
    """
    failures: list[str] = list(problems)
    notes: list[str] = []
    gbw_ok, gbw_text = gbw_reason(gbw_needed_hz, model_gbw_hz, gbw_rule)
    (notes if gbw_ok else failures).append(gbw_text)
    g = abs(section.gain)
    if g > natural_gain * (1 + GAIN_RTOL):
        text = (f"gain {format_sig(g)} V/V exceeds the {format_sig(natural_gain)} V/V this section "
                f"reaches at Q {format_sig(section.q)}; designed for {format_sig(natural_gain)} "
                f"V/V, {20 * math.log10(g / natural_gain):.2f} dB to be made up by a gain stage")
        (notes if accept_gain_shortfall else failures).append(text)
    if spread > max_spread:
        failures.append(f"resistor spread {format_sig(spread)}:1 exceeds "
                        f"{format_sig(max_spread)}:1")
    if c_tolerance is None:
        c_tolerance = r_tolerance
    shift = tolerance_shift(sensitivities, r_tolerance, c_tolerance)
    if shift > TOLERANCE_Q_SHIFT_LIMIT:
        parts = (f"{format_sig(100 * r_tolerance, 3)} % parts" if c_tolerance == r_tolerance else
                 f"{format_sig(100 * r_tolerance, 3)} % resistors and "
                 f"{format_sig(100 * c_tolerance, 3)} % "
                 "capacitors")
        failures.append(
            f"Q {format_sig(section.q)}: with {parts} Q may move by {100 * shift:.0f} % in the "
            f"worst case (each part's Q sensitivity times its tolerance, added up; first "
            f"order); at most "
            f"{100 * TOLERANCE_Q_SHIFT_LIMIT:.0f} % is accepted"
            + (f", which this section keeps up to Q {format_sig(tolerance_q_max, 3)}"
               if tolerance_q_max else ""))
    return Limits(feasible=not failures, reasons=tuple(failures + notes),
                  gbw_needed_hz=float(gbw_needed_hz), spread=float(spread),
                  q_sensitivity=float(max(abs(v) for v in sensitivities.values())),
                  noise_gain=float(noise_gain), opamps=opamps)



def check_design(section: Section, c_farads: float, *,
                 problems: Callable[[Section], tuple[str, ...]] | None = None) -> None:
    """The checks at the top of every ``design``: the arguments, then the topology's own.

    Parameters
    ----------
    section : Section
        The section to design.
    c_farads : float
        The capacitor value asked for, farads.
    problems : callable, optional
        The topology's reasons why it cannot build `section` (empty when it can).

    Raises
    ------
    ValueError
        From ``check_section`` or ``check_capacitor``.
    InfeasibleDesign
        With the first of `problems`, if any.
    """
    check_section(section)
    check_capacitor(c_farads)
    found = problems(section) if problems is not None else ()
    if found:
        raise InfeasibleDesign(found[0])


def fitted(parts: Mapping[str, float]) -> dict[str, float]:
    """The parts with a finite value, in their order (an infinite one is not fitted).

    Parameters
    ----------
    parts : mapping of str to float
        Part name -> value, ``math.inf`` for a part left out (``divider``).

    Returns
    -------
    dict of str to float
    """
    return {k: v for k, v in parts.items() if math.isfinite(v)}


def divider_ratio(section: Section, natural_gain: float) -> float:
    """Ratio of the input divider: the designed |gain| over the natural gain, in (0, 1].

    Parameters
    ----------
    section, natural_gain
        As for ``design_gain``.

    Returns
    -------
    float
        ``design_gain(section, natural_gain) / natural_gain``: the share of the input
        conductance in R1a (1: R1b not fitted).
    """
    return design_gain(section, natural_gain) / natural_gain


def input_divider(components: Mapping[str, float], net: str) -> list[Element]:
    """The input divider's elements: R1a from "in" to `net`, R1b from `net` to ground if fitted.

    Parameters
    ----------
    components : mapping of str to float
        The part list (R1b may be absent or ``math.inf``: not fitted).
    net : str
        The net the divider drives.

    Returns
    -------
    list of Element
        [R1a] or [R1a, R1b].
    """
    out = [resistor("R1a", "in", net, components["R1a"])]
    if is_fitted(components, "R1b"):
        out.append(resistor("R1b", net, "0", components["R1b"]))
    return out


def gbw_needed_from_shift(section: Section, shift: tuple[float, float]) -> float:
    """GBW keeping the first-order pole movement within ``rules.POLE_MOVEMENT_SHARE``.

    Parameters
    ----------
    section : Section
        The section.
    shift : (float, float)
        (k_f, k_q) of the topology's ``gbw_shift``: df0/f0 ~= k_f e, dQ/Q ~= k_q e.

    Returns
    -------
    float
        f0 max(Q |k_f|, |k_q|) / 0.1, Hz (``rules.gbw_needed_hz``).
    """
    return rules.gbw_needed_hz(section.f0_hz, section.q, shift)


def topology_limits(section: Section, model: OpAmp, *, opamps: int,
                    design: Callable[..., dict[str, float]],
                    gbw_needed_hz: Callable[[Section], float],
                    q_sensitivities: Callable[[Section], Mapping[str, float]],
                    noise_gain: Callable[[Section], float],
                    natural_gain: Callable[[float], float],
                    accept_gain_shortfall: bool, r_tolerance: float,
                    c_tolerance: float | None, max_spread: float,
                    gbw_rule: str = rules.GBW_RULE,
                    problems: Callable[[Section], tuple[str, ...]] | None = None,
                    tolerance_q_max: Callable[[float, float | None], float] | None = None
                    ) -> Limits:
    """The ``limits`` of a bandpass topology, from its functions.

    Checks the section, returns infeasible limits (every figure infinite) for the
    topology's own `problems`, and otherwise assembles the record (``assemble_limits``)
    with the resistor spread of a design at ``NOMINAL_C_FARADS``.

    Parameters
    ----------
    section : Section
        A bandpass section.
    model : OpAmp
        The op-amp (every amplifier of the topology).
    opamps : int
        The topology's OPAMPS.
    design : callable
        The topology's ``design(section, *, c_farads)``.
    gbw_needed_hz, q_sensitivities, noise_gain : callable
        The topology's functions of the section.
    natural_gain : callable
        Q -> the largest |centre gain| the topology reaches.
    accept_gain_shortfall, r_tolerance, c_tolerance, max_spread
        As for ``assemble_limits``.
    gbw_rule : str
        The criterion behind ``gbw_needed_hz``, quoted in the reason.
    problems : callable, optional
        The topology's reasons why it cannot build the section (empty when it can).
    tolerance_q_max : callable, optional
        (r_tolerance, c_tolerance) -> the largest Q the topology keeps within the
        tolerance criterion, quoted in the reason when that fails.

    Returns
    -------
    Limits

    Raises
    ------
    ValueError
        From ``check_section``.
    """
    check_section(section)
    found = problems(section) if problems is not None else ()
    if found:
        return infeasible_limits(list(found), opamps)
    spread = resistor_spread(design(section, c_farads=NOMINAL_C_FARADS))
    return assemble_limits(
        section, model.gbw_hz, opamps=opamps, gbw_needed_hz=gbw_needed_hz(section),
        gbw_rule=gbw_rule, spread=spread, sensitivities=q_sensitivities(section),
        noise_gain=noise_gain(section), natural_gain=natural_gain(section.q),
        accept_gain_shortfall=accept_gain_shortfall, r_tolerance=r_tolerance,
        c_tolerance=c_tolerance, max_spread=max_spread,
        tolerance_q_max=(tolerance_q_max(r_tolerance, c_tolerance)
                         if tolerance_q_max is not None else None))
