"""bom.csv: the bill of materials of a chain, one row per distinct part.

Its own module so that the files of ``--out`` (``report.files``) and the HTML report
(``report.html``) both read it without importing each other.
"""

from __future__ import annotations

import csv
import io
from typing import Any, Iterable, Sequence

from bandwright.analysis.bias import chain_reference
from bandwright.analysis.montecarlo import resolve_spreads
from bandwright.analysis.montecarlo.tuned import TuningResult
from bandwright.chain.graph import Chain, flatten
from bandwright.circuits.elements import Element
from bandwright.circuits.reference import Reference
from bandwright.inputs.requirement import Requirement
from bandwright.parts.eseries import SERIES_NAMES, is_member
from bandwright.parts.notation import format_si
from bandwright.parts.tolerance import default_tolerance_pct, dielectric
from bandwright.report import tuning as trims

__all__ = ["bom_csv", "bom_args", "bom_for"]


def bom_csv(chain: Chain, *, r_series: str | None, c_series: str | None,
            r_pct: float | None = None, c_pct: float | None = None,
            reference: Reference | None = None, elements: Iterable[Element] | None = None,
            extra_rows: Iterable[Sequence[object]] = ()) -> str:
    """Bill of materials: one row per distinct part, with designators and quantity.

    The tolerance is the one the yield was computed for (`r_pct`, `c_pct`), else the one
    customary for the part's series (common practice, ``parts.tolerance``). `elements`
    replaces the chain's flat element list (a tuned chain's fixed parts); `extra_rows` are
    appended as given (its trimmers).
    """
    rows: dict[tuple, list[str]] = {}
    for e in (flatten(chain, reference) if elements is None else elements):
        if e.kind == "opamp":
            key = ("op-amp", e.model.name, "", "", "")
        else:
            series = r_series if e.kind == "R" else c_series
            if series is None or not is_member(e.value, series):
                # E3's values are E6 values: name the coarsest series parts are sold in.
                series = next((s for s in SERIES_NAMES[1:] if is_member(e.value, s)), "")
            pct = r_pct if e.kind == "R" else c_pct
            if pct is None and series:
                pct = default_tolerance_pct(series)
            tol = f"{pct:g} %" if pct is not None else ""
            unit = "Ω" if e.kind == "R" else "F"
            key = ("resistor" if e.kind == "R" else "capacitor", format_si(e.value, unit),
                   series, tol, dielectric(e.value) if e.kind == "C" else "")
        rows.setdefault(key, []).append(e.name)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["designators", "part", "value", "series", "tolerance", "dielectric", "quantity"])
    for key, refs in rows.items():
        w.writerow([" ".join(refs), key[0], key[1], key[2], key[3], key[4], len(refs)])
    for row in extra_rows:
        w.writerow(row)
    return buf.getvalue()


def bom_args(req: Requirement, *, planned: bool) -> dict[str, Any]:
    """The series and tolerances the BOM states: a plan's series and the tolerances its yield
    used; an audit's explicit `[tolerance]` only (its parts' series are not known)."""
    if planned:
        spreads = resolve_spreads(req)
        return {"r_series": req.design.resistor_series, "c_series": req.design.capacitor_series,
                "r_pct": spreads.resistor_pct, "c_pct": spreads.capacitor_pct}
    return {"r_series": None, "c_series": None, "r_pct": req.tolerance.resistor_pct,
            "c_pct": req.tolerance.capacitor_pct}


def bom_for(chain: Chain, req: Requirement, *, planned: bool,
            tuning: TuningResult | None = None) -> str:
    """bom.csv of a chain (with its single-supply reference network): with a tuning plan,
    each trimmed part at its fixed value and a row per trimmer value
    (``report.tuning.bom_trimmer_rows``)."""
    reference = chain_reference(chain, req)
    if tuning is None:
        return bom_csv(chain, **bom_args(req, planned=planned), reference=reference)
    plan = tuning.plan
    trimmers = {f"{s.part}_s{s.stage}" for s in plan.steps}
    elements = trims.trimmed_elements(flatten(chain, reference), plan)
    return bom_csv(chain, **bom_args(req, planned=planned),
                   elements=[e for e in elements if e.name not in trimmers],
                   extra_rows=trims.bom_trimmer_rows(plan))
