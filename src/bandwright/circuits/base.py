"""What every topology module provides, and the figures a designed circuit reports."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Protocol

from bandwright.circuits.elements import Element
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.vocabulary import StageKind

__all__ = ["Topology", "Limits", "Figures"]


@dataclass(frozen=True, slots=True)
class Figures:
    """Pole frequency, Q and gain of a section (target, ideal-part or built)."""

    f0_hz: float
    q: float
    gain: float


@dataclass(frozen=True, slots=True)
class Limits:
    """What a topology can do for one section with one op-amp.

    Attributes
    ----------
    feasible : bool
        True when the topology can realise the section with this op-amp.
    reasons : tuple of str
        Why it cannot (each with the figures that decide), or notes when it can.
    gbw_needed_hz : float
        The op-amp GBW this topology needs for this section, margin included.
    spread : float
        Component spread of the ideal design: the largest max/min ratio among its resistors
        or among its capacitors (a capacitor ratio counts: an equal-R Sallen-Key lowpass
        keeps all its spread in C1/C2).
    q_sensitivity : float
        Largest |S_x^Q| over the passive parts (ideal op-amp).
    noise_gain : float
        Noise gain seen by the op-amp input voltage noise at f0 (largest over op-amps).
    opamps : int
        Number of op-amps.
    """

    feasible: bool
    reasons: tuple[str, ...]
    gbw_needed_hz: float
    spread: float
    q_sensitivity: float
    noise_gain: float
    opamps: int


class Topology(Protocol):
    """The module-level interface of every ``circuits/<name>.py``."""

    NAME: str
    KIND: StageKind
    OPAMPS: int
    PARTS: tuple[str, ...]
    NETS: Mapping[str, str]
    REFERENCE: str

    def design(self, section: Section, *, c_farads: float) -> dict[str, float]: ...

    def elements(self, components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]: ...

    def limits(self, section: Section, model: OpAmp) -> Limits: ...
