"""The chain file (chain.toml, the audit format): its tables, stages and parts, validated with
errors that name the file and the key."""

from __future__ import annotations

import difflib
import re
from pathlib import Path

from bandwright.circuits import TOPOLOGY_NAMES, topology
from bandwright.errors import SpecError
from bandwright.inputs.loader import (TOLERANCE_KEYS, TUNING_KEYS, read_amplifier,
                                      read_common_tables, read_converter, read_passband,
                                      read_stop, read_tolerance, read_tuning)
from bandwright.inputs.reader import TableReader, read_toml
from bandwright.inputs.requirement import Requirement
from bandwright.parts.notation import parse_value

__all__ = ["AUDIT_TABLES", "load_chain", "MAX_STAGES"]

#: The most stages an audit takes: memory grows with the square of the stages (a chain of
#: 40 needs about 0.4 GB, one of 100 over 2 GB).
MAX_STAGES = 40

AUDIT_TABLES = ("passband", "stopband", "stage", "input", "supply", "amplifier", "environment",
                "tolerance",
                "noise", "converter", "tuning")
# Values outside these are typing errors, not parts (1 mΩ … 1 TΩ, 1 fF … 1 F).
_R_RANGE = (1e-3, 1e12)
_C_RANGE = (1e-15, 1.0)
# A unit written on a part value: ohms, or farads ("F", or "f" after a prefix: "10uf"; a
# lowercase "f" right after a digit is femto, see parts.notation).
_OHMS_UNIT = re.compile(r"(?:(?i:ohms?)|[\u03a9\u2126])\s*$")
_FARAD_UNIT = re.compile(r"(?:F|(?<=[^\d\s.])f)\s*$")


def _unit_clash(name: str, raw) -> str:
    """Why a resistor written in farads (or a capacitor in ohms) is refused; "" if fine."""
    if not isinstance(raw, str):
        return ""
    if name.startswith("R") and _FARAD_UNIT.search(raw):
        return f"{name} is a resistor, but the value is in farads"
    if name.startswith("C") and _OHMS_UNIT.search(raw):
        return f"{name} is a capacitor, but the value is in ohms"
    return ""


def _stage_parts(path: str, key: str, topo, table) -> dict[str, float]:
    if not isinstance(table, dict):
        raise SpecError(path, key, "expected a table of part = value", value=table)
    optional = set(topo.OPTIONAL_PARTS)
    required = [p for p in topo.PARTS if p not in optional]
    for name in table:
        if name not in topo.PARTS:
            close = difflib.get_close_matches(name, topo.PARTS, n=1, cutoff=0.5)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            raise SpecError(path, f"{key}.{name}", f"{topo.NAME} has no part {name} (its parts: "
                            f"{', '.join(topo.PARTS)}){hint}")
    for name in required:
        if name not in table:
            raise SpecError(path, f"{key}.{name}", f"missing: {topo.NAME} needs "
                            f"{', '.join(required)}")
    return {name: _part_value(path, f"{key}.{name}", name, raw) for name, raw in table.items()}


def _part_value(path: str, k: str, name: str, raw) -> float:
    """One part's value ("4.7k", 4700.0) at key `k`: a resistor (name R…) or a capacitor,
    inside its plausible range."""
    clash = _unit_clash(name, raw)
    if clash:
        raise SpecError(path, k, clash, value=raw)
    try:
        v = parse_value(raw)
    except (ValueError, TypeError) as exc:
        raise SpecError(path, k, str(exc), value=raw) from None
    lo, hi = _R_RANGE if name.startswith("R") else _C_RANGE
    if not v > 0:
        raise SpecError(path, k, "must be > 0", value=raw)
    if not lo <= v <= hi:
        unit = "Ω" if name.startswith("R") else "F"
        raise SpecError(path, k, f"outside the plausible range {lo:g} … {hi:g} {unit}",
                        value=raw)
    return v


def _stage_trims(path: str, key: str, topo, table, parts: dict[str, float]
                 ) -> dict[str, tuple[float, float]]:
    """`trim = { R2 = ["8.2k", "2k"] }`: each trimmed resistor as [fixed, trimmer]; the
    part's value in `parts` is the value the trimmer is set to reach (inside the travel)."""
    if not isinstance(table, dict):
        raise SpecError(path, key, 'expected a table of part = ["fixed", "trimmer"]',
                        value=table)
    out = {}
    for name, raw in table.items():
        k = f"{key}.{name}"
        if name not in topo.PARTS or name not in parts:
            raise SpecError(path, k, f"{topo.NAME} has no part {name} in this stage (its "
                            f"parts: {', '.join(parts)})", value=raw)
        if not name.startswith("R"):
            raise SpecError(path, k, f"{name} is not a resistor: only resistors are trimmed",
                            value=raw)
        if not (isinstance(raw, list) and len(raw) == 2):
            raise SpecError(path, k, 'expected ["fixed", "trimmer"], two values in ohms',
                            value=raw)
        try:
            fixed, trimmer = (parse_value(v) for v in raw)
        except (ValueError, TypeError) as exc:
            raise SpecError(path, k, str(exc), value=raw) from None
        if not (fixed > 0 and trimmer > 0):
            raise SpecError(path, k, "both values must be > 0", value=raw)
        if trimmer > fixed:
            raise SpecError(path, k, f"the trimmer ({trimmer:g} Ω) is larger than the fixed "
                            f"part it is in series with ({fixed:g} Ω)", value=raw)
        if not fixed <= parts[name] <= fixed + trimmer:
            raise SpecError(path, k, f"{name} = {parts[name]:g} Ω lies outside the trim's "
                            f"travel {fixed:g} … {fixed + trimmer:g} Ω", value=raw)
        out[name] = (fixed, trimmer)
    return out


