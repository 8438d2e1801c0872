"""Prototype poles and orders against scipy.signal and published tables."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from bandwright.prototype import (bandpass_omega, butterworth_poles, chebyshev_poles,
                                  minimum_order, prototype, prototype_response)


def _sorted(p):
    """Sort by imaginary part, then real part, rounded so float noise cannot swap ties."""
    p = np.asarray(p, dtype=complex)
    return p[np.lexsort((np.round(p.real, 9), np.round(p.imag, 9)))]


@pytest.mark.parametrize("n", range(1, 13))
def test_butterworth_poles_match_scipy_buttap(n):
    """scipy.signal.buttap gives the half-power poles (edge loss 3.0103 dB)."""
    _, p_ref, _ = signal.buttap(n)
    ours = butterworth_poles(n, 10 * math.log10(2))
    np.testing.assert_allclose(_sorted(ours), _sorted(p_ref), rtol=0, atol=1e-12)


@pytest.mark.parametrize("n", range(1, 13))
@pytest.mark.parametrize("ripple", [0.01, 0.1, 0.5, 1.0, 3.0])
def test_chebyshev_poles_match_scipy_cheb1ap(n, ripple):
    """scipy.signal.cheb1ap(N, rp): same normalisation (ripple band edge at 1 rad/s)."""
    _, p_ref, _ = signal.cheb1ap(n, ripple)
    np.testing.assert_allclose(_sorted(chebyshev_poles(n, ripple)), _sorted(p_ref),
                               rtol=0, atol=1e-12)


def test_chebyshev_0p1db_n3_matches_winder_table():
    """Winder, Analog and Digital Filter Design, 2nd ed. 2002, p. 105 [pub]: 0.1 dB, N = 3:
    -0.48470 ± j1.20616, -0.96941 (printed to 5 decimals)."""
    p = _sorted(chebyshev_poles(3, 0.1))
    np.testing.assert_allclose(p, [-0.48470 - 1.20616j, -0.96941, -0.48470 + 1.20616j],
                               atol=6e-6)


def test_chebyshev_0p5db_n3_matches_handbook_value():
    """0.5 dB, N = 3: -0.313228 ± j1.021927, -0.626456 (Zverev 1967 / Williams & Taylor
    tables [mem]; the same numbers as scipy.cheb1ap, docs/methods.md [calc])."""
    p = _sorted(chebyshev_poles(3, 0.5))
    np.testing.assert_allclose(p, [-0.313228 - 1.021927j, -0.626456, -0.313228 + 1.021927j],
                               atol=1e-6)


@pytest.mark.parametrize("family,loss", [("butterworth", 0.5), ("butterworth", 3.0),
                                         ("chebyshev", 0.1), ("chebyshev", 1.0)])
@pytest.mark.parametrize("n", [1, 2, 3, 6, 9])
def test_edge_loss_is_exactly_max_loss(family, loss, n):
    """Loss at Omega = 1 equals max_loss_db, peak over the passband is 0 dB (definition of
    the prototypes; Williams & Taylor 2006, ch. 2 [mem])."""
    proto = prototype(family, n, loss)
    h = prototype_response(proto, np.linspace(0, 1, 4001))
    g = 20 * np.log10(np.abs(h))
    assert g[-1] == pytest.approx(-loss, abs=1e-9)
    assert g.max() == pytest.approx(0.0, abs=1e-6)
    assert g.min() >= -loss - 1e-9


def test_band_edges_from_centre_and_width():
    """docs/methods.md check value [calc]: f0 40 kHz, BW 4 kHz → 38 049.969, 42 049.969 Hz."""
    from bandwright.inputs import spec_from_dict
    req = spec_from_dict({"passband": {"center_hz": 40000, "bandwidth_hz": 4000},
                          "design": {"order": 2}})
    assert req.passband.low_hz == pytest.approx(38049.969, abs=1e-3)
    assert req.passband.high_hz == pytest.approx(42049.969, abs=1e-3)
    assert bandpass_omega(req.passband.low_hz, 40000, 4000) == pytest.approx(1.0)


def test_order_check_values_of_references():
    """docs/methods.md [calc]: f0 40 kHz, BW 4 kHz, 40 dB at 30 kHz: Ωs = 5.8333;
    Butterworth 3.0103 dB → N 3; Amax 0.5 dB → Butterworth 4, Chebyshev 3."""
    low = (math.sqrt(4000**2 + 4 * 40000**2) - 4000) / 2
    f0 = math.sqrt(low * (low + 4000))
    om = bandpass_omega(30000.0, f0, 4000.0)
    assert om == pytest.approx(5.8333, abs=1e-4)
    assert minimum_order("butterworth", [om], 10 * math.log10(2), [40]) == 3
    assert minimum_order("butterworth", [om], 0.5, [40]) == 4
    assert minimum_order("chebyshev", [om], 0.5, [40]) == 3


MASKS = [
    # (low, high, [(stop_hz, min_loss_db), ...], max_loss_db)
    (38049.969, 42049.969, [(30000.0, 40.0)], 0.5),
    (38049.969, 42049.969, [(30000.0, 40.0), (53333.3, 40.0)], 3.0103),
    (900.0, 1100.0, [(700.0, 30.0), (1500.0, 50.0)], 1.0),      # asymmetric
    (10.0, 20.0, [(4.0, 25.0), (60.0, 45.0)], 0.25),
    (95.0, 105.0, [(80.0, 60.0), (120.0, 20.0)], 0.1),
]


@pytest.mark.parametrize("low,high,stops,amax", MASKS)
@pytest.mark.parametrize("family", ["butterworth", "chebyshev"])
def test_order_matches_scipy_buttord_cheb1ord(low, high, stops, amax, family):
    """scipy.signal.buttord / cheb1ord (analog, bandpass) on the same mask.

    scipy needs a stopband edge on each side and keeps the more demanding one, so each
    point is paired with its geometric mirror f0^2/f (same Ω) and the larger order taken;
    that is the map our order uses (docs/methods.md, "Mask → order")."""
    f0 = math.sqrt(low * high)
    ours = minimum_order(family, bandpass_omega([f for f, _ in stops], f0, high - low), amax,
                         [a for _, a in stops])
    ordfn = signal.buttord if family == "butterworth" else signal.cheb1ord
    ref = 0
    for f, a in stops:
        mirror = f0 * f0 / f
        ws = sorted([f, mirror])
        n, _ = ordfn([2 * math.pi * low, 2 * math.pi * high],
                     [2 * math.pi * ws[0], 2 * math.pi * ws[1]], amax, a, analog=True)
        ref = max(ref, n)
    assert ours == ref
