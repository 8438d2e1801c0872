"""Section order and gain distribution for the most dynamic range.

Model (Schaumann & Van Valkenburg 2001, ch. 6, equal-maxima scaling [mem]; Moschytz 1975
[mem]; Halfin, BSTJ 49(2), 1970):

* the transfer to the output of the k-th stage depends only on the SET S of sections up to
  and including it, so its worst-case peak for unit-gain sections is P(S) =
  V_in · max_passband |Π_S H| + Σ_tones V_t |Π_S H(f_t)|;
* equal maxima: the gains make every op-amp output peak at the output's own level
  L = G · P(all), so the gain up to S is G · P(all) / P(S): every node has the same
  headroom margin and the gains are fixed by the order;
* the noise a stage adds at its own output, n_i²(f), reaches the chain output through the
  sections after it and their gain, P(S)/P(all) · Π_{j∉S} H_j; its share is
  c(i, S) = (P(S)/P(all))² ∫ n_i² Π_{j∉S} |H_j|² df — a function of (i, S) only, so the
  order that minimises Σ c is found exactly by dynamic programming over subsets
  (best(S) = min_{i∈S} best(S∖i) + c(i, S); Held & Karp, J. SIAM 10, 1962), and by brute
  force over every permutation for a handful of sections.

Output noise at a fixed output level is what separates orders, so the least noise is the
most dynamic range.

When the last node has a lower limit than the op-amps before it (a converter whose full
scale sits inside the op-amps' swing), equal maxima means equal margins: every
internal node peaks at r = (op-amp swing) / (last node's limit) times the output's level,
so it reaches its own limit at the same input as the output reaches the converter's. The
gain behind an internal node then falls by r and its noise cost by r² (``last_ratio``).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from bandwright.arrays import quantile_linear, sorted_unique
from bandwright.sections.section import Section, section_response

__all__ = ["OrderingProblem", "Ordering", "make_problem", "order_cost", "best_order_dp",
           "best_order_brute", "best_order", "stage_gains", "choose_order", "long_chain_order",
           "EXHAUSTIVE_MAX", "BuiltTables", "built_tables", "built_figures", "best_built_order"]

EXHAUSTIVE_MAX = 8
MAX_SECTIONS = 12


@dataclass(frozen=True)
class OrderingProblem:
    """Precomputed tables for every subset of sections.

    Attributes
    ----------
    n : int
    peak : ndarray, shape (2^n,)
        P(S) for unit-gain sections, V.
    after_noise : ndarray, shape (n, 2^n)
        c(i, S) divided by nothing: ∫ n_i² Π_{j∉S}|H_j|² df, V² (entries with i ∉ S unused).
    total_gain : float
        G, V/V (magnitude).
    """

    n: int
    peak: np.ndarray
    after_noise: np.ndarray
    total_gain: float
    last_ratio: float = 1.0

    def level_ratio2(self) -> np.ndarray:
        """(P(S) / (P(all) · r_S))² for every subset, r_S = `last_ratio` for every subset
        but the full one (the output), 1 for it."""
        full = (1 << self.n) - 1
        r2 = (self.peak / self.peak[full]) ** 2 / self.last_ratio ** 2
        r2[full] = 1.0
        return r2

    def cost(self, i: int, subset: int) -> float:
        """c(i, S): stage i's noise power at the output when S (with i) comes first."""
        full = (1 << self.n) - 1
        r = 1.0 if subset == full else self.last_ratio
        return float((self.peak[subset] / (self.peak[full] * r)) ** 2
                     * self.after_noise[i, subset])


def _subset_products(log_mag: np.ndarray) -> np.ndarray:
    """Σ_{j∈S} log_mag[j] for every subset S (bit j set), shape (2^n, F)."""
    n = log_mag.shape[0]
    out = np.zeros((1 << n,) + log_mag.shape[1:])
    for j in range(n):
        lo = 1 << j
        out[lo: 2 * lo] = out[:lo] + log_mag[j]
    return out


