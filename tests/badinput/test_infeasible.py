"""Valid requirements no chain meets: exit 1, the figures that make them infeasible, and a
nearest requirement that does work — which each test then plans to show that it does.

Monte Carlo samples are cut to the minimum (10): the yield is not what these tests judge.
"""

from __future__ import annotations

import json
import math
import re

import numpy as np
import pytest
from conftest import run_cli
from scipy import signal

from bandwright.advice import (
    MAX_BUILT_ORDER,
    frequency_of_omega,
    omega_for_loss,
    prototype_loss_db,
)
from bandwright.candidates import LOSS_SHARE, MAX_ORDER, make_candidates
from bandwright.planner import plan
from bandwright.prototype import bandpass_omega
from bandwright.inputs import load_spec, spec_from_dict

FAST_MC = "[tolerance]\nsamples = 10\n"


def _fails(p, check_id):
    return [c for c in p.checks if c.id == check_id and c.status == "fail"]


@pytest.mark.slow
def test_q_beyond_the_op_amp_names_the_gbw_needed_and_a_class_that_builds_it(write_spec):
    """Q 50 at 20 kHz on a 3 MHz op-amp: the topology check names the GBW needed and the
    slowest class that has it; that class then builds every section."""
    text = """
    [passband]
    center_hz = 20000
    bandwidth_hz = 400
    max_loss_db = 1
    [[stopband]]
    freq_hz = 18000
    min_loss_db = 30
    [amplifier]
    archetype = "general"
    """ + FAST_MC
    spec = write_spec(text)
    r = run_cli("plan", spec, "--json")
    assert r.returncode == 1, r.stderr
    doc = json.loads(r.stdout)
    failing = [c for c in doc["checks"] if c["status"] == "fail"]
    assert failing and all(c["id"] == "topology" for c in failing)
    msg = failing[0]["message"]
    need = re.search(r"it needs ([\d.]+) MHz GBW", msg)
    cls = re.search(r"an op-amp of the '([\w-]+)' class", msg)
    assert need and cls, msg
    assert float(need.group(1)) * 1e6 > 3e6  # more than the general class has
    fixed = plan(load_spec(write_spec(text.replace('"general"', f'"{cls.group(1)}"'),
                                      "fixed.toml")))
    assert fixed.chosen.buildable
    assert not _fails(fixed, "topology") and not _fails(fixed, "gbw")


@pytest.mark.slow
def test_gain_that_clips_names_the_largest_gain_that_fits(write_spec):
    """60 dB with 50 mV in on ±2.5 V rails cannot fit (50 V out); the worst headroom check
    names the largest gain that fits, which the planner has planned to be sure — and a plan
    at that gain indeed has no headroom failure, with the margin the message gives."""
    text = """
    [passband]
    center_hz = 1000
    bandwidth_hz = 200
    max_loss_db = 1
    gain_db = 60
    [[stopband]]
    freq_hz = 600
    min_loss_db = 30
    [input]
    max_vpk = 0.05
    [supply]
    rails_v = [-2.5, 2.5]
    [amplifier]
    archetype = "general"
    swing_to_rail_v = 0.1
    """ + FAST_MC
    p = plan(load_spec(write_spec(text)))
    clips = _fails(p, "headroom")
    assert clips
    advised = [c for c in clips if "of gain fits" in c.message]
    assert len(advised) == 1, [c.message for c in clips]
    m = re.search(r"at most about (-?[\d.]+) dB of gain fits the ±([\d.]+) V swing on "
                  r"-2.5/\+2.5 V rails with 50 mV in \(asked: 60 dB; planned at (-?[\d.]+) dB, "
                  r"the worst margin is \+([\d.]+) dB\)", advised[0].message)
    assert m, advised[0].message
    best_db = float(m.group(1))
    assert float(m.group(3)) == best_db
    # The output alone needs 50 mV x 10^(gain/20) <= 2.4 V: gain <= 33.6 dB.
    assert best_db <= 20 * math.log10(2.4 / 0.05)
    # The swing named is the worst clipping net's: ±2.4 V (rails less swing_to_rail_v) less
    # that net's bias, whichever topology the planner picked.
    worst = min(p.chosen.analyses.nodes, key=lambda n: n.margin_db)
    assert float(m.group(2)) == pytest.approx(worst.limit_vpk, rel=5e-3)
    assert 2.4 - abs(worst.dc_v) - 0.01 <= float(m.group(2)) <= 2.4
    ok = plan(load_spec(write_spec(text.replace("gain_db = 60", f"gain_db = {best_db}"),
                                   "fixed.toml")))
    assert not _fails(ok, "headroom"), [c.message for c in _fails(ok, "headroom")]
    assert min(n.margin_db for n in ok.chosen.analyses.nodes) == pytest.approx(
        float(m.group(4)), abs=0.051)


STOP_NEEDS_58 = {"passband": {"center_hz": 1000, "bandwidth_hz": 100, "max_loss_db": 1},
                 "stopband": [{"freq_hz": 940, "min_loss_db": 100}],
                 "design": {"family": "butterworth"}}


