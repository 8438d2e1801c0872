"""The planner: candidates → ordered, gain-scaled sections → circuits → chain → analyses →
checks; the best candidate wins."""

from __future__ import annotations

import importlib
import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from bandwright.advice import order_beyond_reach, with_gain_advice
from bandwright.advice.supply import with_supply_advice
from bandwright.amplifier import resolve_amplifier
from bandwright.analysis import Analyses, analyse
from bandwright.analysis.aliasing import anti_alias_points
from bandwright.analysis.levels import swing_limit_vpk
from bandwright.analysis.grid import noise_grid, passband_grid
from bandwright.advice.tolerance import tighter_offer
from bandwright.analysis.montecarlo import YieldResult, monte_carlo, resolve_spreads
from bandwright.analysis.montecarlo.tuned import TuningResult, tuning_for
from bandwright.candidates import Candidate, make_candidates, path_label
from bandwright.chain import Chain, Stage, build_chain
from bandwright.chain.graph import attach_converter
from bandwright.chain.stage import with_parts
from bandwright.chain.blocking import place_dc_blocks
from bandwright.analysis.mask import trim_judge
from bandwright.chain.graph import net_transfers
from bandwright.chain import trim
from bandwright.chain.trim import trim_stage
from bandwright.chain.ordering import (MAX_SECTIONS, Ordering, best_built_order,
                                      built_figures, built_tables, choose_order,
                                      long_chain_order, make_problem)
from bandwright.checks import all_checks
from bandwright.checks.base import Check
from bandwright.checks.chain_checks import stage_gbw_needed_hz
from bandwright.checks.yield_check import yield_checks
from bandwright.circuits.assign import Assignment, assign
from bandwright.circuits.nodal import (ac_solve, input_impedance_max, input_impedance_min,
                                       noise as nodal_noise)
from bandwright.circuits import all_topologies, topologies_of_kind
from bandwright.errors import InfeasibleDesign
from bandwright.parts.catalogue import archetype, suggest_faster
from bandwright.parts.notation import format_fixed, format_hz, format_si, format_sig
from bandwright.parts.opamp import OpAmp
from bandwright.parts.windows import PartWindows
from bandwright.sections.section import Section
from bandwright.inputs.requirement import Requirement
from bandwright.workers import in_worker, one_blas_thread, run_jobs

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
#: Below this share of its yield target a candidate needs tighter parts or a trim whatever
#: is chosen; the yield then no longer ranks it (``_shortfall``).
FAR_SHORT = 0.5
_TRIM_WHEN_ABOVE = 0.8
# The built stages are placed again only for a clear gain in dynamic range: below it the
# planning model's order stands.
_PLACE_MIN_DB = 0.5
_AS_MODELLED = math.log(10 ** (1 / 20))  # 1 dB
# Choosing again for a missed noise budget: at most this many stages, this many
# alternatives each, and a lower impedance level a third of the one built.
_RECHOICE_ROUNDS = 2
_RECHOICE_ALTERNATIVES = 3
_NOISE_LEVEL_STEP = 3.0


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
    with one_blas_thread():
        return _plan(requirement, family=family, order=order, windows=windows,
                     progress=progress)


