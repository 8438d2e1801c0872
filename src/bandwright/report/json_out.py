"""The JSON object of docs/design.md, built from a Plan or an Audit (a renderer: no maths here)."""

from __future__ import annotations

import hashlib
import json
import math
from importlib.metadata import version
from pathlib import Path
from typing import Any

import numpy as np

from bandwright import __version__
from bandwright.chain.graph import Chain, global_net
from bandwright.report.time_view import time_dict
from bandwright.report.tuning import tuning_dict

__all__ = ["plan_to_dict", "audit_to_dict", "dumps", "chain_dict", "num", "yield_dict", "converter_dict",
           "sensitivities_dict"]


def num(x: Any) -> float | None:
    """A JSON-safe float: None for None, NaN and infinities (no NaN/inf in any output)."""
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _nums(a) -> list[float | None]:
    return [num(x) for x in np.asarray(a, dtype=float)]


def _requirement_hash(path: str) -> str | None:
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        return None


def _tool() -> dict[str, Any]:
    return {"name": "bandwright", "version": __version__, "numpy": np.__version__,
            "scipy": version("scipy")}


def _stage_dict(st, chain: Chain) -> dict[str, Any]:
    last = st is chain.stages[-1]
    inp = chain.input_of(st)
    sign = -1.0 if st.built.gain < 0 else 1.0
    return {
        "position": st.position,
        "kind": st.kind,
        "target": {"f0_hz": num(st.target.f0_hz), "q": num(st.target.q),
                   "gain": num(sign * abs(st.target.gain))},
        "topology": st.topology,
        "components": {n: num(v) for n, v in st.components},
        "nets": {role: global_net(st, net, last=last, input_net=inp)
                 for role, net in st.nets.items()},
        "built": {"f0_hz": num(st.built.f0_hz), "q": num(st.built.q),
                  "gain": num(st.built.gain)},
        "ideal_parts": None if st.ideal is None else
        {"f0_hz": num(st.ideal.f0_hz), "q": num(st.ideal.q), "gain": num(st.ideal.gain)},
        "amplifier": st.model.name,
        "why": st.reason,
        "rejected": [{"topology": t, "reason": r} for t, r in st.rejected],
        **_dc_block_dict(st),
    }


def _dc_block_dict(st) -> dict[str, Any]:
    """`dc_block` of a stage entry, only for a stage that has one (``circuits.dc_block``)."""
    b = getattr(st, "dc_block", None)
    if b is None:
        return {}
    return {"dc_block": {"c_farads": num(b.c_farads), "r_ohms": num(b.r_ohms),
                         "corner_hz": num(b.corner_hz), "reason": b.reason}}


def chain_dict(chain: Chain, an, checks) -> dict[str, Any]:
    """The parts of the JSON object that a plan and an audit share."""
    nz = an.noise
    out = {
        "stages": [_stage_dict(st, chain) for st in chain.stages],
        "checks": _checks(checks),
        "response": {"freq_hz": _nums(an.response.freq_hz),
                     "gain_db": _nums(an.response.gain_db),
                     "phase_deg": _nums(an.response.phase_deg)},
        "nodes": [{"net": n.net, "stage": n.stage, "peak_vpk": num(n.peak_vpk),
                   "limit_vpk": num(n.limit_vpk), "margin_db": num(n.margin_db),
                   "signal_vpk": num(n.signal_vpk),
                   "slew_needed_v_per_us": num(n.slew_needed_v_per_us),
                   "load_ohms": num(n.load_ohms), "dc_v": num(n.dc_v)} for n in an.nodes],
        **_reference_dict(an),
        "noise": {"freq_hz": _nums(nz.freq_hz), "output_v_per_rthz": _nums(nz.output_v_per_rthz),
                  "integrated_vrms": num(nz.integrated_vrms), "band_hz": list(nz.band_hz),
                  "input_referred_v_per_rthz": _nums(nz.input_referred_v_per_rthz),
                  "contributions": [{"source": s, "vrms": num(v)}
                                    for s, v in nz.contributions_vrms],
                  "snr_db": num(an.snr_db), "dynamic_range_db": num(an.dynamic_range_db)},
        "time_domain": time_dict(getattr(an, "time", None)),
    }
    if nz.wide_band_hz is not None:
        out["noise"].update({"wide_band_hz": list(nz.wide_band_hz),
                             "wide_vrms": num(nz.wide_vrms)})
    if getattr(an, "converter", None) is not None:
        out["converter"] = converter_dict(an.converter)
    return out


