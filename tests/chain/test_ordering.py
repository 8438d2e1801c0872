"""Section ordering and equal-maxima gains: check values and brute force."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from bandwright.chain.ordering import (best_order_brute, best_order_dp, choose_order,
                                       make_problem, order_cost, stage_gains)
from bandwright.prototype import prototype
from bandwright.sections import bandpass_sections
from bandwright.sections.section import Section
from bandwright.sections.split import cascade_response


def _problem(sections, psd=None, tones=(), gain=1.0):
    nf = np.geomspace(0.8, 1.25, 301)
    if psd is None:
        psd = np.full((len(sections), nf.size), 1e-16)
    return make_problem(sections, psd, nf, total_gain=gain,
                        passband_hz=np.geomspace(0.95, 1.05, 101), max_vpk=1.0, tones=tones)


def test_intermediate_peaks_match_references_check_values():
    """docs/methods.md [calc]: Butterworth N = 3, Qbp = 10 — the peak after two sections is
    1.155 × the final peak when the two Q ≈ 20 sections come first, 3.12 × otherwise."""
    secs = bandpass_sections(prototype("butterworth", 3, 10 * math.log10(2)), center_hz=1.0,
                             bandwidth_hz=0.1, gain=1.0)
    pr = _problem(secs)
    full = pr.peak[7]
    assert pr.peak[0b101] / full == pytest.approx(1.155, abs=1e-3)   # sections 0 and 2
    assert pr.peak[0b011] / full == pytest.approx(3.12, abs=5e-3)    # 0 and the centre one
    assert pr.peak[0b110] / full == pytest.approx(3.12, abs=5e-3)


def test_peak_of_a_subset_is_the_cascade_peak():
    """P(S) is max over the passband of |Π H| (cross-checked against cascade_response)."""
    secs = bandpass_sections(prototype("chebyshev", 4, 0.5), center_hz=1.0, bandwidth_hz=0.1,
                             gain=1.0)
    pr = _problem(secs)
    unit = [Section(s.kind, s.f0_hz, s.q, 1.0) for s in secs]
    for subset in (0b0001, 0b0110, 0b1011, 0b1111):
        chosen = [u for i, u in enumerate(unit) if subset >> i & 1]
        ref = np.abs(cascade_response(chosen, np.geomspace(0.95, 1.05, 101))).max()
        assert pr.peak[subset] == pytest.approx(ref, rel=1e-12)


def test_equal_maxima_gains_multiply_to_total_and_equalise_peaks():
    """Equal-maxima scaling (Schaumann & Van Valkenburg 2001, ch. 6 [mem]): every stage
    output peaks at the output's level; the gains multiply to the total."""
    secs = bandpass_sections(prototype("butterworth", 4, 1.0), center_hz=1.0, bandwidth_hz=0.1,
                             gain=1.0)
    pr = _problem(secs, tones=[(0.7, 3.0)], gain=50.0)
    order = (2, 0, 3, 1)
    g = stage_gains(pr, order)
    assert np.prod(g) == pytest.approx(50.0, rel=1e-12)
    subset, level = 0, []
    prefix = 1.0
    for i, gi in zip(order, g):
        subset |= 1 << i
        prefix *= gi
        level.append(prefix * pr.peak[subset])
    np.testing.assert_allclose(level, level[-1], rtol=1e-12)


@settings(max_examples=40, deadline=None)
@given(n=st.integers(2, 7), seed=st.integers(0, 10_000))
def test_dynamic_programming_equals_brute_force(n, seed):
    """The DP over subsets is exact: it equals brute force over every permutation."""
    rng = np.random.default_rng(seed)
    secs = [Section("bandpass", float(rng.uniform(0.85, 1.15)), float(rng.uniform(0.7, 30)), 1.0)
            for _ in range(n)]
    psd = rng.uniform(0.2, 5.0, size=(n, 1))[:, [0] * 301] * 1e-16
    pr = _problem(secs, psd=psd, tones=[(float(rng.uniform(0.5, 0.8)), float(rng.uniform(0, 2)))])
    o_bf, c_bf = best_order_brute(pr)
    o_dp, c_dp = best_order_dp(pr)
    assert c_dp == pytest.approx(c_bf, rel=1e-9)
    assert order_cost(pr, o_dp) == pytest.approx(c_dp, rel=1e-9)
    # Never worse than any order tried at random.
    for _ in range(5):
        perm = tuple(rng.permutation(n))
        assert c_dp <= order_cost(pr, perm) * (1 + 1e-12)


def test_twelve_sections_by_dynamic_programming():
    secs = bandpass_sections(prototype("butterworth", 12, 1.0), center_hz=1.0, bandwidth_hz=0.1,
                             gain=1.0)
    pr = _problem(secs)
    result = choose_order(pr, secs)
    assert sorted(result.order) == list(range(12))
    assert result.method.startswith("dynamic")
    assert result.noise_vrms <= result.generated_vrms * (1 + 1e-12)
    assert result.noise_vrms <= result.increasing_q_vrms * (1 + 1e-12)


def test_long_chain_order_follows_the_exact_model():
    """Beyond 12 sections the chain is ordered by increasing Q (Moschytz 1975 [mem]); its
    gains and noise come from the same equal-maxima model, evaluated along that one order:
    checked here against the exact subset tables on a six-section chain."""
    from bandwright.chain.ordering import long_chain_order
    secs = bandpass_sections(prototype("chebyshev", 6, 0.5), center_hz=1.0, bandwidth_hz=0.1,
                             gain=30.0)
    nf = np.geomspace(0.8, 1.25, 301)
    psd = np.random.default_rng(1).uniform(1, 3, (6, 1)) * np.ones((6, 301)) * 1e-16
    kw = dict(total_gain=30.0, passband_hz=np.geomspace(0.95, 1.05, 101), max_vpk=1.0,
              tones=[(0.7, 2.0)])
    pr = make_problem(secs, psd, nf, **kw)
    lo = long_chain_order(secs, psd, nf, **kw)
    assert [secs[i].q for i in lo.order] == sorted(s.q for s in secs)
    assert lo.noise_vrms == pytest.approx(math.sqrt(order_cost(pr, lo.order)), rel=1e-9)
    assert lo.generated_vrms == pytest.approx(math.sqrt(order_cost(pr, tuple(range(6)))),
                                              rel=1e-9)
    np.testing.assert_allclose(lo.gains, stage_gains(pr, lo.order), rtol=1e-9)


def test_brute_force_with_no_finite_cost_keeps_the_given_order():
    """A denormal input amplitude (5e-324 V) once gave every order a NaN cost and the search
    nothing to return (TypeError). With no finite cost the order stays as given, at cost
    inf — the level checks then speak."""
    import numpy as np
    from bandwright.chain.ordering import OrderingProblem, best_order_brute
    n = 3
    problem = OrderingProblem(n=n, peak=np.zeros(1 << n), after_noise=np.ones((n, 1 << n)),
                              total_gain=1.0)  # 0/0 peak ratios: NaN for every order
    with np.errstate(invalid="ignore"):
        order, cost = best_order_brute(problem)
    assert order == (0, 1, 2) and cost == float("inf")
