"""The planner: candidates → ordered, gain-scaled sections → circuits → chain → analyses →
checks; the best candidate wins."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from bandwright.advice import order_beyond_reach, with_gain_advice
from bandwright.amplifier import resolve_amplifier
from bandwright.analysis import Analyses, analyse
from bandwright.analysis.grid import noise_grid, passband_grid
from bandwright.advice.tolerance import tighter_offer
from bandwright.analysis.montecarlo import YieldResult, monte_carlo
from bandwright.analysis.montecarlo.tuned import TuningResult, tuning_for
from bandwright.candidates import Candidate, make_candidates
from bandwright.chain import Chain, Stage, build_chain
from bandwright.chain.stage import with_parts
from bandwright.analysis.mask import trim_judge
from bandwright.chain.graph import net_transfers
from bandwright.chain import trim
from bandwright.chain.trim import trim_stage
from bandwright.chain.ordering import (MAX_SECTIONS, Ordering, choose_order, long_chain_order,
                                      make_problem)
from bandwright.checks import all_checks
from bandwright.checks.base import Check
from bandwright.checks.yield_check import yield_checks
from bandwright.circuits.assign import Assignment, assign
from bandwright.circuits.nodal import (input_impedance_max, input_impedance_min,
                                       noise as nodal_noise)
from bandwright.circuits import topologies_of_kind
from bandwright.errors import InfeasibleDesign
from bandwright.parts.catalogue import archetype, suggest_faster
from bandwright.parts.notation import format_value
from bandwright.parts.opamp import OpAmp
from bandwright.parts.windows import PartWindows
from bandwright.sections.section import Section
from bandwright.inputs.requirement import Requirement

__all__ = ["Plan", "Design", "plan", "build_design", "with_yield"]

_GAIN_BACKOFF_STEPS = 8
# A first stage whose input impedance comes within 20× of the source resistance (about
# 0.4 dB of loading, and an input pole for capacitive inputs) gets a follower ahead of it.
SOURCE_LOADING_LIMIT = 0.05
# A first stage whose input impedance is flat over the band (a resistor, in effect) takes the
# source resistance into its own design when it would otherwise err by more than 0.01 dB.
FLAT_INPUT_RATIO = 1.1
SOURCE_ABSORB_LIMIT = 1e-3
_TRIM_PASSES = 2
_TRIM_WHEN_ABOVE = 0.8


@dataclass(frozen=True)
class Design:
    """One candidate carried all the way to a built chain (or as far as it could go).

    Attributes
    ----------
    candidate : Candidate
    ordering : Ordering or None
    assignments : tuple of Assignment
        In chain order.
    chain : Chain or None
        None when a section has no topology that builds it.
    analyses : Analyses or None
    checks : tuple of Check
    yield_result : YieldResult or None
        Monte Carlo yield; computed for the chosen design only (``with_yield``).
    """

    candidate: Candidate
    ordering: Ordering | None
    assignments: tuple[Assignment, ...]
    chain: Chain | None
    analyses: Analyses | None
    checks: tuple[Check, ...]
    yield_result: YieldResult | None = None
    tuning: TuningResult | None = None

    @property
    def buildable(self) -> bool:
        return self.chain is not None

    @property
    def failures(self) -> int:
        return sum(c.status == "fail" for c in self.checks)

    @property
    def opamps(self) -> int:
        if self.chain is None:
            return 0
        return sum(1 for st in self.chain.stages for e in st.elements if e.kind == "opamp")


@dataclass(frozen=True)
class Plan:
    """What `bandwright plan` found.

    Attributes
    ----------
    requirement : Requirement
    model : OpAmp
    designs : tuple of Design
        Every candidate, ranked, best first.
    why : str
        Why the first one won.
    """

    requirement: Requirement
    model: OpAmp
    designs: tuple[Design, ...]
    why: str

    @property
    def chosen(self) -> Design:
        return self.designs[0]

    @property
    def candidates(self) -> tuple[Candidate, ...]:
        return tuple(d.candidate for d in self.designs)

    @property
    def checks(self) -> tuple[Check, ...]:
        return self.chosen.checks


def plan(requirement: Requirement, *, family: str | None = None,
         order: int | None = None, windows: PartWindows = PartWindows(),
         progress: Callable[[str, int, int], None] | None = None) -> Plan:
    """Plan a chain for `requirement`.

    Every candidate (family × order × path) is carried to a built chain: sections ordered
    and scaled for dynamic range, a topology chosen for each by its reasons, parts rounded
    and trimmed, then analysed, checked and given its Monte Carlo yield. Candidates are
    ranked: buildable first, then fewest failing checks (the nearer yield among those that
    miss it), fewest op-amps, fewest sections, lowest highest Q, widest dynamic range.

    Parameters
    ----------
    requirement : Requirement
    family : str, optional
        Overrides `design.family`.
    order : int, optional
        Overrides `design.order`.
    windows : PartWindows, optional
        Preferred part-value ranges.
    progress : callable(stage, done, total), optional
        Told how far the run is: stage "candidates" (designs built) and "yield" (Monte Carlo
        samples evaluated).

    Raises
    ------
    SpecError
        When the amplifier the requirement names does not exist or cannot swing on its rails.
    """
    model = resolve_amplifier(requirement.amplifier, path=requirement.path,
                              supply=requirement.supply, tones=requirement.input.tones)
    candidates = make_candidates(requirement, family=family, order=order)
    designs = []
    for c in candidates:
        designs.append(build_design(c, requirement, model, windows=windows))
        if progress is not None:
            progress("candidates", len(designs), len(candidates))
    # The yield of every candidate that passes its other checks: how many built boards meet
    # the requirement then decides between them. One that already fails a check ranks by its
    # failures, so its Monte Carlo is skipped — unless no candidate is clean, when the best
    # of them gets one. The tighter-parts search, several runs more, is for the chosen only.
    designs.sort(key=_rank)
    clean = [d.buildable and d.failures == 0 for d in designs]
    designs = [with_yield(d, requirement, progress=progress, offer=False)
               if ok or (i == 0 and not any(clean)) else d
               for i, (d, ok) in enumerate(zip(designs, clean))]
    designs.sort(key=_rank)
    designs[0] = with_gain_advice(designs[0], requirement,
                                  _rebuild(designs[0].candidate, model, windows, order))
    designs[0] = with_yield(designs[0], requirement, progress=progress)
    return Plan(requirement=requirement, model=model, designs=tuple(designs),
                why=_why(designs))


def _rebuild(cand: Candidate, model: OpAmp, windows: PartWindows, order: int | None
             ) -> Callable[[Requirement], Design]:
    """Build `cand`'s family and path again for a requirement with another gain (the
    candidate's sections carry the gain, so they are made afresh)."""
    def rebuild(req: Requirement) -> Design:
        same = [c for c in make_candidates(req, family=cand.family, order=order)
                if c.path == cand.path]
        return build_design(same[0], req, model, windows=windows)
    return rebuild


