"""Checks at the converter: `alias` (one per tone that folds into the band, one for the
broadband noise) and the driver's settling (a `drive` check on the converter's node)."""

from __future__ import annotations

from bandwright.analysis import Analyses
from bandwright.chain.graph import CONVERTER_NET
from bandwright.checks.base import Check
from bandwright.parts.notation import format_fixed, format_hz, format_si

__all__ = ["alias_checks", "settling_checks"]


def alias_checks(an: Analyses) -> list[Check]:
    """Each fold's level at the converter against ``converter.max_alias_dbfs``."""
    c = an.converter
    if c is None:
        return []
    out = []
    for f in c.folds:
        if f.source == "noise":
            what = (f"noise from {format_hz(f.source_hz, significant=3)} to "
                    f"{format_hz(f.top_hz, significant=3)} folds onto the passband")
        else:
            what = (f"{f.source} at {format_hz(f.source_hz, significant=3)} folds to "
                    f"{format_hz(f.alias_hz, significant=3)}")
        out.append(Check(
            id="alias", status="pass" if f.passes else "fail", value=f.level_dbfs,
            limit=f.limit_dbfs, unit="dBFS", stage=None, net=CONVERTER_NET,
            message=f"{what} at {format_fixed(f.level_dbfs, 1)} dBFS (limit "
                    f"{format_fixed(f.limit_dbfs, 1)} dBFS)"))
    return out


def settling_checks(an: Analyses) -> list[Check]:
    """The op-amp at the output against the GBW a first-order estimate of the sampling
    kick's settling needs (``analysis.converter.settling_gbw_hz``); a warning only: the AC
    model does not simulate the kick."""
    c = an.converter
    if c is None:
        return []
    need, have = c.settle_gbw_hz, c.last_gbw_hz
    rc = "" if c.load_time_constant_s is None else \
        f"; the converter's input RC is {format_si(c.load_time_constant_s, 's')}"
    ok = have >= need
    return [Check(
        id="drive", status="pass" if ok else "warn", value=need, limit=have, unit="Hz",
        net=CONVERTER_NET,
        message=f"settling a full-scale kick to 1 LSB in half a sample period needs about "
                f"{format_hz(need, significant=3)} GBW (first-order estimate), the op-amp has "
                f"{format_hz(have, significant=3)}{rc}")]
