"""Trimming one stage's parts so the whole chain sits on the requirement: its passband on
the mask, without giving up a stopband point or an output's headroom.

Rounded parts leave every section a little off; in a staggered chain the errors add up at
the band centre and edges in a way no single section shows. The bench answer is to trim
one stage; here the trim is a search over that stage's neighbouring series values, judged
on the chain's own response to every op-amp output net (the stage's transfers from its
batched polynomials, times the rest of the chain, which the trim does not change).

A trim is rounding, not a redesign: a combination that moves the stage's f0 by more than
``REDESIGN_SHARE`` is taken only when no smaller one meets what it must, and is then
flagged as a redesign (the planner says so in the stage's reasons).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from bandwright.chain.graph import CHAIN_INPUT, CHAIN_OUTPUT, Chain, net_transfers
from bandwright.chain.stage import stage_output_nets
from bandwright.circuits.figures import (horner_rows, section_figures_batch,
                                        transfer_polynomials_many)
from bandwright.circuits.nodal import ac_solve, passive_names
from bandwright.parts.eseries import neighbours

__all__ = ["trim_stage", "passband_score", "TrimChoice", "Judge", "REDESIGN_SHARE"]

_MAX_POINTS = 3125
#: A trim that moves a stage's built f0 by more than this share is a redesign of the
#: section, not a rounding correction: E96 rounding leaves f0 within about 1 %, and one
#: series step of one part in a trim moves it by a few per cent at most.
REDESIGN_SHARE = 0.03

#: Judges trimmed chains: given the complex transfer (N, F) to every op-amp output net on
#: the judge's frequency grid, returns per row the whole violation (0 when the mask and the
#: headroom are met; in units of the passband loss budget) and the passband score (<= 1
#: meets the passband: worst loss over its limit, or the peak's distance from the asked gain
#: over its tolerance). ``analysis.mask.trim_judge`` builds one for a requirement.
Judge = Callable[[dict[str, np.ndarray]], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True, slots=True)
class TrimChoice:
    """The parts a trim puts into one stage.

    Attributes
    ----------
    components : dict of str to float
        Ohms and farads of the stage's passive parts.
    f0_shift : float
        Relative move of the stage's built f0 (0.01: +1 %); 0 for a gain stage.
    redesign : bool
        The move exceeds `REDESIGN_SHARE`: taken because nothing smaller meets the mask.
    violation, score : float
        The chain's whole violation and passband score after the trim (see `Judge`).
    """

    components: dict[str, float]
    f0_shift: float
    redesign: bool
    violation: float
    score: float


def _mask_score(gain_db: np.ndarray, *, gain_db_ref: float, max_loss_db: float,
                tol_db: float) -> np.ndarray:
    """Worst normalised passband violation per row (≤ 1 meets the passband)."""
    loss = (gain_db_ref - gain_db.min(axis=-1)) / max_loss_db
    err = np.abs(gain_db.max(axis=-1) - gain_db_ref) / tol_db
    return np.maximum(loss, err)


def passband_score(chain: Chain, band_hz: np.ndarray, *, gain_db: float, max_loss_db: float,
                   tol_db: float) -> float:
    """The chain's worst normalised passband violation: passband loss over its limit, or
    the passband maximum's distance from the asked gain over its tolerance (≤ 1 meets)."""
    g = 20 * np.log10(np.abs(_output_transfer(chain, np.asarray(band_hz, dtype=float))))
    return float(_mask_score(g[None, :], gain_db_ref=gain_db, max_loss_db=max_loss_db,
                             tol_db=tol_db)[0])


def _stage_nets(chain: Chain, st) -> dict[str, str]:
    """Local output net -> global net of one stage."""
    inp = chain.input_of(st)
    return {d["local"]: net for _, net, d in chain.graph.out_edges(inp, data=True)
            if d["stage"] is st}