def _plan(requirement: Requirement, *, family: str | None, order: int | None,
          windows: PartWindows, progress: Callable[[str, int, int], None] | None) -> Plan:
    model = resolve_amplifier(requirement.amplifier, path=requirement.path,
                              supply=requirement.supply, tones=requirement.input.tones)
    # A converter may need stopband points the mask does not hold (each says why).
    requirement = replace(requirement,
                          stopband=requirement.stopband + anti_alias_points(requirement))
    candidates = make_candidates(requirement, family=family, order=order)
    _load_before_fork()

    def build(c: Candidate) -> tuple[Design, YieldResult | None]:
        d = build_design(c, requirement, model, windows=windows)
        # A clean candidate's yield is needed whatever the others do (below): it is run
        # beside the build, on the same worker, and joins the design after the first ranking.
        return d, (monte_carlo(d.chain, requirement) if _clean(d) else None)

    # Longest jobs first, so that the last one to finish is a short one: a bandpass-path
    # candidate's sections take the multi-amplifier topologies (eight or nine parts to
    # search) where the highpass + lowpass path's take five or six.
    first = sorted(range(len(candidates)), key=lambda i: candidates[i].path != "bandpass")
    built_in_turn = run_jobs(build, [candidates[i] for i in first],
                             done=None if progress is None else
                             (lambda n: progress("candidates", n, len(candidates))))
    built = [b for _, b in sorted(zip(first, built_in_turn), key=lambda ib: ib[0])]
    designs = [d for d, _ in built]
    ready = {id(d): y for d, y in built}
    # The yield of every candidate that passes its other checks: how many built boards meet
    # the requirement then decides between them. One that already fails a check ranks by its
    # failures, so its Monte Carlo is skipped — unless no candidate is clean, when the best
    # of them gets one. The tighter-parts search, several runs more, is for the chosen only.
    designs.sort(key=_rank)
    clean = [_clean(d) for d in designs]
    designs = [with_yield(d if ready[id(d)] is None else replace(d, yield_result=ready[id(d)]),
                          requirement, progress=progress, offer=False)
               if ok or (i == 0 and not any(clean)) else d
               for i, (d, ok) in enumerate(zip(designs, clean))]
    designs.sort(key=_rank)
    designs[0] = with_gain_advice(designs[0], requirement,
                                  _rebuild(designs[0].candidate, model, windows, order))
    designs[0] = with_supply_advice(designs[0], requirement,
                                    _rebuild_any(designs[0].candidate, windows, order))
    designs[0] = with_yield(designs[0], requirement, progress=progress)
    return Plan(requirement=requirement, model=model, designs=tuple(designs),
                why=_why(designs))


def _load_before_fork() -> None:
    """Import here what every candidate's build imports on first use (the topology modules,
    numpy's FFT and random modules, which numpy loads lazily): the workers are forked from
    this process and inherit them, instead of each importing them again. (numpy.ma, which
    numpy's unique and percentile import, is not needed: ``bandwright.arrays``.)"""
    all_topologies()
    importlib.import_module("numpy.fft")
    importlib.import_module("numpy.random")


def _clean(d: Design) -> bool:
    """Buildable, and passing every check but the yield (which decides among these)."""
    return d.buildable and d.failures == 0


def _rebuild(cand: Candidate, model: OpAmp, windows: PartWindows, order: int | None
             ) -> Callable[[Requirement], Design]:
    """Build `cand`'s family and path again for a requirement with another gain (the
    candidate's sections carry the gain, so they are made afresh)."""
    def rebuild(req: Requirement) -> Design:
        same = [c for c in make_candidates(req, family=cand.family, order=order)
                if c.path == cand.path]
        return build_design(same[0], req, model, windows=windows)
    return rebuild


def _rebuild_any(cand: Candidate, windows: PartWindows, order: int | None
                 ) -> Callable[[Requirement], Design]:
    """As ``_rebuild``, with the op-amp and supply the requirement names."""
    def rebuild(req: Requirement) -> Design:
        model = resolve_amplifier(req.amplifier, path=req.path, supply=req.supply)
        return _rebuild(cand, model, windows, order)(req)
    return rebuild


