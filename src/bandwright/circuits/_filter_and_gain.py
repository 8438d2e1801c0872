"""Helpers of the lowpass, highpass and gain-stage topologies (highpass + lowpass path, make-up gain).

Private helpers for ``sallen_key_lowpass``, ``mfb_lowpass``, ``sallen_key_highpass``,
``mfb_highpass``, ``noninverting_gain`` and ``inverting_gain``: the gain-resistor rule,
the finite-GBW criterion, component spread and Q sensitivity, the checks every one of
them makes on a section before designing it and on a part list before wiring it, and the
non-inverting amplifier (Rf, Rg, U1) several of them end in. The rules every topology shares
(the GBW criterion, spread, capacitor check, nominal scale) are in ``circuits.rules``.

First-order shifts from finite GBW
----------------------------------
For a single-op-amp circuit with open-loop gain A(s), the closed-loop poles are the roots
of ``1 + A(s)/NG(s)``, the loop gain A·beta with NG = 1/beta the noise gain (Franco,
*Design with Operational Amplifiers and Analog Integrated Circuits*, 4th ed., 2015, §1.2
and §6.2 [mem]). With the integrator model ``A = wt/s`` (A0 -> inf) and
``NG = N(s)/D(s)``, D(s) = s^2 + b s + c the ideal denominator (b = w0/Q, c = w0^2) and
N(s) = n2 s^2 + n1 s + n0, the poles solve ``D(s) + eps s N(s) = 0``, eps = 1/wt. Writing
that cubic as ``lambda (eps n2 s + 1)(s^2 + b' s + c')`` and matching coefficients to first
order in eps gives (derived here; checked with sympy in the tests)::

    c' = c (1 - eps (n1 - n2 b))
    b' = b + eps (n0 - n2 c - b (n1 - n2 b))

so, with e = f0/GBW (eps = e/w0), ``df0/f0 = -(n1 - n2 b) e / (2 w0)`` and
``dQ/Q = df0/f0 - (b'-b)/b``. No pole roots are needed, so it holds for any Q > 0.

The GBW a filter section needs follows from (k_f, k_q) by the one criterion of
``circuits.rules`` (pole movement within 10 % of the bandwidth). Without predistortion,
the common-practice rule for a unity-gain Sallen-Key lowpass is "GBW >= 100 x gain x Q x
f0", i.e. a 1 % shift (|df0/f0| = |dQ/Q| = Q e there).

A flat gain stage cannot be predistorted: its roll-off adds to the passband loss. Its
criterion is a gain error of at most ``GAIN_ERROR_LIMIT`` (1 %) at the highest signal
frequency.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping

from bandwright.circuits.base import Figures, Limits
from bandwright.circuits.elements import Element, opamp, resistor
from bandwright.circuits.rules import (MAX_SPREAD, NOMINAL_C_FARADS, check_capacitor,
                                       gbw_needed_hz, gbw_reason, infeasible_limits)
from bandwright.errors import InfeasibleDesign
from bandwright.parts.notation import format_hz, format_sig
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section

__all__ = ["GAIN_ERROR_LIMIT", "UNITY_RTOL", "BASE_R_OHMS",
           "is_unity", "ratio_pair", "finite_gbw_shift", "noise_gain_at",
           "spread", "max_log_sensitivity", "section_problems", "design_gain", "unity_note",
           "require", "check_known_parts",
           "check_exact_parts", "pair_fitted", "amplifier_elements",
           "check_capacitor", "amplifier_gain", "gain_resistors", "filter_limits",
           "closed_loop_bandwidth_hz", "gain_stage_gbw_needed_hz", "gain_stage_limits"]

#: Largest gain error of a flat gain stage at the highest signal frequency.
GAIN_ERROR_LIMIT = 0.01
#: A gain this close to 1 (relative) is built at unity (follower). Any other circuit would
#: need a gain-resistor ratio below 1/MAX_SPREAD, which ``limits`` refuses; and a gain this
#: near 1 is the size of the finite-A0 loss of a real op-amp (A0 >= 60 dB) that a
#: predistortion loop asks to make up, which must not turn a follower into a 10 GOhm
#: divider. ``limits`` notes the difference whenever it is not zero.
UNITY_RTOL = 1.0 / MAX_SPREAD
#: The smaller resistor of a gain-setting pair (design choice: 10 kOhm keeps the op-amp
#: load light and the Johnson noise modest; common practice).
BASE_R_OHMS = 10e3
# f_max / f_b at which a single-pole closed loop 1/sqrt(1 + (f/f_b)^2) has lost
# GAIN_ERROR_LIMIT of its gain (Franco 2015, §6.2 [mem]).
_GAIN_ERROR_BANDWIDTH_RATIO = math.sqrt(1 / (1 - GAIN_ERROR_LIMIT) ** 2 - 1)


def is_unity(gain: float) -> bool:
    """True when `gain` is 1 within ``UNITY_RTOL``.

    Parameters
    ----------
    gain : float
        Gain, V/V.

    Returns
    -------
    bool
    """
    return abs(gain - 1.0) <= UNITY_RTOL


def ratio_pair(ratio: float, base_ohms: float = BASE_R_OHMS) -> tuple[float, float]:
    """Two resistors (r_top, r_bottom) with r_top / r_bottom = `ratio`, the smaller one `base_ohms`.

    Parameters
    ----------
    ratio : float
        Wanted r_top / r_bottom, > 0.
    base_ohms : float
        Value of the smaller of the two, ohms.

    Returns
    -------
    (float, float)
        (r_top, r_bottom), ohms.
    """
    if not ratio > 0:
        raise ValueError(f"resistor ratio must be > 0; got {ratio}")
    if ratio >= 1:
        return ratio * base_ohms, base_ohms
    return base_ohms, base_ohms / ratio


def finite_gbw_shift(f0_hz: float, q: float, ng_num: tuple[float, float, float]
                     ) -> tuple[float, float]:
    """First-order relative shifts of f0 and Q per unit e = f0/GBW.

    Parameters
    ----------
    f0_hz : float
        Ideal pole frequency, Hz.
    q : float
        Ideal pole Q.
    ng_num : (float, float, float)
        (n2, n1, n0): numerator of the ideal noise gain NG(s) = N(s)/D(s) over the monic
        denominator D(s) = s^2 + (w0/Q) s + w0^2, s in rad/s.

    Returns
    -------
    (float, float)
        (k_f, k_q) with df0/f0 ~= k_f e and dQ/Q ~= k_q e.

    Notes
    -----
    Perturbation of the characteristic polynomial D(s) + (s/wt) N(s) (module docstring;
    closed-loop gain with finite loop gain, Franco 2015, §6.2 [mem]).
    """
    w0 = 2 * math.pi * f0_hz
    b, c = w0 / q, w0 * w0
    n2, n1, n0 = ng_num
    dc_per_eps = -c * (n1 - n2 * b)
    db_per_eps = n0 - n2 * c - b * (n1 - n2 * b)
    # eps = e / w0
    k_f = 0.5 * dc_per_eps / c / w0
    k_b = db_per_eps / b / w0
    return k_f, k_f - k_b


def noise_gain_at(f_hz: float, f0_hz: float, q: float,
                  ng_num: tuple[float, float, float]) -> float:
    """|NG(j 2 pi f)| from the noise-gain numerator over the monic ideal denominator.

    Parameters
    ----------
    f_hz : float
        Frequency, Hz.
    f0_hz, q : float
        Ideal pole frequency (Hz) and Q.
    ng_num : (float, float, float)
        (n2, n1, n0) as in `finite_gbw_shift`.

    Returns
    -------
    float
        Magnitude of the noise gain, V/V.
    """
    s = 2j * math.pi * f_hz
    w0 = 2 * math.pi * f0_hz
    n2, n1, n0 = ng_num
    return abs((n2 * s * s + n1 * s + n0) / (s * s + (w0 / q) * s + w0 * w0))


def spread(components: Mapping[str, float], *,
           separate: tuple[str, ...] = ()) -> float:
    """Component spread: the largest max/min over the resistors and over the capacitors.

    Names starting with "R" are resistors and with "C" capacitors. Capacitors count too:
    a Sallen-Key lowpass with equal resistors keeps all of its spread in C1/C2. The parts
    named in `separate` (a gain-setting pair such as Rf, Rg, whose level is fixed apart from
    the filter's impedance level) form a group of their own, so that the figure does not
    depend on the capacitor value chosen.

    Parameters
    ----------
    components : mapping of str to float
        Part name -> value (ohms or farads).
    separate : tuple of str
        Parts compared only among themselves.

    Returns
    -------
    float
        Spread, >= 1 (1 when no two parts of one kind share a group).
    """
    out = 1.0
    groups = ({k: v for k, v in components.items() if k not in separate},
              {k: v for k, v in components.items() if k in separate})
    for group in groups:
        for prefix in ("R", "C"):
            vals = [v for k, v in group.items() if k.startswith(prefix)]
            if len(vals) >= 2:
                out = max(out, max(vals) / min(vals))
    return out


def max_log_sensitivity(fn: Callable[[Mapping[str, float]], float],
                        components: Mapping[str, float]) -> float:
    """Largest |d ln fn / d ln x| over the parts x (central differences in ln x).

    Parameters
    ----------
    fn : callable
        Figure (e.g. Q) as a function of the part values.
    components : mapping of str to float
        Part values at which to differentiate.

    Returns
    -------
    float
        max |S_x^fn| (0 when there are no parts).

    Notes
    -----
    Classical sensitivity S_x^y = (x/y) dy/dx (Schaumann & Van Valkenburg 2001, ch. 3
    [mem]); the step h = 1e-5 in ln x leaves an O(h^2) = 1e-10 error.
    """
    h = 1e-5
    worst = 0.0
    for name in components:
        up, down = dict(components), dict(components)
        up[name] *= math.exp(h)
        down[name] *= math.exp(-h)
        s = (math.log(abs(fn(up))) - math.log(abs(fn(down)))) / (2 * h)
        worst = max(worst, abs(s))
    return worst


def section_problems(section: Section, *, kind: str, min_gain: float = 0.0) -> list[str]:
    """Reasons a section cannot be built by a topology of `kind`, or [].

    The sign of ``section.gain`` is not checked: the chain's gains are magnitudes and a
    topology's sign is its ``INVERTING`` flag (docs/design.md; ``circuits.assign``).

    Parameters
    ----------
    section : Section
        The section.
    kind : str
        The topology's KIND.
    min_gain : float
        Smallest |gain| the topology reaches (non-inverting Sallen-Key: 1).

    Returns
    -------
    list of str
    """
    problems: list[str] = []
    if section.kind != kind:
        problems.append(f"section kind {section.kind!r}: this topology builds {kind!r}")
        return problems
    if kind != "gain":
        if not (section.f0_hz > 0 and math.isfinite(section.f0_hz)):
            problems.append(f"f0 = {section.f0_hz!r} Hz: must be finite and > 0")
        if not (section.q > 0 and math.isfinite(section.q)):
            problems.append(f"Q = {section.q!r}: must be finite and > 0")
    g = abs(section.gain)
    if not (math.isfinite(g) and g != 0):
        problems.append(f"gain = {section.gain!r}: must be finite and non-zero")
    elif g < min_gain and not is_unity(g / min_gain):
        problems.append(f"|gain| = {format_sig(g, 6)} V/V: below the {format_sig(min_gain)} V/V "
                        f"this topology "
                        "reaches; run it at unity and put the attenuation in a gain stage")
    return problems


def design_gain(section: Section) -> float:
    """The |gain| a design is built for: |section.gain|, or exactly 1 within ``UNITY_RTOL``.

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    float
        Gain magnitude, V/V.
    """
    g = abs(section.gain)
    return 1.0 if is_unity(g) else g


def unity_note(section: Section) -> list[str]:
    """A note when a gain that is not exactly 1 is built at unity, else [].

    Parameters
    ----------
    section : Section
        The section.

    Returns
    -------
    list of str
    """
    g = abs(section.gain)
    if g != 1.0 and is_unity(g):
        return [f"|gain| {format_sig(g, 7)} V/V built at unity ({100 * (g - 1):+.3g} %, within "
                f"{format_sig(100 * UNITY_RTOL)} %)"]
    return []


def require(section: Section, *, kind: str, min_gain: float = 0.0) -> None:
    """Raise if `section_problems` finds any problem.

    Parameters
    ----------
    section : Section
        The section.
    kind : str
        The topology's KIND.
    min_gain : float
        Smallest |gain| the topology reaches.

    Raises
    ------
    ValueError
        If the section's kind is not `kind` (a caller's mistake).
    InfeasibleDesign
        For any other problem (a section this topology cannot build).
    """
    problems = section_problems(section, kind=kind, min_gain=min_gain)
    if problems:
        if section.kind != kind:
            raise ValueError(problems[0])
        raise InfeasibleDesign("; ".join(problems))


def check_known_parts(name: str, parts: tuple[str, ...], components: Mapping[str, float], *,
                      subset: bool = False) -> None:
    """Raise ValueError if `components` names a part that is not in `parts`.

    Parameters
    ----------
    name : str
        The topology's NAME, for the message.
    parts : tuple of str
        The topology's PARTS.
    components : mapping of str to float
        The part list to check.
    subset : bool
        Word the message for a topology whose every part is optional ("expected a
        subset of ...").

    Raises
    ------
    ValueError
        Naming the unknown parts, sorted.
    """
    unknown = set(components) - set(parts)
    if unknown:
        expected = f"a subset of {parts}" if subset else f"{parts}"
        raise ValueError(f"{name}: unknown parts {sorted(unknown)}; expected {expected}")


def check_exact_parts(name: str, parts: tuple[str, ...],
                      components: Mapping[str, float]) -> None:
    """Raise ValueError unless `components` names exactly the parts in `parts`.

    Parameters
    ----------
    name : str
        The topology's NAME, for the message.
    parts : tuple of str
        The topology's PARTS, all of them required.
    components : mapping of str to float
        The part list to check.

    Raises
    ------
    ValueError
        Naming the unknown and the missing parts, each sorted.
    """
    unknown = set(components) - set(parts)
    missing = set(parts) - set(components)
    if unknown or missing:
        raise ValueError(f"{name}: parts must be exactly {parts}; unknown {sorted(unknown)}, "
                         f"missing {sorted(missing)}")


def pair_fitted(name: str, components: Mapping[str, float], first: str, second: str) -> bool:
    """Whether the resistor pair (`first`, `second`) is fitted; half a pair is an error.

    Parameters
    ----------
    name : str
        The topology's NAME, for the message.
    components : mapping of str to float
        The part list.
    first, second : str
        The two parts that are fitted together or not at all (e.g. "Rf", "Rg").

    Returns
    -------
    bool
        True when both are present, False when neither is.

    Raises
    ------
    ValueError
        If only one of them is present.
    """
    has_first, has_second = first in components, second in components
    if has_first != has_second:
        raise ValueError(f"{name}: {first} and {second} go together (both or neither)")
    return has_first


def amplifier_elements(components: Mapping[str, float], model: OpAmp, *, plus: str,
                       has_gain: bool) -> list[Element]:
    """The non-inverting amplifier U1 driven at net `plus`, with its gain pair if fitted.

    Parameters
    ----------
    components : mapping of str to float
        The part list; Rf and Rg are read when `has_gain`.
    model : OpAmp
        The op-amp model.
    plus : str
        Net at U1's non-inverting input.
    has_gain : bool
        True: Rf (out--fb) and Rg (fb--0) set the gain 1 + Rf/Rg, and U1's inverting
        input is "fb". False: a follower, U1's inverting input is "out".

    Returns
    -------
    list of Element
        [Rf, Rg, U1] or [U1].

    Notes
    -----
    Non-inverting amplifier, gain 1 + Rf/Rg (Franco 2015, §1.4 [mem]).
    """
    if not has_gain:
        return [opamp("U1", plus, "out", "out", model)]
    return [resistor("Rf", "out", "fb", components["Rf"]),
            resistor("Rg", "fb", "0", components["Rg"]),
            opamp("U1", plus, "fb", "out", model)]


def amplifier_gain(components: Mapping[str, float]) -> float:
    """Gain K = 1 + Rf/Rg of the non-inverting amplifier; 1 without Rf and Rg (follower).

    Parameters
    ----------
    components : mapping of str to float
        The part list (ohms); Rf and Rg are read when both are present.

    Returns
    -------
    float
        K, V/V (Franco 2015, §1.4 [mem]).
    """
    if "Rf" in components and "Rg" in components:
        return 1.0 + components["Rf"] / components["Rg"]
    return 1.0


def gain_resistors(k: float) -> dict[str, float]:
    """Rf and Rg for a non-inverting amplifier gain `k`; none at unity (follower).

    Parameters
    ----------
    k : float
        Gain 1 + Rf/Rg, V/V (>= 1).

    Returns
    -------
    dict of str to float
        {} when `k` is 1 within ``UNITY_RTOL``; else Rf, Rg with Rf/Rg = k - 1, the
        smaller ``BASE_R_OHMS`` (``ratio_pair``).
    """
    if is_unity(k):
        return {}
    rf, rg = ratio_pair(k - 1.0)
    return {"Rf": rf, "Rg": rg}


def filter_limits(section: Section, model: OpAmp, *, kind: str, opamps: int,
                  design: Callable[..., dict[str, float]],
                  ideal_figures: Callable[[Mapping[str, float]], Figures],
                  noise_gain_numerator: Callable[[Mapping[str, float]],
                                                 tuple[float, float, float]],
                  summary: Callable[[Mapping[str, float], Figures], str],
                  min_gain: float = 0.0, separate: tuple[str, ...] = (),
                  note_unity: bool = False) -> Limits:
    """Limits of a one-op-amp lowpass or highpass section, from its topology's functions.

    The section is designed at ``NOMINAL_C_FARADS``; its finite-GBW need, component spread,
    Q sensitivity and noise gain at f0 follow from the ideal figures and the noise-gain
    numerator (module docstring).

    Parameters
    ----------
    section : Section
        The lowpass or highpass section.
    model : OpAmp
        The op-amp model.
    kind, opamps : str, int
        The topology's KIND and OPAMPS.
    design : callable
        The topology's ``design(section, *, c_farads)``.
    ideal_figures : callable
        The topology's ``ideal_figures(components)``.
    noise_gain_numerator : callable
        The topology's ``noise_gain_numerator(components)``.
    summary : callable
        (parts, figures) -> the first reason: the design's ratios and gain.
    min_gain : float
        Smallest |gain| the topology reaches (``section_problems``).
    separate : tuple of str
        Parts whose spread is taken among themselves (``spread``).
    note_unity : bool
        Add ``unity_note`` (for topologies that build a near-unity gain at unity).

    Returns
    -------
    Limits
        Infeasible for a section the topology cannot build (every figure infinite), a
        spread above ``MAX_SPREAD`` or a GBW below ``gbw_needed_hz``.
    """
    problems = section_problems(section, kind=kind, min_gain=min_gain)
    if problems:
        return infeasible_limits(problems, opamps)
    parts = design(section, c_farads=NOMINAL_C_FARADS)
    fig = ideal_figures(parts)
    ng = noise_gain_numerator(parts)
    needed = gbw_needed_hz(section.f0_hz, fig.q, finite_gbw_shift(fig.f0_hz, fig.q, ng))
    part_spread = spread(parts, separate=separate)
    q_sens = max_log_sensitivity(lambda p: ideal_figures(p).q, parts)
    gbw_ok, gbw_text = gbw_reason(needed, model.gbw_hz)
    reasons = [summary(parts, fig), gbw_text, f"max |S^Q| = {format_sig(q_sens, 3)}"]
    if note_unity:
        reasons += unity_note(section)
    spread_ok = part_spread <= MAX_SPREAD
    if not spread_ok:
        reasons.append(f"component spread {format_sig(part_spread)} exceeds "
                       f"{format_sig(MAX_SPREAD)}")
    return Limits(feasible=gbw_ok and spread_ok, reasons=tuple(reasons), gbw_needed_hz=needed,
                  spread=part_spread, q_sensitivity=q_sens,
                  noise_gain=noise_gain_at(section.f0_hz, fig.f0_hz, fig.q, ng),
                  opamps=opamps)


def closed_loop_bandwidth_hz(noise_gain: float, model: OpAmp) -> float:
    """-3 dB bandwidth of a flat gain stage with noise gain `noise_gain`, Hz.

    Parameters
    ----------
    noise_gain : float
        NG = 1/beta of the stage's loop, V/V.
    model : OpAmp
        Single-pole op-amp model (GBW and A0).

    Returns
    -------
    float
        GBW (1 + NG/A0) / NG ~= GBW/NG (Franco 2015, §6.2 [mem]): exact for
        A(s) = A0/(1 + s A0/wt), whose closed loop has its one pole there.
    """
    return model.gbw_hz * (1 + noise_gain / model.a0) / noise_gain


def gain_stage_gbw_needed_hz(noise_gain: float, max_freq_hz: float) -> float:
    """GBW keeping a flat stage's gain error within ``GAIN_ERROR_LIMIT`` up to `max_freq_hz`.

    Parameters
    ----------
    noise_gain : float
        NG, the stage's noise gain (V/V).
    max_freq_hz : float
        f_max, the highest frequency to pass (Hz).

    Returns
    -------
    float
        NG f_max / ``_GAIN_ERROR_BANDWIDTH_RATIO`` (about 7.02 NG f_max), Hz.
    """
    return noise_gain * max_freq_hz / _GAIN_ERROR_BANDWIDTH_RATIO


def gain_stage_limits(section: Section, model: OpAmp, *, kind: str, opamps: int,
                      design: Callable[[Section], dict[str, float]],
                      noise_gain: Callable[[Mapping[str, float]], float],
                      summary: Callable[[Mapping[str, float]], str],
                      max_freq_hz: float | None, note_unity: bool = False) -> Limits:
    """Limits of a flat gain stage, from its topology's functions.

    Parameters
    ----------
    section, model : Section, OpAmp
        The gain section and the op-amp model.
    kind, opamps : str, int
        The topology's KIND and OPAMPS.
    design : callable
        The topology's ``design(section)``.
    noise_gain : callable
        The topology's ``noise_gain(components)``.
    summary : callable
        parts -> the start of the first reason (the form and its ratio).
    max_freq_hz : float or None
        Highest signal frequency, Hz; None: ``gbw_needed_hz`` is 0 and a reason gives the
        need per hertz of f_max.
    note_unity : bool
        Add ``unity_note`` (for a stage that builds a near-unity gain as a follower).

    Returns
    -------
    Limits
        Infeasible for a section the stage cannot build, a resistor ratio above
        ``MAX_SPREAD`` or, with `max_freq_hz`, too little GBW (``gain_stage_gbw_needed_hz``).
        ``q_sensitivity`` is 0 (no Q).
    """
    problems = section_problems(section, kind=kind)
    if problems:
        return infeasible_limits(problems, opamps)
    parts = design(section)
    ng = noise_gain(parts)
    reasons = [f"{summary(parts)}; noise gain {format_sig(ng)}; bandwidth "
               f"{format_hz(closed_loop_bandwidth_hz(ng, model))}"]
    if note_unity:
        reasons += unity_note(section)
    ok = True
    if max_freq_hz is None:
        needed = 0.0
        reasons.append("GBW need set by the highest signal frequency (pass max_freq_hz): "
                       f"{format_sig(ng / _GAIN_ERROR_BANDWIDTH_RATIO)} x f_max")
    else:
        needed = gain_stage_gbw_needed_hz(ng, max_freq_hz)
        ok, text = gbw_reason(needed, model.gbw_hz,
                              f"gain error <= 1 % at {format_hz(max_freq_hz)}")
        reasons.append(text)
    part_spread = spread(parts)
    if part_spread > MAX_SPREAD:
        ok = False
        reasons.append(f"resistor ratio {format_sig(part_spread)} exceeds {format_sig(MAX_SPREAD)}")
    return Limits(feasible=ok, reasons=tuple(reasons), gbw_needed_hz=needed,
                  spread=part_spread, q_sensitivity=0.0, noise_gain=ng, opamps=opamps)
