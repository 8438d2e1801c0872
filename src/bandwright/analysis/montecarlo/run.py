"""Monte Carlo yield of a built chain: how many boards built from toleranced parts meet the
requirement, and which parts decide it.

The run is assembled from one module per concern: ``sampling`` (the spreads, the randomised
quantities and the boards drawn), ``kernel`` (each stage's transfer polynomials for a batch
of boards and |H(jw)|^2 along the chain), ``verdicts`` (mask, headroom, per board) and
``drivers`` (which parts decide a failure). The nominal board is evaluated on its own, by the
same kernel and verdicts. Samples run in chunks of ``sampling.CHUNK_SAMPLES`` so that memory
stays bounded whatever the sample count. What tighter parts would give is advice
(``bandwright.advice.tolerance``).

References
----------
.. [1] E. B. Wilson, "Probable inference, the law of succession, and statistical
   inference", J. Amer. Statist. Assoc. 22(158), 1927, pp. 209-212 -- the score interval.
.. [2] I. M. Sobol', "Global sensitivity indices for nonlinear mathematical models and
   their Monte Carlo estimates", Math. Comput. Simulation 55, 2001 -- first-order index
   Var(E[Y | X_i]) / Var(Y) [mem].
.. [3] K. Pearson, "On the general theory of skew correlation and non-linear regression",
   Drapers' Company Research Memoirs, 1905 -- the correlation ratio eta^2, the same
   quantity estimated by binning [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from bandwright.arrays import percentile_linear
from bandwright.analysis.grid import response_grid
from bandwright.analysis.montecarlo import sampling
from bandwright.analysis.montecarlo.drivers import Driver, DriverStats
from bandwright.analysis.montecarlo.kernel import Grid, stage_polynomials
from bandwright.analysis.montecarlo.sampling import (Spreads, draw, factors, resolve_spreads,
                                                     sample_columns, stage_inputs, stage_spans,
                                                     tolerances)
from bandwright.analysis.montecarlo.verdicts import REASONS, judge
from bandwright.analysis.sensitivity import StageSensitivity, chain_sensitivities
from bandwright.chain.graph import CHAIN_OUTPUT, Chain
from bandwright.inputs.requirement import Requirement

__all__ = ["Offer", "YieldResult", "monte_carlo", "wilson_interval", "ENVELOPE_PERCENTILES"]

#: Percentiles of the response envelope.
ENVELOPE_PERCENTILES = (1.0, 50.0, 99.0)
# The envelope is read from at most this many samples (the first ones): percentiles of
# 20,000 i.i.d. samples are already far finer than a plot shows, and memory stays bounded.
_ENVELOPE_MAX = 20_000
_Z95 = 1.959963984540054  # two-sided 95 % normal quantile

Progress = Callable[[int, int], None]


@dataclass(frozen=True, slots=True)
class Offer:
    """Tighter parts that reach the yield target (or the best that the steps reach).

    Attributes
    ----------
    resistor_pct, capacitor_pct : float
    yield_fraction : float
    interval : (float, float)
    reaches : bool
        Whether `yield_fraction` reaches the target.
    message : str
    """

    resistor_pct: float
    capacitor_pct: float
    yield_fraction: float
    interval: tuple[float, float]
    reaches: bool
    message: str


@dataclass(frozen=True)
class YieldResult:
    """Outcome of one Monte Carlo run of a chain.

    Attributes
    ----------
    samples, seed : int
    spreads : Spreads
    passed : ndarray of bool, shape (samples,)
        Per sample: stable, meets the mask and the headroom.
    mask_ok, headroom_ok : ndarray of bool, shape (samples,)
        Per sample: stable and meets the mask; free of a headroom failure (an unstable
        board is counted as unstable only).
    fail_counts : dict of str to int
        Failing samples per reason (``verdicts.REASONS``): "unstable", "passband loss",
        "passband gain", "stopband", "headroom" (a stable sample may fail several).
    yield_fraction : float
    interval : (float, float)
        Wilson score interval, 95 % ([1]_).
    min_yield : float
    nominal_passes : bool
        Whether the chain with nominal parts passes the same test.
    freq_hz : ndarray, shape (F,)
        Grid of the envelope.
    envelope_db : ndarray, shape (3, F)
        Percentiles ``ENVELOPE_PERCENTILES`` of the chain gain over the samples, dB.
    drivers : tuple of Driver
        Largest first-order indices first.
    explained : float
        Sum of every part's first-order index: how much of the excess single parts explain
        (the rest is parts acting together, or the nonlinearity of the worst case).
    sensitivities : tuple of StageSensitivity
    offer : Offer or None
        Set by ``plan_yield`` when the yield is below `min_yield`.
    nominal_margin_db : float
        How far the nominal board stays inside the requirement: minus its worst excess, dB
        (negative when it fails; -inf when it is unstable). A margin near 0 dB means about
        half of any spread fails.
    stable : ndarray of bool, shape (samples,)
        Per sample: every stage's poles in the left half-plane.
    """

    samples: int
    seed: int
    spreads: Spreads
    passed: np.ndarray
    mask_ok: np.ndarray
    headroom_ok: np.ndarray
    fail_counts: dict[str, int]
    yield_fraction: float
    interval: tuple[float, float]
    min_yield: float
    nominal_passes: bool
    freq_hz: np.ndarray
    envelope_db: np.ndarray
    drivers: tuple[Driver, ...]
    explained: float
    sensitivities: tuple[StageSensitivity, ...] = ()
    offer: Offer | None = None
    nominal_margin_db: float = math.nan
    stable: np.ndarray | None = None

    @property
    def meets_target(self) -> bool:
        return self.yield_fraction >= self.min_yield


def wilson_interval(passed: int, samples: int, *, z: float = _Z95) -> tuple[float, float]:
    """Wilson score interval of a binomial proportion.

    Parameters
    ----------
    passed, samples : int
        Successes and trials (samples > 0).
    z : float
        Normal quantile of the two-sided confidence (1.96: 95 %).

    Returns
    -------
    (float, float)
        Lower and upper bound, inside [0, 1].

    Notes
    -----
    (p + z^2/2n -/+ z sqrt(p(1-p)/n + z^2/4n^2)) / (1 + z^2/n), p = passed / n (Wilson 1927
    [1]_). Unlike p -/+ z sqrt(p(1-p)/n) it stays inside [0, 1] and keeps its coverage near
    p = 0 and p = 1, where yields live.
    """
    if samples <= 0 or not 0 <= passed <= samples:
        raise ValueError(f"need 0 <= passed <= samples, samples > 0; got {passed}, {samples}")
    n = float(samples)
    p = passed / n
    z2 = z * z
    centre = (p + z2 / (2 * n)) / (1 + z2 / n)
    half = z / (1 + z2 / n) * math.sqrt(p * (1 - p) / n + z2 / (4 * n * n))
    return max(0.0, centre - half), min(1.0, centre + half)


def monte_carlo(chain: Chain, requirement: Requirement, *, spreads: Spreads | None = None,
                samples: int | None = None, seed: int | None = None,
                envelope_hz: np.ndarray | None = None, progress: Progress | None = None,
                with_sensitivities: bool = True) -> YieldResult:
    """Yield of `chain` against `requirement` with toleranced parts.

    Parameters
    ----------
    chain : Chain
        The chain as built.
    requirement : Requirement
        Mask, input, supply; `[tolerance]` gives the spreads, samples, seed and target.
    spreads : Spreads, optional
        Overrides the requirement's tolerances (``resolve_spreads``).
    samples, seed : int, optional
        Override `tolerance.samples` and `tolerance.seed`.
    envelope_hz : ndarray, optional
        Grid of the response envelope (default: the report grid, ``response_grid``).
    progress : callable(done, total), optional
        Called after each chunk of samples.
    with_sensitivities : bool
        Also compute ``chain_sensitivities`` (stored in the result).

    Returns
    -------
    YieldResult

    Notes
    -----
    Each part is nominal x (1 + t u): u uniform on [-1, 1], or Gaussian with sigma 1/3
    (tolerance t at 3 sigma); every op-amp's GBW the same with the GBW spread, independently
    per op-amp. The draws come from ``numpy.random.default_rng(seed)`` chunk by chunk in a
    fixed order (``sample_values``), so a seed repeats a run exactly. Yield is the share of
    samples passing: stable (every stage's denominator Hurwitz, ``analysis.stability``: |H|^2
    alone would pass an oscillator whose poles mirror a good board's) and inside the mask
    and the headroom; its interval is Wilson's ([1]_). Which parts decide it: for every
    sample the worst excess over the requirement in dB (passband loss, passband gain,
    stopband loss or headroom; > 0 fails), and for every part the share of the variance of
    that excess explained by the part's value alone -- its first-order index, estimated from
    ten equally likely bins of its deviation ([2]_, [3]_). Binning catches parts that fail
    in both directions (f0 too high or too low), which a linear correlation would miss, and
    the continuous excess still ranks the parts when nearly every board fails or passes.
    """
    tol_req = requirement.tolerance
    spreads = spreads or resolve_spreads(requirement)
    samples = int(samples if samples is not None else tol_req.samples)
    seed = int(seed if seed is not None else tol_req.seed)
    if samples < 1:
        raise ValueError(f"samples must be >= 1; got {samples}")
    env_f = response_grid(requirement) if envelope_hz is None else np.asarray(envelope_hz, float)
    grid = Grid.of(requirement, env_f)
    cols = sample_columns(chain)
    tol = tolerances(cols, spreads)
    spans = stage_spans(chain, cols)
    rng = np.random.default_rng(seed)
    stats = DriverStats(cols, spreads.distribution)

    def judge_u(u: np.ndarray) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
        values, gbw = stage_inputs(chain, spans, factors(u, tol))
        return judge(chain, grid, requirement, stage_polynomials(chain, values, gbw))

    # The nominal board on its own, judged as every sample is.
    _, v_nom = judge_u(np.zeros((1, len(cols))))
    nominal_ok = bool(v_nom["ok"][0])
    nominal_margin = float(-v_nom["excess"][0])

    passed, mask_ok, head_ok, stable = [], [], [], []
    fail_counts = {k: 0 for k in REASONS}
    env_rows: list[np.ndarray] = []
    kept = 0
    done = 0
    for n in sampling.chunks(samples):
        u = draw(rng, n, len(cols), spreads.distribution)
        t2, v = judge_u(u)
        m_ok, ok = v["mask"], v["ok"]
        for k in fail_counts:
            fail_counts[k] += int(np.count_nonzero(~v[k]))
        passed.append(ok)
        mask_ok.append(m_ok)
        head_ok.append(v["headroom"])
        stable.append(v["unstable"])
        stats.add(u, ~ok, v["excess"])
        if kept < _ENVELOPE_MAX:
            take = min(n, _ENVELOPE_MAX - kept)
            t_out = t2[CHAIN_OUTPUT][:take][:, grid.envelope]
            with np.errstate(divide="ignore"):
                env_rows.append((10 * np.log10(t_out)).astype(np.float32))
            kept += take
        done += n
        if progress is not None:
            progress(done, samples)
    passed_a = np.concatenate(passed)
    k = int(np.count_nonzero(passed_a))
    # Over the boards, per frequency (percentile_linear sorts each frequency's boards).
    env = percentile_linear(np.vstack(env_rows), ENVELOPE_PERCENTILES, axis=0).astype(float)
    drivers, explained = stats.drivers()
    sens = chain_sensitivities(chain) if with_sensitivities else ()
    return YieldResult(
        samples=samples, seed=seed, spreads=spreads, passed=passed_a,
        mask_ok=np.concatenate(mask_ok), headroom_ok=np.concatenate(head_ok),
        fail_counts=fail_counts, yield_fraction=k / samples,
        interval=wilson_interval(k, samples), min_yield=float(tol_req.min_yield),
        nominal_passes=nominal_ok, freq_hz=env_f, envelope_db=env, drivers=drivers,
        explained=explained, sensitivities=sens, nominal_margin_db=nominal_margin,
        stable=np.concatenate(stable))
