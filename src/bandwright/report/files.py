"""The files `--out DIR` holds: plan.json, chain.cir, chain.toml, bom.csv, plots, schematics,
report.html."""

from __future__ import annotations

import math
import operator
from typing import TYPE_CHECKING, Any

from bandwright.analysis.montecarlo import resolve_spreads
from bandwright.analysis.bias import chain_reference
from bandwright.chain.graph import Chain, converter_elements, flatten
from bandwright.parts.catalogue import ARCHETYPES
from bandwright.parts.notation import format_exact
from bandwright.report.bom import bom_for
from bandwright.report.spice import spice_deck

if TYPE_CHECKING:
    from bandwright.circuits.dc_block import DcBlock
    from bandwright.analysis.montecarlo.tuned import TuningResult
    from bandwright.analysis.tuning import TuningPlan
    from bandwright.audit import Audit
    from bandwright.inputs.requirement import Converter, Requirement
    from bandwright.parts.opamp import OpAmp
    from bandwright.planner import Plan

__all__ = ["plan_files", "audit_files", "chain_toml", "converter_lines"]

_AMP_KEYS = ("gbw_hz", "dc_gain_db", "slew_v_per_us", "swing_to_rail_v", "noise_v_per_rthz",
             "noise_a_per_rthz", "noise_corner_hz", "min_load_ohms", "current_noise_corner_hz",
             "offset_v", "bias_current_a", "input_cm_to_rail_v")


def _shortest(x: float) -> str:
    """`x` as the shortest text that reads back as exactly `x` (Python's repr is the
    shortest round-trip form), a TOML float: "500.0", "0.05", "1.2e-8", "3e6"."""
    text = repr(float(x))
    if "e" not in text and math.isfinite(x) and abs(x) >= 1e5 and x == int(x):
        # 3000000.0 reads better as 3e6: the fewest mantissa digits that stay exact.
        text = next(t for n in range(17) if float(t := f"{x:.{n}e}") == x)
    if "e" in text:
        mantissa, exp = text.split("e")
        text = f"{mantissa}e{int(exp)}"
    return text


def _toml_value(v: Any) -> str:
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    return _shortest(float(v)) if isinstance(v, float) else str(v)


def _parts_line(components) -> list[str]:
    """``parts = { … }``, or nothing for a stage without parts (a follower)."""
    if not components:
        return []
    return ["parts = { " + ", ".join(f"{n} = {_toml_value(format_exact(v))}"
                                     for n, v in components) + " }"]


def _kv(key: str, x: float) -> str:
    """``key = x`` exactly, with the figure to six digits beside it when the exact text
    is long (a computed band edge: ``low_hz = 995.4863183232978  # 995.5``)."""
    text = _shortest(float(x))
    digits = len(text.split("e")[0].replace("-", "").replace(".", "").lstrip("0"))
    return f"{key} = {text}" + (f"  # {float(x):.6g}" if digits > 6 else "")


def _amplifier_lines(model: OpAmp, header: str) -> list[str]:
    lines = [header, f"# op-amp model '{model.name}', every figure written out"]
    if model.name in ARCHETYPES:
        lines.append(f"archetype = {_toml_value(model.name)}")
    lines += [f"{k} = {_toml_value(float(getattr(model, k)))}" for k in _AMP_KEYS]
    return lines


def converter_lines(conv: Converter | None) -> list[str]:
    """`[converter]` as the requirement gave it (optional keys only when given)."""
    if conv is None:
        return []
    out = ["[converter]", _kv("sample_rate_hz", conv.sample_rate_hz), f"bits = {conv.bits}",
           _kv("full_scale_vpp", conv.full_scale_vpp)]
    for key in ("enob", "input_ohms", "max_alias_dbfs"):
        if getattr(conv, key) is not None:
            out.append(_kv(key, getattr(conv, key)))
    out += [_kv("input_farads", conv.input_farads), _kv("headroom_db", conv.headroom_db), ""]
    return out


def chain_toml(chain: Chain, req: Requirement, *, title: str) -> str:
    """The chain in the audit format (docs/design.md), so that `bandwright audit` reproduces it."""
    out = [f"# {title}", "# Audit file written by bandwright: `bandwright audit chain.toml`.", ""]
    pb = req.passband
    if pb is not None:
        out += ["[passband]", _kv("low_hz", pb.low_hz), _kv("high_hz", pb.high_hz),
                _kv("max_loss_db", pb.max_loss_db), _kv("gain_db", pb.gain_db),
                _kv("gain_tolerance_db", pb.gain_tolerance_db), ""]
        for sp in req.stopband:
            out += ["[[stopband]]"] + ([f"# added by the planner: {sp.added}"] if getattr(
                sp, "added", "") else []) + [_kv("freq_hz", sp.freq_hz),
                                              _kv("min_loss_db", sp.min_loss_db), ""]
    inp = req.input
    out += ["[input]", _kv("max_vpk", inp.max_vpk), _kv("source_ohms", inp.source_ohms)]
    if inp.dc_v:
        out.append(_kv("dc_v", inp.dc_v))
    if getattr(inp, "dc_step_v", None) is not None:
        out.append(_kv("dc_step_v", inp.dc_step_v))
    for t in inp.tones:
        out += ["[[input.tone]]", _kv("freq_hz", t.freq_hz), _kv("vpk", t.vpk)]
    out += ["", "[supply]", f"rails_v = {_toml_value(list(req.supply.rails_v))}"]
    if req.supply.single:
        out.append(_kv("reference_v", req.supply.reference_v))
    out.append("")
    models = {st.model for st in chain.stages}
    shared = len(models) == 1
    if shared:
        out += _amplifier_lines(chain.stages[0].model, "[amplifier]") + [""]
    out += ["[environment]", _kv("temperature_c", req.environment.temperature_c), ""]
    if req.noise.band_hz or req.noise.max_output_vrms:
        out += ["[noise]"]
        if req.noise.band_hz:
            out.append(f"band_hz = {_toml_value(list(req.noise.band_hz))}")
        if req.noise.max_output_vrms:
            out.append(_kv("max_output_vrms", req.noise.max_output_vrms))
        out.append("")
    out += converter_lines(getattr(req, "converter", None))
    tol = getattr(req, "tolerance", None)
    if tol is not None:
        spreads = resolve_spreads(req)
        out += ["[tolerance]", "# the plan's production spreads, written out for the audit's yield",
                _kv("resistor_pct", spreads.resistor_pct),
                _kv("capacitor_pct", spreads.capacitor_pct),
                f"distribution = {_toml_value(spreads.distribution)}",
                _kv("gbw_spread_pct", spreads.gbw_spread_pct), f"samples = {tol.samples}",
                f"seed = {tol.seed}", _kv("min_yield", tol.min_yield), ""]
    for st in chain.stages:
        out += ["[[stage]]", f"topology = {_toml_value(st.topology)}",
                *_parts_line(st.components)]
        if getattr(st, "dc_block", None) is not None:
            out += _dc_block_lines(st.dc_block)
        if not shared:
            out += _amplifier_lines(st.model, "[stage.amplifier]")
        out.append("")
    return "\n".join(out)


