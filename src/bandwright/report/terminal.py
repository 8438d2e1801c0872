"""The terminal report (rich). Reads Plan / Audit, Analyses and Checks; computes nothing."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Sequence

import numpy as np
from rich.console import Console

from bandwright.analysis.noise import listed_sources, source_words
from bandwright.parts.notation import format_fixed, format_hz, format_si, format_sig, format_slew
from bandwright.report import converter_view
from bandwright.report import words, yield_text
from bandwright.report.console_text import row as _row
from bandwright.report.console_text import say as _say
from bandwright.report.console_text import table as _table

if TYPE_CHECKING:
    from bandwright.analysis import Analyses
    from bandwright.analysis.montecarlo import YieldResult
    from bandwright.audit import Audit
    from bandwright.chain.graph import Chain
    from bandwright.checks.base import Check
    from bandwright.inputs.requirement import Requirement
    from bandwright.parts.opamp import OpAmp
    from bandwright.planner import Design, Plan

__all__ = ["render_plan", "render_audit"]



def _db(x: float) -> str:
    return format_fixed(20 * math.log10(abs(x)), 2, sign=True) if x else "—"


def _requirement(req: Requirement, model: OpAmp, console: Console, *,
                 has_mask: bool = True) -> None:
    pb = req.passband
    if not has_mask:
        _say(console, "Mask: " + words.unasked_band(pb))
    else:
        _say(console,
             f"Band: {format_hz(pb.low_hz)} to {format_hz(pb.high_hz)} (centre "
             f"{format_hz(pb.center_hz)}, width {format_hz(pb.bandwidth_hz)}, "
             f"{format_sig(pb.bandwidth_hz / pb.center_hz, 3)} of centre); gain "
             f"{format_sig(pb.gain_db)} dB ± {format_sig(pb.gain_tolerance_db)} dB; at most "
             f"{format_sig(pb.max_loss_db, 4)} dB loss in band")
    for sp in req.stopband if has_mask else ():
        _say(console, f"Stop: at least {format_sig(sp.min_loss_db)} dB down at "
                      f"{format_hz(sp.freq_hz)}{converter_view.added_text(sp)}")
    inp = req.input
    tones = ", ".join(f"{format_si(t.vpk, 'Vpk', significant=4)} at {format_hz(t.freq_hz)}" for t in inp.tones) or "none"
    _say(console, f"Input: up to {format_si(inp.max_vpk, 'Vpk', significant=4)} in band from "
                  f"{format_si(inp.source_ohms, 'Ω')}; tones: {tones}")
    _say(console, f"Rails {format_sig(req.supply.rails_v[0])} / "
                  f"{format_si(req.supply.rails_v[1], 'V', significant=4, sign=True)}; op-amp "
                  f"'{model.name}': {format_hz(model.gbw_hz, significant=3)} GBW, "
                  f"{format_sig(model.slew_v_per_us)} V/µs, "
                  f"{format_si(model.noise_v_per_rthz, 'V/√Hz')}; "
                  f"{format_sig(req.environment.temperature_c)} °C")
    if getattr(req, "converter", None) is not None:
        _say(console, "Converter: " + converter_view.requirement_text(req.converter))


def render_plan(p: Plan, console: Console) -> None:
    """Print the plan to `console` (fits 100 columns; readable without colour)."""
    _say(console, f"bandwright plan — {p.requirement.path}", style="bold")
    _requirement(p.requirement, p.model, console)
    cand = _table("Candidates (best first)", "#", "family", "path", "order", "sects",
                  "op-amps", "margin", "noise", "DR", "yield", "state")
    for i, d in enumerate(p.designs):
        c, an = d.candidate, d.analyses
        margin = format_fixed(an.worst_margin_db, 1, sign=True) if an else "—"
        # (margin: worst headroom; noise: integrated output noise; DR: dynamic range)
        noise = format_sig(an.noise.integrated_vrms * 1e6, 3) if an else "—"
        dr = format_fixed(an.dynamic_range_db, 1) if an else "—"
        y = getattr(d, "yield_result", None)
        share = format_fixed(100 * y.yield_fraction, 1) if y is not None else "—"
        state = words.candidate_state(d.buildable, d.failures)
        _row(cand, ("→" if i == 0 else "") + str(i + 1), c.family, words.path_label(c.path),
                     str(c.order), str(len(c.sections)), str(d.opamps) if d.buildable else "—", margin, noise,
                     dr, share, state)
    _say(console, cand)
    _say(console, "sects: sections; margin: worst node headroom, dB; noise: output "
                  "noise over the noise band, µV rms; DR: dynamic range, dB; yield: share of Monte "
                  "Carlo boards that pass, % (not run for a candidate that fails other checks)")
    d = p.chosen
    _say(console, f"Chosen: {d.candidate.family} {words.path_label(d.candidate.path)}, order "
                  f"{d.candidate.order} ({d.candidate.note}) — {p.why}.")
    if d.chain is None:
        _unbuilt(d, console)
    else:
        _chain(d.chain, d.analyses, console)
        o = d.ordering
        _say(console, yield_text.ordering_sentence(o))
        if math.isfinite(o.built_noise_vrms):
            _say(console, yield_text.ordering_built_text(o))
    if getattr(d, "yield_result", None) is not None:
        _yield(d.yield_result, console)
    _tuning(p, console)
    if d.analyses is not None:
        from bandwright.report.time_view import render_time
        render_time(d.analyses, console)
    _checks(d.checks, console)


def render_audit(a: Audit, console: Console) -> None:
    """Print an audit to `console`."""
    _say(console, f"bandwright audit — {a.path}", style="bold")
    _requirement(a.requirement, a.chain.stages[0].model, console, has_mask=a.has_mask)
    _chain(a.chain, a.analyses, console, first=words.AUDIT_IDEAL)
    _tuning(a, console)
    from bandwright.report.time_view import render_time
    render_time(a.analyses, console)
    _checks(a.checks, console)
    from bandwright.report.diagnosis_view import render_diagnosis
    render_diagnosis(a, console)


def _tuning(obj: Plan | Audit, console: Console) -> None:
    """The tuning procedure as numbered steps (``report.tuning``), when there is one."""
    from bandwright.report.tuning import tuning_of, tuning_terminal
    lines = tuning_terminal(tuning_of(obj))
    if lines:
        _say(console, lines[0], style="bold")
        for line in lines[1:]:
            _say(console, "  " + line)


def _yield(y: YieldResult, console: Console) -> None:
    """The Monte Carlo paragraph, the parts that decide it and the most sensitive part of
    each stage (sentences from ``report.yield_text``, shared with the HTML)."""
    _say(console, "Yield: " + yield_text.summary_sentence(y))
    failing = yield_text.failing_sentence(y)
    if failing:
        _say(console, "  " + failing)
    if y.drivers:
        t = _table("Parts that decide the yield", *yield_text.DRIVER_HEAD)
        for r in yield_text.driver_rows(y):
            _row(t, *r)
        _say(console, t)
        _say(console, yield_text.DRIVER_NOTE)
    advice = yield_text.advice_sentence(y)
    if advice:
        _say(console, "  " + advice)
    if y.sensitivities:
        t = _table("Sensitivity S = d ln y / d ln x, most sensitive part per stage", "#",
                   "topology", "part", "S f0", "S Q", "S gain", "S f0 (GBW)", "S Q (GBW)")
        for s in y.sensitivities:
            f0, q, g = s.of(s.worst_part)
            gf, gq, _ = s.of("GBW")
            _row(t, str(s.position), s.topology, s.worst_part, _s(f0), _s(q), _s(g),
                      _s(gf), _s(gq))
        _say(console, t)


def _s(x: float) -> str:
    # Below 1e-6 a finite difference shows rounding, not a dependence; below half the last
    # digit of a three-decimal figure the dependence is there but negligible.
    if x != x:
        return "—"
    if abs(x) < 1e-6:
        return "0"
    return "≈0" if abs(x) < 5e-4 else format_sig(x, 3) if x < 0 else "+" + format_sig(x, 3)


def _unbuilt(d: Design, console: Console) -> None:
    t = _table("Sections (no circuit found for at least one)", "#", "kind", "f0", "Q", "gain",
               "what stops it", wrap=("what stops it",))
    for i, a in enumerate(d.assignments):
        s = a.section
        why = "; ".join(f"{n}: {r}" for n, r in a.rejected) if a.realization is None else \
            f"built as {a.realization.topology}"
        _row(t, str(i + 1), s.kind, format_hz(s.f0_hz), format_sig(s.q), format_sig(s.gain, 3), why)
    _say(console, t)


def _chain(chain: Chain, an: Analyses, console: Console, *, first: str = words.TARGET) -> None:
    """The chain table, stage details, node levels and noise. `first` names the left-hand
    figures: "target" in a plan, "ideal" (the parts with an ideal op-amp) in an audit."""
    t = _table("Chain, input to output", "#", "kind", "topology", f"f0 {first}→built",
               f"Q {first}→built", f"gain dB {first}→built")
    if first == words.AUDIT_IDEAL:
        t.caption = words.AUDIT_IDEAL_NOTE
        t.caption_justify = "left"
    for st in chain.stages:
        tg, b = st.target, st.built
        f0 = "—" if st.kind == "gain" else f"{format_hz(tg.f0_hz)} → {format_hz(b.f0_hz)}"
        q = "—" if st.kind == "gain" else f"{format_sig(tg.q)} → {format_sig(b.q)}"
        _row(t, str(st.position), st.kind, st.topology, f0, q, f"{_db(tg.gain)} → {_db(b.gain)}")
    _say(console, t)
    for st in chain.stages:
        parts = "  ".join(f"{n}={format_si(v, 'Ω' if n.startswith('R') else 'F')}"
                          for n, v in st.components) or "no parts (a unity-gain follower)"
        _say(console, f"Stage {st.position} {st.topology}: {parts}", style="bold")
        if st.ideal is not None and st.kind != "gain":
            _say(console, f"  figures: {words.TARGET} f0 {format_hz(st.target.f0_hz)}, Q "
                          f"{format_sig(st.target.q)}; {words.IDEAL_PARTS} (unrounded) f0 "
                          f"{format_hz(st.ideal.f0_hz)}, Q {format_sig(st.ideal.q)}; {words.BUILT} "
                          f"f0 {format_hz(st.built.f0_hz)}, Q {format_sig(st.built.q)} "
                          f"(values rounded to their series, op-amp's GBW included)")
        if st.reason:
            _say(console, f"  why: {st.reason}")
        for name, why in st.rejected:
            _say(console, f"  not {name}: {why}")
        if getattr(st, "dc_block", None) is not None:
            b = st.dc_block
            rb = "" if b.r_ohms is None else f", RB={format_si(b.r_ohms, 'Ω')} to the reference"
            _say(console, f"  DC block: CB={format_si(b.c_farads, 'F')} in series{rb}: {b.reason}")
    lv = _table("Node levels, worst case (signal anywhere in band + every tone)", "net", "stage",
                "bias", "peak", "limit", "margin", "slew needed", "least load")
    for n in an.nodes:
        load = format_si(n.load_ohms, "Ω") if math.isfinite(n.load_ohms) else "none"
        _row(lv, n.net, str(n.stage), f"{format_si(n.dc_v, 'V', significant=4, sign=True)}", f"{format_si(n.peak_vpk, 'Vpk')}",
             f"{format_si(n.limit_vpk, 'Vpk')}", f"{format_fixed(n.margin_db, 1, sign=True)} dB",
             format_slew(n.slew_needed_v_per_us), load)
    _say(console, lv)
    if an.bias is not None and an.bias.reference.single:
        _say(console, f"Reference: {an.bias.reference.reason}; it sits at "
                      f"{format_si(an.bias.reference_dc_v, 'V', significant=4)}")
    nz = an.noise
    centre = int(np.argmin(np.abs(np.log(nz.freq_hz / math.sqrt(nz.band_hz[0] * nz.band_hz[1])))))
    _say(console, 
        f"Input-referred noise at {format_hz(nz.freq_hz[centre])}: "
        f"{format_si(nz.input_referred_v_per_rthz[centre], 'V/√Hz')} (source open-circuit voltage)")
    _say(console, 
        f"Output noise {format_si(nz.integrated_vrms, 'V rms', significant=4)} over "
        f"{format_hz(nz.band_hz[0])}–{format_hz(nz.band_hz[1])}; SNR at full input "
        f"{format_fixed(an.snr_db, 1)} dB; dynamic range {format_fixed(an.dynamic_range_db, 1)} dB "
        f"(input could grow {format_fixed(an.worst_margin_db, 1, sign=True)} dB before the first "
        f"net clips)")
    wide = converter_view.noise_band_text(nz, format_hz)
    if wide:
        _say(console, wide)
    top = _table("Largest noise sources at the output", "source", "µV rms", "share of power")
    total2 = nz.integrated_vrms**2
    listed, rest, rest_vrms = listed_sources(nz)
    for name, v in listed:
        _row(top, source_words(name), f"{v * 1e6:.3g}", f"{100 * v * v / total2:.1f} %")
    if rest:
        _row(top, words.other_sources(len(rest)), f"{rest_vrms * 1e6:.3g}",
             f"{100 * rest_vrms ** 2 / total2:.1f} %")
    _say(console, top)
    if getattr(an, "converter", None) is not None:
        for block in converter_view.terminal_blocks(an.converter):
            _say(console, block)


def _checks(checks: Sequence[Check], console: Console) -> None:
    t = _table("Checks", "check", "where", "verdict", "value", "limit", "reason",
               wrap=("reason",))
    for k in checks:
        where = k.net or (f"stage {k.stage}" if k.stage else "chain")
        _row(t, k.id, where, words.STATUS_WORD[k.status], words.check_figure(k.value, k.unit),
             words.check_figure(k.limit, k.unit),
                  k.message)
    _say(console, t)
    _say(console, words.checks_sentence(checks))
