"""Monte Carlo yield: repeatability, statistics against first-order theory, per-sample
verdicts against ngspice, drivers, offers, interval and memory.

Sources named beside each check: Schoeffler 1964 [mem] for the first-order spread;
scipy.stats (``binomtest(...).proportion_ci(method="wilson")``) for Wilson's interval
(Wilson, JASA 22, 1927); ngspice-39 (Debian package) for the responses of the same boards.
"""

from __future__ import annotations

import dataclasses
import math
import tracemalloc

import numpy as np
import pytest
from scipy import stats

from bandwright.analysis import montecarlo as mc
from bandwright.analysis.grid import passband_grid
from bandwright.analysis.levels import swing_limit_vpk
from bandwright.advice.tolerance import plan_yield
from bandwright.analysis.montecarlo import (Spreads, monte_carlo, resolve_spreads,
                                            sample_columns, sample_values, wilson_interval)
from bandwright.analysis.sensitivity import first_order_spread, stage_sensitivity
from bandwright.chain.graph import flatten
from bandwright.circuits.figures import section_figures_batch
from bandwright.report.spice import spice_deck

from mc_support import mfb_chain, mixed_chain, requirement_around
from ngspice_runner import read_wrdata, run_ngspice
from spice_tools import with_control

TIGHT = {"resistor_pct": 0.5, "capacitor_pct": 1.0, "gbw_spread_pct": 20.0}


@pytest.fixture(scope="module")
def mixed():
    chain = mixed_chain()
    # Margins small enough that passband, stopband and headroom each fail some boards.
    return chain, requirement_around(chain, tone=(2e3, 1.0), headroom_margin=1.01,
                                     stop_margin_db=0.1, tolerance=TIGHT)


def test_fixed_seed_repeats_exactly(mixed):
    chain, req = mixed
    a = monte_carlo(chain, req, samples=300, seed=11, with_sensitivities=False)
    b = monte_carlo(chain, req, samples=300, seed=11, with_sensitivities=False)
    c = monte_carlo(chain, req, samples=300, seed=12, with_sensitivities=False)
    assert a.yield_fraction == b.yield_fraction
    np.testing.assert_array_equal(a.passed, b.passed)
    np.testing.assert_array_equal(a.envelope_db, b.envelope_db)
    assert a.drivers == b.drivers
    assert not np.array_equal(a.passed, c.passed)
    assert 0 < a.yield_fraction < 1


def test_chunking_does_not_change_the_draws_or_the_verdicts(mixed, monkeypatch):
    chain, req = mixed
    whole = monte_carlo(chain, req, samples=250, seed=5, with_sensitivities=False)
    values = sample_values(chain, resolve_spreads(req), samples=250, seed=5)
    monkeypatch.setattr(mc.sampling, "CHUNK_SAMPLES", 64)
    chunked = monte_carlo(chain, req, samples=250, seed=5, with_sensitivities=False)
    np.testing.assert_array_equal(whole.passed, chunked.passed)
    np.testing.assert_allclose(sample_values(chain, resolve_spreads(req), samples=250, seed=5),
                               values, rtol=0, atol=0)


def test_defaults_are_the_customary_series_tolerances():
    """parts.tolerance (common practice): E96 resistors 1 %, E12 capacitors 10 %."""
    chain = mfb_chain([(1e3, 2.0, 1.0)])
    sp = resolve_spreads(requirement_around(chain))
    assert (sp.resistor_pct, sp.capacitor_pct) == (1.0, 10.0)
    assert sp.resistor_source == "customary for E96"
    assert sp.capacitor_source == "customary for E12"
    sp2 = resolve_spreads(requirement_around(chain, tolerance={"capacitor_pct": 2}))
    assert (sp2.capacitor_pct, sp2.capacitor_source) == (2.0, "[tolerance]")


@pytest.mark.parametrize("distribution", ["uniform", "gaussian"])
def test_draws_have_the_stated_spread(distribution):
    """Uniform on ±t: sigma = t/sqrt(3); Gaussian with t at 3 sigma: sigma = t/3."""
    chain = mfb_chain([(1e3, 2.0, 1.0)])
    sp = Spreads(resistor_pct=1.0, capacitor_pct=5.0, gbw_spread_pct=20.0,
                 distribution=distribution)
    v = sample_values(chain, sp, samples=20000, seed=2)
    cols = sample_columns(chain)
    rel = v / np.array([c.nominal for c in cols]) - 1
    for i, c in enumerate(cols):
        assert np.std(rel[:, i]) == pytest.approx(sp.sigma_rel(c.kind), rel=0.03)
        if distribution == "uniform":
            t = {"R": 0.01, "C": 0.05, "GBW": 0.2}[c.kind]
            assert np.abs(rel[:, i]).max() <= t * (1 + 1e-12)