def with_yield(design: Design, requirement: Requirement, *,
               progress: Callable[[str, int, int], None] | None = None,
               offer: bool = True) -> Design:
    """`design` with its Monte Carlo yield and the `yield` check; unchanged when it has no
    chain. With `offer`, a yield below target also gets the tighter parts that would reach
    it (``advice.tolerance.plan_yield``); a result already computed is reused."""
    if design.chain is None:
        return design
    def report(done: int, total: int) -> None:
        # The bar belongs to this process: a job that runs in a worker (the offer, below)
        # must not draw on the terminal from a fork of it (nor take its console's lock).
        if not in_worker():
            progress("yield", done, total)

    report = None if progress is None else report
    result = design.yield_result
    if result is None:
        result = monte_carlo(design.chain, requirement, progress=report)
    untrimmed, tuning = result, design.tuning
    jobs = {}
    if offer and result.offer is None:
        jobs["offer"] = lambda: tighter_offer(design.chain, requirement, untrimmed,
                                              progress=report)
    if offer and tuning is None:
        # Only the chosen design is tuned: the ranking compares untrimmed chains.
        jobs["tuning"] = lambda: tuning_for(design.chain, requirement, untrimmed, targets={
            st.position: (st.target.f0_hz, st.target.q, abs(st.target.gain))
            for st in design.chain.stages if st.kind == "bandpass"})
    # Both read the untrimmed result only. Below its target each runs Monte Carlo runs of
    # its own: side by side then (on its target both return at once: in line).
    if untrimmed.meets_target:
        done = {k: job() for k, job in jobs.items()}
    else:
        done = dict(zip(jobs, run_jobs(lambda job: job(), list(jobs.values()))))
    if done.get("offer") is not None:
        result = replace(result, offer=done["offer"])
    tuning = done.get("tuning", tuning)
    checks = tuple(c for c in design.checks if c.id != "yield")
    return replace(design, yield_result=result, tuning=tuning,
                   checks=checks + tuple(yield_checks(result, tuning=tuning)))


def _shortfall(d: Design) -> float:
    """The yield's rank key: 0 for a candidate that meets its yield target; between those
    that miss it the one more boards pass is nearer. A yield below `FAR_SHORT` of its target
    needs tighter parts or a trim whichever candidate is chosen, so among such candidates
    the yield does not decide: their cost (op-amps, sections, Q) does."""
    y = d.yield_result
    if y is None or y.yield_fraction >= y.min_yield:
        return 0.0
    return -max(y.yield_fraction, FAR_SHORT * y.min_yield)


def _rank(d: Design) -> tuple:
    dr = d.analyses.dynamic_range_db if d.analyses is not None else -math.inf
    return (not d.buildable, d.failures, _shortfall(d), d.opamps, len(d.candidate.sections),
            d.candidate.highest_q, -dr)


def _why(designs: list[Design]) -> str:
    best = designs[0]
    if len(designs) == 1:
        return "the only candidate for the family and order asked"
    nxt = designs[1]
    name = f"{nxt.candidate.family} {path_label(nxt.candidate.path)}"
    if best.buildable != nxt.buildable:
        return f"the {name} candidate cannot be built with this op-amp"
    if best.failures != nxt.failures:
        why = f"fewer failing checks ({best.failures} against {nxt.failures} for {name})"
        lost = [c for c in nxt.checks if c.status == "fail" and c.id == "time"]
        if lost and not any(c.status == "fail" and c.id == "time" for c in best.checks):
            # A [time] limit decides: name the figure the other candidate misses.
            why += f"; it misses the [time] limit: {lost[0].message}"
        return why
    if (_shortfall(best) != _shortfall(nxt) and best.yield_result is not None
            and nxt.yield_result is not None):
        return (f"more boards meet the requirement "
                f"({format_fixed(100 * best.yield_result.yield_fraction, 1)} % "
                f"against {format_fixed(100 * nxt.yield_result.yield_fraction, 1)} % for {name})")
    if best.opamps != nxt.opamps:
        return f"fewer op-amps ({best.opamps} against {nxt.opamps} for {name})"
    if len(best.candidate.sections) != len(nxt.candidate.sections):
        return (f"fewer sections ({len(best.candidate.sections)} against "
                f"{len(nxt.candidate.sections)} for {name})")
    return (f"as many op-amps and sections as {name}, lower highest Q "
            f"({format_sig(best.candidate.highest_q, 3)} against "
            f"{format_sig(nxt.candidate.highest_q, 3)})")


def _assign(section: Section, model: OpAmp, req: Requirement, windows: PartWindows,
            source_ohms: float = 0.0, rounded: bool = True,
            accept_gain_shortfall: bool = False) -> Assignment:
    # Every stage is driven by an op-amp (or the source, behind a follower when needed):
    # its input must not load that op-amp below its minimum load, in band or at a tone.
    freqs = np.concatenate([passband_grid(req), [t.freq_hz for t in req.input.tones]])
    # The topologies' tolerance rules are judged at the tolerances the yield is run at.
    spreads = resolve_spreads(req)
    return assign(section, model, r_series=req.design.resistor_series,
                  c_series=req.design.capacitor_series, windows=windows,
                  input_floor=(freqs, model.min_load_ohms), source_ohms=source_ohms,
                  rounded=rounded, accept_gain_shortfall=accept_gain_shortfall,
                  r_tolerance=spreads.resistor_pct / 100,
                  c_tolerance=spreads.capacitor_pct / 100)


