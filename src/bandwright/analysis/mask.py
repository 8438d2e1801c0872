"""The one reading of the requirement's mask: passband loss and gain on the passband grid,
each stopband point, one float slack. Vectorised over boards, so that the `mask` check (one
board) and the Monte Carlo verdicts (thousands) judge alike.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.chain.graph import CHAIN_OUTPUT
from bandwright.inputs.requirement import Requirement

__all__ = ["MaskMargins", "mask_margins", "SLACK_DB", "TrimJudge", "trim_judge"]

#: Float slack of every mask comparison: a reading within 1e-9 dB of its limit meets it
#: (the rounding of a log of a product of polynomials, far below any figure printed).
SLACK_DB = 1e-9


@dataclass(frozen=True)
class MaskMargins:
    """Mask figures of a batch of boards, shape (S,) or (S, K) per field.

    Attributes
    ----------
    loss_db : ndarray (S,)
        Worst passband loss below `passband.gain_db`.
    worst_loss_index : ndarray of int (S,)
        Where on the passband grid it lies.
    peak_db : ndarray (S,)
        Passband maximum, dB.
    gain_error_db : ndarray (S,)
        Passband maximum minus `passband.gain_db`.
    stop_loss_db : ndarray (S, K)
        Loss below `passband.gain_db` at each stopband point, file order.
    loss_excess_db, gain_excess_db : ndarray (S,)
        By how much the passband loss exceeds `max_loss_db`, and |gain error| exceeds
        `gain_tolerance_db` (> 0 fails, < 0 the margin left).
    stop_excess_db : ndarray (S, K)
        `min_loss_db` minus the loss at each point (> 0 fails).
    """

    loss_db: np.ndarray
    worst_loss_index: np.ndarray
    peak_db: np.ndarray
    gain_error_db: np.ndarray
    stop_loss_db: np.ndarray
    loss_excess_db: np.ndarray
    gain_excess_db: np.ndarray
    stop_excess_db: np.ndarray

    @property
    def loss_ok(self) -> np.ndarray:
        return self.loss_excess_db <= SLACK_DB

    @property
    def gain_ok(self) -> np.ndarray:
        return self.gain_excess_db <= SLACK_DB

    @property
    def stop_point_ok(self) -> np.ndarray:
        return self.stop_excess_db <= SLACK_DB

    @property
    def stop_ok(self) -> np.ndarray:
        return np.all(self.stop_point_ok, axis=-1)

    @property
    def worst_stop_excess_db(self) -> np.ndarray:
        """The worst stopband point's excess per board (-inf with no stopband)."""
        return np.max(self.stop_excess_db, axis=-1, initial=-np.inf)

    @property
    def excess_db(self) -> np.ndarray:
        """The worst of every mask excess per board, dB."""
        return np.maximum.reduce([self.loss_excess_db, self.gain_excess_db,
                                  self.worst_stop_excess_db])


def mask_margins(passband_gain_db: np.ndarray, stop_gain_db: np.ndarray,
                 requirement: Requirement) -> MaskMargins:
    """Read a batch of boards against the mask.

    Parameters
    ----------
    passband_gain_db : ndarray, shape (S, P)
        Gain on the passband grid (``analysis.grid.passband_grid``, edges included), dB.
    stop_gain_db : ndarray, shape (S, K)
        Gain at each `[[stopband]]` point in file order, dB.
    requirement : Requirement

    Returns
    -------
    MaskMargins

    Notes
    -----
    Every loss is relative to `passband.gain_db`, the passband's reference gain
    (docs/design.md, "Meanings"): the passband may lose at most `max_loss_db` anywhere on its
    grid, its maximum stays within `gain_tolerance_db` of `gain_db`, and each stopband point
    loses at least its `min_loss_db`.
    """
    pb = requirement.passband
    g = np.atleast_2d(np.asarray(passband_gain_db, dtype=float))
    sg = np.asarray(stop_gain_db, dtype=float).reshape(g.shape[0], -1)
    loss_all = pb.gain_db - g
    i = np.argmax(loss_all, axis=1)
    loss = np.take_along_axis(loss_all, i[:, None], axis=1)[:, 0]
    peak = g.max(axis=1)
    err = peak - pb.gain_db
    need = np.array([p.min_loss_db for p in requirement.stopband], dtype=float)
    stop_loss = pb.gain_db - sg
    return MaskMargins(loss_db=loss, worst_loss_index=i, peak_db=peak, gain_error_db=err,
                       stop_loss_db=stop_loss, loss_excess_db=loss - pb.max_loss_db,
                       gain_excess_db=np.abs(err) - pb.gain_tolerance_db,
                       stop_excess_db=need - stop_loss)


