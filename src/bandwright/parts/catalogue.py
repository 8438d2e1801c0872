"""Generic op-amp archetypes and building a model from a requirement's ``[amplifier]`` table.

The archetypes are classes of op-amp, not products: each carries round, typical figures
of its class (common practice), to be overridden key by key by the requirement.

=============  ========  ======  =======  =======  ========  =========  ======  =======  =======
name           GBW       A0      slew     swing    e_n       i_n        corner  i corner load
=============  ========  ======  =======  =======  ========  =========  ======  =======  =======
micropower     200 kHz   100 dB  0.1      0.05 V   50 nV     1 fA       200 Hz  200 Hz   20 kΩ
precision      1 MHz     130 dB  0.4      1.0 V    8 nV      100 fA     3 Hz    100 Hz   2 kΩ
general        3 MHz     100 dB  5        1.0 V    15 nV     10 fA      50 Hz   50 Hz    2 kΩ
low-noise      10 MHz    110 dB  7        1.5 V    3 nV      500 fA     10 Hz   10 Hz    600 Ω
wideband       50 MHz    100 dB  30       1.0 V    6 nV      1 pA       200 Hz  200 Hz   500 Ω
fast           200 MHz   85 dB   300      1.2 V    4 nV      2 pA       1 kHz   1 kHz    150 Ω
=============  ========  ======  =======  =======  ========  =========  ======  =======  =======

Slew in V/µs, noise densities per √Hz, "corner" the voltage noise's 1/f corner, "i corner"
the current noise's, "load" the smallest load for full swing. The precision class has a
bipolar input: its current noise turns up (1/f) far above its voltage-noise corner (common
practice); the others keep one corner for both.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import replace
from types import MappingProxyType
from typing import Mapping

from bandwright.parts.opamp import OpAmp

__all__ = ["ARCHETYPES", "DEFAULT_ARCHETYPE", "OVERRIDE_KEYS", "archetype", "make_opamp",
           "suggest_faster"]

DEFAULT_ARCHETYPE = "general"

# Typical figures of each class (common practice), see the module docstring.
ARCHETYPES: dict[str, OpAmp] = {
    "micropower": OpAmp(name="micropower", gbw_hz=200e3, dc_gain_db=100.0, slew_v_per_us=0.1,
                        swing_to_rail_v=0.05, noise_v_per_rthz=50e-9, noise_a_per_rthz=1e-15,
                        noise_corner_hz=200.0, min_load_ohms=20e3),
    "precision": OpAmp(name="precision", gbw_hz=1e6, dc_gain_db=130.0, slew_v_per_us=0.4,
                       swing_to_rail_v=1.0, noise_v_per_rthz=8e-9, noise_a_per_rthz=100e-15,
                       noise_corner_hz=3.0, min_load_ohms=2e3,
                       current_noise_corner_hz=100.0),
    "general": OpAmp(name="general", gbw_hz=3e6, dc_gain_db=100.0, slew_v_per_us=5.0,
                     swing_to_rail_v=1.0, noise_v_per_rthz=15e-9, noise_a_per_rthz=10e-15,
                     noise_corner_hz=50.0, min_load_ohms=2e3),
    "low-noise": OpAmp(name="low-noise", gbw_hz=10e6, dc_gain_db=110.0, slew_v_per_us=7.0,
                       swing_to_rail_v=1.5, noise_v_per_rthz=3e-9, noise_a_per_rthz=500e-15,
                       noise_corner_hz=10.0, min_load_ohms=600.0),
    "wideband": OpAmp(name="wideband", gbw_hz=50e6, dc_gain_db=100.0, slew_v_per_us=30.0,
                      swing_to_rail_v=1.0, noise_v_per_rthz=6e-9, noise_a_per_rthz=1e-12,
                      noise_corner_hz=200.0, min_load_ohms=500.0),
    "fast": OpAmp(name="fast", gbw_hz=200e6, dc_gain_db=85.0, slew_v_per_us=300.0,
                  swing_to_rail_v=1.2, noise_v_per_rthz=4e-9, noise_a_per_rthz=2e-12,
                  noise_corner_hz=1e3, min_load_ohms=150.0),
}

# Requirement key -> (lowest allowed value, whether the lowest is allowed itself).
_OVERRIDE_RULES: dict[str, tuple[float, bool]] = {
    "gbw_hz": (0.0, False),
    "dc_gain_db": (0.0, False),
    "slew_v_per_us": (0.0, False),
    "swing_to_rail_v": (0.0, True),
    "noise_v_per_rthz": (0.0, True),
    "noise_a_per_rthz": (0.0, True),
    "noise_corner_hz": (0.0, True),
    "min_load_ohms": (0.0, False),
    "current_noise_corner_hz": (0.0, True),
}
OVERRIDE_KEYS: tuple[str, ...] = tuple(_OVERRIDE_RULES)


def archetype(name: str) -> OpAmp:
    """The op-amp model of one archetype.

    Parameters
    ----------
    name : str
        One of the keys of `ARCHETYPES`.

    Returns
    -------
    OpAmp
        The archetype's model (its `name` is `name`).

    Raises
    ------
    KeyError
        If `name` is unknown; the message lists the known names and the closest one.
    """
    return _find_archetype(name)


def _find_archetype(name: str) -> OpAmp:
    try:
        return ARCHETYPES[name]
    except KeyError:
        close = difflib.get_close_matches(str(name), list(ARCHETYPES), n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        raise KeyError(f"unknown op-amp archetype {name!r}{hint}; known: "
                       f"{', '.join(ARCHETYPES)}") from None


def _checked(key: str, value: object) -> float:
    if key not in _OVERRIDE_RULES:
        close = difflib.get_close_matches(key, OVERRIDE_KEYS, n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        raise ValueError(f"unknown op-amp parameter {key!r}{hint}; known: {', '.join(OVERRIDE_KEYS)}")
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError(f"op-amp parameter {key} = {value!r}: must be a number")
    v = float(value)
    floor, inclusive = _OVERRIDE_RULES[key]
    if not math.isfinite(v) or v < floor or (v == floor and not inclusive):
        relation = ">=" if inclusive else ">"
        raise ValueError(f"op-amp parameter {key} = {value!r}: must be finite and {relation} {floor:g}")
    return v


def make_opamp(*, archetype: str | None = None,
               overrides: Mapping[str, float] = MappingProxyType({})) -> OpAmp:
    """Build the op-amp model a requirement asks for.

    Parameters
    ----------
    archetype : str or None, optional
        Base archetype; None means `DEFAULT_ARCHETYPE` ("general").
    overrides : Mapping[str, float], optional
        Requirement keys replacing the base figures: gbw_hz, dc_gain_db, slew_v_per_us,
        swing_to_rail_v, noise_v_per_rthz, noise_a_per_rthz, noise_corner_hz,
        current_noise_corner_hz (default: the base's; the new noise_corner_hz when only
        that is given and the base has one corner for both),
        min_load_ohms.

    Returns
    -------
    OpAmp
        The base with the overrides applied. Its name is the archetype's when no
        override changes a figure, "custom" otherwise.

    Raises
    ------
    KeyError
        If `archetype` is unknown.
    ValueError
        If an override key is unknown (with the closest known key) or its value is not a
        finite number in range (GBW, gain, slew and load > 0; swing, noise and corner >= 0).

    Examples
    --------
    >>> make_opamp(archetype="low-noise", overrides={"gbw_hz": 20e6}).gbw_hz
    20000000.0
    """
    base = _find_archetype(archetype if archetype is not None else DEFAULT_ARCHETYPE)
    changes = {key: _checked(key, value) for key, value in overrides.items()}
    if ("noise_corner_hz" in changes and "current_noise_corner_hz" not in changes
            and base.current_noise_corner_hz == base.noise_corner_hz):
        # A base with one corner for both noises keeps one corner when only the voltage
        # corner is given (the documented default: the same as noise_corner_hz).
        changes["current_noise_corner_hz"] = changes["noise_corner_hz"]
    if all(getattr(base, key) == value for key, value in changes.items()):
        return base
    return replace(base, name="custom", **changes)


def suggest_faster(gbw_needed_hz: float) -> str | None:
    """The slowest archetype whose GBW covers a need.

    Parameters
    ----------
    gbw_needed_hz : float
        GBW a section needs, margin included, Hz.

    Returns
    -------
    str or None
        Name of the archetype with the smallest ``gbw_hz >= gbw_needed_hz``; None when
        even the fastest falls short.

    Examples
    --------
    >>> suggest_faster(5e6), suggest_faster(1e9)
    ('low-noise', None)
    """
    fits = [(amp.gbw_hz, name) for name, amp in ARCHETYPES.items() if amp.gbw_hz >= gbw_needed_hz]
    return min(fits)[1] if fits else None