def make_problem(sections: Sequence[Section], noise_psd: np.ndarray, noise_freq_hz: np.ndarray,
                 *, total_gain: float, passband_hz: np.ndarray, max_vpk: float,
                 tones: Sequence[tuple[float, float]] = (),
                 last_ratio: float = 1.0) -> OrderingProblem:
    """Tables for `sections` (their shapes; gains are ignored).

    Parameters
    ----------
    sections : sequence of Section
    noise_psd : ndarray, shape (n, F)
        Each section's own output noise PSD on `noise_freq_hz`, V²/Hz.
    noise_freq_hz : ndarray, shape (F,)
    total_gain : float
    passband_hz : ndarray
        Where the in-band signal may sit.
    max_vpk : float
        In-band input amplitude.
    tones : sequence of (freq_hz, vpk)
    last_ratio : float
        Internal nodes' limit over the last node's (>= 1; 1: the same limit everywhere).
    """
    n = len(sections)
    if n > MAX_SECTIONS:
        raise ValueError(f"at most {MAX_SECTIONS} sections can be ordered, got {n}")
    unit = [Section(kind=s.kind, f0_hz=s.f0_hz, q=s.q, gain=1.0) for s in sections]
    tf = np.array([t[0] for t in tones], dtype=float)
    tv = np.array([t[1] for t in tones], dtype=float)
    pf = np.concatenate([np.asarray(passband_hz, dtype=float), tf])
    with np.errstate(divide="ignore"):
        lm = np.log(np.abs(np.array([section_response(s, pf) for s in unit])))
        ln = 2 * np.log(np.abs(np.array([section_response(s, noise_freq_hz) for s in unit])))
    mag = np.exp(_subset_products(lm))                       # (2^n, Fp + T)
    npb = len(passband_hz)
    peak = max_vpk * mag[:, :npb].max(axis=1) + (mag[:, npb:] * tv).sum(axis=1)
    full = (1 << n) - 1
    after = np.exp(_subset_products(ln)[full ^ np.arange(1 << n)])  # Π_{j∉S} |H_j|²
    # One section at a time keeps the peak memory at 2^n × F, not n × 2^n × F.
    after_noise = np.array([np.trapezoid(noise_psd[i] * after, noise_freq_hz, axis=-1)
                            for i in range(n)])
    return OrderingProblem(n=n, peak=peak, after_noise=after_noise, total_gain=float(total_gain),
                           last_ratio=float(last_ratio))


def order_cost(problem: OrderingProblem, order: Sequence[int]) -> float:
    """Output noise power (V²) of the chain in `order` under equal-maxima gains."""
    subset, total = 0, 0.0
    for i in order:
        subset |= 1 << i
        total += problem.cost(i, subset)
    return total


def best_order_brute(problem: OrderingProblem) -> tuple[tuple[int, ...], float]:
    """Every permutation (use for up to EXHAUSTIVE_MAX sections)."""
    best, best_cost = None, math.inf
    for perm in itertools.permutations(range(problem.n)):
        c = order_cost(problem, perm)
        if c < best_cost:
            best, best_cost = perm, c
    if best is None:  # no order has a finite cost (NaN or inf levels): keep the given one
        return tuple(range(problem.n)), math.inf
    return tuple(best), best_cost


def best_order_dp(problem: OrderingProblem) -> tuple[tuple[int, ...], float]:
    """Exact minimum by dynamic programming over subsets, O(2^n · n)."""
    n = problem.n
    size = 1 << n
    best = np.full(size, math.inf)
    last = np.full(size, -1, dtype=int)
    best[0] = 0.0
    full = size - 1
    ratio2 = problem.level_ratio2()
    for subset in range(1, size):
        members = [i for i in range(n) if subset >> i & 1]
        prev = np.array([subset ^ (1 << i) for i in members])
        costs = best[prev] + ratio2[subset] * problem.after_noise[members, subset]
        k = int(np.argmin(costs))
        best[subset], last[subset] = costs[k], members[k]
    order, subset = [], full
    while subset:
        i = int(last[subset])
        order.append(i)
        subset ^= 1 << i
    return tuple(reversed(order)), float(best[full])


def best_order(problem: OrderingProblem) -> tuple[tuple[int, ...], float]:
    """Exhaustive up to EXHAUSTIVE_MAX sections, dynamic programming beyond."""
    if problem.n <= EXHAUSTIVE_MAX:
        return best_order_brute(problem)
    return best_order_dp(problem)


