"""From a measured sweep to the part that is off (``bandwright audit --measured``).

The audited chain's element lists are the model (``diagnosis.model``); the measured gain
(and phase, when given) is fitted twice (``diagnosis.fit``): all parts at once, regularised
by their tolerances, for the curve and the residual; and each part alone, for the suspects.
A suspect is a single part (or one op-amp's GBW) whose fit explains the sweep markedly
better than the chain as designed; parts whose fitted effects the sweep cannot tell apart
are listed as its equivalents.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bandwright.analysis.grid import passband_grid
from bandwright.analysis.montecarlo import resolve_spreads
from bandwright.analysis.response import MaskReading
from bandwright.checks.base import Check
from bandwright.checks.mask import mask_checks
from bandwright.circuits.base import Figures
from bandwright.diagnosis.fit import (DEG_PER_RAD, Measurement, SingleFit,
                                      fit_all, fit_each, roughness)
from bandwright.diagnosis.model import DB_PER_NEPER, ChainModel, Variable
from bandwright.inputs.sweep_file import Sweep, check_covers
from bandwright.parts.eseries import SERIES_NAMES, is_member, neighbours
from bandwright.parts.notation import format_fixed, format_hz, format_si

__all__ = ["Diagnosis", "Suspect", "Equivalent", "Fix", "StageFit", "diagnose",
           "NOISE_FLOOR_DB", "NOISE_FLOOR_DEG", "UNEXPLAINED_RATIO", "SIGNIFICANT_CHI2",
           "EQUIVALENT_CHI2"]

#: The smallest noise a reading is credited with: the resolution of a gain reading on a
#: bench instrument, and far above the model's own agreement with ngspice (about 1e-4 dB).
NOISE_FLOOR_DB = 0.005
NOISE_FLOOR_DEG = 0.05
#: The best fit must leave a residual within this many times the measurement's noise, or
#: the measurement is called unexplained.
UNEXPLAINED_RATIO = 2.0
#: A part is a suspect when its fit lowers chi-square by more than this against the chain
#: as designed (25: five standard deviations of a one-parameter improvement).
SIGNIFICANT_CHI2 = 25.0
#: Two explanations the sweep cannot tell apart: their fitted curves differ by less than
#: this chi-square (three standard deviations) ...
EQUIVALENT_CHI2 = 9.0
#: ... or by less than this share of the effect's own size (columns nearly parallel:
#: cos > 0.9987).
PARALLEL_SHARE = 0.05
_MAX_SUSPECTS = 5


@dataclass(frozen=True, slots=True)
class Equivalent:
    """A part the sweep cannot tell apart from a suspect, with its own fitted change."""

    stage: int
    part: str
    change_pct: float


@dataclass(frozen=True, slots=True)
class Fix:
    """What to fit in the suspect's place.

    Attributes
    ----------
    part : str
    value : float or None
        Ohms or farads: the standard value of `series` that brings the stage back to its
        design; None for an op-amp's GBW.
    series : str or None
    text : str
        The fix in words.
    mask_pass : bool or None
        The chain's mask verdict with the fix (None: the audit file states no mask).
    """

    part: str
    value: float | None
    series: str | None
    text: str
    mask_pass: bool | None


@dataclass(frozen=True, slots=True)
class Suspect:
    """One ranked single-part explanation.

    Attributes
    ----------
    stage : int
        Stage position.
    part : str
        Name in the stage's element list, or "U1.gbw".
    change_pct : float
        Fitted deviation from the file's value, percent.
    confidence : float
        0 to 1 (see ``diagnose``).
    equivalent : tuple of Equivalent
    residual_db : float
        Rms gain residual with this part alone changed.
    fix : Fix
    """

    stage: int
    part: str
    change_pct: float
    confidence: float
    equivalent: tuple[Equivalent, ...]
    residual_db: float
    fix: Fix


@dataclass(frozen=True, slots=True)
class StageFit:
    """A stage's figures as planned (the audit's as-built figures) and as fitted."""

    position: int
    topology: str
    kind: str
    planned: Figures
    fitted: Figures


@dataclass(frozen=True)
class Diagnosis:
    """What a measured sweep says about the chain.

    Attributes
    ----------
    sweep : Sweep
    suspects : tuple of Suspect
        Ranked, most likely first; empty when no part explains the sweep markedly better
        than the chain as designed.
    stages : tuple of StageFit
    residual_db : float
        Rms of measured minus fitted gain, dB.
    noise_db : float
        The measurement's own noise (point-to-point roughness, at least NOISE_FLOOR_DB).
    unexplained : bool
        The best fit leaves more than UNEXPLAINED_RATIO times the noise.
    message : str
        The finding in one sentence.
    planned_db, fitted_db : ndarray
        The chain as designed and as fitted at the sweep's frequencies, dB.
    mask_checks : tuple of Check
        The measured chain against the mask (measured points where the sweep covers a mask
        frequency, the fitted chain elsewhere); empty without a mask.
    changes : tuple of (int, str, float)
        The all-parts fit: (stage, part, change_pct) of every variable moved by more than
        0.05 %, largest first.
    """

    sweep: Sweep
    suspects: tuple[Suspect, ...]
    stages: tuple[StageFit, ...]
    residual_db: float
    noise_db: float
    unexplained: bool
    message: str
    planned_db: np.ndarray
    fitted_db: np.ndarray
    mask_checks: tuple[Check, ...]
    changes: tuple[tuple[int, str, float], ...]

    @property
    def mask_pass(self) -> bool | None:
        """The measured chain meets the mask (None: no mask)."""
        if not self.mask_checks:
            return None
        return all(c.status != "fail" for c in self.mask_checks)


def _pct(x: float) -> float:
    return 100.0 * math.expm1(x)


def _stage_series(stage, kind: str, preferred: str) -> str | None:
    """The stage's IEC 60063 series for parts of this kind: `preferred` (the file's design
    series) when it holds every such value of the stage, else the coarsest series that
    does; None when none does."""
    values = [v for n, v in stage.components if n.startswith(kind)]
    if not values:
        return None
    for name in (preferred, *SERIES_NAMES):
        if all(bool(is_member(v, name, rel_tol=1e-6)) for v in values):
            return name
    return None


def _mask(requirement, respond, sweep: Sweep | None = None) -> tuple[Check, ...]:
    """Mask checks of a response; measured points replace the model inside the sweep."""
    pf = passband_grid(requirement)
    sf = np.array([p.freq_hz for p in requirement.stopband], dtype=float)
    f = np.concatenate([pf, sf])
    g = respond(f)
    if sweep is not None:
        inside = (f >= sweep.freq_hz[0]) & (f <= sweep.freq_hz[-1])
        g = np.where(inside, np.interp(np.log(f), np.log(sweep.freq_hz), sweep.gain_db), g)
    reading = MaskReading(passband_freq_hz=pf, passband_gain_db=g[:pf.size],
                          stop_freq_hz=sf, stop_gain_db=g[pf.size:])
    return tuple(mask_checks(reading, requirement))


def _responder(model: ChainModel, x: np.ndarray):
    def respond(f: np.ndarray) -> np.ndarray:
        return DB_PER_NEPER * model.log_h_parts(x, 2 * np.pi * f).sum(axis=0).real
    return respond


def _fix(model: ChainModel, audit, j: int, meas: Measurement) -> Fix:
    var: Variable = model.variables[j]
    k = model.stage_of(j)
    stage = model.chain.stages[k]
    sl = model.stage_slice(k)
    x = np.zeros(model.size)
    if var.kind == "GBW":
        text = (f"fit an op-amp whose GBW is at least the model's "
                f"{format_hz(var.nominal, significant=3)} as {var.part.split('.')[0]}")
        verdict = None
        if audit.has_mask:
            verdict = all(c.status != "fail" for c in _mask(audit.requirement,
                                                            _responder(model, x)))
        return Fix(part=var.part, value=None, series=None, text=text, mask_pass=verdict)
    design = audit.requirement.design
    preferred = design.resistor_series if var.kind == "R" else design.capacitor_series
    series = _stage_series(stage, var.kind, preferred) or preferred
    candidates = neighbours(var.nominal, series, count=2)
    xs = np.zeros((candidates.size, sl.stop - sl.start))
    xs[:, j - sl.start] = np.log(candidates / var.nominal)
    lh = model.stage_log_h(k, xs, meas.w_rad_s)
    lh0 = model.stage_log_h(k, np.zeros((1, sl.stop - sl.start)), meas.w_rad_s)
    err = np.sqrt(np.mean((DB_PER_NEPER * (lh - lh0).real) ** 2, axis=1))
    best = float(candidates[int(np.argmin(err))])
    x[j] = math.log(best / var.nominal)
    verdict = None
    if audit.has_mask:
        verdict = all(c.status != "fail" for c in _mask(audit.requirement, _responder(model, x)))
    unit = "Ω" if var.kind == "R" else "F"
    text = f"replace {var.part} of stage {var.stage} with {format_si(best, unit)} ({series})"
    return Fix(part=var.part, value=best, series=series, text=text, mask_pass=verdict)


def _measurement(model: ChainModel, sweep: Sweep) -> Measurement:
    w = 2 * np.pi * sweep.freq_hz
    lh0 = model.log_h_parts(np.zeros(model.size), w).sum(axis=0)
    noise_db = max(roughness(sweep.gain_db - DB_PER_NEPER * lh0.real), NOISE_FLOOR_DB)
    noise_deg = NOISE_FLOOR_DEG
    if sweep.phase_deg is not None:
        d = (sweep.phase_deg - DEG_PER_RAD * lh0.imag + 180.0) % 360.0 - 180.0
        noise_deg = max(roughness(d), NOISE_FLOOR_DEG)
    return Measurement(w_rad_s=w, gain_db=sweep.gain_db, phase_deg=sweep.phase_deg,
                       noise_db=noise_db, noise_deg=noise_deg)


def diagnose(audit, sweep: Sweep) -> Diagnosis:
    """Fit an audited chain to a measured sweep and rank the parts that explain it.

    Parameters
    ----------
    audit : bandwright.audit.Audit
        The chain as the audit file describes it (its tolerances are the priors).
    sweep : Sweep
        The measurement (``inputs.sweep_file.load_sweep``).

    Returns
    -------
    Diagnosis

    Raises
    ------
    SpecError
        If the sweep has fewer than three points inside the passband.

    Notes
    -----
    Priors: each part's tolerance (the file's ``[tolerance]``, else the one customary for
    its series) and the op-amps' GBW spread, as fractions, are the standard deviations of
    its log deviation (``diagnosis.fit``). The noise is the point-to-point roughness of
    measured minus designed gain (``diagnosis.fit.roughness``), at least NOISE_FLOOR_DB.

    Confidence of a suspect: its share of exp(-cost_j / T) over every single-part
    explanation and the chain as designed (a posterior with equal prior odds for each
    hypothesis, cost including the tolerance prior), its equivalents' shares added, times
    min(1, 1 / chi2_red) of its own fit, so that a part that explains the sweep only
    partly is not called certain. T = max(1, chi2_red of the best fit) widens the
    weights when even the best fit leaves more than noise.
    """
    req = audit.requirement
    check_covers(sweep, req.passband.low_hz, req.passband.high_hz)
    spreads = resolve_spreads(req)
    sigma = {"R": spreads.resistor_pct / 100, "C": spreads.capacitor_pct / 100,
             "GBW": spreads.gbw_spread_pct / 100}
    sigma = {k: max(v, 1e-3) for k, v in sigma.items()}  # a zero spread still gets a prior
    model = ChainModel(audit.chain, sigma)
    meas = _measurement(model, sweep)
    single = fit_each(model, meas)
    j_best = int(np.argmin(single.cost))
    start = np.zeros(model.size)
    start[j_best] = single.x[j_best]
    full = fit_all(model, meas, start=start)
    lh0 = model.log_h_parts(np.zeros(model.size), meas.w_rad_s).sum(axis=0)
    planned_db = DB_PER_NEPER * lh0.real
    single_rms = float(np.sqrt(np.mean((sweep.gain_db - planned_db
                                        - single.change_db[j_best]) ** 2)))
    if single_rms > UNEXPLAINED_RATIO * meas.noise_db:
        # No single part explains the sweep: try the descent from the design as well (the
        # cost has more than one valley once several parts are off).
        again = fit_all(model, meas)
        if again.cost < full.cost:
            full = again
    n_points = meas.points
    # The curve the residual is measured against: the all-parts fit, unless one part
    # alone (which may move further than the drift bound) fits better.
    if single.data_cost[j_best] < full.data_cost:
        xb = np.zeros(model.size)
        xb[j_best] = single.x[j_best]
        fitted_db = planned_db + single.change_db[j_best]
        best_data = float(single.data_cost[j_best])
    else:
        xb = full.x
        fitted_db = DB_PER_NEPER * full.log_h.real
        best_data = full.data_cost
    residual_db = float(np.sqrt(np.mean((sweep.gain_db - fitted_db) ** 2)))
    unexplained = residual_db > UNEXPLAINED_RATIO * meas.noise_db
    suspects = _suspects(model, single, meas, audit, best_data, n_points, planned_db)
    stages = tuple(
        StageFit(position=st.position, topology=st.topology, kind=st.kind, planned=st.built,
                 fitted=Figures(*fig))
        for st, fig in zip(audit.chain.stages, model.figures(xb)))
    mask = _mask(req, _responder(model, xb), sweep) if audit.has_mask else ()
    order = np.argsort(-np.abs(full.x))
    changes = tuple((model.variables[j].stage, model.variables[j].part, _pct(full.x[j]))
                    for j in order if abs(_pct(full.x[j])) > 0.05)
    message = _message(suspects, unexplained, residual_db, meas.noise_db, changes)
    return Diagnosis(sweep=sweep, suspects=suspects, stages=stages, residual_db=residual_db,
                     noise_db=meas.noise_db, unexplained=unexplained, message=message,
                     planned_db=planned_db, fitted_db=fitted_db, mask_checks=mask,
                     changes=changes)


def _suspects(model: ChainModel, single: SingleFit, meas: Measurement, audit,
              best_data: float, n_points: int, planned_db: np.ndarray
              ) -> tuple[Suspect, ...]:
    temp = max(1.0, 2.0 * best_data / n_points)
    gain = (single.null_data_cost - single.cost) / temp           # half the chi2 drop
    significant = [j for j in np.argsort(single.cost) if 2.0 * gain[j] > SIGNIFICANT_CHI2]
    c_min = min(float(single.cost.min()), single.null_data_cost)
    weights = np.exp(-(single.cost - c_min) / temp)
    total = float(weights.sum() + math.exp(-(single.null_data_cost - c_min) / temp))
    taken: set[int] = set()
    out: list[Suspect] = []
    for lead in significant:
        if lead in taken or len(out) >= _MAX_SUSPECTS:
            continue
        d_lead = single.weighted_change[lead]
        size = float(d_lead @ d_lead)
        members = []
        for j in significant:
            if j == lead or j in taken:
                continue
            diff = d_lead - single.weighted_change[j]
            dist = float(diff @ diff)
            if dist / temp < EQUIVALENT_CHI2 or dist < PARALLEL_SHARE ** 2 * size:
                members.append(j)
        taken.update([lead, *members])
        share = float(weights[lead] + sum(weights[j] for j in members)) / total
        chi2_red = 2.0 * float(single.data_cost[lead]) / n_points
        confidence = share * min(1.0, 1.0 / max(chi2_red, 1e-12))
        v = model.variables[lead]
        out.append(Suspect(
            stage=v.stage, part=v.part, change_pct=_pct(single.x[lead]),
            confidence=float(confidence),
            equivalent=tuple(Equivalent(model.variables[j].stage, model.variables[j].part,
                                        _pct(single.x[j])) for j in members),
            residual_db=float(np.sqrt(np.mean(
                (meas.gain_db - planned_db - single.change_db[lead]) ** 2))),
            fix=_fix(model, audit, lead, meas)))
    return tuple(out)


def _message(suspects, unexplained: bool, residual_db: float, noise_db: float,
             changes) -> str:
    if unexplained:
        return (f"no change of part values explains the measurement: the best fit leaves "
                f"{format_fixed(residual_db, 3)} dB rms against a measurement noise of "
                f"{format_fixed(noise_db, 3)} dB; "
                f"look for a wiring fault, a missing or extra part, or another topology")
    if not suspects:
        return (f"the measurement matches the chain as designed within its noise "
                f"({format_fixed(residual_db, 3)} dB rms, noise {format_fixed(noise_db, 3)} dB)")
    s = suspects[0]
    if s.residual_db > UNEXPLAINED_RATIO * noise_db:
        moved = ", ".join(f"{p} of stage {k} {format_fixed(c, 1, sign=True)} %" for k, p, c in changes[:4])
        return (f"no single part explains the measurement ({s.part} of stage {s.stage} alone "
                f"leaves {format_fixed(s.residual_db, 3)} dB rms, noise "
                f"{format_fixed(noise_db, 3)} dB); several parts "
                f"are off together, most likely {moved}")
    alt = f" (or {', '.join(e.part + ' of stage ' + str(e.stage) for e in s.equivalent)})" \
        if s.equivalent else ""
    return (f"stage {s.stage}: {s.part} {format_fixed(s.change_pct, 1, sign=True)} %{alt} "
            f"explains the measurement "
            f"({format_fixed(s.residual_db, 3)} dB rms left, noise {format_fixed(noise_db, 3)} dB)")
