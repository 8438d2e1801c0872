"""Advice for a stopband that needs an order above ``candidates.MAX_ORDER``: which order the
mask needs, the most the tool builds, and what that order reaches at the deciding stopband
point (or where that point would have to move)."""

from __future__ import annotations

import math

import numpy as np

from bandwright.candidates import MAX_ORDER, Candidate, path_label
from bandwright.checks.base import Check
from bandwright.prototype import bandpass_omega, order_for_point
from bandwright.inputs.requirement import Requirement
from bandwright.parts.notation import format_fixed, format_hz, format_sig

__all__ = ["MAX_BUILT_ORDER", "prototype_loss_db", "omega_for_loss", "frequency_of_omega",
           "order_beyond_reach"]

# The bandpass path has one section per prototype order: the section limit of the ordering
# search caps it below MAX_ORDER.
MAX_BUILT_ORDER = MAX_ORDER


def _eps2(ripple_db: float) -> float:
    return math.expm1(ripple_db * math.log(10) / 10)


def prototype_loss_db(family: str, order: int, ripple_db: float, omega: float) -> float:
    """Loss of a lowpass prototype at normalised frequency `omega` (> 1).

    Parameters
    ----------
    family : {"butterworth", "chebyshev"}
    order : int
    ripple_db : float
        Loss at Ω = 1 (Chebyshev ripple or Butterworth edge loss), dB.
    omega : float
        Normalised frequency, Ω > 1.

    Returns
    -------
    float
        Loss in dB.

    Notes
    -----
    Butterworth: A = 10 log10(1 + ε² Ω^(2N)); Chebyshev I: A = 10 log10(1 + ε² cosh²(N acosh Ω)),
    ε² = 10^(Amax/10) − 1 (Williams & Taylor 2006, §2 [mem]; the inverse of the order formulas
    in docs/methods.md, "Mask → order"). Computed in logs so that high orders do not overflow.
    """
    e2 = _eps2(ripple_db)
    if family == "butterworth":
        log_term = math.log(e2) + 2 * order * math.log(omega)
    else:
        # cosh(x) = e^x (1 + e^-2x) / 2, so log cosh²(x) = 2x + 2 log1p(e^-2x) - 2 log 2.
        x = order * math.acosh(omega)
        log_term = math.log(e2) + 2 * x + 2 * math.log1p(math.exp(-2 * x)) - 2 * math.log(2)
    # 10 log10(1 + e^t), stable for large t.
    return 10 / math.log(10) * (max(log_term, 0.0) + math.log1p(math.exp(-abs(log_term))))


def omega_for_loss(family: str, order: int, ripple_db: float, loss_db: float) -> float:
    """The Ω at which a prototype of `order` first loses `loss_db` (inverse of
    `prototype_loss_db`; same source)."""
    ratio = _eps2(loss_db) / _eps2(ripple_db)
    if family == "butterworth":
        return ratio ** (1.0 / (2 * order))
    return math.cosh(math.acosh(math.sqrt(ratio)) / order)


def frequency_of_omega(omega: float, center_hz: float, bandwidth_hz: float, *,
                       upper: bool) -> float:
    """The bandpass frequency on one side of the band that maps to `omega`.

    Notes
    -----
    Solves Ω = (f² − f0²)/(f·BW) for f > f0: f = (Ω·BW + √((Ω·BW)² + 4 f0²)) / 2; the lower
    side is f0²/f (docs/methods.md, "Mask → order").
    """
    x = omega * bandwidth_hz
    f_up = (x + math.sqrt(x * x + 4 * center_hz * center_hz)) / 2
    return f_up if upper else center_hz * center_hz / f_up


def _needed_order(cand: Candidate, req: Requirement) -> tuple[int, int] | None:
    """(order the stopband asks of the bandpass prototype, index of the deciding point)."""
    if cand.path != "bandpass" or not req.stopband:
        return None
    pb = req.passband
    omegas = bandpass_omega([p.freq_hz for p in req.stopband], pb.center_hz, pb.bandwidth_hz)
    orders = [order_for_point(cand.family, float(w), cand.ripple_db, p.min_loss_db)
              for w, p in zip(omegas, req.stopband)]
    k = int(np.argmax(orders))
    return orders[k], k


def order_beyond_reach(cand: Candidate, req: Requirement) -> Check:
    """The failing check of a candidate whose mask needs more than the largest order.

    Says which order the mask needs, the most the tool builds, and for the bandpass path
    what order `MAX_BUILT_ORDER` reaches at the deciding stopband point and how far out
    that point would have to move.
    """
    n = len(cand.sections)
    head = (f"{n} sections ({cand.family} {path_label(cand.path)}, order {cand.order}): the mask "
            f"needs more than the largest order, {MAX_ORDER}")
    need = _needed_order(cand, req)
    if need is None or cand.note.startswith("order given"):
        tail = (f"; ask for order {MAX_BUILT_ORDER} or less"
                if cand.path == "bandpass" or cand.note.startswith("order given")
                else f"; {cand.note.split(';')[0]}: relax the stopband points that set it")
        return Check(id="order", status="fail", value=float(n), limit=float(MAX_ORDER),
                     unit="sections", message=head + tail)
    order, k = need
    p = req.stopband[k]
    pb = req.passband
    cap = f"{MAX_ORDER} is the most this tool accepts" if order > MAX_ORDER else \
        f"the tool accepts up to {MAX_ORDER}"
    omega = float(bandpass_omega(p.freq_hz, pb.center_hz, pb.bandwidth_hz))
    reach = prototype_loss_db(cand.family, MAX_BUILT_ORDER, cand.ripple_db, omega)
    f_ok = frequency_of_omega(omega_for_loss(cand.family, MAX_BUILT_ORDER, cand.ripple_db,
                                             p.min_loss_db),
                              pb.center_hz, pb.bandwidth_hz, upper=p.freq_hz > pb.center_hz)
    msg = (f"the stopband needs a {cand.family} order of {order} ({format_sig(p.min_loss_db)} dB "
           f"at {format_hz(p.freq_hz, significant=6)}, Ω = {format_sig(omega)}); {cap}: order "
           f"{MAX_BUILT_ORDER} gives {format_fixed(reach, 1)} dB there — ask for no more at "
           f"{format_hz(p.freq_hz, significant=6)}, or move the point out to "
           f"{format_hz(f_ok, significant=6)}")
    return Check(id="order", status="fail", value=float(order), limit=float(MAX_BUILT_ORDER),
                 unit="order", message=msg)
