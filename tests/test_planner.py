"""Candidate and plan properties: the order chosen from the stopband points meets every mask
point, judged outside the planner.

The judge of a candidate is scipy.signal: the prototype the candidate states (family, order,
edge loss) built with ``buttap``/``cheb1ap``, moved to the band with ``lp2bp_zpk`` (or
``lp2hp_zpk`` and ``lp2lp_zpk`` on the wideband path) and evaluated with ``freqs_zpk``; the
candidate's sections must be exactly that prototype (the same poles). The judge of a built
plan is its flattened element list solved as one circuit, read against the mask on a grid of
the test's own. Neither uses the planner's mask reader or cascade response.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings, strategies as st
from scipy import signal

from bandwright.candidates import make_candidates
from bandwright.inputs import spec_from_dict
from bandwright.planner import plan

from trust_support import recompute_mask

# Float slack of a mask comparison: the candidates are designed to meet the mask exactly at
# the point that sets the order, so equality must pass.
SLACK_DB = 1e-6


def _scipy_prototype(family: str, order: int, edge_loss_db: float):
    """(z, p, k) of the normalised lowpass prototype whose loss at 1 rad/s is `edge_loss_db`,
    with a passband maximum of exactly 1 (scipy.signal.buttap / cheb1ap)."""
    if family == "butterworth":
        z, p, _ = signal.buttap(order)
        # buttap loses 3.0103 dB at 1 rad/s; the poles scaled by eps^(-1/N) lose edge_loss_db.
        p = p * (10 ** (edge_loss_db / 10) - 1) ** (-0.5 / order)
        return z, p, float(np.real(np.prod(-p)))
    z, p, k = signal.cheb1ap(order, edge_loss_db)
    return z, p, k


def _section_poles(sections) -> np.ndarray:
    """Poles (rad/s) of second-order sections given as f0 and Q: w0 (-1/2Q ± j sqrt(1 - 1/4Q²))."""
    out = []
    for s in sections:
        w0 = 2 * math.pi * s.f0_hz
        out += list(np.roots([1.0, w0 / s.q, w0 * w0]))
    return np.sort_complex(np.array(out))


def _candidate_zpk(cand, req):
    """The scipy zpk of the prototype `cand` states, moved to the requirement's band."""
    pb = req.passband
    if cand.path == "bandpass":
        z, p, k = _scipy_prototype(cand.family, cand.order, cand.ripple_db)
        return signal.lp2bp_zpk(z, p, k, wo=2 * math.pi * pb.center_hz,
                                bw=2 * math.pi * pb.bandwidth_hz)
    n_hp = 2 * sum(s.kind == "highpass" for s in cand.sections)
    n_lp = 2 * sum(s.kind == "lowpass" for s in cand.sections)
    assert n_hp + n_lp == cand.order
    zh, ph, kh = signal.lp2hp_zpk(*_scipy_prototype(cand.family, n_hp, cand.ripple_db),
                                  wo=2 * math.pi * pb.low_hz)
    zl, pl, kl = signal.lp2lp_zpk(*_scipy_prototype(cand.family, n_lp, cand.ripple_db),
                                  wo=2 * math.pi * pb.high_hz)
    return np.concatenate([zh, zl]), np.concatenate([ph, pl]), kh * kl


def _mask_failures(freq_hz: np.ndarray, gain_db: np.ndarray, stop_gain_db: np.ndarray,
                   req) -> list[str]:
    """The mask read by this test: losses relative to gain_db, the peak within its tolerance."""
    pb = req.passband
    bad = []
    loss = pb.gain_db - gain_db
    if loss.max() > pb.max_loss_db + SLACK_DB:
        bad.append(f"passband loss {loss.max():.4f} dB at {freq_hz[np.argmax(loss)]:.6g} Hz")
    if abs(gain_db.max() - pb.gain_db) > pb.gain_tolerance_db + SLACK_DB:
        bad.append(f"passband peak {gain_db.max():.4f} dB")
    for point, g in zip(req.stopband, stop_gain_db):
        if pb.gain_db - g < point.min_loss_db - SLACK_DB:
            bad.append(f"{pb.gain_db - g:.3f} dB down at {point.freq_hz:g} Hz")
    return bad


