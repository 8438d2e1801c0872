"""Monte Carlo sampling: the tolerances as numbers, the randomised quantities of a chain,
and the boards drawn from them.

Every sample draws every resistor, capacitor and op-amp GBW of the whole chain at once.
Draws come from ``numpy.random.default_rng(seed)`` chunk by chunk in a fixed order, so a
seed repeats a run exactly whatever the chunk size.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bandwright.chain.graph import Chain
from bandwright.inputs.requirement import Requirement, Tolerance
from bandwright.parts.tolerance import default_tolerance_pct

__all__ = ["Spreads", "SampleColumn", "resolve_spreads", "sample_columns", "sample_values",
           "draw", "chunks", "tolerances", "factors", "stage_spans", "stage_inputs",
           "CHUNK_SAMPLES"]

#: Samples evaluated together: bounds memory (about 40 MB per chunk for a six-stage chain
#: on 600 frequencies) while keeping numpy's batches large.
CHUNK_SAMPLES = 2000
# Deviations in a Gaussian draw beyond 1 - 1e-3 of a part's value would be a
# non-physical (zero or negative) part; a 3-sigma tolerance below 50 % never gets there
# except at ~1e-9 probability, and the clip keeps the solver finite if it does.
_MIN_FACTOR = 1e-3


@dataclass(frozen=True, slots=True)
class Spreads:
    """Tolerances of one Monte Carlo run, resolved to numbers.

    Attributes
    ----------
    resistor_pct, capacitor_pct, gbw_spread_pct : float
        ± percent.
    distribution : {"uniform", "gaussian"}
        Gaussian: the tolerance is 3 sigma.
    resistor_source, capacitor_source : str
        Where the figure came from ("[tolerance]" or "customary for E96").
    """

    resistor_pct: float
    capacitor_pct: float
    gbw_spread_pct: float
    distribution: str
    resistor_source: str = "[tolerance]"
    capacitor_source: str = "[tolerance]"

    def sigma_rel(self, kind: str) -> float:
        """Relative standard deviation of one quantity.

        Parameters
        ----------
        kind : {"R", "C", "GBW"}

        Returns
        -------
        float
            t/sqrt(3) for a uniform spread on ±t (the variance of a uniform distribution),
            t/3 for a Gaussian with t at 3 sigma.
        """
        pct = {"R": self.resistor_pct, "C": self.capacitor_pct,
               "GBW": self.gbw_spread_pct}[kind] / 100
        # Uniform on ±t: sigma = t / sqrt(3); Gaussian with t at 3 sigma: t / 3.
        return pct / math.sqrt(3) if self.distribution == "uniform" else pct / 3


def resolve_spreads(requirement: Requirement) -> Spreads:
    """The requirement's `[tolerance]` as numbers.

    Parameters
    ----------
    requirement : Requirement

    Returns
    -------
    Spreads
        Part tolerances from `[tolerance]`, or where one is not given the tolerance
        customary for `design.resistor_series` / `design.capacitor_series` (common
        practice, ``parts.tolerance.default_tolerance_pct``: E96 1 %, E12 10 %, ...).
    """
    t: Tolerance = requirement.tolerance
    rs, cs = requirement.design.resistor_series, requirement.design.capacitor_series
    r = t.resistor_pct if t.resistor_pct is not None else default_tolerance_pct(rs)
    c = t.capacitor_pct if t.capacitor_pct is not None else default_tolerance_pct(cs)
    return Spreads(resistor_pct=float(r), capacitor_pct=float(c),
                   gbw_spread_pct=float(t.gbw_spread_pct), distribution=t.distribution,
                   resistor_source="[tolerance]" if t.resistor_pct is not None
                   else f"customary for {rs}",
                   capacitor_source="[tolerance]" if t.capacitor_pct is not None
                   else f"customary for {cs}")


@dataclass(frozen=True, slots=True)
class SampleColumn:
    """One randomised quantity: a part, or the GBW of one op-amp.

    Attributes
    ----------
    stage : int
        Stage position.
    part : str
        Part name in its stage ("R2"), or "<op-amp> GBW" ("U1 GBW").
    kind : {"R", "C", "GBW"}
    nominal : float
        Ohms, farads, or Hz.
    """

    stage: int
    part: str
    kind: str
    nominal: float


def sample_columns(chain: Chain) -> tuple[SampleColumn, ...]:
    """Every randomised quantity of `chain`, in draw order.

    Parameters
    ----------
    chain : Chain

    Returns
    -------
    tuple of SampleColumn
        Stage by stage: its R and C in ``passive_names`` order, then its op-amps with
        finite GBW (an ideal op-amp has no GBW to spread).
    """
    cols = []
    for st in chain.stages:
        cols += [SampleColumn(st.position, e.name, e.kind, e.value)
                 for e in st.elements if e.kind in ("R", "C")]
        cols += [SampleColumn(st.position, f"{e.name} GBW", "GBW", e.model.gbw_hz)
                 for e in st.elements if e.kind == "opamp" and math.isfinite(e.model.gbw_hz)]
    return tuple(cols)


def draw(rng: np.random.Generator, count: int, n_cols: int, distribution: str) -> np.ndarray:
    """Normalised deviations u: uniform on [-1, 1], or Gaussian with sigma 1/3 (tolerance at
    3 sigma); a part's value is nominal * (1 + tolerance * u)."""
    if distribution == "uniform":
        return rng.uniform(-1.0, 1.0, size=(count, n_cols))
    return rng.standard_normal(size=(count, n_cols)) / 3.0


