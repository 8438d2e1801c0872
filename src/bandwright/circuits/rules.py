"""Design rules every topology shares, each written once.

Every topology module (bandpass, lowpass, highpass and gain stages alike) and the realiser
read these: the finite-GBW criterion, the component-spread limit, the impedance scale at
which ``limits`` designs a section, the check of the capacitor a design is asked for, the
record of a section no design reaches, and the weighting that turns a section's f0, Q and
gain errors into the dB they cost at the band edge.

The finite-GBW criterion
------------------------
A single-pole op-amp (docs/design.md, "The op-amp is a model") moves a section's pole pair. To
first order in e = f0/GBW each topology's shift is ``df0/f0 ~= k_f e`` and
``dQ/Q ~= k_q e`` (derived per topology, checked with sympy in the tests). What a response
feels is the movement against the pole pair's own bandwidth f0/Q: its frequency moves by
Q |k_f| e bandwidths and its bandwidth changes by |k_q| e. The criterion, the same for every
topology, is

    max(Q |k_f|, |k_q|, 1) · e <= POLE_MOVEMENT_SHARE   (10 %),

so the GBW a section needs is ``f0 · max(Q |k_f|, |k_q|, 1) / POLE_MOVEMENT_SHARE``. The 1
keeps e itself within the share: the shifts are an expansion in e, and a low-Q section
whose pole barely moves would otherwise be given an op-amp only a few times faster than its
f0, where the op-amp's own pole joins the section's (a Q 0.5 multiple-feedback highpass at
e = 0.4 moves 28 % of its bandwidth where the first order says 10 %). The planner
predistorts for the nominal shift (docs/design.md, "Built, not ideal"); the limit keeps that
correction where the first-order model holds, and keeps a spread of GBW from unit to unit
(``[tolerance] gbw_spread_pct``) from moving the pole far. At the limit the exact movement
(poles of the full circuit) stays within ``POLE_MOVEMENT_AT_LIMIT`` (20 %) of the
bandwidth for every topology from Q 0.5 to 50 (largest, 17 %: a state-variable section at
Q 0.7; at Q >= 1 at most 11.2 %): tests/circuits/test_gbw_rule.py holds that with
ngspice-39's pole-zero analysis of the written deck.

Examples: a multiple-feedback bandpass (k_f = -Q, k_q = +Q) needs 10 Q² f0 for Q >= 1 --
half the 10 (1 + 2Q²) f0 of the loop-gain rule of thumb (open-loop gain 20 dB above the
noise gain [mem]); a Tow-Thomas section needs about 40 Q f0, the rule 4 Q e <= 0.1 of Thomas
(1971) [mem]; a unity-gain Sallen-Key lowpass (|k_f| = |k_q| = Q) needs 10 max(Q², 1) f0.
A flat gain stage has no pole pair: its criterion is a gain error (``_filter_and_gain``).

Spread
------
Largest over smallest resistor (or capacitor) at most ``MAX_SPREAD`` (1000:1, three
decades): beyond it one part ends up comparable with stray and load impedances, or very
large (common practice).

Section-error weighting
-----------------------
``edge_residuals`` turns relative errors of f0, Q and gain into the dB (in nepers) each
costs at the band edge: a relative f0 error d moves a section's band-edge response by about
8.686 Q d dB, a relative Q error by 8.686 e/2 dB at the -3 dB points and a gain error g by
8.686 g dB (Schaumann & Van Valkenburg, *Design of Analog Filters*, 2001, ch. 3 [mem];
docs/methods.md, "Tolerance"). The realiser minimises it when it rounds parts and the
sensitivity analysis reports it per part, with one Q floor: ``F0_WEIGHT_Q_FLOOR`` = 2. Why 2:
a section's f0 error moves the chain's band edge by the chain's slope there, not by the
section's own; for a Butterworth chain of prototype order N with edges f1, f2 that slope is
(N/2)(f2 + f1)/(f2 - f1) nepers per unit relative frequency, which for the gentlest bandpass
chains the planner builds (N = 1 to 2, about an octave wide) is 1.5 to 3. A floor of 2 keeps a
low-Q section's f0 error from being priced below the edge it moves.
"""

from __future__ import annotations

import math

import numpy as np

from bandwright.circuits.base import Limits
from bandwright.parts.notation import format_hz

__all__ = ["POLE_MOVEMENT_SHARE", "POLE_MOVEMENT_AT_LIMIT", "GBW_RULE", "MAX_SPREAD",
           "NOMINAL_C_FARADS", "F0_WEIGHT_Q_FLOOR", "pole_movement", "gbw_needed_hz",
           "gbw_reason", "check_capacitor", "infeasible_limits", "edge_residuals"]

