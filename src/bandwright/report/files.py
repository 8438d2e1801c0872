"""The files `--out DIR` holds: plan.json, chain.cir, chain.toml, bom.csv, plots, schematics,
report.html."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from bandwright.analysis.montecarlo import resolve_spreads
from bandwright.analysis.bias import chain_reference
from bandwright.chain.graph import Chain, converter_elements, flatten
from bandwright.parts.catalogue import ARCHETYPES
from bandwright.parts.notation import format_value
from bandwright.report.bom import bom_for
from bandwright.report.spice import spice_deck

if TYPE_CHECKING:
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


def _toml_value(v: Any) -> str:
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    return repr(float(v)) if isinstance(v, float) else str(v)


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
    out = ["[converter]", f"sample_rate_hz = {conv.sample_rate_hz!r}", f"bits = {conv.bits}",
           f"full_scale_vpp = {conv.full_scale_vpp!r}"]
    for key in ("enob", "input_ohms", "max_alias_dbfs"):
        if getattr(conv, key) is not None:
            out.append(f"{key} = {getattr(conv, key)!r}")
    out += [f"input_farads = {conv.input_farads!r}", f"headroom_db = {conv.headroom_db!r}", ""]
    return out


def chain_toml(chain: Chain, req: Requirement, *, title: str) -> str:
    """The chain in the audit format (docs/design.md), so that `bandwright audit` reproduces it."""
    out = [f"# {title}", "# Audit file written by bandwright: `bandwright audit chain.toml`.", ""]
    pb = req.passband
    if pb is not None:
        out += ["[passband]", f"low_hz = {pb.low_hz!r}", f"high_hz = {pb.high_hz!r}",
                f"max_loss_db = {pb.max_loss_db!r}", f"gain_db = {pb.gain_db!r}",
                f"gain_tolerance_db = {pb.gain_tolerance_db!r}", ""]
        for sp in req.stopband:
            out += ["[[stopband]]"] + ([f"# added by the planner: {sp.added}"] if getattr(
                sp, "added", "") else []) + [f"freq_hz = {sp.freq_hz!r}",
                                              f"min_loss_db = {sp.min_loss_db!r}", ""]
    inp = req.input
    out += ["[input]", f"max_vpk = {inp.max_vpk!r}", f"source_ohms = {inp.source_ohms!r}"]
    if inp.dc_v:
        out.append(f"dc_v = {inp.dc_v!r}")
    if getattr(inp, "dc_step_v", None) is not None:
        out.append(f"dc_step_v = {inp.dc_step_v!r}")
    for t in inp.tones:
        out += ["[[input.tone]]", f"freq_hz = {t.freq_hz!r}", f"vpk = {t.vpk!r}"]
    out += ["", "[supply]", f"rails_v = {_toml_value(list(req.supply.rails_v))}"]
    if req.supply.single:
        out.append(f"reference_v = {req.supply.reference_v!r}")
    out.append("")
    models = {st.model for st in chain.stages}
    shared = len(models) == 1
    if shared:
        out += _amplifier_lines(chain.stages[0].model, "[amplifier]") + [""]
    out += ["[environment]", f"temperature_c = {req.environment.temperature_c!r}", ""]
    if req.noise.band_hz or req.noise.max_output_vrms:
        out += ["[noise]"]
        if req.noise.band_hz:
            out.append(f"band_hz = {_toml_value(list(req.noise.band_hz))}")
        if req.noise.max_output_vrms:
            out.append(f"max_output_vrms = {req.noise.max_output_vrms!r}")
        out.append("")
    out += converter_lines(getattr(req, "converter", None))
    tol = getattr(req, "tolerance", None)
    if tol is not None:
        spreads = resolve_spreads(req)
        out += ["[tolerance]", "# the plan's production spreads, written out for the audit's yield",
                f"resistor_pct = {spreads.resistor_pct!r}",
                f"capacitor_pct = {spreads.capacitor_pct!r}",
                f"distribution = {_toml_value(spreads.distribution)}",
                f"gbw_spread_pct = {spreads.gbw_spread_pct!r}", f"samples = {tol.samples}",
                f"seed = {tol.seed}", f"min_yield = {tol.min_yield!r}", ""]
    for st in chain.stages:
        out += ["[[stage]]", f"topology = {_toml_value(st.topology)}",
                "parts = { " + ", ".join(f"{n} = {_toml_value(format_value(v, significant=6))}"
                                          for n, v in st.components) + " }"]
        if getattr(st, "dc_block", None) is not None:
            out += _dc_block_lines(st.dc_block)
        if not shared:
            out += _amplifier_lines(st.model, "[stage.amplifier]")
        out.append("")
    return "\n".join(out)


def _dc_block_lines(block) -> list[str]:
    """A stage's `dc_block` (its series C and shunt R to the reference) for the audit file."""
    parts = [f"C = {_toml_value(format_value(block.c_farads, significant=6))}"]
    if block.r_ohms is not None:
        parts.append(f"R = {_toml_value(format_value(block.r_ohms, significant=6))}")
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
    from bandwright.report.plots import plot_files
    from bandwright.report.schematic import schematic_files
    from bandwright.report.subject import subject_of
    from bandwright.report.tuning import tuning_of
    plots = plot_files(obj)
    tuning = tuning_of(obj)
    schematics = schematic_files(subject_of(obj).chain,
                                 tuning_plan=None if tuning is None else tuning.plan)
    page = html_report(obj, plots=plots, schematics=schematics,
                       bom_text=None if bom is None else bom.decode())
    return {**plots, **schematics, "report.html": page.encode()}
