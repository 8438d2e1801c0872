"""What every topology module provides, and the figures a designed circuit reports."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Protocol

from bandwright.circuits.elements import Element
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section
from bandwright.vocabulary import StageKind

__all__ = ["Topology", "BandpassTopology", "GainStageTopology", "Limits", "Figures"]


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
    """The module-level interface of every ``circuits/<name>.py``.

    Attributes
    ----------
    NAME : str
        The topology's name in plan, chain and report files.
    KIND : StageKind
        The kind of section it builds.
    OPAMPS : int
        Number of op-amps.
    PARTS : tuple of str
        Its passive parts, in the order files list them.
    OPTIONAL_PARTS : tuple of str
        The parts of `PARTS` a chain file may leave out (empty: every part is needed).
    NETS : Mapping[str, str]
        Its local nets and what each one is.
    REFERENCE : str
        The published source of its design equations.
    INVERTING : bool
        True when its passband gain is -|gain|; the chain's gains are magnitudes, so every
        caller gives a section the sign this flag says (docs/design.md).

    Optional members
    ----------------
    Not declared below, since only some topologies have them; callers read them with a
    default (``circuits.assign._natural_gain``):

    natural_gain : callable (q: float) -> float
        The largest |centre gain| the topology reaches at Q `q` (the bandpass topologies
        whose ceiling grows with Q: multiple-feedback, Sallen-Key, state-variable).
    NATURAL_GAIN : float
        That ceiling when it does not depend on Q (the dual-amplifier bandpass).
    Neither: no ceiling (infinite), as for Tow-Thomas, the lowpass, highpass and gain
    stages. A topology has at most one of the two; ``natural_gain`` wins if both exist.

    Notes
    -----
    ``limits`` takes keyword options by kind, each with a default so a bare
    ``limits(section, model)`` always works: the bandpass topologies (`BandpassTopology`)
    take the part tolerances of their Q-shift rule, a spread limit and
    `accept_gain_shortfall`; the gain stages (`GainStageTopology`) take the highest
    frequency they must pass; lowpass and highpass sections take none.
    """

    NAME: str
    KIND: StageKind
    OPAMPS: int
    PARTS: tuple[str, ...]
    OPTIONAL_PARTS: tuple[str, ...]
    NETS: Mapping[str, str]
    REFERENCE: str
    INVERTING: bool

    def design(self, section: Section, *, c_farads: float) -> dict[str, float]: ...

    def elements(self, components: Mapping[str, float], model: OpAmp) -> tuple[Element, ...]: ...

    def limits(self, section: Section, model: OpAmp) -> Limits: ...


class BandpassTopology(Topology, Protocol):
    """A bandpass ``Topology``: its ``limits`` judge the Q shift at the part tolerances.

    ``limits`` options: `r_tolerance`, `c_tolerance` (relative; None for `c_tolerance`:
    the resistors'), `max_spread` (the largest component ratio allowed) and
    `accept_gain_shortfall` (feasible at the topology's natural gain when the asked gain is
    out of reach).
    """

    def limits(self, section: Section, model: OpAmp, *, r_tolerance: float = ...,
               c_tolerance: float | None = None, max_spread: float = ...,
               accept_gain_shortfall: bool = False) -> Limits: ...


class GainStageTopology(Topology, Protocol):
    """A gain-stage ``Topology``: its ``limits`` take the highest frequency it must pass
    (`max_freq_hz`; None: its own default)."""

    def limits(self, section: Section, model: OpAmp, *,
               max_freq_hz: float | None = None) -> Limits: ...