#: Largest first-order pole movement from finite GBW, as a share of the section's bandwidth.
POLE_MOVEMENT_SHARE = 0.1
#: The exact movement a section designed at the limit stays within (tested with ngspice).
POLE_MOVEMENT_AT_LIMIT = 0.2
#: The GBW criterion, as quoted in a reason.
GBW_RULE = "first-order pole movement within 10 % of the bandwidth"
#: Largest component spread accepted (common practice).
MAX_SPREAD = 1000.0
#: The impedance scale at which ``limits`` designs a section: every figure it reports is a
#: ratio, so any scale gives the same.
NOMINAL_C_FARADS = 1e-9
#: Smallest Q the f0 term of ``edge_residuals`` is weighted with (module docstring).
F0_WEIGHT_Q_FLOOR = 2.0


def pole_movement(q: float, shift: tuple[float, float]) -> float:
    """First-order pole movement per unit e = f0/GBW, in bandwidths f0/Q.

    Parameters
    ----------
    q : float
        The section's Q.
    shift : (float, float)
        (k_f, k_q): df0/f0 ~= k_f e and dQ/Q ~= k_q e.

    Returns
    -------
    float
        max(Q |k_f|, |k_q|) (module docstring, "The finite-GBW criterion").
    """
    k_f, k_q = shift
    return max(q * abs(k_f), abs(k_q))


def gbw_needed_hz(f0_hz: float, q: float, shift: tuple[float, float]) -> float:
    """GBW keeping the first-order pole movement (and e) within ``POLE_MOVEMENT_SHARE``.

    Parameters
    ----------
    f0_hz : float
        The section's f0, Hz.
    q : float
        The section's Q.
    shift : (float, float)
        (k_f, k_q) of the topology (``pole_movement``).

    Returns
    -------
    float
        f0 · max(Q |k_f|, |k_q|, 1) / POLE_MOVEMENT_SHARE, Hz (module docstring).
    """
    return f0_hz * max(pole_movement(q, shift), 1.0) / POLE_MOVEMENT_SHARE


def gbw_reason(needed_hz: float, model_gbw_hz: float, rule: str = GBW_RULE
               ) -> tuple[bool, str]:
    """Whether the op-amp's GBW meets the need, and the reason with both figures.

    Parameters
    ----------
    needed_hz : float
        GBW needed, Hz (infinite: no GBW suffices).
    model_gbw_hz : float
        GBW of the op-amp, Hz.
    rule : str
        The criterion behind `needed_hz`, quoted.

    Returns
    -------
    (bool, str)
        E.g. (False, "needs 5.39 MHz GBW (...): the op-amp's 3 MHz falls short").
    """
    ok = math.isfinite(needed_hz) and model_gbw_hz >= needed_hz
    verdict = "meets it" if ok else "falls short"
    return ok, (f"needs {format_hz(needed_hz)} GBW ({rule}): the op-amp's "
                f"{format_hz(model_gbw_hz)} {verdict}")


def check_capacitor(c_farads: float) -> None:
    """Raise ValueError unless `c_farads` is finite and > 0.

    Parameters
    ----------
    c_farads : float
        The capacitor value a design is asked for, farads. An infinite capacitor is no
        part, and NaN is no value: both are refused.

    Raises
    ------
    ValueError
    """
    if not (math.isfinite(c_farads) and c_farads > 0):
        raise ValueError(f"c_farads = {c_farads!r}: must be finite and > 0")


def infeasible_limits(problems: list[str] | tuple[str, ...], opamps: int) -> Limits:
    """Limits of a section that has no design at all: every figure is infinite.

    Parameters
    ----------
    problems : list of str
        The reasons.
    opamps : int
        Op-amp count of the topology.

    Returns
    -------
    Limits
        feasible False; gbw_needed_hz, spread, q_sensitivity and noise_gain ``math.inf``.
    """
    return Limits(feasible=False, reasons=tuple(problems), gbw_needed_hz=math.inf,
                  spread=math.inf, q_sensitivity=math.inf, noise_gain=math.inf,
                  opamps=opamps)


def edge_residuals(f0_rel, q_rel, gain_rel, q) -> np.ndarray:
    """The band-edge cost of relative f0, Q and gain errors, in nepers, as a vector.

    Parameters
    ----------
    f0_rel, q_rel, gain_rel : array_like
        Relative errors (or sensitivities: errors per unit relative part change) of f0, Q
        and |gain|; broadcast together.
    q : float or array_like
        The section's Q (weights the f0 term, floored at ``F0_WEIGHT_Q_FLOOR``).

    Returns
    -------
    ndarray, shape (..., 3)
        (max(Q, 2)·f0_rel, q_rel/2, gain_rel); its squared norm is the realiser's
        ``figure_error`` (module docstring, "Section-error weighting").
    """
    w = np.maximum(np.abs(np.asarray(q, dtype=float)), F0_WEIGHT_Q_FLOOR)
    f0_rel, q_rel, gain_rel = np.broadcast_arrays(np.asarray(f0_rel, dtype=float),
                                                  np.asarray(q_rel, dtype=float),
                                                  np.asarray(gain_rel, dtype=float))
    return np.stack([w * f0_rel, q_rel / 2, gain_rel], axis=-1)
