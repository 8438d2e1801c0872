"""From a section to a built circuit: impedance level, GBW predistortion, series rounding.

Every figure here is read from the element list by ``figures.section_figures`` (the poles
of the solved transfer, op-amp model included), never from a topology's own formulas, so
the built figures include finite GBW and rounded parts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from types import ModuleType
from typing import Mapping

import numpy as np

from bandwright.circuits.base import Figures
from bandwright.circuits.elements import Element
from bandwright.circuits.figures import (polynomial_degree, section_figures,
                                        section_figures_batch, section_poles_rad_s)
from bandwright.circuits.nodal import BOLTZMANN_J_PER_K, KELVIN_OFFSET, passive_names
from bandwright.circuits.rules import edge_residuals
from bandwright.errors import InfeasibleDesign
from bandwright.parts.eseries import nearest, neighbours
from bandwright.parts.opamp import OpAmp
from bandwright.parts.windows import PartWindows, impedance_scale
from bandwright.sections.section import Section

__all__ = ["Realization", "realize", "figure_error", "choose_capacitor", "predistort",
           "impedance_target_ohms",
           "round_to_series"]

# The design equations are run at 1 nF and then scaled: any value would do, this one is mid-window.
_REFERENCE_C_FARADS = 1e-9
# Predistortion converges in a few steps while f0/GBW is small; more only where it will not.
_PREDISTORT_STEPS = 12
# Grid sweeps per block: each recentres on the last best point; the error stops falling sooner.
_SEARCH_SWEEPS = 4
# A gain error under 0.1 % is left alone (see ``predistort``).
_GAIN_DEADBAND = 1e-3
# Gauss-Newton iterations for the exact resistors: quadratic convergence needs far fewer.
_SOLVE_STEPS = 20
# ±1 series step per part: the grid of a section too large for ±2 steps.
_NARROW_NEIGHBOURS = 1
_GRID_MAX = 729  # 3^6: every ±1 combination of a six-part section
_WIDE_GRID_MAX = 625  # 5^4: every ±2 combination of a four-part section
# Parts moved at once when a section is too large for one ±1 grid (3^5 = 243 points).
_BLOCK = 5
# Each capacitor's starts: its nearest series value and one step either side (the coarse
# capacitor series leaves the resistors to absorb the rest).
_CAP_NEIGHBOURS = 1
# Best solved capacitor combinations that are rounded: which rounds best shows only after.
_CAP_STARTS = 3
# A rounded design this close (about 0.03 dB at the band edge) needs no second search.
_GOOD_ENOUGH = 1.5e-5
_NEIGHBOURS = 2  # ±2 series steps per part where the grid stays within _WIDE_GRID_MAX
# Predistortion stops once every figure is this close (relative): far below any part tolerance.
_PREDISTORT_TOL = 1e-7
# Finite-difference step in log R: about the square root of the solver's own rounding, so the
# Jacobian's truncation and rounding errors are of one size.
_FD_STEP = 1e-5
# Largest Gauss-Newton step in log R (a factor e^0.5 ≈ 1.65): keeps each step where the
# linearisation still holds.
_MAX_LOG_STEP = 0.5
# A step this small in log R (a part-per-billion change of a resistor) has converged.
_STEP_TOL = 1e-9
# A grid point must beat the best by more than rounding to count as better.
_IMPROVEMENT_TOL = 1e-15
# No resistor below this many times the op-amp's minimum load: any may hang on an output.
_MIN_LOAD_FACTOR = 4
# The series grid search reads figures from the wiring's cached monomial expansion where it
# can be expanded (one matrix multiply per batch; ties broken by ``_tie_break``, not by
# rounding). The continuous resistor solve stays on the
# determinant path: several capacitor starts solve to errors at rounding level, and their
# ranking (which ones are rounded) is decided by that rounding; reported figures stay too.
_SEARCH_METHOD = "auto"
# Poles from which the grid search polishes each point's roots from the start's (fewer:
# companion eigenvalues, as quick for three).
_POLISH_FROM_POLES = 4
# Errors this close count as a tie (rounding of a figure_error near 1e-6 is about 1e-22).
_TIE_REL = 1e-9
_TIE_ABS = 1e-20
# A gain stage has no f0: its figures are read at this frequency (far below any GBW).
_GAIN_STAGE_NEAR_HZ = 1.0


@dataclass(frozen=True, slots=True)
class Realization:
    """One section built with one topology.

    Attributes
    ----------
    topology : str
    target : Section
        What the section must do (gain as a magnitude; the sign is the topology's).
    predistorted : Section
        The target handed to the design equations so that the op-amp's finite GBW lands
        the circuit on `target`.
    ideal_components : tuple of (name, value)
        Exact values of the predistorted design.
    components : tuple of (name, value)
        Values rounded to the series, as built.
    elements : tuple of Element
        The built element list.
    ideal : Figures
        f0, Q, gain of the exact-valued design with this op-amp.
    built : Figures
        f0, Q, gain of the rounded design with this op-amp.
    source_ohms : float
        Source resistance the design absorbed (first stage only), ohms.
    """

    topology: str
    target: Section
    predistorted: Section
    ideal_components: tuple[tuple[str, float], ...]
    components: tuple[tuple[str, float], ...]
    elements: tuple[Element, ...]
    ideal: Figures
    built: Figures
    source_ohms: float = 0.0

    def errors(self) -> tuple[float, float, float]:
        """Relative built error of f0, Q and |gain| against the target."""
        return _relative(self.built, self.target)


def _relative(fig: Figures, target: Section) -> tuple[float, float, float]:
    if target.kind == "gain":
        return 0.0, 0.0, abs(fig.gain) / abs(target.gain) - 1
    return (fig.f0_hz / target.f0_hz - 1, fig.q / target.q - 1,
            abs(fig.gain) / abs(target.gain) - 1)


def figure_error(fig: Figures, target: Section) -> float:
    """Weighted squared error of a section's figures, in (dB / 8.686)².

    Notes
    -----
    The squared norm of ``rules.edge_residuals``: each relative error weighted by the dB
    it costs at the band edge, the f0 term by max(Q, 2) (``circuits.rules``,
    "Section-error weighting"; docs/methods.md, "Tolerance").
    """
    return float(_error_batch(np.array([fig.f0_hz]), np.array([fig.q]), np.array([fig.gain]),
                              target)[0])


def _figures(topo: ModuleType, components: Mapping[str, float], model: OpAmp,
             target: Section, source_ohms: float = 0.0) -> tuple[tuple[Element, ...], Figures]:
    elements = tuple(topo.elements(components, model))
    near = target.f0_hz if target.kind != "gain" else _GAIN_STAGE_NEAR_HZ
    return elements, section_figures(elements, kind=target.kind, near_hz=near,
                                     source_ohms=source_ohms)


def impedance_target_ohms(model: OpAmp | None, windows: PartWindows,
                          temperature_c: float = 25.0) -> float | None:
    """The resistance level at which a stage's resistors stop adding much noise.

    Notes
    -----
    A resistor R adds 4kTR of its own and i_n·R of the op-amp's current noise; both stay
    below the op-amp's own voltage noise e_n while R < e_n²/(4kT) and R < e_n/i_n
    (Motchenbacher & Connelly, *Low-Noise Electronic System Design*, 1993, ch. 2 [mem]). Lower
    still only loads the op-amps (``choose_capacitor`` keeps every resistor above four
    times the op-amp's minimum load). None without a noise model.
    """
    if model is None or not model.noise_v_per_rthz > 0:
        return None
    kt4 = 4 * BOLTZMANN_J_PER_K * (temperature_c + KELVIN_OFFSET)
    r = model.noise_v_per_rthz**2 / kt4
    if model.noise_a_per_rthz > 0:
        r = min(r, model.noise_v_per_rthz / model.noise_a_per_rthz)
    return max(r, windows.r_min_ohms)


def choose_capacitor(topo: ModuleType, section: Section, *, series: str,
                     windows: PartWindows, model: OpAmp | None = None,
                     level: float = 1.0) -> float:
    """A series capacitor value that sets the stage's impedance level.

    Impedance scaling (R·k, C/k) leaves f0, Q and gain unchanged (Schaumann & Van
    Valkenburg 2001, §6 [mem]). With an op-amp model the resistors' geometric mean is put
    at ``impedance_target_ohms`` (where they stop adding much noise), as far as every part
    stays inside its window; otherwise the resistors are centred in their window. `level`
    multiplies that first impedance level (a stage that loads its op-amp at the first level
    is tried higher); the value is rounded to the capacitor series and kept inside the
    capacitor window.
    """
    if not any(p.startswith("C") for p in topo.PARTS):
        return _REFERENCE_C_FARADS
    values = topo.design(section, c_farads=_REFERENCE_C_FARADS)
    k = impedance_scale(values, windows)
    target = impedance_target_ohms(model, windows)
    r = np.array([v for n, v in values.items() if n.startswith("R")])
    c = np.array([v for n, v in values.items() if n.startswith("C")])
    if target is not None and r.size and c.size:
        floor = max(windows.r_min_ohms, _MIN_LOAD_FACTOR * model.min_load_ohms)
        k_lo = max(floor / r.min(), c.max() / windows.c_max_farads)
        k_hi = min(windows.r_max_ohms / r.max(), c.min() / windows.c_min_farads)
        if k_lo <= k_hi:
            k = float(np.clip(target / np.exp(np.mean(np.log(r))), k_lo, k_hi))
    cap = float(np.clip(_REFERENCE_C_FARADS / (k * level), windows.c_min_farads,
                        windows.c_max_farads))
    return float(nearest(cap, series))


def predistort(topo: ModuleType, target: Section, model: OpAmp, *, c_farads: float,
               source_ohms: float = 0.0) -> tuple[Section, dict[str, float]]:
    """Design targets that land the circuit on `target` with this op-amp.

    A fixed-point iteration: design for f0', Q', G'; read the circuit's f0, Q, G from its
    poles; scale f0', Q', G' by target/actual; repeat. Converges in a few steps while the
    GBW error is small (it is first order in f0/GBW: Franco 2015, §6 [mem]); stops early when
    the design equations refuse a predistorted target.
    """
    asked = target
    values = topo.design(asked, c_farads=c_farads)
    for _ in range(_PREDISTORT_STEPS):
        _, fig = _figures(topo, values, model, target, source_ohms)
        df, dq, dg = _relative(fig, target)
        if max(abs(df), abs(dq), abs(dg) if abs(dg) > _GAIN_DEADBAND else 0.0) < _PREDISTORT_TOL \
                or fig.q <= 0:
            break
        # A built figure of zero (an open-loop gain near 1, a source of 1 TΩ) or worse has
        # no ratio to scale by: keep the last design and let the checks report it.
        if not all(math.isfinite(d) and d > -1 for d in (df, dq, dg)):
            break
        # A gain error under 0.1 % is left alone: chasing the 1/A0 error of a follower
        # would ask for a 1e-5 gain resistor ratio.
        new = Section(kind=target.kind, f0_hz=asked.f0_hz / (1 + df) if target.f0_hz else 0.0,
                      q=asked.q / (1 + dq) if target.q else 0.0,
                      gain=abs(asked.gain) / (1 + dg) if abs(dg) > _GAIN_DEADBAND
                      else abs(asked.gain))
        try:
            new_values = topo.design(new, c_farads=c_farads)
        except (ValueError, InfeasibleDesign):
            break
        asked, values = new, new_values
    return asked, dict(values)


def _series_of(name: str, r_series: str, c_series: str) -> str:
    return c_series if name.startswith("C") else r_series


def _error_batch(f0_hz, q, gain, target: Section) -> np.ndarray:
    """``figure_error`` for arrays of figures (NaN and unstable samples → inf)."""
    with np.errstate(invalid="ignore", over="ignore"):
        e = np.sum(_residuals(f0_hz, q, gain, target) ** 2, axis=-1)
    if target.kind != "gain":
        e = np.where(np.asarray(q) > 0, e, np.inf)
    return np.where(np.isfinite(e), e, np.inf)


def _residuals(f0_hz, q, gain, target: Section) -> np.ndarray:
    """Per-sample residual vectors whose squared norm is `figure_error`, shape (S, 3)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        g = np.abs(gain) / abs(target.gain) - 1
        if target.kind == "gain":
            return np.stack([np.zeros_like(g), np.zeros_like(g), g], axis=-1)
        return edge_residuals(f0_hz / target.f0_hz - 1, q / target.q - 1, g, target.q)


def solve_resistors(elements: tuple[Element, ...], starts: np.ndarray, target: Section,
                    source_ohms: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Resistor values (continuous) that best land `target`, for each row of `starts`.

    Parameters
    ----------
    elements : tuple of Element
    starts : ndarray, shape (K, P)
        Part values in ``passive_names(elements)`` order; capacitors stay as given.
    target : Section

    Returns
    -------
    values : ndarray, shape (K, P)
    error : ndarray, shape (K,)
        ``figure_error`` of each solution.

    Notes
    -----
    Gauss-Newton on log R with a finite-difference Jacobian, every start and every probe
    evaluated in one batch (``section_figures_batch``); minimum-norm steps keep the
    resistors near their start when they have more freedom than the figures need.
    """
    names = passive_names(elements)
    free = np.flatnonzero([n.startswith("R") for n in names])
    x = np.log(np.asarray(starts, dtype=float))
    k_count, n_free = x.shape[0], free.size
    near = target.f0_hz if target.kind != "gain" else _GAIN_STAGE_NEAR_HZ
    h = _FD_STEP
    for _ in range(_SOLVE_STEPS if n_free else 0):
        probes = np.repeat(x[:, None, :], 1 + n_free, axis=1)       # (K, 1+F, P)
        probes[:, np.arange(1, n_free + 1), free] += h
        f0, q, g = section_figures_batch(elements, kind=target.kind, near_hz=near,
                                         values=np.exp(probes.reshape(-1, x.shape[1])),
                                         source_ohms=source_ohms)
        r = _residuals(f0, q, g, target).reshape(k_count, 1 + n_free, 3)
        jac = np.swapaxes(r[:, 1:] - r[:, :1], 1, 2) / h             # (K, 3, F)
        ok = np.all(np.isfinite(r), axis=(1, 2))
        jac = np.where(ok[:, None, None], jac, 0.0)
        rhs = np.where(ok[:, None], -r[:, 0], 0.0)
        step = np.linalg.pinv(jac) @ rhs[..., None]
        step = np.clip(step[..., 0], -_MAX_LOG_STEP, _MAX_LOG_STEP)
        x[:, free] += step
        if np.max(np.abs(step)) < _STEP_TOL:
            break
    vals = np.exp(x)
    f0, q, g = section_figures_batch(elements, kind=target.kind, near_hz=near, values=vals,
                                     source_ohms=source_ohms)
    return vals, _error_batch(f0, q, g, target)


def _tie_break(err: np.ndarray, grid: np.ndarray, anchor: np.ndarray) -> int:
    """Index of the least error; among points that tie with it to rounding, the one
    nearest (in log distance) the exact values `anchor`.

    Figures that depend only on a ratio tie exactly for every pair of equal parts (a gain
    stage's Rf = Rg, say); without this the last bits of the arithmetic would choose.
    """
    least = float(np.min(err))
    if not math.isfinite(least):
        return int(np.argmin(err))
    ties = np.flatnonzero(err <= least * (1 + _TIE_REL) + _TIE_ABS)
    if ties.size == 1:
        return int(ties[0])
    dist = np.sum((np.log(grid[ties]) - anchor) ** 2, axis=-1)
    return int(ties[np.argmin(dist)])


def _grid_search(elements: tuple[Element, ...], start: Mapping[str, float], target: Section,
                 series_of, movable, source_ohms: float = 0.0) -> tuple[dict[str, float], float]:
    """Best combination of series values around `start` (rounded) for the parts in
    `movable`.

    Every combination of each moving part's neighbouring values is evaluated in one batch:
    ±2 steps while that stays within ``_WIDE_GRID_MAX`` points, else ±1 within
    ``_GRID_MAX``; a section with more
    parts than a ±1 grid allows is searched block by block (``_BLOCK`` parts at a time, the
    others held), sweeping while the error falls.
    """
    names = passive_names(elements)
    anchor = np.log([float(start[n]) for n in names])
    current = {n: float(nearest(start[n], series_of(n))) for n in names}
    moving = [n for n in names if movable(n)]
    steps = _NEIGHBOURS if (2 * _NEIGHBOURS + 1) ** len(moving) <= _WIDE_GRID_MAX \
        else _NARROW_NEIGHBOURS
    blocks = [moving] if (2 * _NARROW_NEIGHBOURS + 1) ** len(moving) <= _GRID_MAX else \
        [moving[i:i + _BLOCK] for i in range(0, len(moving), _BLOCK)]
    near = target.f0_hz if target.kind != "gain" else _GAIN_STAGE_NEAR_HZ
    best_err = math.inf
    seen: dict[bytes, float] = {}  # a recentred grid shares most of its points
    # Every grid point lies a few series steps from the start: its poles, polished from the
    # start's, cost a few multiply-adds instead of an eigenvalue problem each. That pays
    # from four poles on (a multi-amplifier section); three are as quick by eigenvalues.
    seed = section_poles_rad_s(elements, values=np.array([current[n] for n in names]),
                               source_ohms=source_ohms) \
        if polynomial_degree(elements) >= _POLISH_FROM_POLES else None
    for _ in range(_SEARCH_SWEEPS * len(blocks)):
        improved = False
        for block in blocks:
            axes = [neighbours(current[n], series_of(n), count=steps) if n in block
                    else np.array([current[n]]) for n in names]
            grid = np.stack([a.ravel() for a in np.meshgrid(*axes, indexing="ij")], axis=-1)
            # Each row's bytes, in one call (a row's ``tobytes``, row by row, cost more
            # than the rest of the bookkeeping).
            keys = np.ascontiguousarray(grid).view(np.dtype((np.void, grid.itemsize
                                                              * grid.shape[1]))).ravel().tolist()
            new = np.array([k not in seen for k in keys])
            if new.any():
                f0, q, g = section_figures_batch(elements, kind=target.kind, near_hz=near,
                                                 values=grid[new], source_ohms=source_ohms,
                                                 method=_SEARCH_METHOD, start_rad_s=seed)
                seen.update(zip([k for k, n in zip(keys, new) if n],
                                _error_batch(f0, q, g, target).tolist()))
            err = np.array([seen[k] for k in keys])
            k = _tie_break(err, grid, anchor)
            if err[k] < best_err - _IMPROVEMENT_TOL:
                best_err, improved = float(err[k]), True
                current = {n: float(v) for n, v in zip(names, grid[k])}
        if not improved:
            break
    return current, best_err


def round_to_series(topo: ModuleType, values: Mapping[str, float], target: Section,
                    model: OpAmp, *, r_series: str, c_series: str, source_ohms: float = 0.0
                    ) -> tuple[dict[str, float], tuple[Element, ...], Figures]:
    """Round every part to its series with the smallest `figure_error`.

    Two searches, the better one kept: (a) every combination of each part's neighbouring
    series values around the exact design (±2 steps for up to five parts, ±1 beyond);
    (b) capacitors rounded first (their series is the coarse one), the resistors solved
    again for those capacitors (``solve_resistors``), then the resistors' neighbouring
    values searched the same way.
    """
    def series_of(n: str) -> str:
        return _series_of(n, r_series, c_series)

    elements = tuple(topo.elements(values, model))
    names = passive_names(elements)
    near = target.f0_hz if target.kind != "gain" else _GAIN_STAGE_NEAR_HZ
    if not names:  # a follower: nothing to round
        return dict(values), elements, section_figures(elements, kind=target.kind,
                                                       near_hz=near, source_ohms=source_ohms)
    best_a, err_a = _grid_search(elements, values, target, series_of, lambda n: True,
                                 source_ohms)
    if err_a <= _GOOD_ENOUGH:
        elements = tuple(topo.elements(best_a, model))
        return best_a, elements, section_figures(elements, kind=target.kind, near_hz=near,
                                                 source_ohms=source_ohms)
    # Capacitor combinations: each capacitor at its nearest series value or one step either
    # side; the resistors are solved again for each and the best start is rounded.
    axes = [neighbours(values[n], c_series, count=_CAP_NEIGHBOURS) if n.startswith("C")
            else np.array([values[n]]) for n in names]
    combos = np.stack([a.ravel() for a in np.meshgrid(*axes, indexing="ij")], axis=-1)
    solved, errs = solve_resistors(elements, combos, target, source_ohms)
    # Many capacitor pairs can be solved exactly with continuous resistors; which one rounds
    # best is only known after rounding, so the best few are all rounded.
    best_b, err_b = {}, math.inf
    for k in np.argsort(errs)[:_CAP_STARTS]:
        if not np.isfinite(errs[k]):
            continue
        cand, err = _grid_search(elements, dict(zip(names, solved[k])), target, series_of,
                                 lambda n: n.startswith("R"), source_ohms)
        if err < err_b:
            best_b, err_b = cand, err
    current = best_a if err_a <= err_b else best_b
    elements = tuple(topo.elements(current, model))
    return current, elements, section_figures(elements, kind=target.kind, near_hz=near,
                                         source_ohms=source_ohms)


def realize(topo: ModuleType, target: Section, model: OpAmp, *, r_series: str = "E96",
            c_series: str = "E12", windows: PartWindows = PartWindows(),
            source_ohms: float = 0.0, rounded: bool = True,
            level: float = 1.0) -> Realization:
    """Build `target` with topology module `topo` and op-amp `model`.

    Parameters
    ----------
    topo : module
        A ``circuits/<name>.py`` module.
    target : Section
    model : OpAmp
    r_series, c_series : str
        IEC 60063 series for resistors and capacitors.
    windows : PartWindows
        Preferred value ranges.
    source_ohms : float
        Resistance of the source driving the section (the first stage of a chain): the
        design absorbs it, e.g. an input resistor shrinks by it.
    rounded : bool
        False skips the series search (exact values as built): a quick look, e.g. for the
        noise model of the section ordering.
    level : float
        Factor on the impedance level ``choose_capacitor`` picks first (resistors × level,
        capacitors ÷ level, then rounded to the series).
    """
    target = Section(kind=target.kind, f0_hz=target.f0_hz, q=target.q, gain=abs(target.gain))
    c = choose_capacitor(topo, target, series=c_series, windows=windows, model=model,
                         level=level)
    asked, exact = predistort(topo, target, model, c_farads=c, source_ohms=source_ohms)
    _, ideal = _figures(topo, exact, model, target, source_ohms)
    if rounded:
        parts, elements, built = round_to_series(topo, exact, target, model,
                                                 r_series=r_series, c_series=c_series,
                                                 source_ohms=source_ohms)
    else:
        parts, elements, built = exact, tuple(topo.elements(exact, model)), ideal
    order = tuple(topo.PARTS)
    return Realization(
        topology=topo.NAME, target=target, predistorted=asked,
        ideal_components=tuple((n, float(exact[n])) for n in order if n in exact),
        components=tuple((n, float(parts[n])) for n in order if n in parts),
        elements=elements, ideal=ideal, built=built, source_ohms=float(source_ohms))
