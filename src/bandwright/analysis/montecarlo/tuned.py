"""The Monte Carlo in tuned mode: every board is drawn as the untuned run draws it, the
tuning procedure is applied to it (each trim solved, all boards at once, so that its reading
is reached within the trimmer's travel and resolution), and the board is judged after
tuning by the same kernel and verdicts.

A trimmed part's value on a board is its fixed resistor (drawn at the resistor tolerance,
from the same random column the untrimmed part uses) plus the trimmer's setting. Each step
is solved by the secant method in ln R, starting from the power law y ∝ R^S of the
step's sensitivity; the figures are read from the stage's poles
(``circuits.figures.part_sweep_figures``): a second-order bandpass peaks at its pole
frequency and its −3 dB width is f0/Q, which is what the technician reads.

References
----------
.. [1] E. B. Wilson, "Probable inference, the law of succession, and statistical
   inference", J. Amer. Statist. Assoc. 22(158), 1927 -- the score interval.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.analysis.montecarlo import sampling
from bandwright.analysis.montecarlo.kernel import Grid, stage_polynomials
from bandwright.analysis.montecarlo.run import wilson_interval
from bandwright.analysis.montecarlo.sampling import (Spreads, draw, factors, resolve_spreads,
                                                     sample_columns, stage_inputs, stage_spans,
                                                     tolerances)
from bandwright.analysis.montecarlo.verdicts import REASONS, judge
from bandwright.analysis.grid import response_grid
from bandwright.analysis.tuning import TRIMMER_RESOLUTION, TrimStep, TuningPlan, plan_tuning
from bandwright.chain.graph import CHAIN_INPUT, Chain
from bandwright.circuits.figures import part_sweep_figures
from bandwright.circuits.nodal import passive_names
from bandwright.inputs.requirement import Requirement

__all__ = ["TunedYield", "TuningResult", "tuned_monte_carlo", "tune_boards", "tuning_for"]

# Secant iterations per step; the figures are smooth power laws of R, so the error after
# six is far below one step of the trimmer's resolution.
_ITERATIONS = 5
# A board whose reading is off by more than this (relative) after its trim hit an end of
# travel is one the trim range could not rescue.
_REACHED = 1e-4


@dataclass(frozen=True)
class TunedYield:
    """Outcome of the tuned Monte Carlo.

    Attributes
    ----------
    samples, seed : int
    passed : ndarray of bool (samples,)
        Per board, after tuning: stable, inside the mask and the headroom.
    yield_fraction : float
    interval : (float, float)
        Wilson 95 % ([1]_).
    fail_counts : dict of str to int
        Failing boards per reason after tuning (``verdicts.REASONS``).
    out_of_range : dict of str to int
        Per step ("stage 2 R3T"), boards whose reading that trimmer could not reach.
    beyond_range : int
        Boards where at least one trim ran out of travel.
    unrescued : int
        Boards that fail after tuning.
    settings : tuple of ndarray
        Per step, every board's trimmer setting, ohms (0 … trimmer_ohms).
    """

    samples: int
    seed: int
    passed: np.ndarray
    yield_fraction: float
    interval: tuple[float, float]
    fail_counts: dict[str, int]
    out_of_range: dict[str, int]
    beyond_range: int
    unrescued: int
    settings: tuple[np.ndarray, ...]


def _figure_of(stage, chain: Chain, values: np.ndarray, gbw, col: int, adjusts: str):
    """The step's reading as a function of the trimmed part's value (S,): the other parts
    are fixed during a step, so the polynomials are evaluated once per step
    (``circuits.figures.part_sweep_figures``)."""
    rs = chain.source_ohms if chain.input_of(stage) == CHAIN_INPUT else 0.0
    figures = part_sweep_figures(stage.elements, kind=stage.kind, near_hz=stage.built.f0_hz,
                                 values=values, part=col, gbw_scale=gbw, source_ohms=rs)
    pick = {"f0": 0, "q": 1, "gain": 2}[adjusts]

    def figure(value: np.ndarray) -> np.ndarray:
        y = figures(value)[pick]
        return np.abs(y) if adjusts == "gain" else y
    return figure


def _solve_step(stage, chain: Chain, values: np.ndarray, gbw, col: int, fixed: np.ndarray,
                step: TrimStep) -> tuple[np.ndarray, np.ndarray]:
    """Trimmer settings (S,) that bring `step`'s figure to its target, and which boards ran
    out of travel. `values` is updated in place with the solved totals."""
    t_ohms = step.trimmer_ohms
    lo, hi = np.log(fixed), np.log(fixed + t_ohms)
    ln_target = np.log(step.target)
    figure = _figure_of(stage, chain, values, gbw, col, step.adjusts)

    def err(x: np.ndarray) -> np.ndarray:
        values[:, col] = np.exp(x)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log(figure(values[:, col])) - ln_target

    x0 = np.log(fixed + t_ohms / 2)
    e0 = err(x0)
    x1 = np.clip(x0 - np.nan_to_num(e0) / step.sensitivity, lo, hi)
    for _ in range(_ITERATIONS):
        e1 = err(x1)
        de = e1 - e0
        dx = x1 - x0
        with np.errstate(divide="ignore", invalid="ignore"):
            slope = np.where(np.abs(dx) > 1e-12, de / dx, step.sensitivity)
        slope = np.where(np.isfinite(slope) & (np.sign(slope) == np.sign(step.sensitivity))
                         & (np.abs(slope) > 1e-3), slope, step.sensitivity)
        x0, e0 = x1, e1
        x1 = np.clip(x1 - np.nan_to_num(e1) / slope, lo, hi)
    # The technician sets the trimmer to within its resolution.
    q = TRIMMER_RESOLUTION * t_ohms
    setting = np.clip(np.round((np.exp(x1) - fixed) / q) * q, 0.0, t_ohms)
    final = err(np.log(fixed + setting))
    # Out of reach: the trimmer sits at an end of its travel and the reading is still off by
    # more than a resolution step moves it.
    at_end = (setting <= 0.0) | (setting >= t_ohms)
    step_rel = np.maximum(2 * abs(step.sensitivity) * q / fixed, _REACHED)
    short = at_end & ~(np.abs(final) <= step_rel)
    return setting, short


def tune_boards(chain: Chain, plan: TuningPlan, values: list[np.ndarray],
                gbw: list[np.ndarray | None], fixed_factors: dict[tuple[int, str], np.ndarray]
                ) -> tuple[list[np.ndarray], list[np.ndarray], list[np.ndarray]]:
    """Apply `plan` to a batch of boards.

    Parameters
    ----------
    chain : Chain
    plan : TuningPlan
    values : list of ndarray (S, P)
        Every stage's part values as drawn (``sampling.stage_inputs``); copied.
    gbw : list of ndarray or None
        GBW factors per stage.
    fixed_factors : dict of (stage, part) to ndarray (S,)
        The drawn value factor of each trimmed part (its fixed resistor gets it).

    Returns
    -------
    values : list of ndarray (S, P)
        Part values after tuning (a trimmed part holds fixed + setting).
    settings : list of ndarray (S,)
        Per step, the setting, ohms.
    short : list of ndarray of bool (S,)
        Per step, boards whose reading was out of the trimmer's reach.
    """
    values = [v.copy() for v in values]
    settings, shorts = [], []
    for k, st in enumerate(chain.stages):
        names = passive_names(st.elements)
        for step in plan.of_stage(st.position):
            col = names.index(step.trims)
            fixed = step.fixed_ohms * fixed_factors[(st.position, step.trims)]
            setting, short = _solve_step(st, chain, values[k], gbw[k], col, fixed, step)
            values[k][:, col] = fixed + setting
            settings.append(setting)
            shorts.append(short)
    return values, settings, shorts


def tuned_monte_carlo(chain: Chain, requirement: Requirement, plan: TuningPlan, *,
                      spreads: Spreads | None = None, samples: int | None = None,
                      seed: int | None = None) -> TunedYield:
    """Yield of `chain` after every board is tuned by `plan`.

    Parameters
    ----------
    chain : Chain
    requirement : Requirement
    plan : TuningPlan
    spreads : Spreads, optional
        Default: the requirement's tolerances (``resolve_spreads``).
    samples, seed : int, optional
        Default: `tolerance.samples`, `tolerance.seed` -- the same boards the untuned
        ``monte_carlo`` draws.

    Returns
    -------
    TunedYield
    """
    tol_req = requirement.tolerance
    spreads = spreads or resolve_spreads(requirement)
    samples = int(samples if samples is not None else tol_req.samples)
    seed = int(seed if seed is not None else tol_req.seed)
    grid = Grid.of(requirement, response_grid(requirement))
    cols = sample_columns(chain)
    tol = tolerances(cols, spreads)
    spans = stage_spans(chain, cols)
    col_of = {(c.stage, c.part): i for i, c in enumerate(cols)}
    rng = np.random.default_rng(seed)
    passed, settings_all, short_all = [], [], []
    fail_counts = {k: 0 for k in REASONS}
    for n in sampling.chunks(samples):
        u = draw(rng, n, len(cols), spreads.distribution)
        fac = factors(u, tol)
        values, gbw = stage_inputs(chain, spans, fac)
        ff = {(s.stage, s.trims): fac[:, col_of[(s.stage, s.trims)]] for s in plan.steps}
        tuned, settings, shorts = tune_boards(chain, plan, values, gbw, ff)
        _, v = judge(chain, grid, requirement, stage_polynomials(chain, tuned, gbw))
        for key in fail_counts:
            fail_counts[key] += int(np.count_nonzero(~v[key]))
        passed.append(v["ok"])
        settings_all.append(settings)
        short_all.append(shorts)
    ok = np.concatenate(passed)
    n_steps = len(plan.steps)
    settings_c = tuple(np.concatenate([s[j] for s in settings_all]) for j in range(n_steps))
    shorts_c = [np.concatenate([s[j] for s in short_all]) for j in range(n_steps)]
    any_short = np.zeros(samples, dtype=bool)
    for s in shorts_c:
        any_short |= s
    k = int(np.count_nonzero(ok))
    return TunedYield(
        samples=samples, seed=seed, passed=ok, yield_fraction=k / samples,
        interval=wilson_interval(k, samples), fail_counts=fail_counts,
        out_of_range={f"stage {s.stage} {s.part}": int(np.count_nonzero(m))
                      for s, m in zip(plan.steps, shorts_c)},
        beyond_range=int(np.count_nonzero(any_short)), unrescued=samples - k,
        settings=settings_c)



@dataclass(frozen=True)
class TuningResult:
    """A chain's tuning plan with its yield before and after tuning.

    Attributes
    ----------
    plan : TuningPlan
    tuned : TunedYield
    yield_untrimmed : float
        The untrimmed Monte Carlo's yield (the same boards, no trimmers).
    interval_untrimmed : (float, float)
    reason : str
        Why the chain is trimmed.
    """

    plan: TuningPlan
    tuned: TunedYield
    yield_untrimmed: float
    interval_untrimmed: tuple[float, float]
    reason: str

    @property
    def yield_tuned(self) -> float:
        return self.tuned.yield_fraction


def tuning_for(chain: Chain, requirement: Requirement, untrimmed, *,
               targets: dict[int, tuple[float, float, float]] | None = None,
               given: TuningPlan | None = None) -> TuningResult | None:
    """The tuning plan of `chain` and its tuned yield, when the chain is to be trimmed.

    Parameters
    ----------
    chain : Chain
    requirement : Requirement
        `[tuning] enabled`: true always trims, false never; left out, the chain is trimmed
        when `untrimmed` misses `tolerance.min_yield`.
    untrimmed : YieldResult
        The untrimmed Monte Carlo.
    targets : dict, optional
        Per stage position (f0_hz, q, |gain|) to tune to (``analysis.tuning.plan_tuning``).
    given : TuningPlan, optional
        Trims someone else chose (an audit's chain file): used whenever it has steps,
        unless `[tuning] enabled = false`.

    Returns
    -------
    TuningResult or None
        None when the chain is not trimmed, no stage has a part to trim, or a plan of the
        tool's own would not raise the yield.
    """
    enabled = requirement.tuning.enabled
    if enabled is False:
        return None
    if given is not None and given.steps:
        plan = given
        reason = "the chain file names its trimmers"
    else:
        if enabled is None and untrimmed.meets_target:
            return None
        plan = plan_tuning(chain, untrimmed.spreads,
                           resistor_series=requirement.design.resistor_series, targets=targets)
        reason = ("[tuning] enabled = true" if enabled else
                  f"the untrimmed yield {100 * untrimmed.yield_fraction:.1f} % misses the "
                  f"target {100 * untrimmed.min_yield:.1f} %")
    if not plan.steps:
        return None
    tuned = tuned_monte_carlo(chain, requirement, plan, spreads=untrimmed.spreads,
                              samples=untrimmed.samples, seed=untrimmed.seed)
    if plan is not given and tuned.yield_fraction <= untrimmed.yield_fraction:
        # A plan of the tool's own that does not raise the yield is no plan: trimming a
        # section near its stability limit (a positive-feedback Sallen-Key at high Q) can
        # push boards over it, and the untrimmed verdict then says more.
        return None
    return TuningResult(plan=plan, tuned=tuned, yield_untrimmed=untrimmed.yield_fraction,
                        interval_untrimmed=untrimmed.interval, reason=reason)
