"""Trimming one stage's parts so the whole chain's passband sits on the mask.

Rounded parts leave every section a little off; in a staggered chain the errors add up at
the band centre and edges in a way no single section shows. The bench answer is to trim
one stage; here the trim is a search over that stage's neighbouring series values, judged
by the chain's own passband response (the stage's transfer from its batched polynomials,
times the rest of the chain, which the trim does not change).
"""

from __future__ import annotations

import numpy as np
from numpy.polynomial import polynomial as npoly

from bandwright.chain.graph import CHAIN_INPUT, CHAIN_OUTPUT, Chain, net_transfers
from bandwright.circuits.figures import transfer_polynomials
from bandwright.circuits.nodal import ac_solve, passive_names
from bandwright.parts.eseries import neighbours

__all__ = ["trim_stage", "passband_score"]

_MAX_POINTS = 3125


def _mask_score(gain_db: np.ndarray, *, gain_db_ref: float, max_loss_db: float,
                tol_db: float) -> np.ndarray:
    """Worst normalised mask violation per row (≤ 1 meets the passband)."""
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


def trim_stage(chain: Chain, index: int, band_hz: np.ndarray, *, gain_db: float,
               max_loss_db: float, tol_db: float, r_series: str, c_series: str
               ) -> dict[str, float] | None:
    """Series values for stage `index` that put the chain's passband best inside the mask.

    Returns None when no neighbouring combination scores better than the parts it has.
    Every combination of ±1 series step (±2 when few parts) is scored in one batch.
    """
    st = chain.stages[index]
    names = passive_names(st.elements)
    if not names:
        return None
    f = np.asarray(band_hz, dtype=float)
    inp = chain.input_of(st)
    rs = chain.source_ohms if inp == CHAIN_INPUT else 0.0
    # Everything but this stage: the whole chain's transfer over this stage's own.
    own = ac_solve(st.elements, f, source_ohms=rs).at("out")
    whole = _output_transfer(chain, f)
    rest = whole / own
    values = dict(st.components)
    steps = 2 if 5 ** len(names) <= _MAX_POINTS else 1
    axes = [neighbours(values[n], c_series if n.startswith("C") else r_series, count=steps)
            if 3 ** len(names) <= _MAX_POINTS or n.startswith("R") else np.array([values[n]])
            for n in names]
    grid = np.stack([a.ravel() for a in np.meshgrid(*axes, indexing="ij")], axis=-1)
    num, den = transfer_polynomials(st.elements, source_ohms=rs, values=grid)
    s = 2j * np.pi * f
    h = npoly.polyval(s, num.T, tensor=True) / npoly.polyval(s, den.T, tensor=True)
    g = 20 * np.log10(np.maximum(np.abs(h * rest), 1e-30))
    score = _mask_score(g, gain_db_ref=gain_db, max_loss_db=max_loss_db, tol_db=tol_db)
    now = _mask_score(20 * np.log10(np.abs(whole))[None, :], gain_db_ref=gain_db,
                      max_loss_db=max_loss_db, tol_db=tol_db)[0]
    k = int(np.argmin(score))
    if not score[k] < now - 1e-9:
        return None
    return {n: float(v) for n, v in zip(names, grid[k])}


def _output_transfer(chain: Chain, f: np.ndarray) -> np.ndarray:
    return net_transfers(chain, f)[CHAIN_OUTPUT]
