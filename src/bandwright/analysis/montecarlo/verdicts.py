"""Monte Carlo verdicts: per board, whether it meets the mask and keeps its headroom, and by
how much it misses or passes (the worst excess, dB).

A board passes when it meets the mask exactly as ``checks.mask`` reads it (passband loss and
gain on the passband grid, edges included; each stopband point) and every op-amp output
keeps its worst-case peak inside its swing (``analysis.levels.node_levels``).
"""

from __future__ import annotations

import numpy as np

from bandwright.analysis.levels import swing_limit_vpk
from bandwright.analysis.montecarlo.kernel import Grid
from bandwright.chain.graph import CHAIN_OUTPUT, Chain
from bandwright.inputs.requirement import Requirement

__all__ = ["verdicts", "REASONS"]

#: Failure reasons, in the order `yield.failures` lists them.
REASONS = ("passband loss", "passband gain", "stopband", "headroom")
# Mask comparisons use the same float slack as checks.mask.
_SLACK_DB = 1e-9


def verdicts(t2: dict[str, np.ndarray], chain: Chain, grid: Grid, requirement: Requirement
             ) -> dict[str, np.ndarray]:
    """Per-sample pass flags of every mask criterion and of headroom (as checks.mask and
    checks.chain_checks.headroom_checks read them), and under "excess" the worst violation
    in dB (> 0: fails; < 0: the margin left)."""
    pb = requirement.passband
    out_t2 = t2[CHAIN_OUTPUT]
    with np.errstate(divide="ignore"):
        pb_db = 10 * np.log10(out_t2[:, grid.passband])
        stop_db = 10 * np.log10(out_t2[:, grid.stop])
    loss_x = (pb.gain_db - pb_db.min(axis=1)) - pb.max_loss_db
    gain_x = np.abs(pb_db.max(axis=1) - pb.gain_db) - pb.gain_tolerance_db
    need = np.array([p.min_loss_db for p in requirement.stopband])
    stop_x = np.max(need - (pb.gain_db - stop_db), axis=1, initial=-np.inf)
    loss_ok, gain_ok, stop_ok = (x <= _SLACK_DB for x in (loss_x, gain_x, stop_x))
    n_pb = grid.passband.size
    tv = np.array([t.vpk for t in requirement.input.tones], dtype=float)
    head_x = np.full(out_t2.shape[0], -np.inf)
    for net in chain.output_nets:
        m2 = t2[net]
        # The chain output holds the whole grid, other nets only the level frequencies.
        lv = m2[:, grid.levels] if net == CHAIN_OUTPUT else m2
        mag = np.sqrt(lv)
        peak = requirement.input.max_vpk * mag[:, :n_pb].max(axis=1) + mag[:, n_pb:] @ tv
        limit = swing_limit_vpk(requirement.supply, chain.stage_of(net).model.swing_to_rail_v)
        with np.errstate(divide="ignore"):
            head_x = np.maximum(head_x, 20 * np.log10(peak / limit))
    excess = np.maximum.reduce([loss_x, gain_x, stop_x, head_x])
    return {"passband loss": loss_ok, "passband gain": gain_ok, "stopband": stop_ok,
            "headroom": head_x <= 0.0, "excess": excess}
