"""Candidate section sets for a requirement: family × order × path (bandpass, or
highpass + lowpass: ``hp_lp``)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from bandwright.prototype import bandpass_omega, minimum_order, order_for_point, prototype
from bandwright.sections import bandpass_sections, wideband_sections
from bandwright.sections.section import Section
from bandwright.sections.split import cascade_response
from bandwright.inputs.requirement import Requirement
from bandwright.vocabulary import FAMILIES
from bandwright.parts.notation import format_hz, format_sig

__all__ = ["Candidate", "make_candidates", "WIDEBAND_RATIO", "MAX_ORDER"]

# Winder 2002, ch. 6: edges more than an octave apart → highpass + lowpass cascade.
WIDEBAND_RATIO = 2.0
MAX_ORDER = 20
# The prototype is designed for this share of the passband loss allowed; the rest is left
# for rounded parts and finite GBW, which the built chain's mask check then judges.
LOSS_SHARE = 0.7

Path = Literal["bandpass", "hp_lp"]
# The paths as the reports write them (the JSON and chain files keep the keys).
PATH_LABELS: dict[str, str] = {"bandpass": "bandpass", "hp_lp": "highpass + lowpass"}


def path_label(path: str) -> str:
    """A candidate path as text: "bandpass" or "highpass + lowpass"."""
    return PATH_LABELS.get(path, path)


@dataclass(frozen=True, slots=True)
class Candidate:
    """One way to meet the requirement, before circuits.

    Attributes
    ----------
    path : {"bandpass", "hp_lp"}
        "hp_lp" is the highpass + lowpass path (called "wideband" before).
    family : str
    order : int
        Lowpass-prototype order (bandpass path: the bandpass has 2·order poles);
        hp_lp: highpass order + lowpass order.
    ripple_db : float
        Chebyshev ripple, or the Butterworth edge loss, of the prototype(s).
    sections : tuple of Section
        In generated order (by f0).
    note : str
        How the order was decided.
    """

    path: Path
    family: str
    order: int
    ripple_db: float
    sections: tuple[Section, ...]
    note: str

    @property
    def highest_q(self) -> float:
        return max((s.q for s in self.sections), default=0.0)


def make_candidates(req: Requirement, *, family: str | None = None,
                    order: int | None = None) -> tuple[Candidate, ...]:
    """Every candidate the requirement allows, ranked: fewer sections, then lower highest Q.

    `family` and `order` override the file's `[design]` choices.
    """
    family = family or req.design.family
    order = order or req.design.order
    fams = (family,) if family else FAMILIES
    out = [_bandpass_candidate(req, fam, order) for fam in fams]
    if req.passband.high_hz / req.passband.low_hz > WIDEBAND_RATIO:
        out += [_wideband_candidate(req, fam, order) for fam in fams]
    return tuple(sorted(out, key=lambda c: (len(c.sections), c.highest_q,
                                            c.path != "bandpass", c.family)))


def _bandpass_candidate(req: Requirement, family: str, order: int | None) -> Candidate:
    pb = req.passband
    loss_db = LOSS_SHARE * pb.max_loss_db
    if order is None:
        omegas = bandpass_omega([p.freq_hz for p in req.stopband], pb.center_hz, pb.bandwidth_hz)
        order = minimum_order(family, omegas, loss_db, [p.min_loss_db for p in req.stopband])
        decided = _decider(req, family, omegas, order, loss_db)
        if order > MAX_ORDER:
            decided += f"; capped at the largest supported order, {MAX_ORDER}"
            order = MAX_ORDER
    else:
        decided = "order given"
    proto = prototype(family, order, loss_db)
    secs = bandpass_sections(proto, center_hz=pb.center_hz, bandwidth_hz=pb.bandwidth_hz,
                             gain=pb.gain)
    return Candidate(path="bandpass", family=family, order=order, ripple_db=loss_db,
                     sections=secs, note=decided + f"; designed for {format_sig(loss_db, 3)} dB of "
                                                   f"the {format_sig(pb.max_loss_db)} dB allowed")


def _decider(req: Requirement, family: str, omegas, order: int, loss_db: float) -> str:
    """Name the stopband point that sets the order."""
    best = max(range(len(req.stopband)),
               key=lambda i: order_for_point(family, float(omegas[i]), loss_db,
                                             req.stopband[i].min_loss_db))
    p = req.stopband[best]
    return (f"order {order} set by {format_sig(p.min_loss_db)} dB at {format_hz(p.freq_hz)} "
            f"(Ω = {format_sig(float(omegas[best]))})")


def _side_order(family: str, omegas: list[float], losses: list[float], loss_db: float,
                fallback: int | None) -> tuple[int, bool]:
    """Order of one side of the highpass + lowpass path (even: every section a biquad), and whether
    it was capped at MAX_ORDER."""
    if fallback is not None:
        n = fallback
    elif omegas:
        n = minimum_order(family, omegas, loss_db, losses)
    else:
        n = 2
    n += n % 2
    return min(MAX_ORDER, n), n > MAX_ORDER


def _short(secs, points, gain_db: float) -> bool:
    """Whether any of `points` gets less loss than it asks for."""
    if not points:
        return False
    f = np.array([p.freq_hz for p in points])
    loss = gain_db - 20 * np.log10(np.abs(cascade_response(secs, f)))
    return bool(np.any(loss < np.array([p.min_loss_db for p in points]) - 1e-9))


def _wideband_candidate(req: Requirement, family: str, order: int | None) -> Candidate:
    """Highpass for the lower edge, lowpass for the upper; each side's edge loss `a` is found
    so the two skirts together lose at most max_loss_db anywhere in the passband."""
    pb = req.passband
    lo_pts = [p for p in req.stopband if p.freq_hz < pb.low_hz]
    hi_pts = [p for p in req.stopband if p.freq_hz > pb.high_hz]
    grid = np.geomspace(pb.low_hz, pb.high_hz, 801)

    def build(a_db: float, n_hp: int, n_lp: int) -> tuple[Section, ...]:
        return wideband_sections(prototype(family, n_hp, a_db), prototype(family, n_lp, a_db),
                                 low_hz=pb.low_hz, high_hz=pb.high_hz, gain=pb.gain)

    def worst_loss(secs) -> float:
        g = 20 * np.log10(np.abs(cascade_response(secs, grid)))
        return float(pb.gain_db - g.min())

    budget = LOSS_SHARE * pb.max_loss_db
    a_db = budget
    for _ in range(4):
        n_hp, cap_hp = _side_order(family, [pb.low_hz / p.freq_hz for p in lo_pts],
                                   [p.min_loss_db for p in lo_pts], a_db, order)
        n_lp, cap_lp = _side_order(family, [p.freq_hz / pb.high_hz for p in hi_pts],
                                   [p.min_loss_db for p in hi_pts], a_db, order)
        lo, hi = 0.02 * budget, budget
        if worst_loss(build(hi, n_hp, n_lp)) > budget:
            for _ in range(40):  # bisection on the edge loss of each side
                mid = math.sqrt(lo * hi)
                if worst_loss(build(mid, n_hp, n_lp)) > budget:
                    hi = mid
                else:
                    lo = mid
            new_a = lo
        else:
            new_a = hi
        if math.isclose(new_a, a_db, rel_tol=1e-6):
            break
        a_db = new_a
    secs = build(a_db, n_hp, n_lp)
    # Each side's order was set for its own skirt; normalising the cascade to its passband
    # peak can leave a stopband point a hair short: add a pair of poles on that side.
    while not (cap_hp and cap_lp):
        short_lo = _short(secs, lo_pts, pb.gain_db) and n_hp < MAX_ORDER
        short_hi = _short(secs, hi_pts, pb.gain_db) and n_lp < MAX_ORDER
        if not (short_lo or short_hi):
            break
        n_hp += 2 * short_lo
        n_lp += 2 * short_hi
        secs = build(a_db, n_hp, n_lp)
    note = (f"highpass order {n_hp} + lowpass order {n_lp}, each side's edge loss "
            f"{format_sig(a_db, 3)} dB so the skirts together lose at most "
            f"{format_sig(budget, 3)} dB of the "
            f"{format_sig(pb.max_loss_db)} dB allowed")
    if cap_hp or cap_lp:
        note += f"; capped at the largest supported order, {MAX_ORDER} a side"
    return Candidate(path="hp_lp", family=family, order=n_hp + n_lp, ripple_db=a_db,
                     sections=secs, note=note)
