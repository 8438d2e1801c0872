"""The DC block: a series capacitor at a stage's input (and, where the stage's input would
then have no DC return, a resistor from behind it to the reference).

A stage with DC gain multiplies whatever DC arrives at its input (the source's DC level away
from the reference, an earlier stage's offset) into its own output's bias. A series capacitor
passes the band and stops that DC; the stage's own input then sits at the reference.
A bandpass or highpass section has no DC gain and needs none.
"""

from __future__ import annotations

from dataclasses import dataclass

from bandwright.circuits.elements import GROUND, Element, capacitor, resistor

__all__ = ["DcBlock", "BLOCK_NET", "BLOCK_C", "BLOCK_R", "blocked", "block_elements"]

#: The local net between the block's capacitor and the stage it feeds.
BLOCK_NET = "dcb"
#: Element names of the block's parts inside its stage.
BLOCK_C = "CB"
BLOCK_R = "RB"


@dataclass(frozen=True, slots=True)
class DcBlock:
    """A DC block at a stage's input.

    Attributes
    ----------
    c_farads : float
        The series capacitor, F (E-series value).
    r_ohms : float or None
        The resistor from behind the capacitor to the reference (a non-inverting input's DC
        return), ohms; None where the stage itself returns its input to DC.
    net : str
        The stage's local net the block sits on ("in").
    corner_hz : float
        The block's highpass corner 1/(2π R C) with R the impedance it drives, Hz.
    reason : str
        Why the stage is blocked, with the figures.
    """

    c_farads: float
    r_ohms: float | None
    net: str = "in"
    corner_hz: float = 0.0
    reason: str = ""


def block_elements(block: DcBlock) -> tuple[Element, ...]:
    """The block's own parts: the series C from `block.net` to ``BLOCK_NET`` and the shunt R
    from there to ground (the reference on a single supply, as every ground leg)."""
    out = [capacitor(BLOCK_C, block.net, BLOCK_NET, block.c_farads)]
    if block.r_ohms is not None:
        out.append(resistor(BLOCK_R, BLOCK_NET, GROUND, block.r_ohms))
    return tuple(out)


def blocked(elements: tuple[Element, ...], block: DcBlock | None) -> tuple[Element, ...]:
    """`elements` with `block` ahead of them: what sat on `block.net` now sits on
    ``BLOCK_NET``, behind the capacitor. Unchanged for None."""
    if block is None:
        return tuple(elements)
    moved = tuple(Element(name=e.name, kind=e.kind,
                          nets=tuple(BLOCK_NET if n == block.net else n for n in e.nets),
                          value=e.value, model=e.model) for e in elements)
    return block_elements(block) + moved
