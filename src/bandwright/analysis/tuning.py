"""A tuning plan: which resistor of each stage becomes a fixed part in series with a
trimmer, how large each is, and the ordered readings a technician sets them to.

Parts are chosen from the stage's own sensitivities (``analysis.sensitivity``): for f0,
then Q, then gain, the resistor that moves that figure most while leaving the figures
already set alone (so a later step never undoes an earlier one) and, among those, the one
that disturbs the figures still to come least. A topology whose figures do not separate
(a single-op-amp multiple-feedback section: every resistor moves f0 and Q together) gets an
f0 trim only; multi-op-amp sections (dual-amplifier, state-variable, Tow-Thomas) usually
get independent f0 and Q (and gain) trims.

Each trim's range covers the worst-case spread of its figure, Σ |S_x^y| t_x over every part
and the op-amp GBW (first order, Schoeffler 1964 [mem]) plus what the earlier trims' travel
moves it, with a margin; the trimmer is the smallest 1-2-5 value (100, 200, 500, 1k, ...:
common practice) that gives that range, so its resolution is no coarser than needed.

References
----------
.. [1] J. D. Schoeffler, "The synthesis of minimum sensitivity networks", IEEE Trans.
   Circuit Theory CT-11, 1964 -- first-order spread from sensitivities [mem].
.. [2] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*, Oxford UP, 2001,
   ch. 3 and 6 -- tuning of cascaded sections, f0 before Q [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from bandwright.analysis.montecarlo.sampling import Spreads
from bandwright.analysis.sensitivity import GBW, StageSensitivity, stage_sensitivity
from bandwright.chain.graph import CHAIN_INPUT, Chain
from bandwright.chain.stage import Stage
from bandwright.circuits import topology
from bandwright.parts.eseries import bracket
from bandwright.parts.notation import format_fixed, format_hz, format_sig

__all__ = ["TrimStep", "TuningPlan", "plan_tuning", "plan_from_trims", "trimmer_values", "trimmer_name",
           "TRIM_MARGIN", "TRIMMER_RESOLUTION", "FIGURES", "stage_nets"]

#: The figures a trim adjusts, in the order they are set within a stage.
FIGURES = ("f0", "q", "gain")
#: Range margin over the worst-case spread (a trim that only just covers the worst case
#: leaves the technician no room: common practice).
TRIM_MARGIN = 1.5
#: Settability of a multi-turn trimmer, as a share of its travel (a 25-turn part set to
#: about an eighth of a turn: common practice [mem]).
TRIMMER_RESOLUTION = 5e-4
# A part may trim a figure only when it moves it by at least this much per unit of its
# own relative change, and moves each figure already set by at most _UNDO of that.
_MIN_S = 0.2
_UNDO = 0.05
# A Q or gain trim is added only when that figure's worst-case spread exceeds this share
# (a trim for a figure the parts already hold is a part to buy and a step to take).
_MIN_SPREAD = 5e-3
# Largest relative half-travel: the trimmer (2 d R) stays no larger than its fixed part
# (R (1 - d)).
_MAX_TRAVEL = 1 / 3


@dataclass(frozen=True, slots=True)
class TrimStep:
    """One step of the procedure.

    Attributes
    ----------
    stage : int
        Stage position.
    part : str
        The trimmer's name in the stage ("R2T"); the deck names it ``<part>_s<stage>``.
    trims : str
        The stage part it replaces: a fixed resistor of that name in series with the
        trimmer.
    net_in, net_out : str
        The deck's nets the reading is taken between (the generator drives `net_in`).
    adjusts : {"f0", "q", "gain"}
    fixed_ohms, trimmer_ohms : float
        The fixed resistor and the trimmer's end-to-end value.
    target : float
        f0 in Hz, Q, or |gain| in V/V at the peak.
    reading : str
        What the technician sets it to, in words.
    sensitivity : float
        S of the figure to the trimmed part's total value.
    design_ohms : float
        The part's value as designed (inside fixed … fixed + trimmer).
    why : str
        Why this part and this order.
    """

    stage: int
    part: str
    trims: str
    net_in: str
    net_out: str
    adjusts: str
    fixed_ohms: float
    trimmer_ohms: float
    target: float
    reading: str
    sensitivity: float
    design_ohms: float
    why: str = ""

    @property
    def target_key(self) -> str:
        """The JSON key of `target`: "f0_hz", "q" or "gain"."""
        return {"f0": "f0_hz", "q": "q", "gain": "gain"}[self.adjusts]

    @property
    def span_rel(self) -> tuple[float, float]:
        """The travel as relative changes of the designed value (low end, high end)."""
        return (self.fixed_ohms / self.design_ohms - 1,
                (self.fixed_ohms + self.trimmer_ohms) / self.design_ohms - 1)


@dataclass(frozen=True, slots=True)
class TuningPlan:
    """Every trim of a chain, in the order they are set.

    Attributes
    ----------
    steps : tuple of TrimStep
    reason : str
        Why the chain is trimmed (or why not).
    untrimmable : tuple of str
        Figures of a stage no part can set without undoing one already set, in words
        ("stage 2 (dual_amp_bandpass): gain"): their spread stays after tuning.
    """

    steps: tuple[TrimStep, ...]
    reason: str = ""
    untrimmable: tuple[str, ...] = ()

    def of_stage(self, position: int) -> tuple[TrimStep, ...]:
        return tuple(s for s in self.steps if s.stage == position)


def trimmer_name(part: str) -> str:
    """The trimmer in series with `part`: "R2" -> "R2T"."""
    return f"{part}T"


def trimmer_values(limit_ohms: float) -> float:
    """The smallest 1-2-5 trimmer value at or above `limit_ohms` (common practice: trimmers
    come in 100, 200, 500, 1k, 2k, 5k, ...)."""
    if not limit_ohms > 0:
        raise ValueError(f"need a positive value; got {limit_ohms}")
    decade = 10.0 ** math.floor(math.log10(limit_ohms))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * decade >= limit_ohms * (1 - 1e-12):
            return m * decade
    return 10 * decade


def _largest_125(limit_ohms: float) -> float:
    """The largest 1-2-5 trimmer value at or below `limit_ohms`."""
    v = trimmer_values(limit_ohms)
    if v <= limit_ohms * (1 + 1e-12):
        return v
    decade = 10.0 ** math.floor(math.log10(v) - 1e-12)
    steps = [m * decade for m in (0.5, 1.0, 2.0, 5.0)]
    return max(x for x in steps if x <= limit_ohms * (1 + 1e-12))


def stage_nets(chain: Chain, stage: Stage) -> tuple[str, str]:
    """The deck's nets a stage's reading is taken between: the op-amp output before it (or
    the source ahead of the source resistance, for the first stage), and its output."""
    inp = chain.input_of(stage)
    out = next(b for a, b, d in chain.graph.out_edges(inp, data=True)
               if d["stage"] is stage and d["local"] == "out")
    if inp == CHAIN_INPUT and chain.source_ohms > 0:
        inp = "src"
    return inp, out


def _part_tol(stage: Stage, part: str, spreads: Spreads) -> float:
    if part == GBW:
        return spreads.gbw_spread_pct / 100
    kind = next(e.kind for e in stage.elements if e.name == part)
    return (spreads.resistor_pct if kind == "R" else spreads.capacitor_pct) / 100


def _choose(sens: StageSensitivity, figure: str, done: list[str], used: set[str],
            resistors: set[str]) -> str | None:
    i = FIGURES.index(figure)
    rows = {"f0": sens.f0, "q": sens.q, "gain": sens.gain}
    best, best_key = None, None
    for k, part in enumerate(sens.parts):
        if part not in resistors or part in used:
            continue
        s = abs(rows[figure][k])
        if not s >= _MIN_S:
            continue
        if any(abs(rows[f][k]) > _UNDO * s for f in done):
            continue
        later = sum(abs(rows[f][k]) for f in FIGURES[i + 1:])
        key = (later / s, -s)
        if best_key is None or key < best_key:
            best, best_key = part, key
    return best


def _reading(adjusts: str, net_in: str, net_out: str, target: float, inverting: bool) -> str:
    if adjusts == "f0":
        phase = "180°" if inverting else "0°"
        return (f"peak of {net_out}/{net_in} at {format_hz(target, significant=7)} "
                f"(the phase of {net_out} against {net_in} passes {phase} there)")
    if adjusts == "q":
        return f"−3 dB width {format_hz(target)}"
    return f"gain {format_sig(target)} V/V at the peak"


def plan_tuning(chain: Chain, spreads: Spreads, *, resistor_series: str,
                targets: dict[int, tuple[float, float, float]] | None = None) -> TuningPlan:
    """Choose the trims of every bandpass stage of `chain` and their order.

    Parameters
    ----------
    chain : Chain
        The chain as built.
    spreads : Spreads
        The tolerances the trims must cover.
    resistor_series : str
        Series of the fixed resistors.
    targets : dict of int to (f0_hz, q, gain), optional
        Per stage position, the figures to tune to (default: the stage's built figures).

    Returns
    -------
    TuningPlan
        Stages in chain order; within a stage f0, then Q, then gain.

    Notes
    -----
    Worst-case spread of figure y before its trim: sum_x |S_x^y| t_x over the parts, the
    GBW, and each earlier trim of the stage at the edge of its travel ([1]_, first order).
    The trimmed part must move by ±d = margin · spread / |S| plus its own tolerance; the
    trimmer is the smallest 1-2-5 value of at least 2 d R, the fixed part the largest series
    value at or below R (1 - d), stepped up a trimmer size if the top of travel falls short.
    """
    steps: list[TrimStep] = []
    untrimmable: list[str] = []
    for st in chain.stages:
        if st.kind != "bandpass":
            continue
        inverting = bool(topology(st.topology).INVERTING)
        sens = stage_sensitivity(st)
        resistors = {e.name for e in st.elements if e.kind == "R"}
        values = {e.name: e.value for e in st.elements}
        tol = {p: _part_tol(st, p, spreads) for p in sens.parts}
        rows = {"f0": sens.f0, "q": sens.q, "gain": sens.gain}
        built = {"f0": st.built.f0_hz, "q": st.built.q, "gain": abs(st.built.gain)}
        if targets and st.position in targets:
            built = dict(zip(FIGURES, targets[st.position]))
        net_in, net_out = stage_nets(chain, st)
        done: list[str] = []
        used: set[str] = set()
        travel: dict[str, float] = {}   # trimmed part -> relative half-travel
        for figure in FIGURES:
            part = _choose(sens, figure, done, used, resistors)
            spread = sum(abs(v) * tol[p] for p, v in zip(sens.parts, rows[figure])
                         if p not in used and p != part and math.isfinite(v))
            spread += sum(abs(rows[figure][sens.parts.index(p)]) * d for p, d in travel.items())
            if part is None:
                if spread >= _MIN_SPREAD:
                    untrimmable.append(f"stage {st.position} ({st.topology}): {figure} "
                                       f"(±{format_sig(100 * spread, 2)} % worst case)")
                continue
            k = sens.parts.index(part)
            s = rows[figure][k]
            if figure != "f0" and spread < _MIN_SPREAD:
                continue
            need = TRIM_MARGIN * spread / abs(s) + tol[part]
            # A trimmer no larger than the fixed part it is in series with (2 d <= 1 - d):
            # beyond that the trim is a different circuit, and its range falls short.
            d = min(need, _MAX_TRAVEL)
            r = values[part]
            trimmer = trimmer_values(2 * d * r)
            fixed = bracket(r * (1 - d), resistor_series)[0]
            while fixed + trimmer < r * (1 + d):
                trimmer = trimmer_values(trimmer * 1.01)
            if trimmer > fixed:
                # The range needed does not fit a trimmer no larger than its fixed part: the
                # largest that does, its travel centred on the designed value.
                trimmer = _largest_125(0.98 * 2 * r / 3)
                fixed = bracket(r - trimmer / 2, resistor_series)[0]
                d = min(1 - fixed / r, (fixed + trimmer) / r - 1)
            # What the trim moves on the worst board: the range it needs, not the rounded
            # travel of the part bought.
            travel[part] = d
            why = (f"moves {figure} by {format_fixed(s, 2, sign=True)} % per % of {part}"
                   + (f", {' and '.join(done)} by less than {format_sig(100 * _UNDO)} % of that"
                      if done else "")
                   + f"; covers ±{format_sig(100 * spread * TRIM_MARGIN, 2)} % of {figure} "
                     f"(worst case ±{format_sig(100 * spread, 2)} %, ×{format_sig(TRIM_MARGIN)})")
            if need > d:
                why += (f"; the range needed (±{format_sig(100 * need, 3)} % of {part}) would take "
                        f"a trimmer larger than the fixed part: it covers "
                        f"±{format_sig(100 * d, 3)} % only")
            steps.append(TrimStep(
                stage=st.position, part=trimmer_name(part), trims=part, net_in=net_in,
                net_out=net_out, adjusts=figure, fixed_ohms=float(fixed),
                trimmer_ohms=float(trimmer), target=float(built[figure]),
                reading=_reading(figure, net_in, net_out,
                                 built["f0"] / built["q"] if figure == "q" else built[figure],
                                 inverting),
                sensitivity=float(s), design_ohms=float(r), why=why))
            done.append(figure)
            used.add(part)
    return TuningPlan(steps=tuple(steps), untrimmable=tuple(untrimmable))


def plan_from_trims(chain: Chain, trims: dict[int, dict[str, tuple[float, float]]]
                    ) -> TuningPlan:
    """The procedure for trims someone else chose (an audit's ``trim`` tables).

    Parameters
    ----------
    chain : Chain
    trims : dict of int to dict of str to (fixed_ohms, trimmer_ohms)
        Per stage position, each trimmed part's fixed resistor and trimmer.

    Returns
    -------
    TuningPlan
        Per stage, the trims ordered f0, Q, gain: each figure goes to the given trim that
        moves it most relative to the figures already set (``plan_tuning``'s rule without
        its thresholds: the parts are given), the target being the stage's figures with its
        parts as written.
    """
    steps: list[TrimStep] = []
    for st in chain.stages:
        mine = dict(trims.get(st.position, {}))
        if not mine or st.kind != "bandpass":
            continue
        inverting = bool(topology(st.topology).INVERTING)
        sens = stage_sensitivity(st)
        rows = {"f0": sens.f0, "q": sens.q, "gain": sens.gain}
        built = {"f0": st.built.f0_hz, "q": st.built.q, "gain": abs(st.built.gain)}
        values = {e.name: e.value for e in st.elements}
        net_in, net_out = stage_nets(chain, st)
        done: list[str] = []
        for figure in FIGURES:
            if not mine:
                break

            def score(part: str) -> float:
                k = sens.parts.index(part)
                undo = sum(abs(rows[f][k]) for f in done)
                return abs(rows[figure][k]) / (1e-9 + undo)
            part = max(mine, key=score)
            if abs(rows[figure][sens.parts.index(part)]) < _MIN_S and figure != "f0":
                continue
            fixed, trimmer = mine.pop(part)
            s = rows[figure][sens.parts.index(part)]
            steps.append(TrimStep(
                stage=st.position, part=trimmer_name(part), trims=part, net_in=net_in,
                net_out=net_out, adjusts=figure, fixed_ohms=float(fixed),
                trimmer_ohms=float(trimmer), target=float(built[figure]),
                reading=_reading(figure, net_in, net_out,
                                 built["f0"] / built["q"] if figure == "q" else built[figure],
                                 inverting),
                sensitivity=float(s), design_ohms=float(values[part]),
                why=f"given in the chain file; moves {figure} by {format_fixed(s, 2, sign=True)} "
                    f"% per % of {part}"))
            done.append(figure)
    return TuningPlan(steps=tuple(steps))
