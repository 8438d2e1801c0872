"""Customary part tolerances and capacitor dielectrics (common practice, not standards).

IEC 60063 defines the E-series as value steps; the tolerance that customarily goes with
each series is trade practice, so it is kept a separate setting: the planner uses
:func:`default_tolerance_pct` only when the requirement gives no tolerance.
"""

from __future__ import annotations

import math

from bandwright.parts.eseries import SERIES_NAMES

__all__ = ["DEFAULT_TOLERANCE_PCT", "C0G_MAX_FARADS", "default_tolerance_pct", "dielectric"]

# Customary tolerance by series, common practice [mem]. IEC 60063 itself lists no
# tolerance for E3; it sits with E6 here, the loosest customary figure.
DEFAULT_TOLERANCE_PCT: dict[str, float] = dict(zip(SERIES_NAMES,
                                                  (20.0, 20.0, 10.0, 5.0, 2.0, 1.0, 0.5),
                                                  strict=True))

# Largest capacitance for which a C0G/NP0 ceramic is the usual filter choice (common practice).
C0G_MAX_FARADS = 10e-9


def default_tolerance_pct(series: str) -> float:
    """The tolerance customarily sold with an E-series.

    Parameters
    ----------
    series : str
        Series name, "E3" … "E192" (case is ignored).

    Returns
    -------
    float
        Tolerance in percent (±): E6 20, E12 10, E24 5, E48 2, E96 1, E192 0.5; E3 20.

    Raises
    ------
    ValueError
        If `series` is unknown.

    Notes
    -----
    Common practice [mem], as listed in the project's references; tighter parts exist
    in every series, which is why tolerance is a separate setting.
    """
    key = str(series).strip().upper()
    if key not in DEFAULT_TOLERANCE_PCT:
        raise ValueError(f"unknown E-series {series!r}: expected one of "
                         f"{', '.join(DEFAULT_TOLERANCE_PCT)}")
    return DEFAULT_TOLERANCE_PCT[key]


def dielectric(c_farads: float) -> str:
    """Suggest a capacitor dielectric for a filter capacitor.

    Parameters
    ----------
    c_farads : float
        Capacitance, farads, > 0.

    Returns
    -------
    str
        "C0G/NP0" up to and including 10 nF (`C0G_MAX_FARADS`), "film (PPS/PP)" above.

    Raises
    ------
    ValueError
        If `c_farads` is not finite and positive.

    Notes
    -----
    Common practice: filter capacitors need low loss, low voltage and temperature
    coefficients and no piezo or ageing effects, which C0G/NP0 ceramics give in small
    values and polyphenylene-sulphide or polypropylene film gives in large ones;
    high-permittivity ceramics (X7R and the like) are avoided in the signal path.
    """
    c = float(c_farads)
    if not math.isfinite(c) or c <= 0:
        raise ValueError(f"capacitance must be finite and > 0, got {c_farads!r}")
    return "C0G/NP0" if c <= C0G_MAX_FARADS * (1 + 1e-9) else "film (PPS/PP)"