def with_yield(design: Design, requirement: Requirement, *,
               progress: Callable[[str, int, int], None] | None = None,
               offer: bool = True) -> Design:
    """`design` with its Monte Carlo yield and the `yield` check; unchanged when it has no
    chain. With `offer`, a yield below target also gets the tighter parts that would reach
    it (``advice.tolerance.plan_yield``); a result already computed is reused."""
    if design.chain is None:
        return design
    report = None if progress is None else (lambda done, total: progress("yield", done, total))
    result = design.yield_result
    if result is None:
        result = monte_carlo(design.chain, requirement, progress=report)
    if offer and result.offer is None:
        extra = tighter_offer(design.chain, requirement, result, progress=report)
        result = result if extra is None else replace(result, offer=extra)
    tuning = design.tuning
    if offer and tuning is None:
        # Only the chosen design is tuned: the ranking compares untrimmed chains.
        tuning = tuning_for(design.chain, requirement, result, targets={
            st.position: (st.target.f0_hz, st.target.q, abs(st.target.gain))
            for st in design.chain.stages if st.kind == "bandpass"})
    checks = tuple(c for c in design.checks if c.id != "yield")
    return replace(design, yield_result=result, tuning=tuning,
                   checks=checks + tuple(yield_checks(result, tuning=tuning)))


