"""Monte Carlo yield of a built chain: how many boards built from toleranced parts meet the
requirement, which parts decide it, and what tighter parts would give.

Every sample draws every resistor, capacitor and op-amp GBW of the whole chain at once;
each stage is reduced to its transfer polynomials for the whole batch
(``circuits.figures.transfer_polynomials``, one batched determinant per stage and net) and
evaluated as |H(jw)|^2 on every frequency of every sample in numpy; the chain's transfer to
a net is the product along its path (the op-amp outputs are ideal sources, so stages do not
load each other: ``analysis.levels.net_transfers``). Samples run in chunks of
``CHUNK_SAMPLES`` so that memory stays bounded whatever the sample count.

A sample passes when it meets the mask exactly as ``checks.mask`` reads it (passband loss and
gain on the passband grid, edges included; each stopband point) and every op-amp output
keeps its worst-case peak inside its swing (``analysis.levels.node_levels``).

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
.. [4] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*, Oxford UP, 2001,
   ch. 3 -- tolerances and sensitivity of active filters [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from statistics import NormalDist
from typing import Callable

import numpy as np

from bandwright.analysis.grid import passband_grid, response_grid
from bandwright.analysis.levels import swing_limit_vpk
from bandwright.analysis.sensitivity import StageSensitivity, chain_sensitivities
from bandwright.chain.graph import CHAIN_INPUT, CHAIN_OUTPUT, Chain
from bandwright.chain.stage import stage_output_nets
from bandwright.circuits.figures import transfer_polynomials_many
from bandwright.parts.tolerance import DEFAULT_TOLERANCE_PCT, default_tolerance_pct
from bandwright.inputs.requirement import Requirement, Tolerance

__all__ = ["Spreads", "SampleColumn", "Driver", "Offer", "YieldResult", "resolve_spreads",
           "sample_columns", "sample_values", "monte_carlo", "tighter_offer", "plan_yield",
           "wilson_interval", "CHUNK_SAMPLES", "ENVELOPE_PERCENTILES", "RESISTOR_STEPS_PCT",
           "CAPACITOR_STEPS_PCT"]

#: Samples evaluated together: bounds memory (about 40 MB per chunk for a six-stage chain
#: on 600 frequencies) while keeping numpy's batches large.
CHUNK_SAMPLES = 2000
#: Percentiles of the response envelope.
ENVELOPE_PERCENTILES = (1.0, 50.0, 99.0)
# The envelope is read from at most this many samples (the first ones): percentiles of
# 20,000 i.i.d. samples are already far finer than a plot shows, and memory stays bounded.
_ENVELOPE_MAX = 20_000
# Bins of each part's deviation for the first-order failure index.
_BINS = 10
# Worst excesses beyond ±20 dB (a board far off, or unstable) are clipped before their
# variance is taken: they would otherwise decide every index alone.
_EXCESS_CLIP_DB = 20.0
# A first-order index below this share is noise of the estimate, not a driver.
_DRIVER_FLOOR = 0.01
_MAX_DRIVERS = 6
# Deviations in a Gaussian draw beyond 1 - 1e-3 of a part's value would be a
# non-physical (zero or negative) part; a 3-sigma tolerance below 50 % never gets there
# except at ~1e-9 probability, and the clip keeps the solver finite if it does.
_MIN_FACTOR = 1e-3
#: Tighter tolerances offered, loosest first, and the series each customarily goes with
#: (common practice; ``parts.tolerance``).
RESISTOR_STEPS_PCT = (20.0, 10.0, 5.0, 2.0, 1.0, 0.5, 0.25, 0.1)
CAPACITOR_STEPS_PCT = (20.0, 10.0, 5.0, 2.0, 1.0)
# Tolerance -> the series customarily sold at it (E6 rather than E3 at 20 %: later wins).
_GRADE = {pct: name for name, pct in DEFAULT_TOLERANCE_PCT.items()}
# Mask comparisons use the same float slack as checks.mask.
_SLACK_DB = 1e-9
_Z95 = 1.959963984540054  # two-sided 95 % normal quantile

Progress = Callable[[int, int], None]


@dataclass(frozen=True, slots=True)
class Spreads:
    """Tolerances of one Monte Carlo run, resolved to numbers.

    Attributes
    ----------
    resistor_pct, capacitor_pct, gbw_spread_pct : float
        ± percent.
    distribution : {"uniform", "gaussian"}
        Gaussian: the tolerance is 3 sigma.
    resistor_source, capacitor_source : str
        Where the figure came from ("[tolerance]" or "customary for E96").
    """

    resistor_pct: float
    capacitor_pct: float
    gbw_spread_pct: float
    distribution: str
    resistor_source: str = "[tolerance]"
    capacitor_source: str = "[tolerance]"

    def sigma_rel(self, kind: str) -> float:
        """Relative standard deviation of one quantity.

        Parameters
        ----------
        kind : {"R", "C", "GBW"}

        Returns
        -------
        float
            t/sqrt(3) for a uniform spread on ±t (the variance of a uniform distribution),
            t/3 for a Gaussian with t at 3 sigma.
        """
        pct = {"R": self.resistor_pct, "C": self.capacitor_pct,
               "GBW": self.gbw_spread_pct}[kind] / 100
        # Uniform on ±t: sigma = t / sqrt(3); Gaussian with t at 3 sigma: t / 3.
        return pct / math.sqrt(3) if self.distribution == "uniform" else pct / 3


def resolve_spreads(requirement: Requirement) -> Spreads:
    """The requirement's `[tolerance]` as numbers.

    Parameters
    ----------
    requirement : Requirement

    Returns
    -------
    Spreads
        Part tolerances from `[tolerance]`, or where one is not given the tolerance
        customary for `design.resistor_series` / `design.capacitor_series` (common
        practice, ``parts.tolerance.default_tolerance_pct``: E96 1 %, E12 10 %, ...).
    """
    t: Tolerance = requirement.tolerance
    rs, cs = requirement.design.resistor_series, requirement.design.capacitor_series
    r = t.resistor_pct if t.resistor_pct is not None else default_tolerance_pct(rs)
    c = t.capacitor_pct if t.capacitor_pct is not None else default_tolerance_pct(cs)
    return Spreads(resistor_pct=float(r), capacitor_pct=float(c),
                   gbw_spread_pct=float(t.gbw_spread_pct), distribution=t.distribution,
                   resistor_source="[tolerance]" if t.resistor_pct is not None
                   else f"customary for {rs}",
                   capacitor_source="[tolerance]" if t.capacitor_pct is not None
                   else f"customary for {cs}")


@dataclass(frozen=True, slots=True)
class SampleColumn:
    """One randomised quantity: a part, or the GBW of one op-amp.

    Attributes
    ----------
    stage : int
        Stage position.
    part : str
        Part name in its stage ("R2"), or "<op-amp> GBW" ("U1 GBW").
    kind : {"R", "C", "GBW"}
    nominal : float
        Ohms, farads, or Hz.
    """

    stage: int
    part: str
    kind: str
    nominal: float


def sample_columns(chain: Chain) -> tuple[SampleColumn, ...]:
    """Every randomised quantity of `chain`, in draw order.

    Parameters
    ----------
    chain : Chain

    Returns
    -------
    tuple of SampleColumn
        Stage by stage: its R and C in ``passive_names`` order, then its op-amps with
        finite GBW (an ideal op-amp has no GBW to spread).
    """
    cols = []
    for st in chain.stages:
        cols += [SampleColumn(st.position, e.name, e.kind, e.value)
                 for e in st.elements if e.kind in ("R", "C")]
        cols += [SampleColumn(st.position, f"{e.name} GBW", "GBW", e.model.gbw_hz)
                 for e in st.elements if e.kind == "opamp" and math.isfinite(e.model.gbw_hz)]
    return tuple(cols)


def _draw(rng: np.random.Generator, count: int, n_cols: int, distribution: str) -> np.ndarray:
    """Normalised deviations u: uniform on [-1, 1], or Gaussian with sigma 1/3 (tolerance at
    3 sigma); a part's value is nominal * (1 + tolerance * u)."""
    if distribution == "uniform":
        return rng.uniform(-1.0, 1.0, size=(count, n_cols))
    return rng.standard_normal(size=(count, n_cols)) / 3.0


