"""Topology by reasons: try every topology of a section's kind, keep why each lost."""

from __future__ import annotations

import inspect
import math
from dataclasses import dataclass, replace

import numpy as np

from bandwright.circuits import topologies_of_kind
from bandwright.circuits.base import Limits
from bandwright.circuits.elements import opamp_output_nets
from bandwright.circuits.nodal import ac_solve, drawn_impedance, input_impedance_min
from bandwright.circuits.realize import Realization, choose_capacitor, realize
from bandwright.errors import InfeasibleDesign
from bandwright.parts.notation import format_hz, format_si, format_sig, plural
from bandwright.parts.opamp import OpAmp
from bandwright.parts.windows import PartWindows, violations
from bandwright.sections.section import Section

__all__ = ["Assignment", "assign", "BUILT_F0_TOLERANCE", "BUILT_Q_TOLERANCE"]

# A built section must land this close to its target (rounded parts, finite GBW) before it
# counts as realised; the mask check then judges the whole chain.
BUILT_F0_TOLERANCE = 0.01
BUILT_Q_TOLERANCE = 0.05
BUILT_GAIN_TOLERANCE = 0.05
# The impedance level is a variable of each stage's design: a stage that loads its driver
# or its own op-amp, or whose parts leave their windows, is scaled (every R × k, every C ÷ k,
# which keeps f0, Q and gain) and built again. Impedances scale with k, so the factor that
# clears a rule is known; 1.2 keeps clear of the E12 step (about ±10 %) of the capacitor the
# level is rounded to. At most a decade either way: resistor noise power grows with k, and
# the noise rule judges the rest.
LEVEL_MAX = 10.0
_LEVEL_MARGIN = 1.2
_LEVEL_TRIES = 2
# A section built at its natural gain leaves at most 20 dB to a make-up gain stage: more
# would ask the gain stage for a closed-loop bandwidth of less than GBW/10 and multiply the
# section's own noise share; a halved-gain design of another topology is tried instead.
SHORTFALL_MAX = 10.0


@dataclass(frozen=True, slots=True)
class Assignment:
    """The topology chosen for one section, and why.

    Attributes
    ----------
    section : Section
    realization : Realization or None
        None when no topology can build the section.
    limits : Limits or None
        The chosen topology's limits.
    reason : str
        Why the chosen topology won (or why none could).
    rejected : tuple of (topology, reason)
        Every other topology of the kind, with the reason it lost.
    window_notes : tuple of str
        Parts outside the preferred windows (a `parts` warning).
    level : float
        Factor on the first impedance level the stage was built at (1: the first level).
    gain_shortfall : float
        Asked |gain| over the |gain| built (> 1 when the section runs at its topology's
        natural gain and a gain stage must make up the rest).
    """

    section: Section
    realization: Realization | None
    limits: Limits | None
    reason: str
    rejected: tuple[tuple[str, str], ...]
    window_notes: tuple[str, ...] = ()
    level: float = 1.0
    gain_shortfall: float = 1.0


def _weakest_output(elements, freq_hz, sol=None) -> tuple[str, float] | None:
    """The op-amp output net inside a stage that sees the smallest load, and that load;
    `sol`: the stage's ``ac_solve`` at `freq_hz` when already made."""
    if sol is None:
        sol = ac_solve(elements, np.asarray(freq_hz, dtype=float))
    worst = None
    for net in opamp_output_nets(elements):
        z = drawn_impedance(elements, sol, net)
        z = z[np.isfinite(z)]
        if z.size and (worst is None or z.min() < worst[1]):
            worst = (net, float(z.min()))
    return worst


def _rank(lim: Limits) -> tuple[float, float, float]:
    # Cheapest first: fewest op-amps, then lowest Q sensitivity, then lowest noise gain.
    # Sensitivities equal to two significant digits are a tie (0.5 against 0.5000001 is
    # rounding, not a reason), which the noise gain then decides.
    return (lim.opamps, float(f"{lim.q_sensitivity:.2g}"), lim.noise_gain)


