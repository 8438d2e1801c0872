"""The one reading of the requirement's mask: passband loss and gain on the passband grid,
each stopband point, one float slack. Vectorised over boards, so that the `mask` check (one
board) and the Monte Carlo verdicts (thousands) judge alike.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.inputs.requirement import Requirement

__all__ = ["MaskMargins", "mask_margins", "SLACK_DB"]

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
    (design.md, "Meanings"): the passband may lose at most `max_loss_db` anywhere on its
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