def _dc_block_lines(block: DcBlock) -> list[str]:
    """A stage's `dc_block` (its series C and shunt R to the reference) for the audit file."""
    parts = [f"C = {_toml_value(format_exact(block.c_farads))}"]
    if block.r_ohms is not None:
        parts.append(f"R = {_toml_value(format_exact(block.r_ohms))}")
    return ["# DC block at the stage input, added by the planner",
            "dc_block = { " + ", ".join(parts) + " }"]


def _deck(chain: Chain, req: Requirement, title: str, plan: TuningPlan | None = None) -> str:
    """chain.cir: the chain with its reference network and rails on a single supply, the
    source's DC level, the converter's input load on "out" (not in the BOM), and with a
    tuning `plan` each trimmed part as its fixed part plus its trimmer."""
    from bandwright.report import tuning as trims
    reference = chain_reference(chain, req)
    flat = flatten(chain, reference)
    elements = flat if plan is None else trims.trimmed_elements(flat, plan)
    return spice_deck(tuple(elements) + tuple(converter_elements(chain)),
                      source_ohms=chain.source_ohms,
                      temperature_c=req.environment.temperature_c, title=title,
                      dc_v=req.input.dc_v,
                      supply_v=reference.supply_v if reference.single else None)


def _files(chain: Chain, req: Requirement, json_text: str, json_name: str, title: str, *,
           planned: bool, tuning: TuningResult | None = None) -> dict[str, bytes]:
    from bandwright.report import tuning as trims
    plan = None if tuning is None else tuning.plan
    deck = _deck(chain, req, title, plan)
    toml = chain_toml(chain, req, title=title)
    bom = bom_for(chain, req, planned=planned, tuning=tuning)
    if plan is not None:
        deck = trims.trimmer_comments(deck, plan)
        toml = trims.toml_with_trims(toml, plan)
    return {
        json_name: (json_text + "\n").encode(),
        "chain.cir": deck.encode(),
        "chain.toml": toml.encode(),
        "bom.csv": bom.encode(),
    }


def plan_files(p: Plan, json_text: str) -> dict[str, bytes]:
    """Every file of a plan's --out folder."""
    d = p.chosen
    if d.chain is None:
        return {"plan.json": (json_text + "\n").encode(), **_graphic_files(p, None)}
    title = f"bandwright plan of {p.requirement.path}"
    out = _files(d.chain, p.requirement, json_text, "plan.json", title, planned=True,
                 tuning=d.tuning)
    return {**out, **_graphic_files(p, out["bom.csv"])}


def audit_files(a: Audit, json_text: str) -> dict[str, bytes]:
    """Every file of an audit's --out folder."""
    out = _files(a.chain, a.requirement, json_text, "audit.json",
                 f"bandwright audit of {a.path}", planned=False,
                 tuning=a.tuning)
    return {**out, **_graphic_files(a, out["bom.csv"])}


def _graphic_files(obj: Plan | Audit, bom: bytes | None) -> dict[str, bytes]:
    """Plots (PNG and SVG), schematics (schematic_stage<k>.svg, block.svg) and report.html,
    each drawn once and inlined into the report."""
    from bandwright.report.html import html_report
    from bandwright.report.plots import plot_jobs
    from bandwright.report.schematic import schematic_jobs
    from bandwright.report.subject import subject_of
    from bandwright.report.tuning import tuning_of
    from bandwright.workers import run_jobs
    tuning = tuning_of(obj)
    plot_part = plot_jobs(obj)
    jobs = plot_part + schematic_jobs(subject_of(obj).chain,
                                      tuning_plan=None if tuning is None else tuning.plan)
    # Every drawing is a job of its own, drawn side by side, one worker process per core
    # (each exactly as it would be drawn alone; the plots are most of an --out's time).
    drawn = run_jobs(operator.call, jobs)
    plots: dict[str, bytes] = {}
    schematics: dict[str, bytes] = {}
    for k, part in enumerate(drawn):
        (plots if k < len(plot_part) else schematics).update(part)
    page = html_report(obj, plots=plots, schematics=schematics,
                       bom_text=None if bom is None else bom.decode())
    return {**plots, **schematics, "report.html": page.encode()}