def _level_problem(real: Realization, model: OpAmp,
                   input_floor: tuple[np.ndarray, float] | None) -> tuple[str, float] | None:
    """The first load rule `real` breaks, with the level factor that would clear it: its
    input below what the stage before drives, or its own network below the op-amp's
    minimum load (both scale with the impedance level). None when it breaks neither."""
    if input_floor is None:
        return None
    # One solve serves both rules (each reads the stage driven by an ideal source).
    sol = ac_solve(real.elements, np.asarray(input_floor[0], dtype=float))
    z_in = input_impedance_min(real.elements, input_floor[0], sol)
    if z_in < input_floor[1]:
        return (f"its input impedance falls to {format_si(z_in, 'Ω')}, below the "
                f"{format_si(input_floor[1], 'Ω')} the stage before can drive",
                input_floor[1] / z_in)
    weak = _weakest_output(real.elements, input_floor[0], sol)
    if weak is not None and weak[1] < model.min_load_ohms:
        return (f"its own network loads {weak[0]} down to {format_si(weak[1], 'Ω')}, "
                f"below the op-amp's {format_si(model.min_load_ohms, 'Ω')} minimum load",
                model.min_load_ohms / weak[1])
    return None


def _window_factor(components, windows: PartWindows) -> float | None:
    """The level factor that brings every part into its window, or None when none does
    (parts out on both sides) or none is needed."""
    up, down = 1.0, 1.0
    for name, v in components:
        if name.startswith("R"):
            up = max(up, windows.r_min_ohms / v)
            down = min(down, windows.r_max_ohms / v)
        elif name.startswith("C"):
            up = max(up, v / windows.c_max_farads)
            down = min(down, v / windows.c_min_farads)
    if up > 1.0 and down < 1.0:
        return None
    if up > 1.0:
        return up * 1.02  # just inside: the next series value up
    if down < 1.0:
        return down / 1.02
    return None


@dataclass(frozen=True, slots=True)
class _Look:
    components: tuple[tuple[str, float], ...]
    elements: tuple


def _look(topo, section: Section, model: OpAmp, level: float, *, c_series: str,
          windows: PartWindows) -> _Look:
    """The ideal design of `section` at impedance `level` (no predistortion, no rounding):
    enough to read its loads and part windows, which GBW predistortion hardly moves."""
    target = Section(kind=section.kind, f0_hz=section.f0_hz, q=section.q,
                     gain=abs(section.gain))
    c = choose_capacitor(topo, target, series=c_series, windows=windows, model=model,
                         level=level)
    values = topo.design(target, c_farads=c)
    return _Look(components=tuple((n, v) for n, v in values.items() if math.isfinite(v)),
                 elements=tuple(topo.elements(values, model)))


def _choose_level(build, topo, start: float, model: OpAmp,
                  input_floor: tuple[np.ndarray, float] | None, windows: PartWindows
                  ) -> tuple[float, tuple[str, float] | None]:
    """The impedance level to build `topo` at: `start`, or the level that clears a load
    rule (``_level_problem``) and then brings the parts into their windows, as far as
    ``LEVEL_MAX`` either way; with the load rule still broken there, if any. Looked at on
    the ideal design only (``_look``: the series search is the costly part, done once at
    the level chosen)."""
    level = start
    look = build(topo, level, exact=True)
    problem = _level_problem(look, model, input_floor)
    for _ in range(_LEVEL_TRIES if problem is not None else 0):
        new = level * problem[1] * _LEVEL_MARGIN
        if new > LEVEL_MAX:
            return level, problem
        level = new
        look = build(topo, level, exact=True)
        problem = _level_problem(look, model, input_floor)
        if problem is None:
            break
    if problem is not None:
        return level, problem
    notes = violations(dict(look.components), windows)
    factor = _window_factor(look.components, windows) if notes else None
    if factor is not None and 1 / LEVEL_MAX <= level * factor <= LEVEL_MAX:
        moved = build(topo, level * factor, exact=True)
        if _level_problem(moved, model, input_floor) is None and \
                len(violations(dict(moved.components), windows)) < len(notes):
            level *= factor
    return level, None


def _level_text(level: float) -> str:
    return f"impedance level ×{format_sig(level, 3)}"


def _natural_gain(topo, q: float) -> float:
    """The largest |centre gain| `topo` reaches at Q `q` (its ``natural_gain`` or
    ``NATURAL_GAIN``; infinite when it has no such limit)."""
    fn = getattr(topo, "natural_gain", None)
    if callable(fn):
        return float(fn(q))
    return float(getattr(topo, "NATURAL_GAIN", math.inf))


def _takes_shortfall(topo) -> bool:
    try:
        return "accept_gain_shortfall" in inspect.signature(topo.limits).parameters
    except (TypeError, ValueError):
        return False