def _with_gain(section: Section, gain: float) -> Section:
    return Section(kind=section.kind, f0_hz=section.f0_hz, q=section.q, gain=float(gain))


def _assign_with_backoff(section: Section, gain: float, model: OpAmp, req: Requirement,
                         windows: PartWindows, rounded: bool = True
                         ) -> tuple[Assignment, float]:
    """Assign at `gain`; when no topology reaches it, fall back to unity gain (a lowpass or
    highpass, which usually runs at unity) or to halved gains; when none of those builds
    either, take a topology that reaches the Q at its natural gain (a bandpass: the
    dual-amplifier section's 2 V/V). Return the factor left over for the stages after it or
    a make-up gain stage."""
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
    short = _assign(_with_gain(section, gain), model, req, windows, rounded=rounded,
                    accept_gain_shortfall=True)
    if short.realization is not None:
        return short, short.gain_shortfall
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
                  tones=[(t.freq_hz, t.vpk) for t in req.input.tones],
                  last_ratio=_last_node_ratio(req, model))
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
    origin: list[int | None] = list(ordering.order)
    if not math.isclose(leftover, 1.0, rel_tol=1e-9):
        gain_sec = Section(kind="gain", f0_hz=0.0, q=0.0, gain=leftover)
        a = _assign(gain_sec, model, req, windows)
        if a.realization is None:
            return _unbuildable(cand, ordering, tuple(assignments) + (a,), model)
        assignments.append(a)
        origin.append(None)
    # Where every section was built at the gain the model gave it, the model's order
    # stands; a gain stage, or a section that could not take its share, is placed again
    # on the built stages' own figures.
    as_modelled = len(assignments) == len(ordering.gains) and all(
        abs(math.log(abs(a.section.gain) / g)) < _AS_MODELLED
        for a, g in zip(assignments, ordering.gains))
    if as_modelled:
        placement = "built stages in the model's order (every section at its modelled gain)"
    else:
        assignments, origin, placement = _place(assignments, origin, req)
    ordering = replace(ordering, order=tuple(i for i in origin if i is not None),
                       placement=placement)
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
                          f"{format_si(z_in, 'Ω')} in band, too low for the "
                          f"{format_si(rs, 'Ω')} source")
            assignments.insert(0, buf)
    chain = attach_converter(_build_and_trim(assignments, req, model, windows), req.converter)
    an = analyse(chain, req)
    checks = tuple(all_checks(chain, an, req, windows=windows))
    ordering = _built_claims(ordering, chain, origin, secs, req)
    design = Design(candidate=cand, ordering=ordering, assignments=tuple(assignments),
                    chain=chain, analyses=an, checks=checks)
    return _for_noise_budget(design, req, model, windows,
                             claims=lambda ch: _built_claims(ordering, ch, origin, secs, req))


def _noise_failed(checks) -> bool:
    return any(c.id == "noise" and c.status == "fail" for c in checks)


def _stage_shares(an: Analyses, n: int) -> list[float]:
    """Noise power at the output from each stage's own sources (by the ``_s<k>`` suffix of
    the source names), in chain order."""
    shares = [0.0] * n
    for name, vrms in an.noise.contributions_vrms:
        tail = name.rsplit("_s", 1)
        if len(tail) == 2:
            pos = tail[1].split()[0]
            if pos.isdigit() and 1 <= int(pos) <= n:
                shares[int(pos) - 1] += vrms ** 2
    return shares


