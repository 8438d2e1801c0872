"""Topology by reasons: try every topology of a section's kind, keep why each lost."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.circuits import topologies_of_kind
from bandwright.circuits.base import Limits
from bandwright.circuits.elements import opamp_output_nets
from bandwright.circuits.nodal import ac_solve, drawn_impedance, input_impedance_min
from bandwright.circuits.realize import Realization, realize
from bandwright.errors import InfeasibleDesign
from bandwright.parts.notation import format_hz, format_value
from bandwright.parts.opamp import OpAmp
from bandwright.parts.windows import PartWindows, violations
from bandwright.sections.section import Section

__all__ = ["Assignment", "assign", "BUILT_F0_TOLERANCE", "BUILT_Q_TOLERANCE"]

# A built section must land this close to its target (rounded parts, finite GBW) before it
# counts as realised; the mask check then judges the whole chain.
BUILT_F0_TOLERANCE = 0.01
BUILT_Q_TOLERANCE = 0.05
BUILT_GAIN_TOLERANCE = 0.05


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
    """

    section: Section
    realization: Realization | None
    limits: Limits | None
    reason: str
    rejected: tuple[tuple[str, str], ...]
    window_notes: tuple[str, ...] = ()


def _weakest_output(elements, freq_hz) -> tuple[str, float] | None:
    """The op-amp output net inside a stage that sees the smallest load, and that load."""
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


def assign(section: Section, model: OpAmp, *, r_series: str = "E96", c_series: str = "E12",
           windows: PartWindows = PartWindows(),
           input_floor: tuple[np.ndarray, float] | None = None,
           source_ohms: float = 0.0, rounded: bool = True,
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
    """
    tolerances = {} if r_tolerance is None else {"r_tolerance": r_tolerance,
                                                 "c_tolerance": c_tolerance}
    rejected: list[tuple[str, str]] = []
    feasible = []
    for topo in topologies_of_kind(section.kind):
        # Each topology is asked for the gain with its own sign: an inverting circuit
        # realises -|G|; the chain's reference gain is a magnitude (docs/design.md).
        sign = -1.0 if getattr(topo, "INVERTING", False) else 1.0
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
    for topo, lim in feasible:
        try:
            real = realize(topo, section, model, r_series=r_series, c_series=c_series,
                           windows=windows, source_ohms=source_ohms, rounded=rounded)
        except (ValueError, InfeasibleDesign, np.linalg.LinAlgError) as exc:
            rejected.append((topo.NAME, f"could not be built: {exc}"))
            continue
        if input_floor is not None:
            z_in = input_impedance_min(real.elements, input_floor[0])
            if z_in < input_floor[1]:
                rejected.append((topo.NAME, f"its input impedance falls to "
                                 f"{format_value(z_in, 'Ω')}, below the "
                                 f"{format_value(input_floor[1], 'Ω')} the stage before can "
                                 f"drive"))
                continue
        if input_floor is not None:
            weak = _weakest_output(real.elements, input_floor[0])
            if weak is not None and weak[1] < model.min_load_ohms:
                rejected.append((topo.NAME, f"its own network loads {weak[0]} down to "
                                 f"{format_value(weak[1], 'Ω')}, below the op-amp's "
                                 f"{format_value(model.min_load_ohms, 'Ω')} minimum load"))
                continue
        df, dq, dg = real.errors()
        if abs(df) > BUILT_F0_TOLERANCE or abs(dq) > BUILT_Q_TOLERANCE or \
                abs(dg) > BUILT_GAIN_TOLERANCE:
            rejected.append((topo.NAME, f"built with series parts it lands {df:+.2%} in f0, "
                             f"{dq:+.2%} in Q, {dg:+.2%} in gain"))
            continue
        notes = tuple(violations(dict(real.components), windows))
        built.append((topo, lim, real, notes))
        if not notes:
            break
    if not built:
        why = "no topology of kind " + section.kind + " can build this section"
        return Assignment(section=section, realization=None, limits=None, reason=why,
                          rejected=tuple(rejected))
    clean = [b for b in built if not b[3]]
    topo, lim, real, notes = clean[0] if clean else built[0]
    for other in built:
        if other[0] is not topo:
            rejected.append((other[0].NAME, "parts fall outside the preferred windows"
                             if other[3] else "ranked below the chosen one"))
    names_done = {n for n, _ in rejected} | {topo.NAME}
    for t, l in feasible:
        if t.NAME not in names_done:
            rejected.append((t.NAME, f"feasible, but costlier: {l.opamps} op-amp(s), "
                             f"|S_Q| {l.q_sensitivity:.3g}, noise gain {l.noise_gain:.3g}"))
    reason = (f"{lim.opamps} op-amp(s), Q sensitivity {lim.q_sensitivity:.3g}, noise gain "
              f"{lim.noise_gain:.3g}; needs {format_hz(lim.gbw_needed_hz, significant=3)} "
              f"GBW, the op-amp has {format_hz(model.gbw_hz, significant=3)}")
    return Assignment(section=section, realization=real, limits=lim, reason=reason,
                      rejected=tuple(rejected), window_notes=notes)