def _stage_dc_block(path: str, key: str, table) -> tuple[float, float | None]:
    """`dc_block = { C = "1u", R = "1M" }`: a series capacitor at the stage input and an
    optional resistor from behind it to the reference (``circuits.dc_block``)."""
    if not isinstance(table, dict):
        raise SpecError(path, key, 'expected a table { C = "farads", R = "ohms" }', value=table)
    for name in table:
        if name not in ("C", "R"):
            raise SpecError(path, f"{key}.{name}", "a DC block has parts C (series) and R "
                            "(to the reference, optional)")
    if "C" not in table:
        raise SpecError(path, f"{key}.C", "missing: a DC block needs its series capacitor C")
    out = {name: _part_value(path, f"{key}.{name}", name, raw) for name, raw in table.items()}
    return out["C"], out.get("R")


def load_chain(path: str | Path) -> tuple[Requirement | None, dict, list[tuple]]:
    """Parse and validate an audit file; returns (requirement-or-None, common tables, stage
    specs (position, topology module, parts, amplifier choice))."""
    p = str(path)
    doc = read_toml(path)
    top = TableReader(p, "", doc, AUDIT_TABLES)
    common = read_common_tables(p, doc)
    passband = None
    if top.has("passband"):
        passband = read_passband(TableReader(p, "passband", doc["passband"],
                                              ("center_hz", "bandwidth_hz", "low_hz", "high_hz",
                                               "max_loss_db", "gain_db", "gain_tolerance_db")))
    stops = tuple(read_stop(p, i, t, passband) for i, t in enumerate(top.tables("stopband"))) \
        if passband is not None else ()
    if top.tables("stopband") and passband is None:
        raise SpecError(p, "stopband", "stopband points need a [passband] to be relative to")
    stage_tables = top.tables("stage")
    if not stage_tables:
        raise SpecError(p, "stage", "no [[stage]] tables: an audit needs the chain's stages")
    if len(stage_tables) > MAX_STAGES:
        raise SpecError(p, "stage", f"{len(stage_tables)} stages; an audit takes at most "
                        f"{MAX_STAGES} (twice the sections a plan builds)")
    specs = []
    trims: dict[int, dict[str, tuple[float, float]]] = {}
    blocks: dict[int, tuple[float, float | None]] = {}
    for i, t in enumerate(stage_tables):
        key = f"stage[{i}]"
        st = TableReader(p, key, t, ("topology", "parts", "amplifier", "trim", "dc_block"))
        name = st.string("topology")
        if name is None:
            raise SpecError(p, f"{key}.topology", f"missing; one of {', '.join(TOPOLOGY_NAMES)}")
        if name not in TOPOLOGY_NAMES:
            close = difflib.get_close_matches(name, TOPOLOGY_NAMES, n=1, cutoff=0.5)
            hint = f"; did you mean '{close[0]}'?" if close else \
                f"; known: {', '.join(TOPOLOGY_NAMES)}"
            raise SpecError(p, f"{key}.topology", "unknown topology" + hint, value=name)
        topo = topology(name)
        required = [n for n in topo.PARTS if n not in topo.OPTIONAL_PARTS]
        if not st.has("parts") and required:
            raise SpecError(p, f"{key}.parts", f"missing; {name} needs {', '.join(required)}")
        # A topology whose parts are all optional (a follower) may leave the table out.
        parts = _stage_parts(p, f"{key}.parts", topo, t["parts"] if st.has("parts") else {})
        if st.has("trim"):
            trims[i + 1] = _stage_trims(p, f"{key}.trim", topo, t["trim"], parts)
        if st.has("dc_block"):
            blocks[i + 1] = _stage_dc_block(p, f"{key}.dc_block", t["dc_block"])
        amp = read_amplifier(p, f"{key}.amplifier", t["amplifier"]) if st.has("amplifier") \
            else None
        specs.append((i + 1, topo, parts, amp, key))
    common["trims"] = trims
    common["dc_blocks"] = blocks
    common["tuning"] = read_tuning(TableReader(p, "tuning", doc.get("tuning", {}), TUNING_KEYS))
    common["tolerance"] = read_tolerance(TableReader(p, "tolerance", doc.get("tolerance", {}),
                                                     TOLERANCE_KEYS))
    common["converter"] = read_converter(p, doc.get("converter"), passband=passband,
                                         supply=common["supply"])
    req = None
    if passband is not None:
        req = Requirement(path=p, passband=passband, stopband=stops, input=common["input"],
                          supply=common["supply"], amplifier=common["amplifier"],
                          environment=common["environment"], noise=common["noise"],
                          tolerance=common["tolerance"], converter=common["converter"],
                          tuning=common["tuning"])
    return req, common, specs
