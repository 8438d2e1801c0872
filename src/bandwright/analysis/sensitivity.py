"""Normalised sensitivities of every built section's f0, Q and gain to each part and to the
op-amp GBW, read from the built circuit.

S_x^y = d ln y / d ln x (Bode's classical sensitivity): the relative change of a figure per
relative change of a part. A part with S = 1/2 moves the figure by 0.5 % per 1 % of its own
error. Nothing here uses a topology's own formulas: every derivative is taken on the
figures ``circuits.figures.section_figures_batch`` reads from the element list (op-amp
model included), so sensitivities of a topology added later come for free, and a finite
GBW shows in them.

References
----------
.. [1] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*, Oxford UP, 2001,
   ch. 3 -- the normalised sensitivity S_x^y = (x/y) dy/dx and its rules [mem].
.. [2] H. W. Bode, *Network Analysis and Feedback Amplifier Design*, Van Nostrand, 1945 --
   the sensitivity function [mem].
.. [3] J. D. Schoeffler, "The synthesis of minimum sensitivity networks", IEEE Trans.
   Circuit Theory CT-11, 1964 -- multiparameter sensitivity
   (sigma_y/y)^2 = sum S^2 (sigma_x/x)^2 for independent parts [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bandwright.chain.graph import Chain
from bandwright.chain.stage import Stage
from bandwright.circuits.figures import section_figures_batch
from bandwright.circuits.nodal import passive_names
from bandwright.circuits.rules import edge_residuals

__all__ = ["GBW", "StageSensitivity", "stage_sensitivity", "chain_sensitivities",
           "first_order_spread"]

#: Name of the op-amp GBW among a stage's sensitivity "parts" (every op-amp of the stage
#: scaled together: they are one model).
GBW = "GBW"

# Step of the central difference in ln x. Truncation error ~ h^2 (1e-8 relative), rounding
# ~ 1e-13 / h of the figures read from polynomial roots: both far below what is reported.
_LOG_STEP = 1e-4


@dataclass(frozen=True, slots=True)
class StageSensitivity:
    """Sensitivities of one stage's built figures.

    Attributes
    ----------
    position : int
        Stage position (1-based).
    topology : str
    kind : str
    built_q : float
        The stage's built Q (it weights `weight`); 0 for a gain stage.
    parts : tuple of str
        Passive parts in ``passive_names`` order, then ``GBW``.
    f0, q, gain : tuple of float
        S_x^{f0}, S_x^{Q}, S_x^{|gain|} for each entry of `parts` (f0 and Q: NaN for a gain
        stage, which has neither).
    weight : tuple of float
        sqrt((max(Q, 2) S^{f0})^2 + (S^Q / 2)^2 + (S^gain)^2): the response error at the
        band edge, in nepers (dB / 8.686), per unit relative error of the part (see Notes).
    worst_part : str
        The passive part with the largest `weight`: the one whose tolerance this stage
        feels most.

    Notes
    -----
    A relative f0 error d moves a section's band-edge response by about 8.686 Q d dB, a
    relative Q error e by about 8.686 e / 2 dB and a gain error g by 8.686 g dB
    (docs/methods.md, "Tolerance"; Schaumann & Van Valkenburg 2001, ch. 3 [mem]); `weight`
    is the norm of ``circuits.rules.edge_residuals``, the vector whose squared norm the
    realiser minimises (``circuits.realize.figure_error``), Q floored at 2 in both.
    """

    position: int
    topology: str
    kind: str
    built_q: float
    parts: tuple[str, ...]
    f0: tuple[float, ...]
    q: tuple[float, ...]
    gain: tuple[float, ...]
    weight: tuple[float, ...]
    worst_part: str

    def of(self, part: str) -> tuple[float, float, float]:
        """(S^{f0}, S^{Q}, S^{gain}) of one part (or ``GBW``).

        Raises
        ------
        KeyError
            If `part` is not in the stage.
        """
        if part not in self.parts:
            raise KeyError(f"stage {self.position} has no part {part!r} (parts {self.parts})")
        i = self.parts.index(part)
        return self.f0[i], self.q[i], self.gain[i]


def _log_figures(stage: Stage, values: np.ndarray, gbw_scale: np.ndarray | None
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    near = stage.built.f0_hz if stage.kind != "gain" else 1.0
    f0, q, g = section_figures_batch(stage.elements, kind=stage.kind, near_hz=near,
                                     values=values, gbw_scale=gbw_scale)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log(np.abs(f0)), np.log(np.abs(q)), np.log(np.abs(g))


def stage_sensitivity(stage: Stage, *, log_step: float = _LOG_STEP) -> StageSensitivity:
    """Normalised sensitivities of a built stage's f0, Q and |gain| to every part and GBW.

    Parameters
    ----------
    stage : Stage
        A built stage (its element list and op-amp model as built).
    log_step : float
        Step h of the central difference in ln x (default 1e-4).

    Returns
    -------
    StageSensitivity

    Notes
    -----
    S_x^y = d ln y / d ln x ([1]_) by the central difference
    (ln y(x e^h) - ln y(x e^-h)) / 2h, every part stepped in one batch of
    ``section_figures_batch`` (2P + 2 rows: each part up and down, then every op-amp's
    GBW up and down together through its ``gbw_scale``). Error O(h^2).
    """
    els = stage.elements
    names = passive_names(els)
    v0 = np.array([e.value for e in els if e.kind in ("R", "C")], dtype=float)
    n_p = v0.size
    h = float(log_step)
    step = np.exp(h)
    up = np.tile(v0, (n_p, 1))
    down = up.copy()
    up[np.arange(n_p), np.arange(n_p)] *= step
    down[np.arange(n_p), np.arange(n_p)] /= step
    values = np.vstack([up, down, v0, v0])
    has_gbw = any(e.kind == "opamp" and math.isfinite(e.model.gbw_hz) for e in els)
    scale = np.ones(2 * n_p + 2)
    scale[-2], scale[-1] = step, 1 / step
    lf, lq, lg = _log_figures(stage, values, scale if has_gbw else None)

    def central(y: np.ndarray) -> np.ndarray:
        return np.concatenate([y[:n_p] - y[n_p:2 * n_p], [y[-2] - y[-1]]]) / (2 * h)

    with np.errstate(invalid="ignore"):  # a gain stage's f0 and Q are 0: ln 0 - ln 0
        s_f0, s_q, s_g = central(lf), central(lq), central(lg)
    if stage.kind == "gain":
        s_f0 = np.full_like(s_g, np.nan)
        s_q = np.full_like(s_g, np.nan)
        q_built = 0.0
        weight = np.abs(s_g)
    else:
        q_built = float(stage.built.q)
        weight = np.linalg.norm(edge_residuals(s_f0, s_q, s_g, q_built), axis=-1)
    worst = names[int(np.argmax(weight[:n_p]))] if n_p else GBW
    return StageSensitivity(
        position=stage.position, topology=stage.topology, kind=stage.kind, built_q=q_built,
        parts=names + (GBW,), f0=tuple(map(float, s_f0)), q=tuple(map(float, s_q)),
        gain=tuple(map(float, s_g)), weight=tuple(map(float, weight)), worst_part=worst)


def chain_sensitivities(chain: Chain) -> tuple[StageSensitivity, ...]:
    """Sensitivities of every stage.

    Parameters
    ----------
    chain : Chain

    Returns
    -------
    tuple of StageSensitivity
        ``stage_sensitivity`` of each stage, in chain order.
    """
    return tuple(stage_sensitivity(st) for st in chain.stages)


def first_order_spread(sens: StageSensitivity, sigma_rel: dict[str, float]
                       ) -> tuple[float, float, float]:
    """First-order relative standard deviation of f0, Q and |gain| from part spreads.

    Parameters
    ----------
    sens : StageSensitivity
    sigma_rel : dict of str to float
        Relative standard deviation of each part (and of ``GBW``); parts left out do not
        vary.

    Returns
    -------
    (float, float, float)
        sigma(f0)/f0, sigma(Q)/Q, sigma(gain)/gain.

    Notes
    -----
    (sigma_y / y)^2 = sum_x (S_x^y)^2 (sigma_x / x)^2 for independent parts and small
    spreads (Schoeffler 1964 [3]_).
    """
    sig = np.array([sigma_rel.get(p, 0.0) for p in sens.parts])
    return tuple(float(np.sqrt(np.nansum((np.asarray(s) * sig) ** 2)))
                 for s in (sens.f0, sens.q, sens.gain))
