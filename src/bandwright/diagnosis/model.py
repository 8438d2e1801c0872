"""The chain's response as a function of its parts' log deviations: the model a measured
sweep is fitted with.

Every resistor, capacitor and finite-GBW op-amp of the chain is one variable
x = ln(value / nominal) (for an op-amp, ln(GBW / nominal GBW)). A stage's transfer for a
batch of such vectors comes from its element list through the tool's own transfer
polynomials (``circuits.figures.transfer_polynomials``, the same evaluation the Monte Carlo
uses), and the chain's transfer is the product of its stages' (the op-amp outputs are ideal
sources: ``chain.graph.net_transfers``), so ln H = sum_k ln H_k and each variable moves only
its own stage's term. Derivatives are central differences in x, every variable of a stage
in one batch.

References
----------
.. [1] J. Vlach, K. Singhal, *Computer Methods for Circuit Analysis and Design*, 2nd ed.,
   Van Nostrand Reinhold, 1994 -- network functions and their sensitivities [mem].
.. [2] H. W. Bode, *Network Analysis and Feedback Amplifier Design*, Van Nostrand, 1945 --
   the logarithmic sensitivity d ln H / d ln x [mem].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bandwright.chain.graph import CHAIN_INPUT, Chain
from bandwright.chain.stage import Stage
from bandwright.circuits.figures import (horner_rows, section_figures_batch,
                                        transfer_polynomials)

__all__ = ["Variable", "ChainModel", "DB_PER_NEPER", "gbw_part"]

#: 20 / ln 10: dB per neper, so that 20 log10|H| = DB_PER_NEPER * Re ln H.
DB_PER_NEPER = 20.0 / math.log(10.0)
# Step of the central difference in x = ln(value): truncation ~h^2, rounding ~1e-13/h.
_LOG_STEP = 1e-4


def gbw_part(opamp_name: str) -> str:
    """The part name of an op-amp's GBW in a diagnosis ("U1" -> "U1.gbw")."""
    return f"{opamp_name}.gbw"


@dataclass(frozen=True, slots=True)
class Variable:
    """One fitted quantity.

    Attributes
    ----------
    stage : int
        Stage position (1-based).
    part : str
        Its name in the stage's element list ("R1a", "C2"), or "U1.gbw" for an op-amp's GBW.
    kind : {"R", "C", "GBW"}
    nominal : float
        Ohms, farads, or Hz.
    sigma : float
        Prior spread of x = ln(value / nominal): the part's tolerance as a fraction.
    """

    stage: int
    part: str
    kind: str
    nominal: float
    sigma: float


@dataclass(frozen=True)
class _StageVars:
    stage: Stage
    start: int            # first variable of this stage in the chain's vector
    n_passive: int
    gbw_slots: tuple[int, ...]  # for each op-amp of the stage (element order): its
    #                             variable offset within the stage, or -1 (ideal op-amp)
    nominal: np.ndarray   # passive values, passive_names order
    source_ohms: float

    @property
    def size(self) -> int:
        return self.n_passive + sum(1 for s in self.gbw_slots if s >= 0)