def converter_dict(c) -> dict[str, Any]:
    """docs/design.md's ``converter{…}`` (and the noise budget behind it)."""
    conv = c.converter
    return {"full_scale_vpk": num(c.full_scale_vpk), "peak_vpk": num(c.peak_vpk),
            "margin_db": num(c.margin_db), "snr_db": num(c.snr_db),
            "dynamic_range_db": num(c.dynamic_range_db), "dominant_noise": c.dominant_noise,
            "folds": [{"source": f.source, "source_hz": num(f.source_hz),
                       "alias_hz": num(f.alias_hz), "level_dbfs": num(f.level_dbfs),
                       "limit_dbfs": num(f.limit_dbfs)} for f in c.folds],
            "sample_rate_hz": num(conv.sample_rate_hz), "bits": conv.bits,
            "effective_bits": num(conv.effective_bits), "headroom_db": num(conv.headroom_db),
            "fill_gain_db": num(c.fill_gain_db), "band_hz": list(c.band_hz),
            "chain_vrms": num(c.chain_vrms), "folded_vrms": num(c.folded_vrms),
            "quantisation_vrms": num(c.quantisation_vrms), "total_vrms": num(c.total_vrms),
            "input_referred_vrms": num(c.input_referred_vrms),
            "noise_folded_to_hz": num(c.folds[-1].top_hz) if c.folds else None,
            "load_time_constant_s": num(c.load_time_constant_s),
            "settle_gbw_hz": num(c.settle_gbw_hz)}


def _reference_dict(an) -> dict[str, Any]:
    """`reference` (single supply only: split rails add nothing): the network, its level."""
    b = getattr(an, "bias", None)
    if b is None or not b.reference.single:
        return {}
    r = b.reference
    return {"reference": {"reference_v": num(r.reference_v), "dc_v": num(b.reference_dc_v),
                          "buffered": r.buffered, "reason": r.reason,
                          "components": {e.name: num(e.value) for e in r.elements
                                         if e.kind in ("R", "C")}}}


def _checks(checks) -> list[dict[str, Any]]:
    return [{"id": k.id, "stage": k.stage, "net": k.net, "status": k.status,
             "value": num(k.value), "limit": num(k.limit), "unit": k.unit,
             "message": k.message} for k in checks]


def _candidate_dict(d) -> dict[str, Any]:
    c = d.candidate
    an = d.analyses
    margin = an.worst_margin_db if an else None
    return {"family": c.family, "path": c.path, "order": c.order, "section_count": len(c.sections),
            "highest_q": num(c.highest_q), "buildable": d.buildable, "opamp_count": d.opamps,
            "failed_check_count": d.failures, "worst_margin_db": num(margin),
            "noise_vrms": num(an.noise.integrated_vrms) if an else None,
            "dynamic_range_db": num(an.dynamic_range_db) if an else None,
            "yield": num(d.yield_result.yield_fraction) if d.yield_result is not None else None,
            "note": c.note}


def plan_to_dict(p) -> dict[str, Any]:
    """The plan as docs/design.md's JSON object (plus a few keys of our own)."""
    d = p.chosen
    c = d.candidate
    out: dict[str, Any] = {
        "tool": _tool(),
        "requirement": {"path": p.requirement.path,
                        "sha256": _requirement_hash(p.requirement.path)},
        "prototype": {"family": c.family, "order": c.order, "design_loss_db": num(c.ripple_db),
                      "path": c.path},
        "why": p.why,
        "candidates": [_candidate_dict(x) for x in p.designs],
    }
    if d.chain is None:
        out.update({"stages": [{"position": i + 1, "kind": a.section.kind,
                                "target": {"f0_hz": num(a.section.f0_hz),
                                           "q": num(a.section.q),
                                           "gain": num(a.section.gain)},
                                "topology": None, "components": None, "nets": None,
                                "built": None,
                                "rejected": [{"topology": t, "reason": r} for t, r in a.rejected]}
                               for i, a in enumerate(d.assignments)],
                    "checks": _checks(d.checks), "response": None, "nodes": [],
                    "noise": None, "yield": None, "sensitivities": None})
        return out
    out.update(chain_dict(d.chain, d.analyses, d.checks))
    o = d.ordering
    # chosen_order: for each chain position, the 1-based number of its section as generated.
    out["ordering"] = {"method": o.method, "chosen_order": [i + 1 for i in o.order],
                       "dynamic_range_gain_db": num(o.gain_over_generated_db),
                       "dynamic_range_gain_over_increasing_q_db":
                           num(o.gain_over_increasing_q_db),
                       "model_noise_vrms": num(o.noise_vrms),
                       "built": {"noise_vrms": num(o.built_noise_vrms),
                                 "dynamic_range_gain_db": num(o.built_gain_over_generated_db),
                                 "dynamic_range_gain_over_increasing_q_db":
                                     num(o.built_gain_over_increasing_q_db),
                                 "placement": o.placement}}
    y = getattr(d, "yield_result", None)
    out["yield"] = yield_dict(y) if y is not None else None
    out["sensitivities"] = sensitivities_dict(y.sensitivities) if y is not None else None
    out["tuning"] = tuning_dict(getattr(d, "tuning", None))
    return out


