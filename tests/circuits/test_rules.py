"""The shared design rules (``circuits.rules``): the figures their docstrings state."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from bandwright.circuits import TOPOLOGY_NAMES, topology
from bandwright.circuits.rules import (F0_WEIGHT_Q_FLOOR, check_capacitor, edge_residuals,
                                       gbw_needed_hz)


@pytest.mark.parametrize("order,slope", [(1, 1.5), (2, 3.0)])
def test_q_floor_reason_butterworth_edge_slope_from_scipy(order, slope):
    """The Q floor's reason: a one-octave Butterworth bandpass of prototype order N has an edge
    slope of (N/2)(f2 + f1)/(f2 - f1) nepers per unit relative frequency (1.5 and 3 for N = 1
    and 2), read here from scipy.signal (buttap, lp2bp_zpk, freqs_zpk) by a central
    difference in ln f."""
    f1, f2 = 1000.0, 2000.0
    z, p, k = signal.buttap(order)
    z, p, k = signal.lp2bp_zpk(z, p, k, wo=2 * math.pi * math.sqrt(f1 * f2),
                               bw=2 * math.pi * (f2 - f1))
    h = 1e-6
    _, hh = signal.freqs_zpk(z, p, k, 2 * math.pi * f2 * np.exp([-h, h]))
    measured = -(math.log(abs(hh[1])) - math.log(abs(hh[0]))) / (2 * h)
    assert measured == pytest.approx(order / 2 * (f2 + f1) / (f2 - f1), rel=1e-6)
    assert measured == pytest.approx(slope, rel=1e-6)
    assert 1.5 <= F0_WEIGHT_Q_FLOOR <= 3.0


def test_edge_residuals_weights_each_error_by_its_band_edge_cost():
    """Q 10: an f0 error d costs 10 d nepers, a Q error e costs e/2, a gain error g costs g;
    at Q 0.7 the f0 weight is the floor."""
    r = edge_residuals(0.01, 0.02, 0.03, 10.0)
    np.testing.assert_allclose(r, [0.1, 0.01, 0.03], rtol=1e-15)
    np.testing.assert_allclose(edge_residuals(0.01, 0.0, 0.0, 0.7)[0], 0.01 * F0_WEIGHT_Q_FLOOR,
                               rtol=1e-15)


@pytest.mark.parametrize("c_farads", [0.0, -1e-9, math.inf, math.nan])
def test_every_topology_refuses_a_capacitor_that_is_no_part(c_farads):
    """One capacitor check for every topology: zero, negative, infinite and NaN refused."""
    with pytest.raises(ValueError):
        check_capacitor(c_farads)
    from bandwright.sections.section import Section
    for name in TOPOLOGY_NAMES:
        topo = topology(name)
        if topo.KIND == "gain":
            continue
        sign = -1.0 if topo.INVERTING else 1.0
        with pytest.raises(ValueError):
            topo.design(Section(kind=topo.KIND, f0_hz=1e3, q=2.0, gain=sign), c_farads=c_farads)


def test_gbw_need_keeps_e_within_the_share():
    """A pole that barely moves still gets GBW >= 10 f0 (e <= 10 %); otherwise the need is
    f0 max(Q |k_f|, |k_q|) / 0.1 (multiple-feedback bandpass, k_f = -Q, k_q = Q: 10 Q² f0)."""
    assert gbw_needed_hz(1e3, 0.5, (-0.5, 0.5)) == pytest.approx(1e4)
    assert gbw_needed_hz(1e3, 10.0, (-10.0, 10.0)) == pytest.approx(1e6)