def assign(section: Section, model: OpAmp, *, r_series: str = "E96", c_series: str = "E12",
           windows: PartWindows = PartWindows(),
           input_floor: tuple[np.ndarray, float] | None = None,
           source_ohms: float = 0.0, rounded: bool = True,
           accept_gain_shortfall: bool = False,
           only: frozenset[str] | None = None, level: float = 1.0,
           r_tolerance: float | None = None, c_tolerance: float | None = None) -> Assignment:
    """Choose the cheapest topology that really builds `section` with op-amp `model`.

    Every topology of the section's kind is asked for its limits (Q and gain reach, GBW
    needed, spread, sensitivity); the feasible ones are built in rank order (fewest op-amps,
    lowest Q sensitivity, lowest noise gain) and the first whose built f0, Q and gain land
    within 1 %, 5 % and 5 % of the target wins. A design inside the part windows is preferred
    to one outside them. With `input_floor` = (freq_hz, ohms), a design whose input
    impedance falls below `ohms` at those frequencies is rejected: the stage before it
    could not drive it. `r_tolerance` and `c_tolerance` (relative, 0.05 for 5 %) are the
    part tolerances a bandpass topology's Q-shift rule is judged at (None: the topology's
    default, 1 %); the planner passes the requirement's.

    The impedance level is part of each design: a topology that breaks a load rule (its
    input, its own network) or leaves the part windows at the first level is built again
    at the level that clears the rule (``LEVEL_MAX`` at most either way) before it is
    rejected.

    With `accept_gain_shortfall`, when no topology builds the section at its gain, a
    topology that reaches its Q but not its gain is built at its natural gain; the
    Assignment's ``gain_shortfall`` says how much a gain stage must make up. `only`
    restricts the topologies tried (by name); `level` is the first impedance level tried
    (a factor on ``realize.choose_capacitor``'s).
    """
    start = level
    tolerances = {} if r_tolerance is None else {"r_tolerance": r_tolerance,
                                                 "c_tolerance": c_tolerance}
    rejected: list[tuple[str, str]] = []
    feasible = []
    for topo in topologies_of_kind(section.kind):
        if only is not None and topo.NAME not in only:
            continue
        # Each topology is asked for the gain with its own sign: an inverting circuit
        # realises -|G|; the chain's reference gain is a magnitude (docs/design.md).
        sign = -1.0 if topo.INVERTING else 1.0
        signed = Section(kind=section.kind, f0_hz=section.f0_hz, q=section.q,
                         gain=sign * abs(section.gain))
        try:
            # Only the bandpass topologies have a tolerance rule (their Q-shift limit).
            lim = topo.limits(signed, model,
                              **(tolerances if section.kind == "bandpass" else {}))
        except (ValueError, InfeasibleDesign) as exc:
            rejected.append((topo.NAME, str(exc)))
            continue
        if lim.feasible:
            feasible.append((topo, lim))
        else:
            rejected.append((topo.NAME, "; ".join(lim.reasons) or "not feasible"))
    feasible.sort(key=lambda tl: _rank(tl[1]))
    built = []

    def build(topo, level, exact=False):
        if exact:
            return _look(topo, section, model, level, c_series=c_series, windows=windows)
        return realize(topo, section, model, r_series=r_series, c_series=c_series,
                       windows=windows, source_ohms=source_ohms, rounded=rounded,
                       level=level)

    for topo, lim in feasible:
        try:
            level, problem = _choose_level(build, topo, start, model, input_floor, windows)
            real = build(topo, level) if problem is None else None
        except (ValueError, InfeasibleDesign, np.linalg.LinAlgError) as exc:
            rejected.append((topo.NAME, f"could not be built: {exc}"))
            continue
        if problem is None:
            problem = _level_problem(real, model, input_floor)
        if problem is not None:
            rejected.append((topo.NAME, problem[0] + (f" (at {_level_text(level)}; at most "
                                                      f"×{format_sig(LEVEL_MAX)} is tried)"
                                                      if level != 1.0 else "")))
            continue
        df, dq, dg = real.errors()
        if abs(df) > BUILT_F0_TOLERANCE or abs(dq) > BUILT_Q_TOLERANCE or \
                abs(dg) > BUILT_GAIN_TOLERANCE:
            rejected.append((topo.NAME, f"built with series parts it lands {df:+.2%} in f0, "
                             f"{dq:+.2%} in Q, {dg:+.2%} in gain"))
            continue
        notes = tuple(violations(dict(real.components), windows))
        built.append((topo, lim, real, notes, level))
        if not notes:
            break
    if not built:
        if accept_gain_shortfall:
            short = _with_shortfall(section, model, rejected, r_series=r_series,
                                    c_series=c_series, windows=windows,
                                    input_floor=input_floor, source_ohms=source_ohms,
                                    rounded=rounded, only=only, r_tolerance=r_tolerance,
                                    c_tolerance=c_tolerance)
            if short is not None:
                return short
        why = "no topology of kind " + section.kind + " can build this section"
        return Assignment(section=section, realization=None, limits=None, reason=why,
                          rejected=tuple(rejected))
    clean = [b for b in built if not b[3]]
    topo, lim, real, notes, level = clean[0] if clean else built[0]
    for other in built:
        if other[0] is not topo:
            rejected.append((other[0].NAME, "parts fall outside the preferred windows"
                             if other[3] else "ranked below the chosen one"))
    names_done = {n for n, _ in rejected} | {topo.NAME}
    for t, l in feasible:
        if t.NAME not in names_done:
            rejected.append((t.NAME, f"feasible, but costlier: {plural(l.opamps, 'op-amp')}, "
                             f"Q sensitivity {format_sig(l.q_sensitivity, 3)}, "
                             f"noise gain {format_sig(l.noise_gain, 3)}"))
    reason = (f"{plural(lim.opamps, 'op-amp')}, Q sensitivity {format_sig(lim.q_sensitivity, 3)}, "
              f"noise gain {format_sig(lim.noise_gain, 3)}; needs {format_hz(lim.gbw_needed_hz, significant=3)} "
              f"GBW, the op-amp has {format_hz(model.gbw_hz, significant=3)}")
    if level != 1.0:
        reason += f"; built at {_level_text(level)} of the first level"
    return Assignment(section=section, realization=real, limits=lim, reason=reason,
                      rejected=tuple(rejected), window_notes=notes, level=level)