def test_f0_spread_matches_the_first_order_estimate_from_sensitivities():
    """One section, uniform tolerances: std(f0)/f0 from the Monte Carlo draws equals
    sqrt(sum S^2 sigma^2) (Schoeffler 1964 [mem]) within 10 %."""
    chain = mfb_chain([(10e3, 5.0, 2.0)])
    st = chain.stages[0]
    sp = Spreads(resistor_pct=1.0, capacitor_pct=2.0, gbw_spread_pct=20.0,
                 distribution="uniform")
    v = sample_values(chain, sp, samples=4000, seed=9)
    n_p = sum(e.kind in ("R", "C") for e in st.elements)
    gbw = v[:, n_p:] / st.model.gbw_hz
    f0, q, _ = section_figures_batch(st.elements, kind="bandpass", near_hz=10e3,
                                     values=v[:, :n_p], gbw_scale=gbw)
    sens = stage_sensitivity(st)
    sigma = {c.part.replace(" GBW", "") if c.kind != "GBW" else "GBW": sp.sigma_rel(c.kind)
             for c in sample_columns(chain)}
    f0_sig, q_sig, _ = first_order_spread(sens, sigma)
    assert np.std(f0) / np.mean(f0) == pytest.approx(f0_sig, rel=0.10)
    assert np.std(q) / np.mean(q) == pytest.approx(q_sig, rel=0.10)


@pytest.mark.parametrize("k, n", [(0, 50), (1, 50), (25, 50), (49, 50), (50, 50),
                                  (1900, 2000), (1999, 2000)])
def test_wilson_interval_matches_scipy(k, n):
    ref = stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
    lo, hi = wilson_interval(k, n)
    assert lo == pytest.approx(ref.low, abs=1e-12)
    assert hi == pytest.approx(ref.high, abs=1e-12)


def test_result_figures_are_consistent(mixed):
    chain, req = mixed
    r = monte_carlo(chain, req, samples=400, seed=3)
    assert r.nominal_passes and r.nominal_margin_db > 0
    assert r.yield_fraction == pytest.approx(np.mean(r.passed))
    np.testing.assert_array_equal(r.passed, r.mask_ok & r.headroom_ok)
    assert r.fail_counts["headroom"] == np.count_nonzero(~r.headroom_ok)
    lo, hi = r.interval
    assert lo < r.yield_fraction < hi
    p1, p50, p99 = r.envelope_db
    assert np.all(p1 <= p50) and np.all(p50 <= p99)
    assert r.envelope_db.shape == (3, r.freq_hz.size)
    assert len(r.sensitivities) == len(chain.stages)
    # The deciding part is one that sets an f0 (|S^f0| >= 1/4), not the GBW (S ~ Q f0/GBW).
    top = r.drivers[0]
    assert abs(r.sensitivities[top.stage - 1].of(top.part)[0]) >= 0.25
    assert 0 < r.explained <= 1.5


def test_drivers_name_the_loose_class():
    """Capacitors at 5 %, resistors at 0.01 %: only capacitors can decide."""
    chain = mfb_chain([(10e3, 8.0, 2.0)])
    req = requirement_around(chain, loss_margin_db=0.3,
                             tolerance={"resistor_pct": 0.01, "capacitor_pct": 5,
                                        "gbw_spread_pct": 0})
    r = monte_carlo(chain, req, samples=1000, seed=1, with_sensitivities=False)
    assert 0.05 < r.yield_fraction < 0.95
    assert {d.part for d in r.drivers} <= {"C1", "C2"}
    assert r.drivers[0].index > 0.1


def test_offer_finds_tighter_parts_that_reach_the_target():
    chain = mfb_chain([(10e3, 4.0, 2.0)])
    req = requirement_around(chain, loss_margin_db=0.5,
                             tolerance={"resistor_pct": 1, "capacitor_pct": 10,
                                        "gbw_spread_pct": 0, "samples": 400,
                                        "min_yield": 0.9})
    r = plan_yield(chain, req)
    assert r.yield_fraction < 0.9
    o = r.offer
    assert o is not None and o.reaches
    assert o.yield_fraction >= 0.9
    assert o.capacitor_pct < 10 or o.resistor_pct < 1
    assert "capacitors" in o.message and "%" in o.message


def test_no_offer_when_the_nominal_chain_fails():
    chain = mfb_chain([(10e3, 4.0, 2.0)])
    req = requirement_around(chain, loss_margin_db=-0.2, tolerance={"samples": 100})
    r = plan_yield(chain, req)
    assert not r.nominal_passes and r.offer is None
    assert r.nominal_margin_db == pytest.approx(-0.2, abs=1e-6)   # loss 0.2 dB over the mask


def test_twenty_thousand_samples_stay_in_bounded_memory():
    """Chunked: peak traced memory (numpy reports to tracemalloc) well under 150 MB."""
    chain = mfb_chain([(10e3, 4.0, 2.0), (11e3, 4.0, 1.0)])
    req = requirement_around(chain, tolerance={"capacitor_pct": 2})
    tracemalloc.start()
    try:
        r = monte_carlo(chain, req, samples=20_000, seed=4, with_sensitivities=False)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert r.passed.shape == (20_000,)
    assert peak < 150e6


