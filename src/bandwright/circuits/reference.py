"""The signal reference of a single supply: a divider from the rail, its decoupling, and a
follower where the chain needs one.

On split rails the signal reference is ground and nothing here is built. On a single supply
every stage's ground connection (non-inverting inputs, shunt legs, divider legs) goes to the
reference net ``ref`` instead (``referenced``), and the chain gains one reference network::

    unbuffered:   [vcc] --R1_ref-- [ref] --R2_ref-- 0,   [ref] --C1_ref-- 0
    buffered:     [vcc] --R1_ref-- [refdiv] --R2_ref-- 0, [refdiv] --C1_ref-- 0,
                  U1_ref: + at [refdiv], - at [ref], output [ref] (a follower)

Which one: a divider alone when the stages tie only op-amp inputs to the reference (they
draw their bias current, nothing of the signal), unless that current across the divider
moves the reference by more than ``MAX_DIVIDER_SHIFT_V``; a follower when a resistor or
capacitor of a stage returns signal current to the reference (a divider would turn that
current into a voltage on the reference and couple every stage to every other).

The decoupling capacitor puts the divider's pole ``DECOUPLE_BELOW`` times below the lowest
frequency of interest, so the divider's thermal noise (4kT R1∥R2, Johnson/Nyquist 1928) is
filtered there; the nodal solver sees every part of the network, so that noise and the
follower's own noise count in the noise budget, and its impedance in the response.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Sequence

from bandwright.circuits.elements import (GROUND, REFERENCE_NET, SUPPLY_NET, Element, capacitor,
                                          opamp, resistor)
from bandwright.circuits.nodal import BOLTZMANN_J_PER_K, KELVIN_OFFSET
from bandwright.parts.eseries import bracket, nearest
from bandwright.parts.notation import format_hz, format_si, format_sig, plural
from bandwright.parts.opamp import OpAmp

__all__ = ["Reference", "referenced", "design_reference", "DIVIDER_OHMS", "DECOUPLE_BELOW",
           "MAX_DIVIDER_SHIFT_V", "DIVIDER_NET", "SPLIT_REFERENCE"]

#: R1∥R2 of the divider: low enough that op-amp bias currents barely move it, high enough
#: that it draws only tens of µA from the rail (common practice).
DIVIDER_OHMS = 50e3
#: Divider pole this many times below the lowest frequency of interest.
DECOUPLE_BELOW = 20.0
#: Largest shift of an unbuffered reference by the bias currents drawn from it.
MAX_DIVIDER_SHIFT_V = 1e-3
DIVIDER_NET = "refdiv"


@dataclass(frozen=True, slots=True)
class Reference:
    """The chain's signal reference.

    Attributes
    ----------
    reference_v : float
        The reference level asked for, V (0 on split rails).
    supply_v : float
        The upper rail, V (the divider's top).
    single : bool
        True on a single supply: stages are referenced to ``ref`` and `elements` hold the
        network.
    elements : tuple of Element
        The network, nets "vcc", "ref" (and "refdiv" when buffered), ground "0".
    buffered : bool
        Whether a follower drives ``ref``.
    reason : str
        Which network and why, with the figures.
    """

    reference_v: float = 0.0
    supply_v: float = 0.0
    single: bool = False
    elements: tuple[Element, ...] = ()
    buffered: bool = False
    reason: str = ""


#: Split rails: ground is the reference.
SPLIT_REFERENCE = Reference()


def referenced(elements: Sequence[Element]) -> tuple[Element, ...]:
    """A stage's element list with every ground connection moved to the reference net.

    Where a split-rail circuit returns to ground (non-inverting inputs, shunt legs, divider
    legs, shunt capacitors), a single-supply one returns to the mid-rail reference: both are
    AC grounds, so the response is the same, and the DC level is the reference's.
    """
    return tuple(replace(e, nets=tuple(REFERENCE_NET if n == GROUND else n for n in e.nets))
                 for e in elements)


def design_reference(stage_elements: Sequence[Element], *, rails_v: tuple[float, float],
                     reference_v: float, model: OpAmp, low_hz: float,
                     c_series: str = "E6") -> Reference:
    """The reference network for a chain on a single supply.

    Parameters
    ----------
    stage_elements : sequence of Element
        Every stage's elements, already ``referenced``.
    rails_v : (float, float)
        The rails, V; the divider hangs from the upper one to ground.
    reference_v : float
        Reference level, V.
    model : OpAmp
        The op-amp of the follower (and the one whose bias current the divider carries).
    low_hz : float
        Lowest frequency of interest (the passband's lower edge), Hz.
    c_series : str
        Series of the decoupling capacitor (rounded up).

    Returns
    -------
    Reference

    Notes
    -----
    Divider R1 = R∥/k, R2 = R∥/(1 - k) (each rounded to E96), k = V_ref/V+, so that V+ R2/(R1 + R2) = V_ref and
    R1∥R2 = R∥ (voltage divider, any circuit-theory text). The decoupling pole
    f_c = 1/(2π R∥ C) sits ``DECOUPLE_BELOW`` times below `low_hz`.
    """
    top = rails_v[1]
    k = reference_v / top
    r_par = DIVIDER_OHMS
    r1, r2 = float(nearest(r_par / k, "E96")), float(nearest(r_par / (1 - k), "E96"))
    c_need = 1 / (2 * math.pi * r_par * low_hz / DECOUPLE_BELOW)
    c = float(bracket(c_need, c_series)[1])  # rounded up: the pole no higher than asked
    passive_legs = [e.name for e in stage_elements
                    if e.kind in ("R", "C") and REFERENCE_NET in e.nets]
    inputs = sum(1 for e in stage_elements if e.kind == "opamp"
                 for n in e.nets[:2] if n == REFERENCE_NET)
    shift_v = inputs * abs(model.bias_current_a) * r_par
    fc_hz = 1 / (2 * math.pi * r_par * c)
    buffered = bool(passive_legs) or shift_v > MAX_DIVIDER_SHIFT_V
    # Its Johnson noise as the divider's description states it, at 25 °C.
    noise_v = math.sqrt(4 * BOLTZMANN_J_PER_K * (25.0 + KELVIN_OFFSET) * r_par)
    divider = (f"divider {format_si(r1, 'Ω')}/{format_si(r2, 'Ω')} from the "
               f"{format_si(top, 'V', significant=4)} rail, {format_si(c, 'F')} decoupling (pole "
               f"{format_hz(fc_hz, significant=3)}, {format_sig(DECOUPLE_BELOW)}× below "
               f"{format_hz(low_hz, significant=3)}, so its "
               f"{format_si(noise_v, 'V/√Hz', significant=2)} is filtered in band)")
    if passive_legs:
        why = (f"a follower drives the reference: {plural(len(passive_legs), 'part')} of the "
               f"stages return signal current to it (e.g. {', '.join(passive_legs[:3])}), which a "
               f"divider alone would turn into a voltage shared by every stage")
    elif buffered:
        why = (f"a follower drives the reference: {plural(inputs, 'op-amp input')} draw "
               f"{format_si(inputs * abs(model.bias_current_a), 'A')} of bias current, "
               f"{format_si(shift_v, 'V')} across the divider (more than "
               f"{format_si(MAX_DIVIDER_SHIFT_V, 'V')})")
    else:
        why = (f"no follower: only {plural(inputs, 'op-amp input')} sit at the reference, drawing "
               f"{format_si(inputs * abs(model.bias_current_a), 'A')} "
               f"({format_si(shift_v, 'V')} across the divider) and no signal current")
    node = DIVIDER_NET if buffered else REFERENCE_NET
    els = [resistor("R1_ref", SUPPLY_NET, node, r1), resistor("R2_ref", node, GROUND, r2),
           capacitor("C1_ref", node, GROUND, c)]
    if buffered:
        els.append(opamp("U1_ref", DIVIDER_NET, REFERENCE_NET, REFERENCE_NET, model))
    return Reference(reference_v=reference_v, supply_v=top, single=True, elements=tuple(els),
                     buffered=buffered, reason=f"reference {format_si(reference_v, 'V', significant=4)}: {divider}; {why}")