def test_order_above_the_most_supported_says_which_order_and_where_the_point_could_go(
        write_spec):
    """100 dB at 940 Hz around a 1 kHz, 100 Hz band needs Butterworth order 58; the answer
    names it, says 20 is the most, and gives the stopband frequency that order 12 (the
    most the bandpass path builds) reaches — a point there plans at order 12 or less."""
    spec = write_spec("""
    [passband]
    center_hz = 1000
    bandwidth_hz = 100
    max_loss_db = 1
    [[stopband]]
    freq_hz = 940
    min_loss_db = 100
    [design]
    family = "butterworth"
    """)
    r = run_cli("plan", spec, "--json")
    assert r.returncode == 1, r.stderr
    doc = json.loads(r.stdout)
    (check,) = [c for c in doc["checks"] if c["status"] == "fail"]
    assert check["id"] == "order"
    msg = check["message"]
    # Order from docs/methods.md "Mask -> order" (Butterworth), with the planner's share
    # (LOSS_SHARE) of max_loss_db = 1 dB:
    # N >= log10[(10^10 - 1)/(10^(share/10) - 1)] / (2 log10 Omega_s).
    pb = load_spec(spec).passband
    omega = float(bandpass_omega(940.0, pb.center_hz, pb.bandwidth_hz))
    n = math.ceil(math.log10((10 ** 10 - 1) / (10 ** (LOSS_SHARE / 10) - 1))
                  / (2 * math.log10(omega)))
    assert f"order of {n} " in msg and f"{MAX_ORDER} is the most" in msg
    f_ok = float(re.search(r"move the point out to ([\d.]+) Hz", msg).group(1))
    assert f_ok < 940.0
    moved = spec_from_dict({**STOP_NEEDS_58, "stopband": [{"freq_hz": f_ok * 0.999,
                                                          "min_loss_db": 100}]})
    (cand,) = [c for c in make_candidates(moved) if c.path == "bandpass"]
    assert cand.order <= MAX_BUILT_ORDER


@pytest.mark.slow
def test_given_order_above_the_exact_search_is_built_in_increasing_q_order(write_spec):
    """Order 16 (16 sections, past the 12 the exact ordering tabulates): the chain is still
    planned, its sections in increasing Q (Moschytz 1975 [mem], docs/methods.md), and it meets
    its mask as built; the report says which method ordered it."""
    spec = write_spec("[passband]\ncenter_hz = 1000\nbandwidth_hz = 100\n[design]\norder = 16\n"
                      "family = \"butterworth\"\n[amplifier]\narchetype = \"fast\"\n" + FAST_MC)
    p = plan(load_spec(spec))
    d = p.chosen
    assert d.chain is not None and len(d.candidate.sections) == 16
    assert d.ordering.method.startswith("increasing Q")
    qs = [d.candidate.sections[i].q for i in d.ordering.order]
    assert qs == sorted(qs)
    assert not _fails(p, "mask")
    assert not _fails(p, "order")


@pytest.mark.parametrize("family,ripple_db,order", [("butterworth", 3.0103, 5),
                                                    ("butterworth", 0.5, 12),
                                                    ("chebyshev", 0.5, 7),
                                                    ("chebyshev", 0.1, 12)])
def test_prototype_loss_matches_scipy(family, ripple_db, order):
    """The loss and its inverse behind the advice, against scipy.signal's prototypes
    (buttap scaled by eps^(-1/N) for the edge loss, cheb1ap) evaluated with freqs_zpk."""
    omegas = np.array([1.05, 1.3, 2.0, 5.0])
    if family == "butterworth":
        z, p, k = signal.buttap(order)
        eps = math.sqrt(10 ** (ripple_db / 10) - 1)
        p = p * eps ** (-1.0 / order)
        k = k * eps ** (-1.0)  # the gain scales with the N poles: k' = Π|p'| = eps^-1
    else:
        z, p, k = signal.cheb1ap(order, ripple_db)  # peak gain 1, as the formula assumes
    _, h = signal.freqs_zpk(z, p, k, worN=omegas)
    ref = -20 * np.log10(np.abs(h))
    got = [prototype_loss_db(family, order, ripple_db, w) for w in omegas]
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-9)
    for w, a in zip(omegas, got):
        assert omega_for_loss(family, order, ripple_db, a) == pytest.approx(w, rel=1e-9)


def test_frequency_of_omega_inverts_the_bandpass_map():
    """docs/methods.md "Mask -> order": Omega(f) = |f^2 - f0^2| / (f BW)."""
    for omega in (1.0, 1.7, 30.0):
        for upper in (True, False):
            f = frequency_of_omega(omega, 40e3, 4e3, upper=upper)
            assert (f > 40e3) == upper
            assert float(bandpass_omega(f, 40e3, 4e3)) == pytest.approx(omega, rel=1e-12)