def chunks(samples: int) -> list[int]:
    """Sizes of the chunks `samples` boards are evaluated in (``CHUNK_SAMPLES`` each)."""
    return [min(CHUNK_SAMPLES, samples - s) for s in range(0, samples, CHUNK_SAMPLES)]


def tolerances(cols: tuple[SampleColumn, ...], spreads: Spreads) -> np.ndarray:
    """Relative tolerance of every column (0.01 for ±1 %)."""
    pct = {"R": spreads.resistor_pct, "C": spreads.capacitor_pct, "GBW": spreads.gbw_spread_pct}
    return np.array([pct[c.kind] / 100 for c in cols])


def factors(u: np.ndarray, tol: np.ndarray) -> np.ndarray:
    """Value factors 1 + t u of normalised deviations `u`, kept physical (> 0)."""
    return np.maximum(1.0 + u * tol, _MIN_FACTOR)


def sample_values(chain: Chain, spreads: Spreads, *, samples: int, seed: int) -> np.ndarray:
    """The boards `monte_carlo` draws for the same chain, spreads, samples and seed.

    Parameters
    ----------
    chain : Chain
    spreads : Spreads
    samples, seed : int

    Returns
    -------
    ndarray of float, shape (samples, columns)
        Columns as ``sample_columns(chain)``: ohms, farads, and GBW in Hz.

    Notes
    -----
    For writing the same boards elsewhere (a SPICE run) and for tests; the Monte Carlo
    itself draws chunk by chunk in the same order and never holds every board at once.
    """
    cols = sample_columns(chain)
    rng = np.random.default_rng(seed)
    tol = tolerances(cols, spreads)
    nominal = np.array([c.nominal for c in cols])
    out = [nominal * factors(draw(rng, n, len(cols), spreads.distribution), tol)
           for n in chunks(samples)]
    return np.vstack(out)


def stage_spans(chain: Chain, cols: tuple[SampleColumn, ...]
                ) -> list[tuple[list[int], list[int]]]:
    """Per stage: column indices of its passives (``passive_names`` order) and its op-amps'
    GBW (element order)."""
    spans = []
    for st in chain.stages:
        mine = [i for i, c in enumerate(cols) if c.stage == st.position]
        spans.append(([i for i in mine if cols[i].kind != "GBW"],
                      [i for i in mine if cols[i].kind == "GBW"]))
    return spans


def stage_inputs(chain: Chain, spans, fac: np.ndarray
                 ) -> tuple[list[np.ndarray], list[np.ndarray | None]]:
    """Part values (S, P) and GBW factors (S, A) of every stage from the factor matrix
    (S, columns) of ``factors``."""
    values, gbw = [], []
    for st, (pcols, gcols) in zip(chain.stages, spans):
        nominal = np.array([e.value for e in st.elements if e.kind in ("R", "C")])
        values.append(nominal * fac[:, pcols])
        ops = [e for e in st.elements if e.kind == "opamp"]
        if not gcols:
            gbw.append(None)
            continue
        # Ideal op-amps have no column; the solver leaves them ideal whatever their factor.
        g = np.ones((fac.shape[0], len(ops)))
        finite = [a for a, e in enumerate(ops) if math.isfinite(e.model.gbw_hz)]
        g[:, finite] = fac[:, gcols]
        gbw.append(g)
    return values, gbw