def _rank(d: Design) -> tuple:
    dr = d.analyses.dynamic_range_db if d.analyses is not None else -math.inf
    y = d.yield_result
    # Between candidates that both miss the yield, the one more boards pass is nearer.
    short = -y.yield_fraction if y is not None and y.yield_fraction < y.min_yield else 0.0
    return (not d.buildable, d.failures, short, d.opamps, len(d.candidate.sections),
            d.candidate.highest_q, -dr)


def _why(designs: list[Design]) -> str:
    best = designs[0]
    if len(designs) == 1:
        return "the only candidate for the family and order asked"
    nxt = designs[1]
    name = f"{nxt.candidate.family} {nxt.candidate.path}"
    if best.buildable != nxt.buildable:
        return f"the {name} candidate cannot be built with this op-amp"
    if best.failures != nxt.failures:
        return f"fewer failing checks ({best.failures} against {nxt.failures} for {name})"
    if best.opamps != nxt.opamps:
        return f"fewer op-amps ({best.opamps} against {nxt.opamps} for {name})"
    if len(best.candidate.sections) != len(nxt.candidate.sections):
        return (f"fewer sections ({len(best.candidate.sections)} against "
                f"{len(nxt.candidate.sections)} for {name})")
    return (f"as many op-amps and sections as {name}, lower highest Q "
            f"({best.candidate.highest_q:.3g} against {nxt.candidate.highest_q:.3g})")


def _assign(section: Section, model: OpAmp, req: Requirement, windows: PartWindows,
            source_ohms: float = 0.0, rounded: bool = True) -> Assignment:
    # Every stage is driven by an op-amp (or the source, behind a follower when needed):
    # its input must not load that op-amp below its minimum load, in band or at a tone.
    freqs = np.concatenate([passband_grid(req), [t.freq_hz for t in req.input.tones]])
    return assign(section, model, r_series=req.design.resistor_series,
                  c_series=req.design.capacitor_series, windows=windows,
                  input_floor=(freqs, model.min_load_ohms), source_ohms=source_ohms,
                  rounded=rounded)


def _with_gain(section: Section, gain: float) -> Section:
    return Section(kind=section.kind, f0_hz=section.f0_hz, q=section.q, gain=float(gain))


def _assign_with_backoff(section: Section, gain: float, model: OpAmp, req: Requirement,
                         windows: PartWindows, rounded: bool = True
                         ) -> tuple[Assignment, float]:
    """Assign at `gain`; when no topology reaches it, fall back to unity gain (a lowpass or
    highpass, which usually runs at unity) or to halved gains, and return the factor left
    over for the stages after it."""
    first = _assign(_with_gain(section, gain), model, req, windows, rounded=rounded)
    if first.realization is not None:
        return first, 1.0
    tries = [1.0] if section.kind in ("lowpass", "highpass") else []
    tries += [gain / 2 ** k for k in range(1, _GAIN_BACKOFF_STEPS + 1)]
    for g in tries:
        # A quick look with exact parts first: the series search costs far more, and only
        # the gain that can be built is worth it.
        if rounded and _assign(_with_gain(section, g), model, req, windows,
                               rounded=False).realization is None:
            continue
        a = _assign(_with_gain(section, g), model, req, windows, rounded=rounded)
        if a.realization is not None:
            return a, gain / g
    return first, 1.0


def _stage_noise_psd(a: Assignment, freq_hz: np.ndarray, temperature_c: float) -> np.ndarray:
    return nodal_noise(a.realization.elements, freq_hz,
                       temperature_c=temperature_c).total_psd


