"""Time-domain figures of a built chain: group delay, tone bursts, step, overload at onset.

Every figure comes from the chain's transfer to a net as zeros, poles and gain (``net_zpk``),
assembled stage by stage from the same transfer polynomials the frequency analyses use
(``circuits.figures.transfer_polynomials_many``), so rounded parts and finite GBW are in.

Method
------
With simple poles p_i and residues r_i (H strictly or just proper), the response to the
complex tone e^{jωt} switched on at t = 0 from rest is

    y(t) = H(jω) e^{jωt} - Σ_i r_i e^{p_i t} / (jω - p_i),

the convolution of Σ r_i e^{p_i t} with the tone done term by term ([1]_). The real response
to V sin(ωt + φ) is Im(V e^{jφ} y(t)), and |y(t)| is the envelope of the response to the
analytic tone. A burst of length T is y(t) - e^{jωT} y(t - T) u(t - T) (superposition); the
step response is H(0) + Σ r_i e^{p_i t} / p_i. The terms e^{p_i t} are one (poles × times)
matrix shared by every frequency, so each figure is one matrix product.

Group delay is τ(ω) = -d arg H(jω)/dω = -Re(N'/N - D'/D) at s = jω, and with N, D in
product form N'/N - D'/D = Σ 1/(s - z) - Σ 1/(s - p): exact, no numerical derivative ([2]_).

References
----------
.. [1] A. V. Oppenheim, A. S. Willsky, *Signals and Systems*, 2nd ed., Prentice Hall, 1997,
   §9.5 (partial fractions of a rational Laplace transform) and §2.3 (convolution) [mem].
.. [2] A. B. Williams, F. J. Taylor, *Electronic Filter Design Handbook*, 4th ed.,
   McGraw-Hill, 2006, §2.4 (group delay as the derivative of phase) [mem].
.. [3] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*, Oxford UP, 2001,
   §4.3: a second-order bandpass's envelope has the time constant 2Q/ω0 [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import polynomial as npoly

from bandwright.arrays import sorted_unique
from bandwright.chain.graph import CHAIN_INPUT, CHAIN_OUTPUT, Chain
from bandwright.circuits.figures import _scale_rad_s, _trim, transfer_polynomials_many

__all__ = ["Zpk", "net_zpk", "zpk_response", "group_delay_s", "tone_onset", "tone_phasors",
           "burst_response",
           "step_response", "BurstReading", "read_burst", "OnsetReading", "onset_peaks",
           "TimeFigures", "time_figures", "default_burst_s", "worst_onset_phases",
           "RING_FRACTION"]

# Ringing and settling are read down to 1 % of the steady level (the figure).
RING_FRACTION = 0.01
# Samples of a burst window: with the crossing interpolated linearly the 10/90 % times are
# good to far better than 0.1 % of the rise time at this density (tested against lsim).
_BURST_POINTS = 6000
# Onset grid: points per period of the fastest beat (band edge + tone) before refinement.
_ONSET_PER_PERIOD = 24
_ONSET_MAX_POINTS = 1 << 15
# Poles closer than this (relative) are split apart: the simple-pole formula then holds to
# about this relative error, far below every figure's resolution.
_SPLIT = 1e-7
# Exponent below which e^x is 0 in IEEE doubles (the smallest subnormal is e^-744.4), with
# a margin: ``_exp_matrix`` stops computing a pole's row there.
_DEAD_EXPONENT = -800.0


@dataclass(frozen=True, slots=True)
class Zpk:
    """A transfer as zeros, poles (rad/s) and gain: H(s) = k Π(s - z) / Π(s - p)."""

    zeros: np.ndarray
    poles: np.ndarray
    k: float

    @property
    def stable(self) -> bool:
        return bool(np.all(self.poles.real < 0))

    @property
    def slowest_rad_s(self) -> float:
        """Smallest decay rate |Re p| among the poles (sets how long transients last)."""
        return float(np.min(-self.poles.real)) if self.poles.size else math.inf


def _stage_factors(stage, nets_local, rs):
    """(zeros per local net, poles, gain per local net) of one stage."""
    nums, den = transfer_polynomials_many(stage.elements, out_nets=nets_local, source_ohms=rs)
    v = np.array([e.value for e in stage.elements if e.kind in ("R", "C")], dtype=float)
    w_c = float(_scale_rad_s(stage.elements, v))
    powers = w_c ** np.arange(den.size)
    # Rounding noise is trimmed in sigma = s/w_c, where the coefficients are of one size.
    den_s = _trim(den * powers)
    poles = np.roots(den_s[::-1]) * w_c
    s_ref = 1j * w_c
    out = []
    for num in nums:
        num_s = _trim(num * powers)
        zeros = np.roots(num_s[::-1]) * w_c if num_s.size > 1 else np.zeros(0, complex)
        h_ref = npoly.polyval(s_ref / w_c, num_s) / npoly.polyval(s_ref / w_c, den_s)
        shape = np.prod(s_ref - zeros) / np.prod(s_ref - poles)
        # A real network has a real gain: what imaginary part is left is rounding.
        out.append((zeros, float(np.real(h_ref / shape))))
    return out, poles


def net_zpk(chain: Chain) -> dict[str, Zpk]:
    """Zeros, poles and gain of the transfer from the source to every op-amp output net.

    Parameters
    ----------
    chain : Chain
        The built chain.

    Returns
    -------
    dict of str to Zpk
        One entry per op-amp output net; zeros and poles in rad/s.

    Notes
    -----
    A stage's numerator and denominator come from ``transfer_polynomials_many`` (exact
    interpolation of the MNA determinants); their roots are taken per stage, where the
    degree is small, and multiplied along the path (the op-amp model has zero output
    impedance, so stages do not load each other, as in ``chain.graph.net_transfers``). The
    gain is fixed by matching the polynomials' value at s = j w_c.
    """
    out: dict[str, Zpk] = {CHAIN_INPUT: Zpk(np.zeros(0, complex), np.zeros(0, complex), 1.0)}
    for st in chain.stages:
        inp = chain.input_of(st)
        rs = chain.source_ohms if inp == CHAIN_INPUT else 0.0
        edges = [(net, d["local"]) for _, net, d in chain.graph.out_edges(inp, data=True)
                 if d["stage"] is st]
        factors, poles = _stage_factors(st, [loc for _, loc in edges], rs)
        up = out[inp]
        for (net, _), (zeros, k) in zip(edges, factors):
            out[net] = Zpk(zeros=np.concatenate([up.zeros, zeros]),
                           poles=np.concatenate([up.poles, poles]), k=up.k * k)
    del out[CHAIN_INPUT]
    return out


def zpk_response(zpk: Zpk, s: np.ndarray) -> np.ndarray:
    """H(s) from zeros, poles and gain, at complex `s` (rad/s)."""
    s = np.asarray(s, dtype=complex)
    num = np.prod(s[..., None] - zpk.zeros, axis=-1)
    den = np.prod(s[..., None] - zpk.poles, axis=-1)
    return zpk.k * num / den


def group_delay_s(zpk: Zpk, freq_hz: np.ndarray) -> np.ndarray:
    """Group delay τ = -d∠H(jω)/dω, in seconds, at `freq_hz`.

    Notes
    -----
    τ = -Re(Σ 1/(jω - z) - Σ 1/(jω - p)), the logarithmic derivative N'/N - D'/D of the
    product form ([2]_).
    """
    s = 2j * np.pi * np.asarray(freq_hz, dtype=float)
    dz = np.sum(1.0 / (s[..., None] - zpk.zeros), axis=-1) if zpk.zeros.size else 0.0
    dp = np.sum(1.0 / (s[..., None] - zpk.poles), axis=-1)
    return -np.real(dz - dp)


def _residues(zpk: Zpk) -> tuple[np.ndarray, np.ndarray]:
    """Poles (coincident ones split by _SPLIT) and their residues."""
    p = zpk.poles.astype(complex).copy()
    for i in range(p.size):
        for j in range(i):
            if abs(p[i] - p[j]) <= _SPLIT * max(abs(p[i]), 1e-300):
                p[i] = p[i] * (1 + _SPLIT * (i + 1))
    diff = p[:, None] - p[None, :]
    np.fill_diagonal(diff, 1.0)
    # Sums of logs: a product of 30 differences of op-amp poles would overflow.
    log_r = (np.sum(np.log(p[:, None] - zpk.zeros[None, :]), axis=1) if zpk.zeros.size else 0)
    log_r = log_r - np.sum(np.log(diff), axis=1)
    return p, zpk.k * np.exp(log_r)


def _exp_matrix(p: np.ndarray, t_s: np.ndarray,
                rows: dict[complex, np.ndarray] | None = None) -> np.ndarray:
    """e^{p t} for t >= 0, 0 before, shape (P, T).

    `rows`: rows already computed on this same grid, by pole (filled in here): a net after
    a stage carries that stage's poles, so on a shared grid their rows are shared.

    On an ascending grid each pole's exponential is computed only while it can still be
    told from zero: e^x is exactly 0 in doubles for x below about -745, so past
    t = _DEAD_EXPONENT / Re p the entries are the zeros the full computation would give.
    An op-amp's pole dies out within the first few samples of a grid that must outlast the
    slowest bandpass pole, so most of such a row is never computed.
    """
    t = np.asarray(t_s, dtype=float)
    e = np.zeros((p.size, t.size), dtype=complex)
    ascending = t.size < 2 or bool(np.all(np.diff(t) >= 0))
    start = int(np.searchsorted(t, 0.0, side="left")) if ascending else 0
    with np.errstate(under="ignore", over="ignore"):
        for i, pole in enumerate(p):
            if rows is not None and complex(pole) in rows:
                e[i] = rows[complex(pole)]
                continue
            stop = t.size
            if ascending and pole.real < 0:
                stop = int(np.searchsorted(t, _DEAD_EXPONENT / pole.real, side="right"))
            if stop > start:
                e[i, start:stop] = np.exp(pole * np.maximum(t[start:stop], 0))
            if rows is not None:
                rows[complex(pole)] = e[i].copy()
    return e if ascending else np.where(t[None, :] >= 0, e, 0)


def tone_phasors(freq_hz: np.ndarray, t_s: np.ndarray) -> np.ndarray:
    """e^{jωt}, shape (F, T): the tones themselves, which every net's onset on the same
    time grid shares (``tone_onset``'s `phasors`)."""
    jw = 2j * np.pi * np.atleast_1d(np.asarray(freq_hz, dtype=float))
    return np.exp(jw[:, None] * np.asarray(t_s, dtype=float)[None, :])


def tone_onset(zpk: Zpk, freq_hz: np.ndarray, t_s: np.ndarray,
               phasors: np.ndarray | None = None,
               rows: dict[complex, np.ndarray] | None = None) -> np.ndarray:
    """Response to e^{jωt} switched on at t = 0 from rest, shape (F, T), per 1 V.

    `phasors`: ``tone_phasors(freq_hz, t_s)`` when already computed for these tones and
    times, and `rows` the poles' exponentials on these times (several nets on one grid).

    Notes
    -----
    y(t) = H(jω) e^{jωt} - Σ r_i e^{p_i t}/(jω - p_i) ([1]_; module docstring). The real
    response to sin(ωt + φ) is Im(e^{jφ} y).
    """
    f = np.atleast_1d(np.asarray(freq_hz, dtype=float))
    t = np.asarray(t_s, dtype=float)
    p, r = _residues(zpk)
    jw = 2j * np.pi * f
    h = zpk_response(zpk, jw)
    coef = r[None, :] / (jw[:, None] - p[None, :])
    forced = h[:, None] * (tone_phasors(f, t) if phasors is None else phasors)
    if t.size and t.min() < 0:      # before the switch-on there is no tone
        forced = np.where(t[None, :] >= 0, forced, 0)
    # A complex matrix product (BLAS): about 8× quicker than einsum's generic complex loop
    # on a (10, 12) × (12, 32768) product, measured with one BLAS thread as in a plan.
    return forced - coef @ _exp_matrix(p, t, rows)


def burst_response(zpk: Zpk, freq_hz: float, t_s: np.ndarray, burst_s: float) -> np.ndarray:
    """Complex response to the analytic tone e^{jωt} on from 0 to `burst_s` (per 1 V)."""
    t = np.asarray(t_s, dtype=float)
    on = tone_onset(zpk, [freq_hz], t)[0]
    off = tone_onset(zpk, [freq_hz], t - burst_s)[0]
    return on - np.exp(2j * np.pi * freq_hz * burst_s) * off


def step_response(zpk: Zpk, t_s: np.ndarray,
                  rows: dict[complex, np.ndarray] | None = None) -> np.ndarray:
    """Response to a 1 V step at the source from rest: H(0) + Σ r_i e^{p_i t}/p_i.
    `rows`: as ``tone_onset``'s."""
    p, r = _residues(zpk)
    t = np.asarray(t_s, dtype=float)
    y = zpk_response(zpk, np.zeros(1))[0] + (r / p) @ _exp_matrix(p, t, rows)
    return np.where(t >= 0, y.real, 0.0)


def _crossing(t: np.ndarray, y: np.ndarray, level: float) -> float:
    """First time y rises through `level`, linearly interpolated (nan if never)."""
    above = np.nonzero(y >= level)[0]
    if not above.size:
        return math.nan
    i = above[0]
    if i == 0:
        return float(t[0])
    return float(t[i - 1] + (level - y[i - 1]) * (t[i] - t[i - 1]) / (y[i] - y[i - 1]))


def _last_above(t: np.ndarray, y: np.ndarray, level: float) -> float:
    """Last time y falls through `level` for good (interpolated); inf if it ends above."""
    above = np.nonzero(y > level)[0]
    if not above.size:
        return float(t[0]) if t.size else 0.0
    i = above[-1]
    if i == y.size - 1:
        return math.inf
    return float(t[i] + (y[i] - level) * (t[i + 1] - t[i]) / (y[i] - y[i + 1]))


@dataclass(frozen=True, slots=True)
class BurstReading:
    """The chain output's envelope for a tone burst at one frequency.

    Attributes
    ----------
    freq_hz : float
    burst_s : float
        Length of the burst.
    gain : float
        Steady-state |H| at `freq_hz`: the level the envelope is read against.
    t10_s, t90_s : float
        When the envelope first reaches 10 % and 90 % of `gain` (nan if never).
    rise_s : float
        t90 - t10.
    delay_s : float
        When the envelope first reaches 50 %: the delay from input to output.
    overshoot_pct : float
        Envelope maximum above `gain`, percent (0 when it never exceeds it).
    ringing_s : float
        From the burst's end until the envelope stays below 1 % of `gain`.
    t_s, envelope : ndarray
        The envelope (per 1 V of input) over time, for the plots.
    """

    freq_hz: float
    burst_s: float
    gain: float
    t10_s: float
    t90_s: float
    rise_s: float
    delay_s: float
    overshoot_pct: float
    ringing_s: float
    t_s: np.ndarray
    envelope: np.ndarray


def read_burst(zpk: Zpk, freq_hz: float, *, burst_s: float, tail_s: float,
               points: int = _BURST_POINTS) -> BurstReading:
    """Envelope figures of a burst of `burst_s` at `freq_hz`, watched `tail_s` after it."""
    t = np.linspace(0.0, burst_s + tail_s, points)
    env = np.abs(burst_response(zpk, freq_hz, t, burst_s))
    gain = float(abs(zpk_response(zpk, np.array([2j * np.pi * freq_hz]))[0]))
    during = t <= burst_s
    t10 = _crossing(t[during], env[during], 0.1 * gain)
    t90 = _crossing(t[during], env[during], 0.9 * gain)
    t50 = _crossing(t[during], env[during], 0.5 * gain)
    over = max(0.0, 100.0 * (float(env.max()) / gain - 1.0))
    after = ~during
    ring = _last_above(t[after], env[after], RING_FRACTION * gain) - burst_s
    return BurstReading(freq_hz=float(freq_hz), burst_s=float(burst_s), gain=gain, t10_s=t10,
                        t90_s=t90, rise_s=t90 - t10, delay_s=t50, overshoot_pct=over,
                        ringing_s=max(ring, 0.0), t_s=t, envelope=env)


@dataclass(frozen=True, slots=True)
class OnsetReading:
    """Peak at one op-amp output when signals start from rest (or the DC level steps).

    Attributes
    ----------
    net : str
    stage : int
    peak_vpk : float
        Largest |v(t)| with every tone and the in-band signal started at its worst phase
        (or the DC step on top of the steady worst case, whichever is larger).
    steady_vpk : float
        The same signals' steady-state worst case (the headroom figure).
    limit_vpk : float
        Swing limit of the op-amp driving the net.
    event : {"tones", "dc_step"}
        Which start gives `peak_vpk`.
    at_s : float
        When the peak comes, after the start.
    recovery_s : float
        When the worst-case level falls back inside the limit for good (0 if it never
        leaves it; inf if the steady state is beyond it).
    signal_hz : float
        The in-band frequency of the worst case.
    """

    net: str
    stage: int
    peak_vpk: float
    steady_vpk: float
    limit_vpk: float
    event: str
    at_s: float
    recovery_s: float
    signal_hz: float


def _onset_grid(zpk: Zpk, f_top_hz: float) -> np.ndarray:
    # No poles (ideal op-amps, no capacitor): nothing rings; a few periods show that.
    span = 12.0 / zpk.slowest_rad_s if zpk.poles.size else 10.0 / f_top_hz
    dt = 1.0 / (_ONSET_PER_PERIOD * f_top_hz)
    n = int(min(_ONSET_MAX_POINTS, max(256, math.ceil(span / dt))))
    return np.linspace(0.0, span, n)


def _bound(zpk: Zpk, freqs: np.ndarray, amps: np.ndarray, t: np.ndarray,
           n_signal: int, phasors: np.ndarray | None = None,
           rows: dict[complex, np.ndarray] | None = None) -> np.ndarray:
    """Worst-phase level Σ V|y(t)|, one row per in-band candidate frequency."""
    y = np.abs(tone_onset(zpk, freqs, t, phasors, rows)) * amps[:, None]
    tones = y[n_signal:].sum(axis=0)
    return y[:n_signal] + tones[None, :]


def worst_onset_phases(zpk: Zpk, freq_hz: np.ndarray, at_s: float) -> np.ndarray:
    """Phases φ (rad) of sin(ωt + φ) that make every tone peak together at `at_s`.

    Im(e^{jφ} y) = |y| when φ = π/2 - arg y(at_s).
    """
    y = tone_onset(zpk, freq_hz, np.array([at_s]))[:, 0]
    return np.pi / 2 - np.angle(y)


def onset_peaks(chain: Chain, zpks: dict[str, Zpk], *, signal_vpk: float,
                signal_hz: np.ndarray, tones: tuple, dc_step_v: float | None,
                limits_vpk: dict[str, float]) -> tuple[OnsetReading, ...]:
    """Worst-phase onset peak, and the DC-step peak, at every op-amp output net.

    Parameters
    ----------
    chain : Chain
    zpks : dict of str to Zpk
        ``net_zpk(chain)``.
    signal_vpk : float
        In-band amplitude at the source (open circuit).
    signal_hz : ndarray
        In-band frequencies to try (the worst one is kept per net).
    tones : tuple of Tone
        Out-of-band tones (open-circuit amplitudes).
    dc_step_v : float or None
        A step of the source's DC level; None: none.
    limits_vpk : dict of str to float
        Swing limit per net.

    Returns
    -------
    tuple of OnsetReading, in chain order.

    Notes
    -----
    Each source's response from rest is Im(V e^{jφ} y(t)) ([1]_); with every phase free, the
    worst level at time t is Σ V |y(t)| (each term reaches its modulus for one φ), and its
    limit for t → ∞ is the steady-state worst case Σ V |H|. A DC step ΔV adds ΔV |s(t)|,
    s the step response, on top of the steady worst case.
    """
    sig_f = np.asarray(signal_hz, dtype=float)
    tf = np.array([t.freq_hz for t in tones], dtype=float)
    tv = np.array([t.vpk for t in tones], dtype=float)
    freqs = np.concatenate([sig_f, tf])
    amps = np.concatenate([np.full(sig_f.size, signal_vpk), tv])
    f_top = float(freqs.max()) + float(sig_f.max())
    # The nets of one stage, and often every net after the slowest pole, share one grid:
    # their tones, and the exponentials of the poles they share, are computed once.
    phasors: dict[tuple[int, float], np.ndarray] = {}
    pole_rows: dict[tuple[int, float], dict[complex, np.ndarray]] = {}
    out = []
    for net in chain.output_nets:
        zpk = zpks[net]
        limit = limits_vpk[net]
        st = chain.stage_of(net).position
        if not zpk.stable:
            out.append(OnsetReading(net=net, stage=st, peak_vpk=math.inf, steady_vpk=math.inf,
                                    limit_vpk=limit, event="tones", at_s=0.0,
                                    recovery_s=math.inf, signal_hz=float(sig_f[0])))
            continue
        h = np.abs(zpk_response(zpk, 2j * np.pi * freqs))
        steady_rows = amps[: sig_f.size] * h[: sig_f.size] + float(np.sum(tv * h[sig_f.size:]))
        t = _onset_grid(zpk, f_top)
        grid_key = (t.size, float(t[-1]))
        if grid_key not in phasors:
            phasors[grid_key], pole_rows[grid_key] = tone_phasors(freqs, t), {}
        rows = pole_rows[grid_key]
        b = _bound(zpk, freqs, amps, t, sig_f.size, phasors[grid_key], rows)
        row, col = np.unravel_index(int(np.argmax(b)), b.shape)
        # Refine the peak between the neighbouring samples.
        lo, hi = t[max(col - 1, 0)], t[min(col + 1, t.size - 1)]
        fine = np.linspace(lo, hi, 65)
        bf = _bound(zpk, freqs[[row] + list(range(sig_f.size, freqs.size))],
                    amps[[row] + list(range(sig_f.size, freqs.size))], fine, 1)[0]
        peak = max(float(bf.max()), float(b[row, col]))
        at = float(fine[int(np.argmax(bf))]) if bf.max() >= b[row, col] else float(t[col])
        steady = float(steady_rows[row])
        worst_steady = float(steady_rows.max())
        level = b.max(axis=0)
        event = "tones"
        if dc_step_v:
            s = np.abs(step_response(zpk, t, rows)) * dc_step_v + worst_steady
            if float(s.max()) > peak:
                peak, at, event, level = float(s.max()), float(t[int(np.argmax(s))]), \
                    "dc_step", s
                steady = worst_steady
        recovery = 0.0 if peak <= limit else _last_above(t, level, limit)
        if steady > limit:
            recovery = math.inf
        out.append(OnsetReading(net=net, stage=st, peak_vpk=peak, steady_vpk=steady,
                                limit_vpk=limit, event=event, at_s=at, recovery_s=recovery,
                                signal_hz=float(sig_f[row])))
    return tuple(out)


@dataclass(frozen=True, slots=True)
class TimeFigures:
    """Time-domain figures of the chain output (and onset peaks at every net).

    Attributes
    ----------
    freq_hz, group_delay_s : ndarray
        Group delay of the chain output over the passband grid.
    delay_min_s, delay_max_s, delay_spread_s : float
        Its extremes over the passband and their difference.
    delay_center_s : float
        Group delay at the centre.
    bursts : tuple of BurstReading
        At the centre, the low edge and the high edge, in that order.
    settling_s : float
        Step response at the output: time until it stays within 1 % of its largest
        excursion from the final value.
    step_t_s, step_v : ndarray
        Step response (per 1 V) for the plots.
    onset : tuple of OnsetReading
        Per op-amp output net.
    """

    freq_hz: np.ndarray
    group_delay_s: np.ndarray
    delay_min_s: float
    delay_max_s: float
    delay_spread_s: float
    delay_center_s: float
    bursts: tuple[BurstReading, ...]
    settling_s: float
    step_t_s: np.ndarray
    step_v: np.ndarray
    onset: tuple[OnsetReading, ...]

    @property
    def center(self) -> BurstReading:
        return self.bursts[0]


def default_burst_s(bandwidth_hz: float, center_hz: float) -> float:
    """A burst long enough for the envelope to settle: 10 / bandwidth, at least 10 periods.

    A bandpass of bandwidth B has an envelope like a lowpass of cutoff B/2, whose 10-90 % rise
    is about 0.7/B and whose 1 % settling takes a few 1/B with order and ripple (common
    practice); 10/B shows the rise, the plateau and the fall on one plot.
    """
    return max(10.0 / bandwidth_hz, 10.0 / center_hz)


def time_figures(chain: Chain, *, passband_hz: np.ndarray, low_hz: float, high_hz: float,
                 center_hz: float, burst_s: float | None, signal_vpk: float, tones: tuple,
                 dc_step_v: float | None, limits_vpk: dict[str, float]) -> TimeFigures | None:
    """Every time-domain figure of `chain`; None if its output transfer is unstable.

    Parameters
    ----------
    chain : Chain
    passband_hz : ndarray
        Grid over the passband (group delay, in-band onset frequencies).
    low_hz, high_hz, center_hz : float
        Band edges and centre (burst frequencies).
    burst_s : float or None
        Burst length; None: ``default_burst_s``.
    signal_vpk : float
    tones : tuple of Tone
    dc_step_v : float or None
    limits_vpk : dict of str to float
        Swing limit per op-amp output net.
    """
    zpks = net_zpk(chain)
    out = zpks[CHAIN_OUTPUT]
    if not out.stable:
        return None
    pb = np.asarray(passband_hz, dtype=float)
    gd = group_delay_s(out, pb)
    tb = burst_s if burst_s is not None else default_burst_s(high_hz - low_hz, center_hz)
    tail = 12.0 / out.slowest_rad_s if out.poles.size else 10.0 / center_hz
    bursts = tuple(read_burst(out, f, burst_s=tb, tail_s=tail)
                   for f in (center_hz, low_hz, high_hz))
    ts = np.linspace(0.0, tail + 2 * tb, _BURST_POINTS)
    sv = step_response(out, ts)
    final = float(zpk_response(out, np.zeros(1))[0].real)
    dev = np.abs(sv - final)
    settling = _last_above(ts, dev, RING_FRACTION * float(dev.max())) if dev.max() > 0 else 0.0
    sig_f = sorted_unique(np.concatenate([[low_hz, center_hz, high_hz],
                                      pb[np.linspace(0, pb.size - 1, 9).astype(int)]]))
    onset = onset_peaks(chain, zpks, signal_vpk=signal_vpk, signal_hz=sig_f, tones=tones,
                        dc_step_v=dc_step_v, limits_vpk=limits_vpk)
    g_center = float(group_delay_s(out, np.array([center_hz]))[0])
    return TimeFigures(freq_hz=pb, group_delay_s=gd, delay_min_s=float(gd.min()),
                       delay_max_s=float(gd.max()), delay_spread_s=float(gd.max() - gd.min()),
                       delay_center_s=g_center, bursts=bursts, settling_s=settling,
                       step_t_s=ts, step_v=sv, onset=onset)