def stage_gains(problem: OrderingProblem, order: Sequence[int]) -> tuple[float, ...]:
    """Equal-maxima gains (V/V, magnitudes) of the sections in `order`: the first
    G·P(all)/P(S1), then P(S_{k-1})/P(S_k); their product is G. With a `last_ratio` r the
    internal nodes run r times hotter: the first gain is r times larger, the last r times
    smaller."""
    full = (1 << problem.n) - 1
    r = problem.last_ratio
    gains, subset, prev_peak = [], 0, None
    for i in order:
        subset |= 1 << i
        # An internal node's level is r times the output's: its P(S) counts as P(S)/r.
        p = problem.peak[subset] / (1.0 if subset == full else r)
        gains.append(problem.total_gain * problem.peak[full] / p if prev_peak is None
                     else prev_peak / p)
        prev_peak = p
    return tuple(float(g) for g in gains)


@dataclass(frozen=True, slots=True)
class Ordering:
    """The chosen order and what it gained.

    Attributes
    ----------
    order : tuple of int
        Indices into the generated section list.
    gains : tuple of float
        Equal-maxima gain of each section in `order`.
    noise_vrms : float
        Model output noise of the chosen order.
    generated_vrms, increasing_q_vrms : float
        Model output noise of the order as generated and of increasing-Q order.
    method : str
        "exhaustive" or "dynamic programming".
    built_noise_vrms : float
        Output noise of the built stages in the chain's order, from their own transfers and
        noise (``built_figures``; the source resistance left out); NaN until the chain is
        built.
    built_gain_over_generated_db, built_gain_over_increasing_q_db : float
        Dynamic range of the built chain over the same built stages (parts and gains as
        built) in the order as generated and in increasing-Q order, any gain stage last.
    placement : str
        How the built stages were placed (empty before).
    """

    order: tuple[int, ...]
    gains: tuple[float, ...]
    noise_vrms: float
    generated_vrms: float
    increasing_q_vrms: float
    method: str
    built_noise_vrms: float = math.nan
    built_gain_over_generated_db: float = math.nan
    built_gain_over_increasing_q_db: float = math.nan
    placement: str = ""

    @property
    def gain_over_generated_db(self) -> float:
        return 20 * math.log10(self.generated_vrms / self.noise_vrms)

    @property
    def gain_over_increasing_q_db(self) -> float:
        return 20 * math.log10(self.increasing_q_vrms / self.noise_vrms)


def choose_order(problem: OrderingProblem, sections: Sequence[Section]) -> Ordering:
    """Best order, with the generated and increasing-Q orders for comparison."""
    order, cost = best_order(problem)
    gen = tuple(range(problem.n))
    inc_q = tuple(sorted(gen, key=lambda i: sections[i].q))
    return Ordering(order=order, gains=stage_gains(problem, order), noise_vrms=math.sqrt(cost),
                    generated_vrms=math.sqrt(order_cost(problem, gen)),
                    increasing_q_vrms=math.sqrt(order_cost(problem, inc_q)),
                    method="exhaustive" if problem.n <= EXHAUSTIVE_MAX else
                    "dynamic programming over subsets")