def build_design(cand: Candidate, req: Requirement, model: OpAmp, *,
                 windows: PartWindows = PartWindows()) -> Design:
    """Order, scale, assign and analyse one candidate."""
    secs = cand.sections
    if len(secs) > MAX_SECTIONS and "capped" in cand.note:
        # The mask needs more than the largest order: building the capped chain would only
        # show a failing stopband; say instead which order it needs and what would fit.
        return Design(candidate=cand, ordering=None, assignments=(), chain=None,
                      analyses=None, checks=(order_beyond_reach(cand, req),))
    # Noise of each section as first assigned (equal gain split): the ordering's model.
    first = [_assign_with_backoff(s, s.gain, model, req, windows, rounded=False)[0]
             for s in secs]
    if any(a.realization is None for a in first):
        return _unbuildable(cand, None, tuple(first), model)
    nf = noise_grid(req)
    psd = np.array([_stage_noise_psd(a, nf, req.environment.temperature_c) for a in first])
    # The sections' own gains already hold the reference gain and the shape's peak (an
    # even-order Chebyshev peaks above its centre), so their product is the chain's gain.
    total = float(np.prod([abs(s.gain) for s in secs]))
    inputs = dict(total_gain=total, passband_hz=passband_grid(req), max_vpk=req.input.max_vpk,
                  tones=[(t.freq_hz, t.vpk) for t in req.input.tones])
    if len(secs) > MAX_SECTIONS:
        ordering = long_chain_order(secs, psd, nf, **inputs)
    else:
        ordering = choose_order(make_problem(secs, psd, nf, **inputs), secs)
    assignments, leftover = [], 1.0
    for i, g in zip(ordering.order, ordering.gains):
        # A gain one section could not take is carried into the next one.
        a, leftover = _assign_with_backoff(secs[i], g * leftover, model, req, windows)
        if a.realization is None:
            return _unbuildable(cand, ordering, tuple(assignments) + (a,), model)
        assignments.append(a)
    if not math.isclose(leftover, 1.0, rel_tol=1e-9):
        # Fold the leftover into the latest section that can take it before paying for
        # a separate gain stage.
        for k in range(len(assignments) - 1, -1, -1):
            sec = assignments[k].section
            a = _assign(_with_gain(sec, abs(sec.gain) * leftover), model, req, windows)
            if a.realization is not None:
                assignments[k], leftover = a, 1.0
                break
    if not math.isclose(leftover, 1.0, rel_tol=1e-9):
        gain_sec = Section(kind="gain", f0_hz=0.0, q=0.0, gain=leftover)
        a = _assign(gain_sec, model, req, windows)
        if a.realization is None:
            return _unbuildable(cand, ordering, tuple(assignments) + (a,), model)
        assignments.append(a)
    rs = req.input.source_ohms
    if rs > 0:
        band = passband_grid(req)
        z_in = input_impedance_min(assignments[0].realization.elements, band)
        z_top = input_impedance_max(assignments[0].realization.elements, band)
        if z_top / z_in < FLAT_INPUT_RATIO and rs / z_in > SOURCE_ABSORB_LIMIT:
            # A resistive input: design the first section with the source as part of it.
            again = _assign(assignments[0].section, model, req, windows, source_ohms=rs)
            if again.realization is not None:
                assignments[0] = again
                z_in = math.inf
        if rs / z_in > SOURCE_LOADING_LIMIT:
            buf = _assign(Section(kind="gain", f0_hz=0.0, q=0.0, gain=1.0), model, req, windows)
            buf = replace(buf, reason=f"follower: the first section's input impedance falls to "
                          f"{format_value(z_in, 'Ω')} in band, too low for the "
                          f"{format_value(rs, 'Ω')} source")
            assignments.insert(0, buf)
    chain = _build_and_trim(assignments, req, model, windows)
    an = analyse(chain, req)
    checks = tuple(all_checks(chain, an, req, windows=windows))
    return Design(candidate=cand, ordering=ordering, assignments=tuple(assignments),
                  chain=chain, analyses=an, checks=checks)


def _chain_of(assignments: list[Assignment], req: Requirement, model: OpAmp) -> Chain:
    stages = [_stage(i + 1, a, model) for i, a in enumerate(assignments)]
    rs = req.input.source_ohms
    if rs > 0:
        # Every figure of the first stage is the one the source sees (an audit of the same
        # parts reads them so too), whether or not its design absorbed the source.
        st = stages[0]
        stages[0] = with_parts(st, dict(st.components), source_ohms=rs)
    return build_chain(stages, source_ohms=rs)