# --- against ngspice ----------------------------------------------------------------------

def _alter_lines(chain, row: np.ndarray) -> list[str]:
    lines = []
    for c, x in zip(sample_columns(chain), row):
        if c.kind == "GBW":
            inst = f"xu{c.part.split()[0][1:]}_s{c.stage}".lower()
            # C_P = 1/(2 pi GBW) inside the op-amp subcircuit (report.spice).
            lines.append(f"alter c.{inst}.c_p = {1 / (2 * math.pi * x):.12g}")
        else:
            lines.append(f"alter {c.part}_s{c.stage} = {x:.12g}")
    return lines


def _ngspice_verdicts(chain, req, values, tmp_path) -> np.ndarray:
    """Run every sample in one ngspice deck (alter per sample) and judge its responses
    with the mask and headroom rules written out here, independently of the module."""
    pb = req.passband
    lo, hi = pb.low_hz, pb.high_hz
    # ngspice-39 takes floor(ppd log10(hi/lo)) + 1 points spread evenly in log from lo to
    # hi: half a step above the count we want lands exactly on geomspace(lo, hi, n).
    ppd = math.floor((passband_grid(req).size - 0.5) / math.log10(hi / lo))
    singles = [p.freq_hz for p in req.stopband] + [t.freq_hz for t in req.input.tones]
    nets = chain.output_nets
    probes = " ".join(f"v({n})" for n in nets)
    cmds = ["set wr_singlescale", "set wr_vecnames"]
    for k, row in enumerate(values):
        cmds += _alter_lines(chain, row)
        cmds += [f"ac dec {ppd} {lo!r} {hi!r}", f"wrdata pb{k}.txt {probes}"]
        for j, f in enumerate(singles):
            cmds += [f"ac lin 1 {f!r} {f!r}", f"wrdata x{k}_{j}.txt {probes}"]
        cmds.append("destroy all")
    deck = spice_deck(flatten(chain), source_ohms=chain.source_ohms,
                      temperature_c=req.environment.temperature_c, title="mc")
    run_ngspice(with_control(deck, cmds), tmp_path, name="mc.cir", timeout_s=120)
    n_stop = len(req.stopband)
    tv = np.array([t.vpk for t in req.input.tones])
    verdicts = []
    for k in range(len(values)):
        d = read_wrdata(tmp_path / f"pb{k}.txt")
        np.testing.assert_allclose(d["frequency"].real, passband_grid(req), rtol=1e-8)
        single = [read_wrdata(tmp_path / f"x{k}_{j}.txt") for j in range(len(singles))]
        g_pb = 20 * np.log10(np.abs(d["v(out)"]))
        ok = (pb.gain_db - g_pb.min() <= pb.max_loss_db + 1e-9
              and abs(g_pb.max() - pb.gain_db) <= pb.gain_tolerance_db + 1e-9)
        for j, p in enumerate(req.stopband):
            ok &= pb.gain_db - 20 * np.log10(abs(single[j]["v(out)"][0])) >= p.min_loss_db - 1e-9
        for n in nets:
            tones = np.array([abs(s[f"v({n})"][0]) for s in single[n_stop:]])
            peak = req.input.max_vpk * np.abs(d[f"v({n})"]).max() + float(tones @ tv)
            ok &= peak <= swing_limit_vpk(req.supply, chain.stage_of(n).model.swing_to_rail_v)
        verdicts.append(bool(ok))
    return np.array(verdicts)


@pytest.mark.ngspice
def test_every_sample_gets_the_same_verdict_from_ngspice(mixed, tmp_path):
    """40 boards (the same part values and GBWs, written with ngspice `alter`): ngspice-39's
    AC responses, read with the mask and headroom rules, pass and fail exactly the samples
    the Monte Carlo passes and fails."""
    chain, req = mixed
    n = 40
    r = monte_carlo(chain, req, samples=n, seed=21, with_sensitivities=False)
    assert 0 < r.yield_fraction < 1          # both verdicts occur
    # and every way of failing a stable board can (these boards are all stable)
    assert r.fail_counts["unstable"] == 0
    assert all(v > 0 for k, v in r.fail_counts.items() if k != "unstable")
    values = sample_values(chain, r.spreads, samples=n, seed=21)
    got = _ngspice_verdicts(chain, req, values, tmp_path)
    np.testing.assert_array_equal(got, r.passed)


def test_sample_columns_cover_every_part_and_opamp(mixed):
    chain, _ = mixed
    cols = sample_columns(chain)
    n_parts = sum(e.kind in ("R", "C") for st in chain.stages for e in st.elements)
    n_amps = sum(e.kind == "opamp" for st in chain.stages for e in st.elements)
    assert len(cols) == n_parts + n_amps
    assert sum(c.kind == "GBW" for c in cols) == n_amps
    assert dataclasses.is_dataclass(cols[0])
