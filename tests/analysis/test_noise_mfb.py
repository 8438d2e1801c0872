"""Output noise of one equal-capacitor multiple-feedback bandpass against its closed form.

The closed form: every resistor's Johnson noise 4kTR (Johnson; Nyquist, Phys. Rev. 32,
1928) reaches the output through the transfer from a voltage source in series with that
resistor, written here by hand from Kirchhoff's current law at the two internal nodes
(ideal op-amp: the inverting input is a virtual ground) and solved with sympy — an
analysis independent of the nodal solver. The op-amp's voltage noise sees the noise gain,
1 + 2Q² at f0 whatever the centre gain (docs/methods.md; common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from bandwright.circuits import mfb_bandpass
from bandwright.circuits.nodal import BOLTZMANN_J_PER_K, noise
from bandwright.parts.opamp import OpAmp
from bandwright.sections.section import Section

IDEAL = OpAmp(name="ideal", gbw_hz=math.inf, dc_gain_db=300.0, slew_v_per_us=10.0,
              swing_to_rail_v=1.0, noise_v_per_rthz=0.0, noise_a_per_rthz=0.0,
              noise_corner_hz=0.0)


def _closed_form_psd(c: dict, f_hz: np.ndarray, temperature_c: float) -> np.ndarray:
    s, va, vo, vin, e1a, e1b, e2 = sp.symbols("s v_a v_o v_in e1a e1b e2")
    r1a, r1b, r2, c1, c2 = (c[k] for k in ("R1a", "R1b", "R2", "C1", "C2"))
    # Node a: R1a from (vin + e1a), R1b to (e1b), C1 to vo, C2 to the virtual ground.
    kcl_a = (va - vin - e1a) / r1a + (va - e1b) / r1b + (va - vo) * s * c1 + va * s * c2
    # Virtual ground: C2 current from a equals the current through R2 (+ e2) to vo.
    kcl_n = (0 - va) * s * c2 + (0 - vo - e2) / r2
    sol = sp.solve([kcl_a, kcl_n], [va, vo], dict=True)[0][vo]
    temp_k = temperature_c + 273.15
    total = np.zeros_like(f_hz)
    for src, r in ((e1a, r1a), (e1b, r1b), (e2, r2)):
        h = sp.lambdify(s, sp.diff(sol, src), "numpy")(2j * np.pi * f_hz)
        total = total + 4 * BOLTZMANN_J_PER_K * temp_k * r * np.abs(h) ** 2
    return total


@pytest.mark.parametrize("q,h0", [(5.0, 2.0), (10.0, 10.0), (3.0, 0.5)])
def test_resistor_noise_matches_closed_form(q, h0):
    sec = Section("bandpass", 10_000.0, q, h0)
    comps = mfb_bandpass.design(sec, c_farads=1e-9)
    els = mfb_bandpass.elements(comps, IDEAL)
    f = np.geomspace(1000, 100_000, 301)
    ours = noise(els, f, temperature_c=40.0).total_psd
    ref = _closed_form_psd(comps, f, 40.0)
    np.testing.assert_allclose(ours, ref, rtol=1e-9)


def test_opamp_voltage_noise_sees_noise_gain_one_plus_two_q_squared():
    """Common practice: an equal-C MFB bandpass's noise gain at f0 is 1 + 2Q², independent
    of the centre gain set by the divider."""
    q = 8.0
    model = OpAmp(name="n", gbw_hz=math.inf, dc_gain_db=300.0, slew_v_per_us=10.0,
                  swing_to_rail_v=1.0, noise_v_per_rthz=10e-9, noise_a_per_rthz=0.0,
                  noise_corner_hz=0.0)
    for h0 in (1.0, 5.0, 50.0):
        comps = mfb_bandpass.design(Section("bandpass", 5000.0, q, h0), c_farads=1e-9)
        res = noise(mfb_bandpass.elements(comps, model), np.array([5000.0]))
        gain = math.sqrt(res.contributions["U1 voltage"][0]) / 10e-9
        assert gain == pytest.approx(1 + 2 * q * q, rel=1e-9)