@settings(max_examples=60, deadline=None)
@given(f0=st.floats(1.0, 1e6), frac=st.floats(0.01, 4.0), amax=st.floats(0.1, 3.0),
       lo_ratio=st.floats(0.2, 0.95), hi_ratio=st.floats(1.05, 5.0),
       a_lo=st.floats(10, 80), a_hi=st.floats(10, 80), family=st.sampled_from(
           [None, "butterworth", "chebyshev"]))
def test_every_candidate_meets_its_mask(f0, frac, amax, lo_ratio, hi_ratio, a_lo, a_hi, family):
    """Property (scipy's buttord tests check the same before pinning N): every candidate's
    sections are the scipy.signal prototype it states (poles within 1e-7 of |p|), and that
    prototype, evaluated by ``freqs_zpk``, meets the passband loss and every stopband point
    -- unless the order was capped at 20."""
    bw = frac * f0
    low = (math.sqrt(bw * bw + 4 * f0 * f0) - bw) / 2
    high = low + bw
    doc = {"passband": {"low_hz": low, "high_hz": high, "max_loss_db": amax, "gain_db": 10},
           "stopband": [{"freq_hz": low * lo_ratio, "min_loss_db": max(a_lo, amax + 1)},
                        {"freq_hz": high * hi_ratio, "min_loss_db": max(a_hi, amax + 1)}]}
    if family:
        doc["design"] = {"family": family}
    req = spec_from_dict(doc)
    pb = req.passband
    band = np.geomspace(pb.low_hz, pb.high_hz, 2001)
    stops = np.array([p.freq_hz for p in req.stopband])
    for cand in make_candidates(req):
        if "capped" in cand.note:
            continue
        z, p, k = _candidate_zpk(cand, req)
        ours = _section_poles(cand.sections)
        want = np.sort_complex(p)
        assert ours.size == want.size, (cand.path, cand.order)
        # Sorting pairs conjugates and nearby poles the same way in both lists.
        np.testing.assert_allclose(ours, want, rtol=0, atol=1e-7 * np.abs(want).max())
        _, h = signal.freqs_zpk(z, p, k, 2 * math.pi * np.concatenate([band, stops]))
        g = 20 * np.log10(np.abs(h))
        # A bandpass prototype peaks at exactly 0 dB (|H_bp(jw)| = |H_lp(jW)|); the wideband
        # cascade of two skirts is normalised to its passband peak, as the planner does.
        g = g + pb.gain_db - (g[: band.size].max() if cand.path == "hp_lp" else 0.0)
        bad = _mask_failures(band, g[: band.size], g[band.size:], req)
        assert not bad, (cand.path, cand.family, cand.order, bad)


def test_built_plan_meets_its_mask_as_one_circuit():
    """A planned chain, its parts rounded and its op-amps finite, solved as one flattened
    element list (source resistance included) on 2001 log points across the passband -- not
    the planner's 101-point grid -- meets the mask its checks say it meets."""
    req = spec_from_dict({
        "passband": {"center_hz": 10e3, "bandwidth_hz": 2e3, "max_loss_db": 1.0,
                     "gain_db": 12.0},
        "stopband": [{"freq_hz": 6e3, "min_loss_db": 30.0},
                     {"freq_hz": 16e3, "min_loss_db": 30.0}],
        "input": {"max_vpk": 0.1, "source_ohms": 600.0},
        "amplifier": {"archetype": "general"}, "tolerance": {"samples": 10}})
    p = plan(req)
    assert p.chosen.buildable
    masks = [c for c in p.checks if c.id == "mask"]
    assert masks and all(c.status == "pass" for c in masks), [c.message for c in masks]
    band = np.geomspace(req.passband.low_hz, req.passband.high_hz, 2001)
    again = recompute_mask(p.chosen.chain, req, passband_hz=band)
    bad = _mask_failures(band, again.passband_gain_db, req.passband.gain_db - again.stop_loss_db,
                         req)
    assert not bad, bad
    # The check's own lowest gain is read on a coarser grid: never below the dense one's.
    assert masks[0].value >= req.passband.gain_db - again.worst_loss_db - 1e-9