def _alternatives(a: Assignment, model: OpAmp, req: Requirement, windows: PartWindows
                  ) -> list[tuple[str, Assignment]]:
    """Other ways to build the stage of `a`: each other topology of its kind that builds it,
    and the same topology at a third of its impedance level (less resistor and current
    noise, as far as the load rules allow)."""
    out = []
    rs = a.realization.source_ohms
    names = [t.NAME for t in topologies_of_kind(a.section.kind)]
    for name in names:
        if name == a.realization.topology:
            continue
        alt = _assign_only(a, name, model, req, windows, rs, a.level)
        if alt.realization is not None:
            out.append((f"{name} instead of {a.realization.topology}", alt))
    lower = _assign_only(a, a.realization.topology, model, req, windows, rs,
                         a.level / _NOISE_LEVEL_STEP)
    if lower.realization is not None and lower.level < a.level:
        out.append((f"{a.realization.topology} at a lower impedance level "
                    f"(×{format_sig(lower.level, 3)} of the first)", lower))
    return out[:_RECHOICE_ALTERNATIVES]


def _assign_only(a: Assignment, name: str, model: OpAmp, req: Requirement,
                 windows: PartWindows, source_ohms: float, level: float) -> Assignment:
    freqs = np.concatenate([passband_grid(req), [t.freq_hz for t in req.input.tones]])
    spreads = resolve_spreads(req)
    return assign(a.section, model, r_series=req.design.resistor_series,
                  c_series=req.design.capacitor_series, windows=windows,
                  input_floor=(freqs, model.min_load_ohms), source_ohms=source_ohms,
                  only=frozenset({name}), level=level,
                  r_tolerance=spreads.resistor_pct / 100,
                  c_tolerance=spreads.capacitor_pct / 100)


def _for_noise_budget(design: Design, req: Requirement, model: OpAmp, windows: PartWindows,
                      *, claims: Callable[[Chain], Ordering]) -> Design:
    """When the built chain misses the noise budget, choose again among the feasible
    alternatives of the stages that add the most noise (another topology, a lower impedance
    level) before settling.

    The stages are taken in order of their own noise share; each alternative is built into
    the whole chain, analysed and checked, and the one with the least output noise that
    fails no more other checks is kept. At most ``_RECHOICE_ROUNDS`` stages are re-chosen
    and ``_RECHOICE_ALTERNATIVES`` alternatives tried for each: the planner's time stays
    within a few chain analyses. The reason of a re-chosen stage names the change and the
    noise before and after; when no alternative meets the budget, the noise check names the
    best one found.
    """
    if design.chain is None or not _noise_failed(design.checks):
        return design
    assignments = list(design.assignments)
    best = design
    first_noise = design.analyses.noise.integrated_vrms
    tried: set[int] = set()
    changes: list[str] = []
    for _ in range(_RECHOICE_ROUNDS):
        shares = _stage_shares(best.analyses, len(assignments))
        order = [k for k in np.argsort(shares)[::-1] if k not in tried and shares[k] > 0]
        if not order:
            break
        k = int(order[0])
        tried.add(k)
        others = best.failures - 1
        found = None
        for what, alt in _alternatives(assignments[k], model, req, windows):
            trial = list(assignments)
            trial[k] = alt
            chain = _build_and_trim(trial, req, model, windows)
            an = analyse(chain, req)
            checks = tuple(all_checks(chain, an, req, windows=windows))
            fails = sum(c.status == "fail" for c in checks) - _noise_failed(checks)
            if fails > others:
                continue
            if found is None or an.noise.integrated_vrms < found[2].noise.integrated_vrms:
                found = (what, trial, an, checks, chain)
        if found is None or \
                found[2].noise.integrated_vrms >= best.analyses.noise.integrated_vrms:
            continue
        what, trial, an, checks, chain = found
        before = best.analyses.noise.integrated_vrms
        a, old = trial[k], assignments[k]
        limit = req.noise.max_output_vrms
        gone = (old.realization.topology,
                f"chosen first: the chain's output noise was {format_si(before, 'V')} rms "
                f"against the {format_si(limit, 'V')} budget")
        trial[k] = replace(a, reason=(f"re-chosen for the noise budget ({what}): the chain's "
                                      f"output noise {format_si(before, 'V rms')} → "
                                      f"{format_si(an.noise.integrated_vrms, 'V rms')}; "
                                      + a.reason),
                           rejected=(gone,) + tuple(r for r in old.rejected
                                                    if r[0] != a.realization.topology))
        stages = list(chain.stages)
        stages[k] = replace(stages[k], reason=trial[k].reason, rejected=trial[k].rejected)
        chain = build_chain(stages, source_ohms=chain.source_ohms)
        assignments = trial
        changes.append(f"stage {k + 1}: {what} ({format_si(before, 'V')} → "
                       f"{format_si(an.noise.integrated_vrms, 'V')})")
        best = replace(best, assignments=tuple(trial), chain=chain, analyses=an,
                       checks=checks, ordering=claims(chain))
        if not _noise_failed(checks):
            break
    if best is design:
        advice = ("; no other topology or impedance level of the noisiest stages lowers it "
                  "without failing another check: a quieter op-amp class, or more gain early")
    elif _noise_failed(best.checks):
        advice = (f"; chosen again for it: {'; '.join(changes)}, still above the budget "
                  f"(first built: {format_si(first_noise, 'V')}): a quieter op-amp class, or "
                  f"more gain early")
    else:
        return best
    return replace(best, checks=tuple(replace(c, message=c.message + advice)
                                      if c.id == "noise" else c for c in best.checks))