def _trimmed_transfers(chain: Chain, index: int, f: np.ndarray, grid: np.ndarray
                       ) -> dict[str, np.ndarray]:
    """Transfer (N, F) to every op-amp output net with stage `index` built from each row of
    `grid` (part values in ``passive_names`` order); the other stages as they are."""
    st = chain.stages[index]
    inp = chain.input_of(st)
    rs = chain.source_ohms if inp == CHAIN_INPUT else 0.0
    now = net_transfers(chain, f)
    before = np.ones(f.shape, dtype=complex) if inp == CHAIN_INPUT else now[inp]
    locals_ = stage_output_nets(st)
    nums, den = transfer_polynomials_many(st.elements, out_nets=locals_, source_ohms=rs,
                                          values=grid, method="auto")
    s = 2j * np.pi * f
    d = horner_rows(den, s)
    mine = _stage_nets(chain, st)
    out = {net: np.broadcast_to(h, (grid.shape[0], f.size)) for net, h in now.items()}
    for local, num in zip(locals_, nums):
        out[mine[local]] = before * (horner_rows(num, s) / d)
    own = ac_solve(st.elements, f, source_ohms=rs).at("out")
    ratio = out[mine["out"]] / (before * own)           # the stage's new over its old transfer
    fed = {mine["out"]}
    for later in chain.stages[index + 1:]:
        if chain.input_of(later) in fed:
            for net in _stage_nets(chain, later).values():
                out[net] = now[net] * ratio
                fed.add(net)
    return out


def trim_stage(chain: Chain, index: int, *, freq_hz: np.ndarray, judge: Judge,
               r_series: str, c_series: str, redesign_share: float | None = None
               ) -> TrimChoice | None:
    """Series values for stage `index` that put the whole chain best inside the requirement.

    Parameters
    ----------
    chain : Chain
    index : int
        0-based stage index.
    freq_hz : ndarray
        The judge's frequency grid.
    judge : Judge
        Scores trimmed chains (``analysis.mask.trim_judge``).
    r_series, c_series : str
        Series the neighbouring values come from.
    redesign_share : float, optional
        Largest f0 move a trim takes as rounding (default `REDESIGN_SHARE`).

    Returns
    -------
    TrimChoice or None
        None when no neighbouring combination is better than the parts the stage has.

    Notes
    -----
    Every combination of ±1 series step (±2 when few parts) is judged in one batch, ranked
    by (whole violation, passband score): first the mask's stopband points and every
    output's headroom are kept (or come nearest to it), then the passband is centred.
    Combinations that move f0 by more than `redesign_share` are taken only when they meet
    what the smaller ones cannot (a smaller whole violation), and are marked a redesign.
    """
    share = REDESIGN_SHARE if redesign_share is None else redesign_share
    st = chain.stages[index]
    names = passive_names(st.elements)
    if not names:
        return None
    f = np.asarray(freq_hz, dtype=float)
    values = dict(st.components)
    steps = 2 if 5 ** len(names) <= _MAX_POINTS else 1
    axes = [neighbours(values[n], c_series if n.startswith("C") else r_series, count=steps)
            if 3 ** len(names) <= _MAX_POINTS or n.startswith("R") else np.array([values[n]])
            for n in names]
    grid = np.stack([a.ravel() for a in np.meshgrid(*axes, indexing="ij")], axis=-1)
    violation, score = judge(_trimmed_transfers(chain, index, f, grid))
    now_v, now_s = judge({net: h[None, :] for net, h in net_transfers(chain, f).items()})
    now_v, now_s = float(now_v[0]), float(now_s[0])
    if st.kind == "gain":
        shift = np.zeros(grid.shape[0])
    else:
        rs = chain.source_ohms if chain.input_of(st) == CHAIN_INPUT else 0.0
        f0, _, _ = section_figures_batch(st.elements, kind=st.kind, near_hz=st.target.f0_hz,
                                         values=grid, source_ohms=rs, method="auto")
        shift = f0 / st.built.f0_hz - 1.0
    small = np.abs(np.nan_to_num(shift, nan=np.inf)) <= share
    order = np.lexsort((score, violation))          # violation first, then the passband
    best_small = next((int(i) for i in order if small[i]), None)
    best = int(order[0])
    if best_small is not None and not violation[best] < violation[best_small] - 1e-12:
        best = best_small
    if not (violation[best] < now_v - 1e-12
            or (violation[best] <= now_v + 1e-12 and score[best] < now_s - 1e-9)):
        return None
    return TrimChoice(components={n: float(v) for n, v in zip(names, grid[best])},
                      f0_shift=float(shift[best]), redesign=not bool(small[best]),
                      violation=float(violation[best]), score=float(score[best]))


def _output_transfer(chain: Chain, f: np.ndarray) -> np.ndarray:
    return net_transfers(chain, f)[CHAIN_OUTPUT]