@dataclass(frozen=True)
class TrimJudge:
    """Judges trimmed chains against the whole requirement (``chain.trim.Judge``): the mask
    as ``mask_margins`` reads it, and every op-amp output's worst-case peak against its swing
    (as ``analysis.levels.node_levels``).

    Attributes
    ----------
    freq_hz : ndarray
        The passband grid, then each stopband point, then each tone.
    requirement : Requirement
    limit_vpk : dict of str to float
        Swing limit of every op-amp output net.
    """

    freq_hz: np.ndarray
    requirement: Requirement
    limit_vpk: dict

    def __call__(self, transfers: dict[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
        """Whole violation and passband score per row of complex transfers (N, F) (or (F,):
        one row).

        The violation is the largest of: passband loss over its limit and the peak's
        distance from the asked gain over its tolerance (each minus 1), every stopband
        excess and every headroom excess (dB) over the passband loss budget; 0 when all are
        met (``SLACK_DB``). The score is the passband part alone, <= 1 when it is met.
        """
        req = self.requirement
        pb = req.passband
        transfers = {net: np.atleast_2d(h) for net, h in transfers.items()}
        n_pb = self.freq_hz.size - len(req.stopband) - len(req.input.tones)
        n_st = len(req.stopband)
        out = np.asarray(transfers[CHAIN_OUTPUT])
        with np.errstate(divide="ignore"):
            g = 20 * np.log10(np.abs(out))
        m = mask_margins(g[:, :n_pb], g[:, n_pb:n_pb + n_st], req)
        score = np.maximum(m.loss_db / pb.max_loss_db,
                           np.abs(m.gain_error_db) / pb.gain_tolerance_db)
        tv = np.array([t.vpk for t in req.input.tones], dtype=float)
        head = np.full(out.shape[0], -np.inf)
        for net, limit in self.limit_vpk.items():
            mag = np.abs(np.asarray(transfers[net]))
            peak = req.input.max_vpk * mag[:, :n_pb].max(axis=1) + mag[:, n_pb + n_st:] @ tv
            with np.errstate(divide="ignore"):
                head = np.maximum(head, 20 * np.log10(peak / limit))
        parts = [np.maximum(m.loss_excess_db / pb.max_loss_db,
                            m.gain_excess_db / pb.gain_tolerance_db),
                 m.worst_stop_excess_db / pb.max_loss_db, head / pb.max_loss_db]
        worst = np.maximum.reduce(parts)
        return np.where(worst > SLACK_DB, worst, 0.0), score


def trim_judge(chain, requirement: Requirement) -> TrimJudge:
    """The judge a trim of `chain` is scored by, for `requirement` (see ``TrimJudge``)."""
    from bandwright.analysis.grid import passband_grid
    from bandwright.analysis.levels import swing_limit_vpk
    f = np.concatenate([passband_grid(requirement),
                        [p.freq_hz for p in requirement.stopband],
                        [t.freq_hz for t in requirement.input.tones]]).astype(float)
    limits = {net: swing_limit_vpk(requirement.supply, chain.stage_of(net).model.swing_to_rail_v)
              for net in chain.output_nets}
    return TrimJudge(freq_hz=f, requirement=requirement, limit_vpk=limits)