def _build_and_trim(assignments: list[Assignment], req: Requirement, model: OpAmp,
               windows: PartWindows) -> Chain:
    """Build the chain, then trim stages' parts so its passband sits on the mask.

    Rounded parts leave each section a little off; in a staggered chain those errors add up
    to a passband error no single section shows. Stages are trimmed from the output back
    (``chain.trim.trim_stage``), each judged by the whole chain against the whole
    requirement (``analysis.mask.trim_judge``: passband, every stopband point, every
    output's headroom). A trim that moves a stage's f0 beyond ``chain.trim.REDESIGN_SHARE``
    is a redesign and the stage's reasons say so.
    """
    chain = _chain_of(assignments, req, model)
    judge = trim_judge(chain, req)
    for _ in range(_TRIM_PASSES):
        now = judge(net_transfers(chain, judge.freq_hz))
        if now[1][0] <= _TRIM_WHEN_ABOVE:
            break  # comfortably inside: leave every section on its own target
        changed = False
        for k in range(len(chain.stages) - 1, -1, -1):
            new = trim_stage(chain, k, freq_hz=judge.freq_hz, judge=judge,
                             r_series=req.design.resistor_series,
                             c_series=req.design.capacitor_series)
            if new is None:
                continue
            st = chain.stages[k]
            rs = chain.source_ohms if k == 0 else 0.0
            stages = list(chain.stages)
            note = "parts trimmed for the chain's mask"
            if new.redesign:
                note = (f"parts re-chosen for the chain's mask: f0 moved {100 * new.f0_shift:+.1f} %, "
                        f"more than the {100 * trim.REDESIGN_SHARE:g} % a rounding trim moves it — "
                        f"a redesign of this section, not rounding")
            stages[k] = with_parts(st, new.components, source_ohms=rs, note=note)
            chain = build_chain(stages, source_ohms=chain.source_ohms)
            changed = True
        if not changed:
            break
    return chain


def _stage(position: int, a: Assignment, model: OpAmp) -> Stage:
    r = a.realization
    return Stage(position=position, topology=r.topology, target=r.target,
                 components=r.components, elements=r.elements, model=model, built=r.built,
                 ideal=r.ideal, reason=a.reason, rejected=a.rejected)


def _nearest_fix(section: Section, model: OpAmp) -> str:
    """What would build the section: the slowest op-amp class whose GBW covers the least
    GBW any topology of its kind needs, or a wider band when none does."""
    needs = []
    for topo in topologies_of_kind(section.kind):
        try:
            needs.append(topo.limits(section, model).gbw_needed_hz)
        except (ValueError, InfeasibleDesign):
            continue
    need = min((n for n in needs if math.isfinite(n)), default=math.inf)
    if not math.isfinite(need) or need <= model.gbw_hz:
        return ""
    name = suggest_faster(need)
    if name is None:
        return (f"; no op-amp class reaches the {format_value(need, 'Hz')} GBW it needs: "
                f"widen the band (lower Q) or lower the order")
    return (f"; it needs {format_value(need, 'Hz')} GBW at the least: an op-amp of the "
            f"'{name}' class ({format_value(archetype(name).gbw_hz, 'Hz')}) would do")


def _unbuildable(cand: Candidate, ordering: Ordering | None,
                 assignments: tuple[Assignment, ...], model: OpAmp) -> Design:
    checks = []
    for pos, a in enumerate(assignments, start=1):
        if a.realization is not None:
            continue
        s = a.section
        why = "; ".join(f"{name}: {reason}" for name, reason in a.rejected)
        checks.append(Check(
            id="topology", status="fail", value=s.q, limit=None, unit="Q", stage=pos,
            message=f"no circuit builds the {s.kind} section at {s.f0_hz:.5g} Hz, Q {s.q:.3g}, "
                    f"gain {s.gain:.3g}{_nearest_fix(s, model)} — {why}"))
    return Design(candidate=cand, ordering=ordering, assignments=assignments, chain=None,
                  analyses=None, checks=tuple(checks))
