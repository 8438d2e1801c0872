"""``transfer_polynomials_many``: every net's numerator over one denominator, against
``transfer_polynomials`` net by net and the nodal solver (the reference path)."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.polynomial import polynomial as npoly

from bandwright.circuits.figures import transfer_polynomials, transfer_polynomials_many
from bandwright.circuits.nodal import ac_solve

from test_gbw_scale import FREQ_HZ, two_amp

NETS = ("o1", "out", "n1")


def _h(num, den, f):
    s = 2j * np.pi * f
    return npoly.polyval(s, num.T, tensor=True) / npoly.polyval(s, den.T, tensor=True)


def test_single_circuit_matches_the_nodal_solver():
    nums, den = transfer_polynomials_many(two_amp(), out_nets=NETS, source_ohms=600.0)
    sol = ac_solve(two_amp(), FREQ_HZ, source_ohms=600.0)
    for k, net in enumerate(NETS):
        ref = sol.at(net)
        np.testing.assert_allclose(_h(nums[k], den, FREQ_HZ), ref, rtol=1e-7,
                                   atol=1e-9 * np.abs(ref).max())


def test_batch_matches_transfer_polynomials_net_by_net():
    rng = np.random.default_rng(3)
    nominal = np.array([10e3, 20e3, 1e-9, 15e3, 2.2e-9, 10e3, 10e3])
    values = nominal * rng.uniform(0.9, 1.1, size=(5, nominal.size))
    k = rng.uniform(0.8, 1.2, size=(5, 2))
    nums, den = transfer_polynomials_many(two_amp(), out_nets=NETS, values=values,
                                          gbw_scale=k)
    assert nums.shape == (3, 5, den.shape[-1])
    for i, net in enumerate(NETS):
        n1, d1 = transfer_polynomials(two_amp(), out_net=net, values=values, gbw_scale=k)
        for row in range(5):
            a = _h(nums[i, row], den[row], FREQ_HZ)
            b = _h(n1[row], d1[row], FREQ_HZ)
            np.testing.assert_allclose(a, b, rtol=1e-7, atol=1e-9 * np.abs(b).max())


def test_ground_is_not_an_output():
    with pytest.raises(ValueError, match="ground"):
        transfer_polynomials_many(two_amp(), out_nets=("out", "0"))