class ChainModel:
    """Log response of a chain at fixed frequencies, for batches of part deviations.

    Parameters
    ----------
    chain : Chain
    sigma : dict of str to float
        Prior spread (fraction) per kind: "R", "C", "GBW".

    Attributes
    ----------
    variables : tuple of Variable
        Stage by stage: its R and C in element order, then its finite-GBW op-amps.
    """

    def __init__(self, chain: Chain, sigma: dict[str, float]) -> None:
        self.chain = chain
        variables: list[Variable] = []
        stages: list[_StageVars] = []
        for st in chain.stages:
            start = len(variables)
            passives = [e for e in st.elements if e.kind in ("R", "C")]
            variables += [Variable(st.position, e.name, e.kind, e.value, sigma[e.kind])
                          for e in passives]
            slots = []
            n = len(passives)
            for e in st.elements:
                if e.kind != "opamp":
                    continue
                if math.isfinite(e.model.gbw_hz):
                    slots.append(n)
                    n += 1
                    variables.append(Variable(st.position, gbw_part(e.name), "GBW",
                                              e.model.gbw_hz, sigma["GBW"]))
                else:
                    slots.append(-1)
            rs = chain.source_ohms if chain.input_of(st) == CHAIN_INPUT else 0.0
            stages.append(_StageVars(stage=st, start=start, n_passive=len(passives),
                                     gbw_slots=tuple(slots),
                                     nominal=np.array([e.value for e in passives], float),
                                     source_ohms=rs))
        self.variables = tuple(variables)
        self._stages = tuple(stages)

    @property
    def size(self) -> int:
        return len(self.variables)

    @property
    def sigma(self) -> np.ndarray:
        return np.array([v.sigma for v in self.variables])

    def stage_slice(self, k: int) -> slice:
        """The variables of the k-th stage (0-based) in the chain's vector."""
        sv = self._stages[k]
        return slice(sv.start, sv.start + sv.size)

    def stage_of(self, j: int) -> int:
        """0-based stage index of variable j."""
        for k, sv in enumerate(self._stages):
            if sv.start <= j < sv.start + sv.size:
                return k
        raise IndexError(j)

    def _values(self, k: int, x: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
        sv = self._stages[k]
        values = sv.nominal * np.exp(x[:, :sv.n_passive])
        if not sv.gbw_slots:
            return values, None
        scale = np.ones((x.shape[0], len(sv.gbw_slots)))
        for a, slot in enumerate(sv.gbw_slots):
            if slot >= 0:
                scale[:, a] = np.exp(x[:, slot])
        return values, scale

    def stage_log_h(self, k: int, x: np.ndarray, w_rad_s: np.ndarray) -> np.ndarray:
        """ln H of the k-th stage for a batch of its variables.

        Parameters
        ----------
        k : int
            0-based stage index.
        x : ndarray, shape (S, n_k)
            Log deviations of the stage's variables.
        w_rad_s : ndarray, shape (F,)

        Returns
        -------
        ndarray of complex, shape (S, F)
            ln|H| + j arg H.
        """
        sv = self._stages[k]
        x = np.atleast_2d(np.asarray(x, dtype=float))
        values, scale = self._values(k, x)
        num, den = transfer_polynomials(sv.stage.elements, values=values, gbw_scale=scale,
                                        source_ohms=sv.source_ohms)
        num, den = np.atleast_2d(num), np.atleast_2d(den)
        # Evaluate in z = s / w_ref so that the powers stay near 1 across the sweep.
        w_ref = float(np.exp(np.mean(np.log(w_rad_s))))
        powers = w_ref ** np.arange(num.shape[-1])
        z = 1j * w_rad_s / w_ref
        return np.log(horner_rows(num * powers, z) / horner_rows(den * powers, z))

    def log_h_parts(self, x: np.ndarray, w_rad_s: np.ndarray) -> np.ndarray:
        """ln H of every stage at one vector x (n,): shape (stages, F)."""
        x = np.asarray(x, dtype=float)
        return np.vstack([self.stage_log_h(k, x[None, self.stage_slice(k)], w_rad_s)
                          for k in range(len(self._stages))])

    def jacobian(self, x: np.ndarray, w_rad_s: np.ndarray) -> np.ndarray:
        """d ln H / dx at x, complex, shape (F, n): central differences, one batch per stage.

        Notes
        -----
        The quotient ln(H(x + h e_i) / H(x - h e_i)) / 2h keeps the phase difference
        free of 2 pi wraps.
        """
        x = np.asarray(x, dtype=float)
        h = _LOG_STEP
        cols = []
        for k in range(len(self._stages)):
            xk = x[self.stage_slice(k)]
            n = xk.size
            if n == 0:
                continue
            batch = np.tile(xk, (2 * n, 1))
            batch[np.arange(n), np.arange(n)] += h
            batch[n + np.arange(n), np.arange(n)] -= h
            lh = self.stage_log_h(k, batch, w_rad_s)
            cols.append(((lh[:n] - lh[n:]) / (2 * h)).T)
        return np.hstack(cols) if cols else np.zeros((w_rad_s.size, 0), complex)

    def figures(self, x: np.ndarray) -> list[tuple[float, float, float]]:
        """(f0_hz, q, gain) of every stage with its parts at x (the tool's own reading of
        f0, Q and gain from the poles, ``circuits.figures.section_figures_batch``)."""
        x = np.asarray(x, dtype=float)
        out = []
        for k, sv in enumerate(self._stages):
            st = sv.stage
            values, scale = self._values(k, x[None, self.stage_slice(k)])
            near = st.built.f0_hz if st.kind != "gain" else 1.0
            f0, q, g = section_figures_batch(st.elements, kind=st.kind, near_hz=near,
                                             values=values, gbw_scale=scale,
                                             source_ohms=sv.source_ohms)
            out.append((float(f0[0]), float(q[0]), float(g[0])))
        return out
