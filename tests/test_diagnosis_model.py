"""The diagnosis model (ln H of the chain and its derivatives in log-part space) against a
closed form differentiated by sympy, and held to the nodal solver (docs/design.md: the fast path
is tested against the reference evaluation)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from bandwright.audit import audit
from bandwright.chain.graph import CHAIN_OUTPUT, build_chain, net_transfers
from bandwright.chain.stage import with_parts
from bandwright.diagnosis.model import ChainModel

SIGMA = {"R": 0.01, "C": 0.05, "GBW": 0.2}


@pytest.fixture(scope="module")
def two_inverters(tmp_path_factory):
    p = tmp_path_factory.mktemp("m") / "chain.toml"
    p.write_text("""
[amplifier]
gbw_hz = 1e6
dc_gain_db = 100
[[stage]]
topology = "inverting_gain"
parts = { Rin = "10k", Rf = "47k" }
[[stage]]
topology = "inverting_gain"
parts = { Rin = "22k", Rf = "22k" }
""")
    return audit(p)


def test_log_response_and_jacobian_match_the_single_pole_closed_form(two_inverters):
    """Inverting amplifier with a single-pole op-amp, A(s) = A0 / (1 + s A0 / wt):
    H = -(Rf/Rin) / (1 + (1 + Rf/Rin) / A(s)) (Franco 2015, §6.2 [mem]); ln H of the chain
    and d ln H / d ln x for every x (Rin, Rf, GBW of each stage) by sympy."""
    rin, rf, wt, s = sp.symbols("rin rf wt s")
    a0 = 10 ** (100 / 20)
    a = a0 / (1 + s * a0 / wt)
    h = -(rf / rin) / (1 + (1 + rf / rin) / a)
    lnh = sp.log(h)
    # d/d ln x = x d/dx
    d = [sp.lambdify((rin, rf, wt, s), x * sp.diff(lnh, x)) for x in (rin, rf, wt)]
    f_ln = sp.lambdify((rin, rf, wt, s), lnh)
    f = np.geomspace(1e3, 1e6, 37)
    sj = 2j * np.pi * f
    w_t = 2 * math.pi * 1e6
    stages = ((10e3, 47e3), (22e3, 22e3))
    want_ln = sum(f_ln(r1, r2, w_t, sj) for r1, r2 in stages)
    want_j = np.column_stack([g(r1, r2, w_t, sj) * np.ones_like(sj)
                              for r1, r2 in stages for g in d])
    m = ChainModel(two_inverters.chain, SIGMA)
    assert [v.part for v in m.variables] == ["Rin", "Rf", "U1.gbw"] * 2
    got = m.log_h_parts(np.zeros(m.size), 2 * np.pi * f).sum(axis=0)
    # Compare H itself: ln of a negative number differs by 2 pi j in branch choice.
    np.testing.assert_allclose(np.exp(got), np.exp(want_ln), rtol=1e-9)
    # Central difference, step 1e-4 in ln x: truncation ~1e-8 of the derivative.
    np.testing.assert_allclose(m.jacobian(np.zeros(m.size), 2 * np.pi * f), want_j,
                               rtol=1e-6, atol=1e-8)


def test_response_with_a_part_changed_equals_the_nodal_solver():
    """A capacitor of the Tow-Thomas stage 5 % high: the model at x = ln 1.05 against the
    nodal solver on the chain rebuilt with that value (relative 1e-9)."""
    from pathlib import Path
    a = audit(Path(__file__).resolve().parent / "reference" / "diagnosis" /
              "three_stage_mfb_tow_thomas.toml")
    m = ChainModel(a.chain, SIGMA)
    j = next(i for i, v in enumerate(m.variables) if (v.stage, v.part) == (2, "C1"))
    x = np.zeros(m.size)
    x[j] = math.log(1.05)
    f = np.geomspace(1e3, 2e4, 50)
    got = np.exp(m.log_h_parts(x, 2 * np.pi * f).sum(axis=0))
    st = a.chain.stages[1]
    parts = dict(st.components)
    parts["C1"] *= 1.05
    stages = list(a.chain.stages)
    stages[1] = with_parts(st, parts)
    want = net_transfers(build_chain(stages, source_ohms=a.chain.source_ohms), f)[CHAIN_OUTPUT]
    np.testing.assert_allclose(got, want, rtol=1e-9)