def _chunks(samples: int) -> list[int]:
    return [min(CHUNK_SAMPLES, samples - s) for s in range(0, samples, CHUNK_SAMPLES)]


def _tolerances(cols: tuple[SampleColumn, ...], spreads: Spreads) -> np.ndarray:
    pct = {"R": spreads.resistor_pct, "C": spreads.capacitor_pct, "GBW": spreads.gbw_spread_pct}
    return np.array([pct[c.kind] / 100 for c in cols])


def _factors(u: np.ndarray, tol: np.ndarray) -> np.ndarray:
    return np.maximum(1.0 + u * tol, _MIN_FACTOR)


def sample_values(chain: Chain, spreads: Spreads, *, samples: int, seed: int) -> np.ndarray:
    """The boards `monte_carlo` draws for the same chain, spreads, samples and seed.

    Parameters
    ----------
    chain : Chain
    spreads : Spreads
    samples, seed : int

    Returns
    -------
    ndarray of float, shape (samples, columns)
        Columns as ``sample_columns(chain)``: ohms, farads, and GBW in Hz.

    Notes
    -----
    For writing the same boards elsewhere (a SPICE run) and for tests; the Monte Carlo
    itself draws chunk by chunk in the same order and never holds every board at once.
    """
    cols = sample_columns(chain)
    rng = np.random.default_rng(seed)
    tol = _tolerances(cols, spreads)
    nominal = np.array([c.nominal for c in cols])
    out = [nominal * _factors(_draw(rng, n, len(cols), spreads.distribution), tol)
           for n in _chunks(samples)]
    return np.vstack(out)


