"""Practical part-value windows and impedance scaling into them.

Multiplying every resistor of an RC-active section by k and dividing every capacitor by
k leaves each RC product, and so f0, Q and every resistor ratio (the gain), unchanged.
That freedom is used to move a design into the range of values that behave well: large
enough resistors not to load the op-amps, small enough not to add much thermal and
current noise or meet board leakage, capacitors well above stray capacitance.

Parts are told apart by their reference designator: names starting with "R" are
resistors (ohms), names starting with "C" are capacitors (farads), as in the element
list (``circuits/elements.py``).

References
----------
.. [1] Schaumann & Van Valkenburg, *Design of Analog Filters*, Oxford UP 2001, §6
   (impedance scaling of active-RC sections, dynamic-range scaling) [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from bandwright.parts.notation import format_si

__all__ = ["PartWindows", "impedance_scale", "violations"]


@dataclass(frozen=True, slots=True)
class PartWindows:
    """The ranges of resistor and capacitor values a design should stay in.

    The defaults are common practice for op-amp RC-active filters at audio to low-MHz
    frequencies: 1 kΩ … 1 MΩ and 100 pF … 1 µF.

    Attributes
    ----------
    r_min_ohms, r_max_ohms : float
        Smallest and largest resistor, ohms.
    c_min_farads, c_max_farads : float
        Smallest and largest capacitor, farads.

    Raises
    ------
    ValueError
        If a bound is not finite and positive or a minimum exceeds its maximum.
    """

    r_min_ohms: float = 1e3
    r_max_ohms: float = 1e6
    c_min_farads: float = 100e-12
    c_max_farads: float = 1e-6

    def __post_init__(self) -> None:
        bounds = (self.r_min_ohms, self.r_max_ohms, self.c_min_farads, self.c_max_farads)
        if not all(math.isfinite(b) and b > 0 for b in bounds):
            raise ValueError(f"part windows need finite bounds > 0, got {bounds}")
        if self.r_min_ohms > self.r_max_ohms:
            raise ValueError(
                f"r_min_ohms = {self.r_min_ohms} is above r_max_ohms = {self.r_max_ohms}")
        if self.c_min_farads > self.c_max_farads:
            raise ValueError(
                f"c_min_farads = {self.c_min_farads} is above c_max_farads = {self.c_max_farads}")


def _split(values: Mapping[str, float]) -> tuple[list[str], np.ndarray, np.ndarray]:
    """Names in order, a resistor mask and the values as an array."""
    names = list(values)
    for name in names:
        if not name or name[0].upper() not in "RC":
            raise ValueError(f"part {name!r}: name must start with R (resistor) or C (capacitor)")
    v = np.array([float(values[n]) for n in names], dtype=float)
    bad = ~np.isfinite(v) | (v <= 0)
    if np.any(bad):
        first = names[int(np.argmax(bad))]
        raise ValueError(f"part {first} = {values[first]!r}: must be finite and > 0")
    is_r = np.array([n[0].upper() == "R" for n in names], dtype=bool)
    return names, is_r, v


def impedance_scale(values: Mapping[str, float], windows: PartWindows = PartWindows()) -> float:
    """The impedance scale factor that centres a section's parts in their windows.

    Parameters
    ----------
    values : Mapping[str, float]
        Part name → value: "R…" in ohms, "C…" in farads.
    windows : PartWindows, optional
        The allowed ranges (defaults: 1 kΩ … 1 MΩ, 100 pF … 1 µF).

    Returns
    -------
    float
        The factor k: resistors become R·k and capacitors C/k. When some k puts every
        part inside its window, k is the geometric centre of that allowed range; when
        none does, k minimises the worst violation (in log). 1.0 for an empty mapping.

    Raises
    ------
    ValueError
        If a name does not start with R or C, or a value is not finite and positive.

    Notes
    -----
    Each part bounds log k from one side or both: a resistor R needs
    ``log(r_min/R) <= log k <= log(r_max/R)``, a capacitor C needs
    ``log(C/c_max) <= log k <= log(C/c_min)``. Let L be the largest lower bound and U the
    smallest upper bound. If L <= U every k in [L, U] fits and the midpoint centres the
    design. If L > U, the worst violation ``max(L - log k, log k - U)`` is smallest at the
    same midpoint, where both sides are violated by (L - U)/2. So in both cases
    ``k = sqrt(k_L · k_U)``. Scaling keeps f0, Q and gain: every time constant is a
    product R·C [1]_.

    References
    ----------
    .. [1] Schaumann & Van Valkenburg, *Design of Analog Filters*, Oxford UP 2001, §6
       (impedance scaling) [mem].

    Examples
    --------
    >>> impedance_scale({"R1": 10.0, "R2": 100.0})  # into 1k…1M: k from 100 to 1e4
    1000.0
    """
    _, is_r, v = _split(values)
    if v.size == 0:
        return 1.0
    # Lower and upper bounds on k, one pair per part (see Notes); kept as ratios rather
    # than logs so that round windows give round factors.
    k_lower = np.where(is_r, windows.r_min_ohms / v, v / windows.c_max_farads)
    k_upper = np.where(is_r, windows.r_max_ohms / v, v / windows.c_min_farads)
    return float(np.sqrt(k_lower.max() * k_upper.min()))


def violations(values: Mapping[str, float], windows: PartWindows = PartWindows()) -> list[str]:
    """Describe every part outside its window.

    Parameters
    ----------
    values : Mapping[str, float]
        Part name → value: "R…" in ohms, "C…" in farads.
    windows : PartWindows, optional
        The allowed ranges.

    Returns
    -------
    list of str
        One sentence per offending part, in the mapping's order, e.g.
        ``"R2 = 2.2MΩ is above the resistor window 1kΩ … 1MΩ"``; empty when all fit.

    Raises
    ------
    ValueError
        If a name does not start with R or C, or a value is not finite and positive.
    """
    names, is_r, v = _split(values)
    lo = np.where(is_r, windows.r_min_ohms, windows.c_min_farads)
    hi = np.where(is_r, windows.r_max_ohms, windows.c_max_farads)
    out: list[str] = []
    for i in np.flatnonzero((v < lo) | (v > hi)):
        unit, what = ("Ω", "resistor") if is_r[i] else ("F", "capacitor")
        side = "below" if v[i] < lo[i] else "above"
        out.append(f"{names[i]} = {format_si(v[i], unit)} is {side} the {what} window "
                   f"{format_si(lo[i], unit)} … {format_si(hi[i], unit)}")
    return out
