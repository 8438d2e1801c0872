"""The per-sample GBW factor of ``mna_system`` / ``transfer_polynomials``.

Checked against the same element list rebuilt with a scaled op-amp model
(``dataclasses.replace``) and solved by the nodal solver (the reference path): scaling the
GBW in the matrices must be the same circuit as scaling it in the model.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from numpy.polynomial import polynomial as npoly

from bandwright.circuits.elements import capacitor, opamp, resistor
from bandwright.circuits.figures import section_figures_batch, transfer_polynomials
from bandwright.circuits.nodal import ac_solve, mna_system
from bandwright.parts.opamp import OpAmp

MODEL = OpAmp(name="t", gbw_hz=1e6, dc_gain_db=100.0, slew_v_per_us=1.0, swing_to_rail_v=1.0,
              noise_v_per_rthz=1e-8, noise_a_per_rthz=1e-12, noise_corner_hz=0.0)


def two_amp(model_a=MODEL, model_b=MODEL):
    """An inverting lossy integrator driving a non-inverting RC stage: two op-amps whose
    poles both show in the transfer."""
    return (resistor("R1", "in", "n1", 10e3), resistor("R2", "n1", "o1", 20e3),
            capacitor("C1", "n1", "o1", 1e-9), opamp("U1", "0", "n1", "o1", model_a),
            resistor("R3", "o1", "p2", 15e3), capacitor("C2", "p2", "0", 2.2e-9),
            resistor("R4", "out", "m2", 10e3), resistor("R5", "m2", "0", 10e3),
            opamp("U2", "p2", "m2", "out", model_b))


FREQ_HZ = np.geomspace(100.0, 3e6, 40)


def _eval(num, den, f):
    s = 2j * np.pi * f
    return npoly.polyval(s, num.T, tensor=True) / npoly.polyval(s, den.T, tensor=True)


def test_per_opamp_scale_matches_a_rebuilt_model():
    """(S, A) factors: each row equals the circuit rebuilt with replaced models, nodal-solved."""
    k = np.array([[1.0, 1.0], [0.5, 2.0], [1.3, 0.7]])
    num, den = transfer_polynomials(two_amp(), gbw_scale=k)
    for row, (ka, kb) in enumerate(k):
        els = two_amp(dataclasses.replace(MODEL, gbw_hz=MODEL.gbw_hz * ka),
                      dataclasses.replace(MODEL, gbw_hz=MODEL.gbw_hz * kb))
        ref = ac_solve(els, FREQ_HZ).at("out")
        got = _eval(num[row], den[row], FREQ_HZ)
        # FFT interpolation rounds at 1e-9 of the largest |H|, not of each value.
        np.testing.assert_allclose(got, ref, rtol=1e-7, atol=1e-9 * np.abs(ref).max())


def test_common_scale_with_values():
    """(S,) factors together with part-value samples."""
    values = np.array([[10e3, 20e3, 1e-9, 15e3, 2.2e-9, 10e3, 10e3],
                       [11e3, 19e3, 1.1e-9, 15e3, 2.0e-9, 12e3, 10e3]])
    k = np.array([0.8, 1.25])
    num, den = transfer_polynomials(two_amp(), values=values, gbw_scale=k)
    for row in range(2):
        m = dataclasses.replace(MODEL, gbw_hz=MODEL.gbw_hz * k[row])
        ref = ac_solve(two_amp(m, m), FREQ_HZ, values=values[row:row + 1]).at("out")[0]
        np.testing.assert_allclose(_eval(num[row], den[row], FREQ_HZ), ref, rtol=1e-7,
                                   atol=1e-9 * np.abs(ref).max())


def test_ideal_opamps_stay_ideal_and_unit_scale_changes_nothing():
    ideal = dataclasses.replace(MODEL, gbw_hz=np.inf)
    base = mna_system(two_amp(ideal, ideal))
    scaled = mna_system(two_amp(ideal, ideal), gbw_scale=np.array([3.0]))
    np.testing.assert_array_equal(scaled.c[0], base.c)
    one = mna_system(two_amp(), gbw_scale=np.ones(2))
    np.testing.assert_allclose(one.c[1], mna_system(two_amp()).c, rtol=0, atol=0)


def test_section_figures_batch_accepts_a_gbw_scale():
    """A bandpass biquad's f0 falls as the GBW falls (finite-GBW shift, docs/methods.md)."""
    mfb = (resistor("R1a", "in", "a", 4e3), capacitor("C1", "a", "out", 1e-9),
           capacitor("C2", "a", "inv", 1e-9), resistor("R2", "inv", "out", 80e3),
           opamp("U1", "0", "inv", "out", dataclasses.replace(MODEL, gbw_hz=20e6)))
    values = np.tile([4e3, 1e-9, 1e-9, 80e3], (3, 1))
    f0, q, _ = section_figures_batch(mfb, kind="bandpass", near_hz=4e4, values=values,
                                     gbw_scale=np.array([0.5, 1.0, 2.0]))
    assert f0[0] < f0[1] < f0[2]
    assert q[0] > q[1] > q[2]


@pytest.mark.parametrize("bad", [np.array([1.0, 0.0]), np.array([[1.0, 1.0, 1.0]]),
                                 np.array([np.nan, 1.0])])
def test_bad_gbw_scale_raises(bad):
    with pytest.raises(ValueError, match="gbw_scale"):
        mna_system(two_amp(), gbw_scale=bad)