def _tables_of(element_lists, req: Requirement, source_ohms: float = 0.0):
    """``built_tables`` of stages given by their element lists (the first one driven by
    `source_ohms`, the others by an op-amp)."""
    pb = passband_grid(req)
    f_sig = np.concatenate([pb, [t.freq_hz for t in req.input.tones]])
    nf = noise_grid(req)
    h_sig, h_noise, psd = [], [], []
    for k, elements in enumerate(element_lists):
        rs = source_ohms if k == 0 else 0.0
        h_sig.append(ac_solve(elements, f_sig, source_ohms=rs).at("out"))
        h_noise.append(ac_solve(elements, nf, source_ohms=rs).at("out"))
        psd.append(nodal_noise(elements, nf, source_ohms=rs,
                               temperature_c=req.environment.temperature_c).total_psd)
    return built_tables(np.array(h_sig), np.array(h_noise), np.array(psd), nf,
                        n_passband=pb.size, max_vpk=req.input.max_vpk,
                        tone_vpk=[t.vpk for t in req.input.tones])


def _place(assignments: list[Assignment], origin: list[int | None], req: Requirement
           ) -> tuple[list[Assignment], list[int | None], str]:
    """The built stages (a make-up gain stage among them) in the order with the most
    dynamic range, judged on their own transfers and noise (``best_built_order``).

    The planning model fixes each section's gain for its order; a gain stage, or a section
    that could not take its share, changes what the best order is, and only the built
    stages show it. The new order is taken for a gain of at least ``_PLACE_MIN_DB``.
    """
    if len(assignments) < 2 or len(assignments) > MAX_SECTIONS + 2:
        return assignments, origin, ""
    tables = _tables_of([a.realization.elements for a in assignments], req)
    limit = min(swing_limit_vpk(req.supply, e.model.swing_to_rail_v)
                for a in assignments for e in a.realization.elements if e.kind == "opamp")
    order, method = best_built_order(tables, limit_vpk=limit)
    here = tuple(range(len(assignments)))
    n_new, p_new = built_figures(tables, order)
    n_old, p_old = built_figures(tables, here)
    gain_db = 20 * math.log10((n_old * p_old) / (n_new * p_new))
    if p_new > limit and p_old > limit:
        # Nothing fits the swing: the lowest peak, however noisy.
        gain_db = math.inf if p_new < p_old else -math.inf
    elif p_old > limit >= p_new:
        gain_db = math.inf
    elif p_new > limit >= p_old:
        gain_db = -math.inf
    if order == here or not gain_db >= _PLACE_MIN_DB:
        return assignments, origin, f"built stages kept in the model's order ({method})"
    note = (f"built stages placed again ({method}): " +
            (f"{format_fixed(gain_db, 1, sign=True)} dB of dynamic range over the model's order"
             if math.isfinite(gain_db) else "the model's order clips on the swing"))
    return [assignments[i] for i in order], [origin[i] for i in order], note