def _with_shortfall(section: Section, model: OpAmp, rejected: list[tuple[str, str]], *,
                    only: frozenset[str] | None, r_series: str, c_series: str,
                    windows: PartWindows, input_floor: tuple[np.ndarray, float] | None,
                    source_ohms: float, rounded: bool, r_tolerance: float | None = None,
                    c_tolerance: float | None = None) -> Assignment | None:
    """The cheapest topology that reaches `section`'s Q but not its gain, built at its
    natural gain (``assign`` with ``accept_gain_shortfall``); None when there is none."""
    offers = []
    for topo in topologies_of_kind(section.kind):
        if (only is not None and topo.NAME not in only) or not _takes_shortfall(topo):
            continue
        reach = _natural_gain(topo, section.q)
        if not reach < abs(section.gain) <= SHORTFALL_MAX * reach:
            continue
        sign = -1.0 if topo.INVERTING else 1.0
        try:
            lim = topo.limits(Section(kind=section.kind, f0_hz=section.f0_hz, q=section.q,
                                      gain=sign * abs(section.gain)), model,
                              accept_gain_shortfall=True,
                              **({} if r_tolerance is None else
                                 {"r_tolerance": r_tolerance, "c_tolerance": c_tolerance}))
        except (ValueError, InfeasibleDesign):
            continue
        if lim.feasible:
            offers.append((topo, lim, reach))
    offers.sort(key=lambda t: _rank(t[1]))
    for topo, lim, reach in offers:
        lower = Section(kind=section.kind, f0_hz=section.f0_hz, q=section.q, gain=reach)
        a = assign(lower, model, only=frozenset({topo.NAME}), r_series=r_series,
                   c_series=c_series, windows=windows, input_floor=input_floor,
                   source_ohms=source_ohms, rounded=rounded, r_tolerance=r_tolerance,
                   c_tolerance=c_tolerance)
        if a.realization is None:
            continue
        short_db = 20 * math.log10(abs(section.gain) / reach)
        others = [(n, r) for n, r in rejected if n != topo.NAME]
        return replace(a, rejected=tuple(others), gain_shortfall=abs(section.gain) / reach,
                       reason=(f"reaches Q {format_sig(section.q)} but not the gain: built at its "
                               f"natural gain {format_sig(reach)} V/V, {short_db:.2f} dB left to a "
                               f"gain stage; " + a.reason))
    return None
