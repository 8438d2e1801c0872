"""Monte Carlo verdicts: per board, whether it is stable, meets the mask and keeps its
headroom, and by how much it misses or passes (the worst excess, dB).

A board passes when every stage's denominator is Hurwitz (``analysis.stability``: |H|^2
cannot tell a right-half-plane pole from its mirror), it meets the mask as
``analysis.mask.mask_margins`` reads it (the reader of the `mask` check) and every op-amp
output keeps its worst-case peak, around its nominal bias point, inside its swing
(``analysis.levels.node_levels``).
"""

from __future__ import annotations

import numpy as np

from bandwright.analysis.bias import bias_points, chain_reference
from bandwright.analysis.levels import swing_limit_vpk
from bandwright.analysis.mask import mask_margins
from bandwright.analysis.montecarlo.kernel import (Grid, StagePolynomials, chain_mag_sq,
                                                   chain_stable)
from bandwright.chain.graph import CHAIN_OUTPUT, Chain
from bandwright.inputs.requirement import Requirement

__all__ = ["verdicts", "judge", "REASONS", "bias_limits_vpk"]

#: Failure reasons, in the order `yield.failures` lists them. An unstable board counts
#: under "unstable" only: its steady-state readings mean nothing.
REASONS = ("unstable", "passband loss", "passband gain", "stopband", "headroom")


def bias_limits_vpk(chain: Chain, requirement: Requirement) -> dict[str, float]:
    """Each output net's room around its nominal bias, Vpk: min((V+ - swing) - bias,
    bias - (V- + swing)), the nominal headroom check's limit (``analysis.levels.node_levels``
    with the bias points of ``analysis.bias``) on a single supply; on split rails the swing
    around the reference, as before. The boards share the nominal bias: a part's
    spread moves the bias far less than it moves the response."""
    sup = requirement.supply
    if not sup.single:
        # Split rails keep the limit around the reference (their yields stay as they were;
        # the nominal headroom check judges the bias there).
        return {net: swing_limit_vpk(sup, chain.stage_of(net).model.swing_to_rail_v)
                for net in chain.output_nets}
    bias = bias_points(chain, requirement, chain_reference(chain, requirement))
    lo, hi = sup.rails_v
    out = {}
    for net in chain.output_nets:
        swing = chain.stage_of(net).model.swing_to_rail_v
        b = bias.nets[net].dc_v if net in bias.nets else requirement.supply.reference_v
        out[net] = min((hi - swing) - b, b - (lo + swing))
    return out


def verdicts(t2: dict[str, np.ndarray], chain: Chain, grid: Grid, requirement: Requirement,
             stable: np.ndarray | None = None) -> dict[str, np.ndarray]:
    """Per-board verdicts from the chain's |T|^2 (``kernel.chain_mag_sq``).

    Parameters
    ----------
    t2 : dict of str to ndarray
        |T|^2 to every op-amp output net.
    chain : Chain
    grid : Grid
    requirement : Requirement
    stable : ndarray of bool (S,), optional
        Per board: every stage stable (``kernel.chain_stable``); all stable when omitted.

    Returns
    -------
    dict of str to ndarray (S,)
        Under each of `REASONS` whether the board is free of that failure (a stable board
        only can fail the others), "ok" whether it passes, "mask" whether it is stable and
        meets the mask, and "excess" its worst violation in dB (> 0: fails; < 0: the margin
        left; +inf when unstable).
    """
    out_t2 = t2[CHAIN_OUTPUT]
    n_boards = out_t2.shape[0]
    stable = np.ones(n_boards, dtype=bool) if stable is None else np.asarray(stable, bool)
    with np.errstate(divide="ignore"):
        pb_db = 10 * np.log10(out_t2[:, grid.passband])
        stop_db = 10 * np.log10(out_t2[:, grid.stop])
    m = mask_margins(pb_db, stop_db, requirement)
    n_pb = grid.passband.size
    tv = np.array([t.vpk for t in requirement.input.tones], dtype=float)
    head_x = np.full(n_boards, -np.inf)
    limits = bias_limits_vpk(chain, requirement)
    for net in chain.output_nets:
        m2 = t2[net]
        # The chain output holds the whole grid, other nets only the level frequencies.
        lv = m2[:, grid.levels] if net == CHAIN_OUTPUT else m2
        mag = np.sqrt(lv)
        peak = requirement.input.max_vpk * mag[:, :n_pb].max(axis=1) + mag[:, n_pb:] @ tv
        limit = limits[net]
        with np.errstate(divide="ignore"):
            # A bias beyond its swing limit leaves no room at all: an infinite excess.
            x = 20 * np.log10(peak / limit) if limit > 0 else np.full(n_boards, np.inf)
            head_x = np.maximum(head_x, x)
    excess = np.where(stable, np.maximum(m.excess_db, head_x), np.inf)
    free = {"passband loss": m.loss_ok, "passband gain": m.gain_ok, "stopband": m.stop_ok,
            "headroom": head_x <= 0.0}
    out = {"unstable": stable}
    out.update({k: v | ~stable for k, v in free.items()})
    mask = stable & m.loss_ok & m.gain_ok & m.stop_ok
    out["mask"] = mask
    out["ok"] = mask & free["headroom"]
    out["excess"] = excess
    return out


def judge(chain: Chain, grid: Grid, requirement: Requirement,
          polys: list[StagePolynomials]) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Judge a batch of boards from their stage polynomials (``kernel.stage_polynomials``).

    Parameters
    ----------
    chain : Chain
        The chain the boards are built from (its nets and op-amp models).
    grid : Grid
    requirement : Requirement
    polys : list of StagePolynomials
        Every stage's polynomials for the same S boards.

    Returns
    -------
    t2 : dict of str to ndarray
        |T|^2 to every op-amp output net (``kernel.chain_mag_sq``).
    verdicts : dict of str to ndarray (S,)
        As ``verdicts``, stability included.
    """
    t2 = chain_mag_sq(chain, grid, polys)
    return t2, verdicts(t2, chain, grid, requirement, stable=chain_stable(polys))