@dataclass(frozen=True, slots=True)
class Driver:
    """A part whose spread decides pass or fail.

    Attributes
    ----------
    stage : int
    part : str
    index : float
        Share of the variance of the worst excess over the requirement (dB) explained by
        this part's value alone: its first-order index, bias-corrected, 0 to 1.
    worst_fail_rate : float
        Failure rate of the samples whose deviation of this part falls in its worst tenth
        (the tenth with the largest mean excess).
    worst_side : {"high", "low", "middle"}
        Where that tenth lies: the part too high, too low, or near nominal.
    """

    stage: int
    part: str
    index: float
    worst_fail_rate: float
    worst_side: str


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
        Per sample: meets the mask and the headroom.
    mask_ok, headroom_ok : ndarray of bool, shape (samples,)
    fail_counts : dict of str to int
        Failing samples per reason: "passband loss", "passband gain", "stopband",
        "headroom" (a sample may fail several).
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
        (negative when it fails). A margin near 0 dB means about half of any spread fails.
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


def _power_coefficients(coefs: np.ndarray) -> np.ndarray:
    """Coefficients in x = w^2 of |N(jw)|^2 for N with ascending coefficients (S, d+1).

    N(jw) = E(x) + j w O(x) with E, O the even and odd parts (alternating signs), so
    |N(jw)|^2 = E(x)^2 + x O(x)^2: a real polynomial of degree <= d in x (docs/design.md, "|H|^2
    as a ratio of real polynomials in w^2 is cheapest"). Products of the few coefficients
    only: loops run over coefficients, never over samples or frequencies.
    """
    n = coefs.shape[1]
    c = coefs * np.where(np.arange(n) // 2 % 2 == 0, 1.0, -1.0)
    even, odd = c[:, 0::2], c[:, 1::2]
    out = np.zeros((c.shape[0], n))
    for i in range(even.shape[1]):
        out[:, i:i + even.shape[1]] += even[:, i:i + 1] * even
    for i in range(odd.shape[1]):
        out[:, 1 + i:1 + i + odd.shape[1]] += odd[:, i:i + 1] * odd
    return out


def _horner(p: np.ndarray, x: np.ndarray) -> np.ndarray:
    """sum_m p[:, m] x^m on the grid (S, F), in place in one buffer (Horner's rule)."""
    out = np.empty((p.shape[0], x.size))
    out[:] = p[:, -1:]
    for m in range(p.shape[1] - 2, -1, -1):
        out *= x
        out += p[:, m:m + 1]
    return out


def _mag_sq(num: np.ndarray, den: np.ndarray, w_rad_s: np.ndarray) -> np.ndarray:
    """|N(jw)|^2 / |D(jw)|^2 for (S, d+1) ascending coefficients at (F,) frequencies.

    Rounding: near a pole pair |D|^2 is a difference of terms some Q^2 times larger, so the
    relative error is about Q^2 x 1e-16: 1e-12 even at Q = 100.
    """
    x = w_rad_s * w_rad_s
    out = _horner(_power_coefficients(num), x)
    out /= _horner(_power_coefficients(den), x)
    return out


@dataclass(frozen=True)
class _Grid:
    """Every frequency a run evaluates, and where each reading sits in it."""

    freq_hz: np.ndarray
    passband: np.ndarray
    stop: np.ndarray
    tones: np.ndarray
    envelope: np.ndarray
    levels: np.ndarray  # passband then tones: what node levels read

    @staticmethod
    def of(requirement: Requirement, envelope_hz: np.ndarray) -> "_Grid":
        pb = passband_grid(requirement)
        sf = np.array([p.freq_hz for p in requirement.stopband], dtype=float)
        tf = np.array([t.freq_hz for t in requirement.input.tones], dtype=float)
        env = np.asarray(envelope_hz, dtype=float)
        allf, inv = np.unique(np.concatenate([pb, sf, tf, env]), return_inverse=True)
        cuts = np.cumsum([pb.size, sf.size, tf.size])
        i_pb, i_sf, i_tf, i_env = np.split(inv, cuts)
        return _Grid(freq_hz=allf, passband=i_pb, stop=i_sf, tones=i_tf, envelope=i_env,
                     levels=np.concatenate([i_pb, i_tf]))


def _chain_mag_sq(chain: Chain, grid: _Grid, values: list[np.ndarray],
                  gbw: list[np.ndarray | None]) -> dict[str, np.ndarray]:
    """|T|^2 from the source to every op-amp output net, for one chunk of samples.

    "out" of a stage is evaluated on the whole grid (the next stage multiplies it); the
    entries hold the whole grid for the chain output and only the node-level frequencies
    (``grid.levels``) for every other net.
    """
    w_all = 2 * np.pi * grid.freq_hz
    w_lvl = w_all[grid.levels]
    out: dict[str, np.ndarray] = {}
    before = None  # |T|^2 at the stage input on the whole grid; None = 1 (the source)
    for k, st in enumerate(chain.stages):
        inp = chain.input_of(st)
        rs = chain.source_ohms if inp == CHAIN_INPUT else 0.0
        nets = {d["local"]: net for _, net, d in chain.graph.out_edges(inp, data=True)
                if d["stage"] is st}
        locals_ = stage_output_nets(st)   # "out" last: internal nets see the stage input
        nums, den = transfer_polynomials_many(st.elements, out_nets=locals_, source_ohms=rs,
                                              values=values[k], gbw_scale=gbw[k])
        for local, num in zip(locals_, nums):
            if local == "out":
                m2 = _mag_sq(num, den, w_all)
                if before is not None:
                    m2 *= before
                # Only the chain output keeps the whole grid; other nets keep what node
                # levels read, which bounds memory to two full-grid arrays per chunk.
                before = m2
                out[nets[local]] = m2 if nets[local] == CHAIN_OUTPUT else m2[:, grid.levels]
            else:
                m2 = _mag_sq(num, den, w_lvl)
                out[nets[local]] = m2 if before is None else m2 * before[:, grid.levels]
    return out


def _verdicts(t2: dict[str, np.ndarray], chain: Chain, grid: _Grid, requirement: Requirement
              ) -> dict[str, np.ndarray]:
    """Per-sample pass flags of every mask criterion and of headroom (as checks.mask and
    checks.chain_checks.headroom_checks read them), and under "excess" the worst violation
    in dB (> 0: fails; < 0: the margin left)."""
    pb = requirement.passband
    out_t2 = t2[CHAIN_OUTPUT]
    with np.errstate(divide="ignore"):
        pb_db = 10 * np.log10(out_t2[:, grid.passband])
        stop_db = 10 * np.log10(out_t2[:, grid.stop])
    loss_x = (pb.gain_db - pb_db.min(axis=1)) - pb.max_loss_db
    gain_x = np.abs(pb_db.max(axis=1) - pb.gain_db) - pb.gain_tolerance_db
    need = np.array([p.min_loss_db for p in requirement.stopband])
    stop_x = np.max(need - (pb.gain_db - stop_db), axis=1, initial=-np.inf)
    loss_ok, gain_ok, stop_ok = (x <= _SLACK_DB for x in (loss_x, gain_x, stop_x))
    n_pb = grid.passband.size
    tv = np.array([t.vpk for t in requirement.input.tones], dtype=float)
    head_x = np.full(out_t2.shape[0], -np.inf)
    for net in chain.output_nets:
        m2 = t2[net]
        # The chain output holds the whole grid, other nets only the level frequencies.
        lv = m2[:, grid.levels] if net == CHAIN_OUTPUT else m2
        mag = np.sqrt(lv)
        peak = requirement.input.max_vpk * mag[:, :n_pb].max(axis=1) + mag[:, n_pb:] @ tv
        limit = swing_limit_vpk(requirement.supply, chain.stage_of(net).model.swing_to_rail_v)
        with np.errstate(divide="ignore"):
            head_x = np.maximum(head_x, 20 * np.log10(peak / limit))
    excess = np.maximum.reduce([loss_x, gain_x, stop_x, head_x])
    return {"passband loss": loss_ok, "passband gain": gain_ok, "stopband": stop_ok,
            "headroom": head_x <= 0.0, "excess": excess}


def _bin_edges(distribution: str) -> np.ndarray:
    """Inner edges of `_BINS` equally likely bins of u."""
    q = np.arange(1, _BINS) / _BINS
    if distribution == "uniform":
        return 2 * q - 1
    nd = NormalDist(0.0, 1.0 / 3.0)
    return np.array([nd.inv_cdf(float(p)) for p in q])


class _DriverStats:
    """Per-part, per-bin sums over the samples seen so far (streamed chunk by chunk)."""

    def __init__(self, cols: tuple[SampleColumn, ...], distribution: str) -> None:
        self.cols = cols
        self.edges = _bin_edges(distribution)
        shape = (len(cols), _BINS)
        self.count = np.zeros(shape)
        self.fail = np.zeros(shape)
        self.excess_sum = np.zeros(shape)
        self.n = 0
        self.y_sum = 0.0
        self.y_sq = 0.0
        self.shift = None

    def add(self, u: np.ndarray, failed: np.ndarray, excess_db: np.ndarray) -> None:
        # Extreme excesses (an unstable board) would swamp the variance: clip them.
        y = np.clip(np.nan_to_num(excess_db, nan=_EXCESS_CLIP_DB), -_EXCESS_CLIP_DB,
                    _EXCESS_CLIP_DB)
        if self.shift is None:
            self.shift = float(np.mean(y))    # centred sums keep the variance exact
        y = y - self.shift
        onehot = np.searchsorted(self.edges, u, side="right")[:, :, None] == np.arange(_BINS)
        self.count += onehot.sum(axis=0)
        self.fail += onehot[failed].sum(axis=0)
        self.excess_sum += np.einsum("scb,s->cb", onehot, y)
        self.n += y.size
        self.y_sum += float(y.sum())
        self.y_sq += float(np.dot(y, y))

    def drivers(self) -> tuple[tuple[Driver, ...], float]:
        """First-order index of every part on the worst excess (see ``monte_carlo``).

        eta^2 = sum_b n_b (ybar_b - ybar)^2 / sum (y - ybar)^2 over ten equally likely bins
        of the part's deviation: Pearson's correlation ratio [3]_, an estimate of Sobol's
        first-order index Var(E[y | x_i]) / Var(y) [2]_. With no dependence its expectation
        is (B - 1)/(n - 1) (B bins), which is subtracted.
        """
        n = self.n
        if n < 2:
            return (), 0.0
        mean = self.y_sum / n
        total = self.y_sq - n * mean * mean
        if not total > 0:
            return (), 0.0
        with np.errstate(divide="ignore", invalid="ignore"):
            bin_mean = np.where(self.count > 0, self.excess_sum / self.count, mean)
            fail_rate = np.where(self.count > 0, self.fail / self.count, 0.0)
        eta2 = np.sum(self.count * (bin_mean - mean) ** 2, axis=1) / total
        index = np.maximum(eta2 - (_BINS - 1) / (n - 1), 0.0)
        out = []
        for i in np.argsort(-index, kind="stable")[:_MAX_DRIVERS]:
            if index[i] < _DRIVER_FLOOR:
                break
            b = int(np.argmax(bin_mean[i]))
            side = "low" if b < _BINS // 2 - 1 else ("high" if b > _BINS // 2 else "middle")
            c = self.cols[i]
            out.append(Driver(stage=c.stage, part=c.part, index=float(index[i]),
                              worst_fail_rate=float(fail_rate[i, b]), worst_side=side))
        return tuple(out), float(index.sum())


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
    samples passing; its interval is Wilson's ([1]_). Which parts decide it: for every
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
    grid = _Grid.of(requirement, env_f)
    cols = sample_columns(chain)
    tol = _tolerances(cols, spreads)
    spans = _stage_spans(chain, cols)
    rng = np.random.default_rng(seed)
    stats = _DriverStats(cols, spreads.distribution)

    passed, mask_ok, head_ok = [], [], []
    fail_counts = {"passband loss": 0, "passband gain": 0, "stopband": 0, "headroom": 0}
    env_rows: list[np.ndarray] = []
    kept = 0
    done = 0
    chunks = _chunks(samples)
    nominal_ok, nominal_margin = True, math.nan
    for ci, n in enumerate(chunks):
        u = _draw(rng, n, len(cols), spreads.distribution)
        if ci == 0:
            # The nominal board rides along as one extra row.
            u_eval = np.vstack([np.zeros((1, len(cols))), u])
        else:
            u_eval = u
        fac = _factors(u_eval, tol)
        values, gbw = _stage_inputs(chain, spans, fac)
        t2 = _chain_mag_sq(chain, grid, values, gbw)
        v = _verdicts(t2, chain, grid, requirement)
        first = 1 if ci == 0 else 0
        if ci == 0:
            nominal_ok = bool(v["excess"][0] <= _SLACK_DB)
            nominal_margin = float(-v["excess"][0])
        v = {k: x[first:] for k, x in v.items()}
        m_ok = v["passband loss"] & v["passband gain"] & v["stopband"]
        ok = m_ok & v["headroom"]
        for k in fail_counts:
            fail_counts[k] += int(np.count_nonzero(~v[k]))
        passed.append(ok)
        mask_ok.append(m_ok)
        head_ok.append(v["headroom"])
        stats.add(u, ~ok, v["excess"])
        if kept < _ENVELOPE_MAX:
            take = min(n, _ENVELOPE_MAX - kept)
            t_out = t2[CHAIN_OUTPUT][first:first + take][:, grid.envelope]
            with np.errstate(divide="ignore"):
                env_rows.append((10 * np.log10(t_out)).astype(np.float32))
            kept += take
        done += n
        if progress is not None:
            progress(done, samples)
    passed_a = np.concatenate(passed)
    k = int(np.count_nonzero(passed_a))
    # Frequencies as rows: the partition then runs over contiguous memory.
    env = np.percentile(np.vstack(env_rows).T, ENVELOPE_PERCENTILES, axis=1).astype(float)
    drivers, explained = stats.drivers()
    sens = chain_sensitivities(chain) if with_sensitivities else ()
    return YieldResult(
        samples=samples, seed=seed, spreads=spreads, passed=passed_a,
        mask_ok=np.concatenate(mask_ok), headroom_ok=np.concatenate(head_ok),
        fail_counts=fail_counts, yield_fraction=k / samples,
        interval=wilson_interval(k, samples), min_yield=float(tol_req.min_yield),
        nominal_passes=nominal_ok, freq_hz=env_f, envelope_db=env, drivers=drivers,
        explained=explained, sensitivities=sens, nominal_margin_db=nominal_margin)


def _stage_spans(chain: Chain, cols: tuple[SampleColumn, ...]) -> list[tuple[list[int], list[int]]]:
    """Per stage: column indices of its passives (``passive_names`` order) and its op-amps'
    GBW (element order)."""
    spans = []
    for st in chain.stages:
        mine = [i for i, c in enumerate(cols) if c.stage == st.position]
        spans.append(([i for i in mine if cols[i].kind != "GBW"],
                      [i for i in mine if cols[i].kind == "GBW"]))
    return spans


def _stage_inputs(chain: Chain, spans, fac: np.ndarray
                  ) -> tuple[list[np.ndarray], list[np.ndarray | None]]:
    """Part values (S, P) and GBW factors (S, A) of every stage from the factor matrix."""
    values, gbw = [], []
    for st, (pcols, gcols) in zip(chain.stages, spans):
        nominal = np.array([e.value for e in st.elements if e.kind in ("R", "C")])
        values.append(nominal * fac[:, pcols])
        ops = [e for e in st.elements if e.kind == "opamp"]
        if not gcols:
            gbw.append(None)
            continue
        # Ideal op-amps have no column; the solver leaves them ideal whatever their factor.
        g = np.ones((fac.shape[0], len(ops)))
        finite = [a for a, e in enumerate(ops) if math.isfinite(e.model.gbw_hz)]
        g[:, finite] = fac[:, gcols]
        gbw.append(g)
    return values, gbw


def _grade(pct: float) -> str:
    g = _GRADE.get(pct)
    return f"{pct:g} %" + (f" (the customary {g} grade)" if g else "")


def _fmt_yield(y: float, ci: tuple[float, float]) -> str:
    return f"{100 * y:.1f} % (95 % interval {100 * ci[0]:.1f}–{100 * ci[1]:.1f} %)"


def tighter_offer(chain: Chain, requirement: Requirement, result: YieldResult, *,
                  progress: Progress | None = None) -> Offer | None:
    """Tighter resistors and/or capacitors that bring the yield up to `min_yield`.

    Parameters
    ----------
    chain : Chain
    requirement : Requirement
    result : YieldResult
        The run at the requirement's tolerances.
    progress : callable, optional

    Returns
    -------
    Offer or None
        None when the yield already meets the target, or the nominal chain fails (no
        tolerance helps then).

    Notes
    -----
    First the tightest steps of both (``RESISTOR_STEPS_PCT``, ``CAPACITOR_STEPS_PCT``):
    if even they miss the target, the offer says so. Otherwise greedy over the steps: each
    step tightens the class (resistors or capacitors) whose parts explain more of the
    failures (sum of first-order indices of the current run), or the other class when one
    has no tighter step, and re-runs the Monte Carlo on the same chain with the same seed
    (common random numbers: only the scale of each deviation changes, so the comparison is
    not blurred by new draws). It stops at the first run that meets the target. The parts
    keep their values: a tighter grade of the same series value (E96 values are E192
    values; E12 capacitors come in every grade).
    """
    if result.meets_target or not result.nominal_passes:
        return None
    sp = result.spreads

    def run(r_pct: float, c_pct: float) -> YieldResult:
        trial = replace(sp, resistor_pct=r_pct, capacitor_pct=c_pct, resistor_source="offer",
                        capacitor_source="offer")
        return monte_carlo(chain, requirement, spreads=trial, samples=result.samples,
                           seed=result.seed, envelope_hz=result.freq_hz, progress=progress,
                           with_sensitivities=False)

    # The tightest parts first: when even they miss the target, say so after one run.
    r_min = min(sp.resistor_pct, RESISTOR_STEPS_PCT[-1])
    c_min = min(sp.capacitor_pct, CAPACITOR_STEPS_PCT[-1])
    best = run(r_min, c_min)
    if not best.meets_target:
        return Offer(resistor_pct=r_min, capacitor_pct=c_min,
                     yield_fraction=best.yield_fraction, interval=best.interval, reaches=False,
                     message=f"even resistors {_grade(r_min)} and capacitors {_grade(c_min)} "
                             f"give only {_fmt_yield(best.yield_fraction, best.interval)}: "
                             f"the chain itself is too sensitive or too close to the mask "
                             f"(nominal margin {result.nominal_margin_db:.3g} dB; see the parts "
                             f"that decide it)")
    r, c = sp.resistor_pct, sp.capacitor_pct
    current = result
    while True:
        r_next = next((x for x in RESISTOR_STEPS_PCT if x < r - 1e-12), None)
        c_next = next((x for x in CAPACITOR_STEPS_PCT if x < c - 1e-12), None)
        if r_next is None and c_next is None:
            current = best
            break
        share_r = sum(d.index for d in current.drivers if d.part.startswith("R"))
        share_c = sum(d.index for d in current.drivers if d.part.startswith("C"))
        if c_next is None or (r_next is not None and share_r >= share_c):
            r = r_next
        else:
            c = c_next
        current = run(r, c) if (r, c) != (r_min, c_min) else best
        if current.meets_target:
            break
    return Offer(resistor_pct=r, capacitor_pct=c, yield_fraction=current.yield_fraction,
                 interval=current.interval, reaches=True,
                 message=f"resistors {_grade(r)} and capacitors {_grade(c)} give "
                         f"{_fmt_yield(current.yield_fraction, current.interval)}")


def plan_yield(chain: Chain, requirement: Requirement, *, progress: Progress | None = None
               ) -> YieldResult:
    """The yield the planner reports.

    Parameters
    ----------
    chain : Chain
    requirement : Requirement
    progress : callable(done, total), optional

    Returns
    -------
    YieldResult
        ``monte_carlo`` at the requirement's tolerances, its `offer` set by
        ``tighter_offer`` when the yield is below `tolerance.min_yield`.
    """
    result = monte_carlo(chain, requirement, progress=progress)
    offer = tighter_offer(chain, requirement, result, progress=progress)
    return result if offer is None else replace(result, offer=offer)