def long_chain_order(sections: Sequence[Section], noise_psd: np.ndarray,
                     noise_freq_hz: np.ndarray, *, total_gain: float, passband_hz: np.ndarray,
                     max_vpk: float, tones: Sequence[tuple[float, float]] = (),
                     last_ratio: float = 1.0) -> Ordering:
    """Increasing-Q order with equal-maxima gains, for more sections than the exact search
    takes (it tabulates all 2^n subsets).

    Increasing Q keeps the early nodes' peaks low (Moschytz 1975 [mem]; docs/methods.md,
    "Dynamic range"). The gains and the output noise follow the same model as
    ``make_problem``, evaluated along the one order instead of over every subset.
    """
    n = len(sections)
    unit = [Section(kind=s.kind, f0_hz=s.f0_hz, q=s.q, gain=1.0) for s in sections]
    tf = np.array([t[0] for t in tones], dtype=float)
    tv = np.array([t[1] for t in tones], dtype=float)
    pb = np.asarray(passband_hz, dtype=float)
    mag = np.abs(np.array([section_response(s, np.concatenate([pb, tf])) for s in unit]))
    mag2 = np.abs(np.array([section_response(s, noise_freq_hz) for s in unit])) ** 2

    def evaluate(order: tuple[int, ...]) -> tuple[float, tuple[float, ...]]:
        prefix = np.cumprod(mag[list(order)], axis=0)
        peaks = max_vpk * prefix[:, :pb.size].max(axis=1) + (prefix[:, pb.size:] * tv).sum(axis=1)
        peaks[:-1] /= last_ratio   # internal nodes run r times hotter (stage_gains)
        # after[k]: |H|² of every section behind position k.
        rev = np.cumprod(mag2[list(order)][::-1], axis=0)[::-1]
        after = np.vstack([rev[1:], np.ones((1, mag2.shape[1]))])
        power = np.trapezoid(noise_psd[list(order)] * after, noise_freq_hz, axis=-1)
        cost = float(np.sum((peaks / peaks[-1]) ** 2 * power))
        gains = (total_gain * peaks[-1] / peaks[0],) + tuple(peaks[:-1] / peaks[1:])
        return cost, tuple(float(g) for g in gains)

    inc_q = tuple(sorted(range(n), key=lambda i: sections[i].q))
    cost, gains = evaluate(inc_q)
    return Ordering(order=inc_q, gains=gains, noise_vrms=math.sqrt(cost),
                    generated_vrms=math.sqrt(evaluate(tuple(range(n)))[0]),
                    increasing_q_vrms=math.sqrt(cost),
                    method=f"increasing Q (more than {MAX_SECTIONS} sections: the exact "
                           f"search would tabulate 2^{n} subsets)")


# --- the built stages: fixed gains, their own transfers and noise ---------------------------

@dataclass(frozen=True)
class BuiltTables:
    """Subset tables of built stages, whose gains are fixed (a gain stage among them).

    Attributes
    ----------
    n : int
    peak : ndarray, shape (2^n,)
        Worst-case peak at the output of the last stage of S when the stages of S come
        first: V_in · max_passband Π_S |H| + Σ_tones V_t Π_S |H(f_t)|, with the stages' own
        gains, V.
    after_noise : ndarray, shape (n, 2^n)
        ∫ n_i² Π_{j∉S} |H_j|² df: stage i's own output noise carried to the chain output
        through the stages after it, V².
    """

    n: int
    peak: np.ndarray
    after_noise: np.ndarray


def built_tables(h_signal: np.ndarray, h_noise: np.ndarray, noise_psd: np.ndarray,
                 noise_freq_hz: np.ndarray, *, n_passband: int, max_vpk: float,
                 tone_vpk: Sequence[float] = ()) -> BuiltTables:
    """Tables for stages as built (``make_problem``'s model with the stages' own figures).

    Parameters
    ----------
    h_signal : ndarray, shape (n, P + T)
        Each stage's complex transfer on the passband grid (first `n_passband` columns)
        and at each tone.
    h_noise : ndarray, shape (n, F)
        Each stage's transfer on `noise_freq_hz`.
    noise_psd : ndarray, shape (n, F)
        Each stage's own output noise PSD (its input driven by a zero-impedance source),
        V²/Hz.
    noise_freq_hz : ndarray, shape (F,)
    n_passband : int
    max_vpk : float
        In-band input amplitude, V.
    tone_vpk : sequence of float
        Amplitude of each tone, V.

    Notes
    -----
    The op-amp model has zero output impedance, so a stage's transfer does not depend on
    the stage before it and the chain's transfer to any stage output is the product of the
    stages' own (``chain.graph.net_transfers``); the output noise is the sum of each
    stage's own noise times |transfer|² of the stages after it (Motchenbacher & Connelly
    1993, ch. 2 [mem]). Both are then functions of the subset S only, as in ``make_problem``.
    """
    n = h_signal.shape[0]
    if n > MAX_SECTIONS + 2:
        raise ValueError(f"at most {MAX_SECTIONS + 2} stages can be placed, got {n}")
    tv = np.asarray(tone_vpk, dtype=float)
    with np.errstate(divide="ignore"):
        lm = np.log(np.abs(np.asarray(h_signal)))
        ln = 2 * np.log(np.abs(np.asarray(h_noise)))
    mag = np.exp(_subset_products(lm))
    peak = max_vpk * mag[:, :n_passband].max(axis=1) + (mag[:, n_passband:] * tv).sum(axis=1)
    full = (1 << n) - 1
    after = np.exp(_subset_products(ln)[full ^ np.arange(1 << n)])
    after_noise = np.array([np.trapezoid(noise_psd[i] * after, noise_freq_hz, axis=-1)
                            for i in range(n)])
    return BuiltTables(n=n, peak=peak, after_noise=after_noise)