def _built_claims(ordering: Ordering, chain: Chain, origin: list[int | None],
                  secs: tuple[Section, ...] | list[Section], req: Requirement) -> Ordering:
    """`ordering` with the figures of the chain as built: its noise from the stages' own
    transfers and noise, and its dynamic range over the same built stages in the order as
    generated and in increasing-Q order (a follower stays first, a gain stage goes last)."""
    stages = list(chain.stages)
    n = len(stages)
    if n > MAX_SECTIONS + 2:
        return ordering
    head = n - len(origin)  # a follower ahead of the placed stages
    tags: list[int | None] = [None] * head + list(origin)
    tables = _tables_of([st.elements for st in stages], req, source_ohms=chain.source_ohms)
    here = tuple(range(n))
    noise, top = built_figures(tables, here)

    def arranged(key) -> tuple[int, ...]:
        placed = sorted((k for k in range(head, n) if tags[k] is not None),
                        key=lambda k: key(tags[k]))
        rest = [k for k in range(head, n) if tags[k] is None]
        return tuple(range(head)) + tuple(placed) + tuple(rest)

    def over(order: tuple[int, ...]) -> float:
        other_noise, other_top = built_figures(tables, order)
        return 20 * math.log10((other_noise * other_top) / (noise * top))

    return replace(ordering, built_noise_vrms=noise,
                   built_gain_over_generated_db=over(arranged(lambda i: i)),
                   built_gain_over_increasing_q_db=over(arranged(lambda i: secs[i].q)))


def _last_node_ratio(req: Requirement, model: OpAmp) -> float:
    """The op-amps' swing over the last node's limit, the converter's full scale where that
    is lower (1 without a converter; ``chain.ordering``): when the peak sits at full scale
    less ``headroom_db``, every op-amp net sits the same margin inside its swing."""
    conv = req.converter
    if conv is None:
        return 1.0
    swing = swing_limit_vpk(req.supply, model.swing_to_rail_v)
    return swing / min(swing, conv.full_scale_vpk)


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
                note = (f"parts re-chosen for the chain's mask: f0 moved "
                        f"{format_fixed(100 * new.f0_shift, 1, sign=True)} %, more than the "
                        f"{format_sig(100 * trim.REDESIGN_SHARE)} % a rounding trim moves it — a "
                        f"redesign of this section, not rounding")
            stages[k] = with_parts(st, new.components, source_ohms=rs, note=note)
            if _trim_breaks_gbw_rule(st, stages[k]):
                continue
            chain = build_chain(stages, source_ohms=chain.source_ohms)
            changed = True
        if not changed:
            break
    # DC blocks go in after the trim (the trim rounds the sections, the block stays out of
    # their figures); the analyses that follow see them in the stages' element lists.
    return place_dc_blocks(chain, req)


def _trim_breaks_gbw_rule(before: Stage, after: Stage) -> bool:
    """Whether a trim moved a stage's figures to where its op-amp no longer meets the GBW
    rule it met before (a trim rounds the chain's passband; it must not buy that with a
    failing ``gbw`` check)."""
    try:
        need_after = stage_gbw_needed_hz(after)
    except ValueError:
        return True
    return need_after > after.model.gbw_hz >= stage_gbw_needed_hz(before)


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
        return (f"; no op-amp class reaches the {format_hz(need)} GBW it needs: "
                f"widen the band (lower Q) or lower the order")
    return (f"; it needs {format_hz(need)} GBW at the least: an op-amp of the "
            f"'{name}' class ({format_hz(archetype(name).gbw_hz)}) would do")


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
            message=f"no circuit builds the {s.kind} section at "
                    f"{format_hz(s.f0_hz, significant=5)}, Q {format_sig(s.q, 3)}, "
                    f"gain {format_sig(s.gain, 3)}{_nearest_fix(s, model)} — {why}"))
    return Design(candidate=cand, ordering=ordering, assignments=assignments, chain=None,
                  analyses=None, checks=tuple(checks))
