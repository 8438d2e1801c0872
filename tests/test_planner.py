"""Candidate properties: the order chosen from the stopband points meets every mask point."""

from __future__ import annotations

import math

from hypothesis import given, settings, strategies as st

from bandwright.analysis.response import read_mask
from bandwright.candidates import make_candidates
from bandwright.checks.mask import mask_checks
from bandwright.sections.split import cascade_response
from bandwright.inputs import spec_from_dict


@settings(max_examples=60, deadline=None)
@given(f0=st.floats(1.0, 1e6), frac=st.floats(0.01, 4.0), amax=st.floats(0.1, 3.0),
       lo_ratio=st.floats(0.2, 0.95), hi_ratio=st.floats(1.05, 5.0),
       a_lo=st.floats(10, 80), a_hi=st.floats(10, 80), family=st.sampled_from(
           [None, "butterworth", "chebyshev"]))
def test_every_candidate_meets_its_mask(f0, frac, amax, lo_ratio, hi_ratio, a_lo, a_hi, family):
    """Property (scipy's buttord tests check the same before pinning N): every candidate's
    ideal sections, at the order chosen from the stopband points, meet the passband loss,
    the reference gain and every stopband point — unless the order was capped at 20."""
    bw = frac * f0
    low = (math.sqrt(bw * bw + 4 * f0 * f0) - bw) / 2
    high = low + bw
    doc = {"passband": {"low_hz": low, "high_hz": high, "max_loss_db": amax, "gain_db": 10},
           "stopband": [{"freq_hz": low * lo_ratio, "min_loss_db": max(a_lo, amax + 1)},
                        {"freq_hz": high * hi_ratio, "min_loss_db": max(a_hi, amax + 1)}]}
    if family:
        doc["design"] = {"family": family}
    req = spec_from_dict(doc)
    for cand in make_candidates(req):
        if "capped" in cand.note:
            continue
        reading = read_mask(lambda f: cascade_response(cand.sections, f), req)
        bad = [c.message for c in mask_checks(reading, req) if c.status == "fail"]
        assert not bad, (cand.path, cand.family, cand.order, bad)