def built_figures(tables: BuiltTables, order: Sequence[int]) -> tuple[float, float]:
    """(output noise, V rms; highest stage-output peak, V) of the built stages in `order`.

    The dynamic range of an order is the output signal over the noise at the input level
    that makes the highest node clip, so between orders it goes as 1/(noise · highest
    peak) (every stage's output swings to the same rails).
    """
    subset, total, top = 0, 0.0, 0.0
    for i in order:
        subset |= 1 << i
        total += float(tables.after_noise[i, subset])
        top = max(top, float(tables.peak[subset]))
    return math.sqrt(total), top


def _dp_under(tables: BuiltTables, allowed: np.ndarray, first: int | None
              ) -> tuple[tuple[int, ...] | None, float]:
    """Least-noise order through subsets whose peak is `allowed` (DP over subsets)."""
    n = tables.n
    size = 1 << n
    best = np.full(size, math.inf)
    last = np.full(size, -1, dtype=int)
    best[0] = 0.0
    for subset in range(1, size):
        if not allowed[subset]:
            continue
        members = [i for i in range(n) if subset >> i & 1]
        if first is not None and not subset >> first & 1:
            continue
        if first is not None and subset != 1 << first:
            members = [i for i in members if i != first]
        prev = np.array([subset ^ (1 << i) for i in members])
        costs = best[prev] + tables.after_noise[members, subset]
        k = int(np.argmin(costs))
        best[subset], last[subset] = costs[k], members[k]
    full = size - 1
    if not math.isfinite(best[full]):
        return None, math.inf
    order, subset = [], full
    while subset:
        i = int(last[subset])
        order.append(i)
        subset ^= 1 << i
    return tuple(reversed(order)), float(best[full])


_PEAK_LEVELS = 16


def best_built_order(tables: BuiltTables, *, first: int | None = None,
                     limit_vpk: float = math.inf) -> tuple[tuple[int, ...], str]:
    """The order of built stages with the most dynamic range (least noise × highest peak)
    among those whose highest stage-output peak stays within `limit_vpk` (the swing); the
    lowest peak when none does.

    Every permutation for up to ``EXHAUSTIVE_MAX`` stages. Beyond, dynamic programming over
    subsets for each of up to 16 ceilings on the node peak (the least-noise order whose
    nodes stay under the ceiling, Held & Karp 1962 as in ``best_order_dp``), the best
    product kept: exact when the optimum's highest peak is one of the ceilings tried.
    `first` pins one stage at the front.

    Returns
    -------
    order : tuple of int
    method : str
    """
    n = tables.n

    def score(order) -> tuple[bool, float]:
        noise, top = built_figures(tables, order)
        clips = top > limit_vpk
        return clips, top if clips else noise * top

    if n <= EXHAUSTIVE_MAX:
        best, best_cost = None, (True, math.inf)
        rest = [i for i in range(n) if i != first]
        for perm in itertools.permutations(rest):
            order = perm if first is None else (first,) + perm
            cost = score(order)
            if cost < best_cost:
                best, best_cost = order, cost
        return tuple(best), "exhaustive"
    levels = sorted_unique(tables.peak[1:])
    if levels.size > _PEAK_LEVELS:
        levels = quantile_linear(levels, np.linspace(0, 1, _PEAK_LEVELS))
    levels = np.maximum(levels, tables.peak[-1])
    best, best_cost = None, (True, math.inf)
    for ceiling in sorted_unique(levels):
        allowed = tables.peak <= ceiling * (1 + 1e-12)
        allowed[0] = allowed[-1] = True
        order, _ = _dp_under(tables, allowed, first)
        if order is None:
            continue
        cost = score(order)
        if cost < best_cost:
            best, best_cost = order, cost
    return tuple(best), f"dynamic programming over subsets under {levels.size} peak ceilings"
