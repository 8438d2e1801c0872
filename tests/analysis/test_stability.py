"""Stability: the batched Routh–Hurwitz test, the Monte Carlo's unstable boards, and the
audit of an unstable chain.

Outside judges: numpy.roots (the roots of each polynomial, independently of the Routh array),
ngspice-39 (Debian package) transient runs from a kick on boards of the same parts, and the
closed form of a pole's growth, |v(t)| ~ exp(Re(p) t). Case A of the fixture
(tests/cases/oscillating_boards.toml) is a Q 25 Sallen-Key bandpass whose nominal board is
stable while some boards built from its 1 % parts are not.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from bandwright.analysis.montecarlo import sample_columns, sample_values
from bandwright.analysis.stability import routh_stable, stage_poles
from bandwright.audit import audit
from bandwright.chain.graph import flatten
from bandwright.circuits.figures import transfer_polynomials
from bandwright.parts.notation import format_hz
from bandwright.report.spice import spice_deck

from ngspice_runner import read_wrdata_columns, run_ngspice
from spice_tools import with_control

CASES = Path(__file__).resolve().parent.parent / "cases"
CASE_A = CASES / "oscillating_boards.toml"


def _numpy_stable(den_ascending: np.ndarray) -> bool:
    """Reference verdict: every numpy.roots root strictly left of the imaginary axis."""
    return bool(np.all(np.roots(np.trim_zeros(den_ascending[::-1], "f")).real < 0))


@pytest.mark.parametrize("degree", [1, 2, 3, 4, 5, 6])
def test_routh_matches_numpy_roots_on_random_polynomials(degree):
    """5,000 random real polynomials per degree (about half stable at low degree): the
    Routh array's verdict equals numpy.roots' on every one."""
    rng = np.random.default_rng(degree)
    coefs = rng.standard_normal((5_000, degree + 1))
    ref = np.array([_numpy_stable(c) for c in coefs])
    np.testing.assert_array_equal(routh_stable(coefs), ref)


def test_routh_on_stable_polynomials_with_one_pair_near_the_axis():
    """Polynomials built from roots (numpy.poly): a complex pair with real part drawn on
    both sides of the axis, the other roots stable. The verdict is the sign of that pair."""
    rng = np.random.default_rng(7)
    for degree in (2, 3, 4, 5):
        polys, expect = [], []
        for _ in range(500):
            roots = -rng.uniform(0.1, 3.0, degree).astype(complex)
            re, im = rng.uniform(-0.05, 0.05), rng.uniform(0.5, 2.0)
            roots[0], roots[1] = complex(re, im), complex(re, -im)
            polys.append(np.real(np.poly(roots))[::-1])
            expect.append(re < 0)
        np.testing.assert_array_equal(routh_stable(np.array(polys)), np.array(expect))


@pytest.fixture(scope="module")
def case_a():
    return audit(CASE_A)


def test_case_a_yield_counts_only_stable_boards(case_a):
    """Every one of the 4,000 boards (seed 1) judged by numpy.roots of its own denominator
    (one polynomial per board, not the batched path): the Monte Carlo's stable flags agree
    board by board, no unstable board is counted as passing, and the yield is the stable
    boards' share. Counting |H|^2 alone passed 3,830 boards (95.75 %, target met); 84 of
    them have right-half-plane poles (140 of the 4,000 in all), so 3,746 pass (93.65 %, the
    95 % target missed)."""
    a = case_a
    r = a.yield_result
    st = a.chain.stages[0]
    values = sample_values(a.chain, r.spreads, samples=r.samples, seed=r.seed)
    cols = sample_columns(a.chain)
    parts = [i for i, c in enumerate(cols) if c.kind != "GBW"]
    gbw = [i for i, c in enumerate(cols) if c.kind == "GBW"]
    _, den = transfer_polynomials(st.elements, values=values[:, parts],
                                  gbw_scale=values[:, gbw] / st.model.gbw_hz)
    ref = np.array([_numpy_stable(d) for d in den])
    np.testing.assert_array_equal(r.stable, ref)
    assert np.count_nonzero(~ref) == 140
    assert r.fail_counts["unstable"] == 140
    assert not np.any(r.passed & ~ref)
    assert np.count_nonzero(r.passed) == 3746
    assert r.yield_fraction == pytest.approx(0.9365)
    assert not r.meets_target
    (y,) = [c for c in a.checks if c.id == "yield"]
    assert y.status == "fail" and "unstable 140" in y.message


@pytest.mark.ngspice
def test_case_a_boards_grow_in_ngspice_as_their_poles_say(case_a, tmp_path):
    """ngspice-39 transient from a 1 mV, 10 µs kick on three boards of case A (the parts and
    GBW written with `alter`): the most and the least unstable board and a stable one
    decaying at about 200 /s. The
    envelope grows (or decays) between 1–3 ms and 17–19 ms by exp(Re(p) · 16 ms), p the
    right-most pole from numpy.roots; within 2 % of the exponent (the envelope is read at
    1 µs steps, about 100 per cycle)."""
    a = case_a
    r = a.yield_result
    st = a.chain.stages[0]
    values = sample_values(a.chain, r.spreads, samples=r.samples, seed=r.seed)
    cols = sample_columns(a.chain)
    parts = [i for i, c in enumerate(cols) if c.kind != "GBW"]
    gbw = [i for i, c in enumerate(cols) if c.kind == "GBW"]
    _, den = transfer_polynomials(st.elements, values=values[:, parts],
                                  gbw_scale=values[:, gbw] / st.model.gbw_hz)
    right = np.array([np.max(np.roots(np.trim_zeros(d[::-1], "f")).real) for d in den])
    unstable = np.nonzero(right >= 0)[0]
    stable = np.nonzero(right < 0)[0]
    # A stable board that decays by about e^-3 over the window: a faster one reaches
    # ngspice's numerical floor before the late window.
    boards = [int(unstable[np.argmax(right[unstable])]), int(unstable[np.argmin(right[unstable])]),
              int(stable[np.argmin(np.abs(right[stable] + 200.0))])]
    deck = spice_deck(flatten(a.chain), source_ohms=a.chain.source_ohms, temperature_c=25.0,
                      title="kick")
    assert "VIN src 0 DC 0 AC 1" in deck  # docs/design.md: VIN src 0 DC <dc_v> AC 1
    deck = deck.replace("VIN src 0 DC 0 AC 1", "VIN src 0 DC 0 AC 1 PULSE(0 1m 0 1u 1u 10u 1)")
    cmds = []
    for k in boards:
        for c, x in zip(cols, values[k]):
            if c.kind == "GBW":
                inst = f"xu{c.part.split()[0][1:]}_s{c.stage}".lower()
                cmds.append(f"alter c.{inst}.c_p = {1 / (2 * math.pi * x):.12g}")
            else:
                cmds.append(f"alter {c.part}_s{c.stage} = {x:.12g}")
        cmds += ["tran 1u 20m 0 1u", f"wrdata kick{k}.txt v(out)", "destroy all"]
    run_ngspice(with_control(deck, cmds), tmp_path, name="kick.cir", timeout_s=120)
    for k in boards:
        d = read_wrdata_columns(tmp_path / f"kick{k}.txt")
        # The op-amp model's offset voltage gives the output a DC operating point: the
        # envelope is the departure from it (v at t = 0, before the kick).
        t, v = d[:, 0], d[:, 1] - d[0, 1]
        early = np.abs(v[(t > 1e-3) & (t < 3e-3)]).max()
        late = np.abs(v[(t > 17e-3) & (t < 19e-3)]).max()
        got = math.log(late / early)
        want = right[k] * 16e-3
        assert got == pytest.approx(want, rel=0.02, abs=0.002)
        assert (got > 0) == (not r.stable[k])


def test_unstable_board_leads_the_audit(tmp_path):
    """Case A's parts with K = 1 + Ra/Rb = 31 (Ra 300 kΩ): Q = 1/(3 − K) < 0, both poles
    real and in the right half-plane (Sallen-Key bandpass, Q = 1/(3 − K): common practice).
    numpy.roots of the stage's denominator says so; the audit's first check is a failing
    `stability` naming them, the gbw check says unstable (not "cannot reach Q"), and the
    steady-state checks are failed as not meaningful."""
    text = CASE_A.read_text().replace('Ra = "19.6k"', 'Ra = "300k"')
    path = tmp_path / "k31.toml"
    path.write_text(text)
    a = audit(path)
    st = a.chain.stages[0]
    _, den = transfer_polynomials(st.elements)
    roots = np.roots(np.trim_zeros(den[::-1], "f"))
    rhp = roots[roots.real > 0]
    assert rhp.size == 2 and np.all(np.abs(rhp.imag) < 1e-9 * np.abs(rhp))
    poles = stage_poles(st.elements, position=1)
    np.testing.assert_allclose(np.sort(poles.unstable_poles.real), np.sort(rhp.real), rtol=1e-6)
    first = a.checks[0]
    assert first.id == "stability" and first.status == "fail" and first.value == 2.0
    for p in rhp:   # the message names each right-half-plane pole as numpy.roots finds it
        assert "+" + format_hz(abs(p) / (2 * math.pi), significant=3) in first.message
    (g,) = [c for c in a.checks if c.id == "gbw"]
    assert g.status == "fail" and "unstable" in g.message and "cannot reach" not in g.message
    for c in a.checks:
        if c.id in ("mask", "headroom", "slew", "noise"):
            assert c.status == "fail" and c.message.startswith("not meaningful")
    assert a.yield_result.fail_counts["unstable"] == a.yield_result.samples


def test_stable_chain_passes_stability_and_keeps_its_checks(case_a):
    """Case A's nominal board: the pole pair near 9.93 kHz at Q ≈ 25 (numpy.roots) is in
    the left half-plane; the stability check passes and the mask checks are read as usual."""
    a = case_a
    st = a.chain.stages[0]
    _, den = transfer_polynomials(st.elements)
    assert _numpy_stable(den)
    assert a.checks[0].id == "stability" and a.checks[0].status == "pass"
    assert all(not c.message.startswith("not meaningful") for c in a.checks)
