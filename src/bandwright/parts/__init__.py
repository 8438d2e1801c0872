"""Parts: IEC 60063 series and rounding, value notation, part windows, the op-amp model
and its archetypes, customary tolerances."""

from bandwright.parts.catalogue import (ARCHETYPES, DEFAULT_ARCHETYPE, OVERRIDE_KEYS, archetype,
                                        make_opamp, suggest_faster)
from bandwright.parts.eseries import (SERIES_NAMES, bracket, is_member, nearest, neighbours,
                                      series_mantissas)
from bandwright.parts.notation import format_spice, format_value, parse_value
from bandwright.parts.opamp import OpAmp
from bandwright.parts.tolerance import (C0G_MAX_FARADS, DEFAULT_TOLERANCE_PCT,
                                        default_tolerance_pct, dielectric)
from bandwright.parts.windows import PartWindows, impedance_scale, violations

__all__ = [
    "OpAmp",
    "ARCHETYPES", "DEFAULT_ARCHETYPE", "OVERRIDE_KEYS", "archetype", "make_opamp", "suggest_faster",
    "SERIES_NAMES", "series_mantissas", "nearest", "bracket", "neighbours", "is_member",
    "parse_value", "format_value", "format_spice",
    "PartWindows", "impedance_scale", "violations",
    "DEFAULT_TOLERANCE_PCT", "C0G_MAX_FARADS", "default_tolerance_pct", "dielectric",
]
