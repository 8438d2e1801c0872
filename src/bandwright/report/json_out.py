"""The JSON object of design.md, built from a Plan (a renderer: no maths here)."""

from __future__ import annotations

import json
import math
from typing import Any

from bandwright import __version__
from bandwright.planner import Plan

__all__ = ["plan_to_dict", "dumps"]


def _num(x: float | None) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def plan_to_dict(p: Plan) -> dict[str, Any]:
    """The plan as design.md's JSON object."""
    c = p.chosen
    return {
        "tool": {"name": "bandwright", "version": __version__},
        "prototype": {"family": c.family, "order": c.order, "ripple_db": _num(c.ripple_db),
                      "path": c.path},
        "stages": [
            {"position": i + 1, "kind": s.kind, "f0_hz": _num(s.f0_hz), "q": _num(s.q),
             "gain": _num(s.gain), "topology": None, "components": None, "nets": None,
             "actual": None}
            for i, s in enumerate(c.sections)
        ],
        "checks": [
            {"id": k.id, "stage": k.stage, "net": k.net, "status": k.status,
             "value": _num(k.value), "limit": _num(k.limit), "unit": k.unit,
             "message": k.message}
            for k in p.checks
        ],
        "response": {"freq_hz": [_num(f) for f in p.response.freq_hz],
                     "gain_db": [_num(g) for g in p.response.gain_db],
                     "phase_deg": [_num(g) for g in p.response.phase_deg]},
        "nodes": [],
        "noise": None,
    }


def dumps(p: Plan) -> str:
    """Exactly one JSON object, sorted keys off (design order), no NaN."""
    return json.dumps(plan_to_dict(p), indent=1, allow_nan=False)
