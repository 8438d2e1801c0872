"""The Monte Carlo kernel: a batch of boards' stage polynomials, and |H(jw)|^2 of the chain
to every op-amp output net on one frequency grid.

Each stage is reduced to its transfer polynomials for the whole batch
(``circuits.figures.transfer_polynomials_many``, from the cached monomial expansion) and
evaluated as |H(jw)|^2 on every frequency of every sample in numpy; the chain's transfer to
a net is the product along its path (the op-amp outputs are ideal sources, so stages do not
load each other: ``analysis.levels.net_transfers``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.analysis.grid import passband_grid
from bandwright.analysis.stability import routh_stable, scale_rad_s
from bandwright.chain.graph import CHAIN_INPUT, CHAIN_OUTPUT, Chain
from bandwright.chain.stage import stage_output_nets
from bandwright.circuits.figures import horner_rows, transfer_polynomials_many
from bandwright.inputs.requirement import Requirement

__all__ = ["Grid", "StagePolynomials", "stage_polynomials", "chain_mag_sq", "chain_stable",
           "mag_sq", "power_coefficients"]


def power_coefficients(coefs: np.ndarray) -> np.ndarray:
    """Coefficients in x = w^2 of |N(jw)|^2 for N with ascending coefficients (S, d+1).

    N(jw) = E(x) + j w O(x) with E, O the even and odd parts (alternating signs), so
    |N(jw)|^2 = E(x)^2 + x O(x)^2: a real polynomial of degree <= d in x (docs/design.md, "|H|^2
    as a ratio of real polynomials in w^2 is cheapest"). Products of the few coefficients
    only: loops run over coefficients, never over samples or frequencies.
    """
    n = coefs.shape[1]
    c = coefs * np.where(np.arange(n) // 2 % 2 == 0, 1.0, -1.0)
    even, odd = c[:, 0::2], c[:, 1::2]
    out = np.zeros((c.shape[0], n))
    for i in range(even.shape[1]):
        out[:, i:i + even.shape[1]] += even[:, i:i + 1] * even
    for i in range(odd.shape[1]):
        out[:, 1 + i:1 + i + odd.shape[1]] += odd[:, i:i + 1] * odd
    return out


def mag_sq(num: np.ndarray, den: np.ndarray, w_rad_s: np.ndarray) -> np.ndarray:
    """|N(jw)|^2 / |D(jw)|^2 for (S, d+1) ascending coefficients at (F,) frequencies.

    Rounding: near a pole pair |D|^2 is a difference of terms some Q^2 times larger, so the
    relative error is about Q^2 x 1e-16: 1e-12 even at Q = 100.
    """
    x = w_rad_s * w_rad_s
    out = horner_rows(power_coefficients(num), x)
    out /= horner_rows(power_coefficients(den), x)
    return out


@dataclass(frozen=True)
class Grid:
    """Every frequency a run evaluates, and where each reading sits in it."""

    freq_hz: np.ndarray
    passband: np.ndarray
    stop: np.ndarray
    tones: np.ndarray
    envelope: np.ndarray
    levels: np.ndarray  # passband then tones: what node levels read

    @staticmethod
    def of(requirement: Requirement, envelope_hz: np.ndarray) -> "Grid":
        pb = passband_grid(requirement)
        sf = np.array([p.freq_hz for p in requirement.stopband], dtype=float)
        tf = np.array([t.freq_hz for t in requirement.input.tones], dtype=float)
        env = np.asarray(envelope_hz, dtype=float)
        allf, inv = np.unique(np.concatenate([pb, sf, tf, env]), return_inverse=True)
        cuts = np.cumsum([pb.size, sf.size, tf.size])
        i_pb, i_sf, i_tf, i_env = np.split(inv, cuts)
        return Grid(freq_hz=allf, passband=i_pb, stop=i_sf, tones=i_tf, envelope=i_env,
                    levels=np.concatenate([i_pb, i_tf]))


@dataclass(frozen=True)
class StagePolynomials:
    """One stage's transfer polynomials for a batch of boards.

    Attributes
    ----------
    nets : tuple of str
        The stage's local output nets, "out" last (``chain.stage.stage_output_nets``).
    nums : ndarray, shape (N, S, d + 1)
        Numerator to each net, ascending powers of s.
    den : ndarray, shape (S, d + 1)
        The stage's one denominator, ascending powers of s (its roots are the poles).
    w_rad_s : ndarray, shape (S,)
        The stage's characteristic frequency per board (``analysis.stability.scale_rad_s``),
        the scale its coefficients are read in.
    """

    nets: tuple[str, ...]
    nums: np.ndarray
    den: np.ndarray
    w_rad_s: np.ndarray

    @property
    def stable(self) -> np.ndarray:
        """Per board: every pole of the stage in the open left half-plane (Routh–Hurwitz)."""
        return routh_stable(self.den, self.w_rad_s)


def stage_polynomials(chain: Chain, values: list[np.ndarray],
                      gbw: list[np.ndarray | None]) -> list[StagePolynomials]:
    """Every stage's transfer polynomials for a batch of boards.

    Parameters
    ----------
    chain : Chain
    values : list of ndarray, shape (S, P) per stage
        Part values in ``passive_names`` order (``sampling.stage_inputs``).
    gbw : list of ndarray (S, A) or None per stage
        GBW factors of the stage's op-amps.

    Returns
    -------
    list of StagePolynomials
        In chain order; the first stage's include the source resistance.
    """
    out = []
    for k, st in enumerate(chain.stages):
        rs = chain.source_ohms if chain.input_of(st) == CHAIN_INPUT else 0.0
        nets = tuple(stage_output_nets(st))   # "out" last: internal nets see the stage input
        nums, den = transfer_polynomials_many(st.elements, out_nets=nets, source_ohms=rs,
                                              values=values[k], gbw_scale=gbw[k],
                                              method="auto")
        out.append(StagePolynomials(nets=nets, nums=nums, den=den,
                                    w_rad_s=scale_rad_s(st.elements, values[k])))
    return out


def chain_mag_sq(chain: Chain, grid: Grid, polys: list[StagePolynomials]
                 ) -> dict[str, np.ndarray]:
    """|T|^2 from the source to every op-amp output net, for one batch of boards.

    "out" of a stage is evaluated on the whole grid (the next stage multiplies it); the
    entries hold the whole grid for the chain output and only the node-level frequencies
    (``grid.levels``) for every other net.
    """
    w_all = 2 * np.pi * grid.freq_hz
    w_lvl = w_all[grid.levels]
    out: dict[str, np.ndarray] = {}
    before = None  # |T|^2 at the stage input on the whole grid; None = 1 (the source)
    for st, sp in zip(chain.stages, polys):
        inp = chain.input_of(st)
        nets = {d["local"]: net for _, net, d in chain.graph.out_edges(inp, data=True)
                if d["stage"] is st}
        for local, num in zip(sp.nets, sp.nums):
            if local == "out":
                m2 = mag_sq(num, sp.den, w_all)
                if before is not None:
                    m2 *= before
                # Only the chain output keeps the whole grid; other nets keep what node
                # levels read, which bounds memory to two full-grid arrays per chunk.
                before = m2
                out[nets[local]] = m2 if nets[local] == CHAIN_OUTPUT else m2[:, grid.levels]
            else:
                m2 = mag_sq(num, sp.den, w_lvl)
                out[nets[local]] = m2 if before is None else m2 * before[:, grid.levels]
    return out


def chain_stable(polys: list[StagePolynomials]) -> np.ndarray:
    """Per board: every stage stable. The op-amp outputs are ideal sources, so the chain's
    poles are the union of its stages' poles."""
    ok = None
    for sp in polys:
        ok = sp.stable if ok is None else ok & sp.stable
    return ok
