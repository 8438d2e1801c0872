"""The element list: the one description of a circuit.

The nodal solver analyses it, the SPICE writer writes it and the schematic draws it.
Nets are strings; "0" is ground. A stage's input net is "in" and its output net is "out";
other nets are internal to the stage (the chain prefixes them when it joins stages).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from bandwright.parts.opamp import OpAmp

__all__ = ["Element", "ElementKind", "GROUND", "REFERENCE_NET", "SUPPLY_NET", "resistor", "capacitor", "opamp",
           "opamp_output_nets", "passive_values"]

ElementKind = Literal["R", "C", "opamp"]
GROUND = "0"
#: The signal reference of a single supply (mid-rail): where a split-rail circuit has ground.
REFERENCE_NET = "ref"
#: The positive rail of a single supply: a DC source, so an AC ground.
SUPPLY_NET = "vcc"


@dataclass(frozen=True, slots=True)
class Element:
    """One circuit element between named nets.

    Attributes
    ----------
    name : str
        Reference designator inside its stage ("R1a", "C2", "U1").
    kind : {"R", "C", "opamp"}
    nets : tuple of str
        R and C: (a, b). Op-amp: (non_inverting, inverting, output).
    value : float
        Ohms for R, farads for C; 0 for an op-amp.
    model : OpAmp or None
        The op-amp model (op-amps only).
    """

    name: str
    kind: ElementKind
    nets: tuple[str, ...]
    value: float = 0.0
    model: OpAmp | None = None


def resistor(name: str, a: str, b: str, r_ohms: float) -> Element:
    """A resistor of `r_ohms` between nets `a` and `b`."""
    return Element(name=name, kind="R", nets=(a, b), value=float(r_ohms))


def capacitor(name: str, a: str, b: str, c_farads: float) -> Element:
    """A capacitor of `c_farads` between nets `a` and `b`."""
    return Element(name=name, kind="C", nets=(a, b), value=float(c_farads))


def opamp(name: str, non_inverting: str, inverting: str, output: str, model: OpAmp) -> Element:
    """An op-amp with inputs `non_inverting`, `inverting` driving net `output`."""
    return Element(name=name, kind="opamp", nets=(non_inverting, inverting, output), model=model)


def opamp_output_nets(elements: tuple[Element, ...]) -> tuple[str, ...]:
    """Output nets of every op-amp, in element order."""
    return tuple(e.nets[2] for e in elements if e.kind == "opamp")


def passive_values(elements: tuple[Element, ...]) -> dict[str, float]:
    """Name → value of every R and C."""
    return {e.name: e.value for e in elements if e.kind in ("R", "C")}