def yield_dict(y) -> dict[str, Any]:
    """The Monte Carlo yield (``analysis.montecarlo.YieldResult``) as a JSON object."""
    sp = y.spreads
    offer = y.offer
    return {
        "yield": num(y.yield_fraction),
        "interval": [num(y.interval[0]), num(y.interval[1])],
        "confidence": 0.95,
        "interval_method": "Wilson score",
        "samples": y.samples,
        "seed": y.seed,
        "min_yield": num(y.min_yield),
        "meets_target": bool(y.meets_target),
        "nominal_passes": bool(y.nominal_passes),
        "nominal_margin_db": num(getattr(y, "nominal_margin_db", None)),
        "tolerance": {"resistor_pct": num(sp.resistor_pct), "capacitor_pct": num(sp.capacitor_pct),
                      "gbw_spread_pct": num(sp.gbw_spread_pct), "distribution": sp.distribution,
                      "resistor_source": sp.resistor_source,
                      "capacitor_source": sp.capacitor_source},
        "failures": dict(y.fail_counts),
        "envelope": {"freq_hz": _nums(y.freq_hz), "percentiles": [1, 50, 99],
                     "gain_db": [_nums(row) for row in y.envelope_db]},
        "top_parts": [{"stage": p.stage, "part": p.part, "first_order_index": num(p.index),
                       "worst_fail_rate": num(p.worst_fail_rate), "worst_side": p.worst_side}
                      for p in y.drivers],
        "explained": num(y.explained),
        "offer": None if offer is None else
        {"resistor_pct": num(offer.resistor_pct), "capacitor_pct": num(offer.capacitor_pct),
         "yield": num(offer.yield_fraction),
         "interval": [num(offer.interval[0]), num(offer.interval[1])],
         "reaches_target": bool(offer.reaches), "message": offer.message},
    }


def sensitivities_dict(sens) -> list[dict[str, Any]]:
    """Per-stage normalised sensitivities (``analysis.sensitivity.StageSensitivity``)."""
    return [{"stage": s.position, "topology": s.topology, "worst_part": s.worst_part,
             "parts": [{"part": p, "f0": num(f), "q": num(q), "gain": num(g), "weight": num(w)}
                       for p, f, q, g, w in zip(s.parts, s.f0, s.q, s.gain, s.weight)]}
            for s in sens]


def audit_to_dict(a) -> dict[str, Any]:
    """An audit as the same JSON object (prototype null: the chain came from a file)."""
    out: dict[str, Any] = {"tool": _tool(),
                           "requirement": {"path": a.path, "sha256": _requirement_hash(a.path)},
                           "prototype": None}
    out.update(chain_dict(a.chain, a.analyses, a.checks))
    y = getattr(a, "yield_result", None)
    out["yield"] = yield_dict(y) if y is not None else None
    out["tuning"] = tuning_dict(getattr(a, "tuning", None))
    if getattr(a, "diagnosis", None) is not None:
        from bandwright.report.diagnosis_view import diagnosis_dict
        out["diagnosis"] = diagnosis_dict(a.diagnosis)
    return out


def dumps(doc: dict[str, Any]) -> str:
    """Exactly one JSON object, no NaN."""
    return json.dumps(doc, indent=1, allow_nan=False)
