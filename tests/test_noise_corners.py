"""The op-amp's voltage-noise and current-noise 1/f corners, set apart.

e_n^2(f) = e_w^2 (1 + fcv/f) and i_n^2(f) = i_w^2 (1 + fci/f), each with its own corner
(Motchenbacher & Connelly, *Low-Noise Electronic System Design*, 1993, ch. 4 [mem]); a
bipolar input's current-noise corner lies far above its voltage-noise corner (common
practice). Judges: the closed-form output noise of a non-inverting amplifier (written out
below, not taken from the code) and ngspice-39's `.noise` on the deck the tool writes.
"""

from __future__ import annotations

import math
import numpy as np
import pytest

from bandwright.circuits.elements import opamp, resistor
from bandwright.circuits.nodal import noise
from bandwright.inputs.loader import spec_from_dict
from bandwright.amplifier import resolve_amplifier
from bandwright.parts.catalogue import archetype
from bandwright.parts.opamp import OpAmp
from bandwright.report.spice import opamp_subckt, spice_deck

from spice_tools import run_ngspice_noise

K_B = 1.380649e-23          # J/K, exact (SI 2019)
T_K = 298.15                 # 25 °C
E_W, I_W = 4e-9, 2e-12       # white densities, V/√Hz and A/√Hz
FCV_HZ, FCI_HZ = 2.0, 2000.0  # voltage corner far below the current corner


def _model(fci_hz: float | None) -> OpAmp:
    """A made-up bipolar-input class (not a product); GBW high enough that the noise gain
    is flat to 1 part in 1e4 over 1 Hz–10 kHz at closed-loop gain 2."""
    return OpAmp(name="bipolar-test", gbw_hz=1e9, dc_gain_db=160.0, slew_v_per_us=5.0,
                 swing_to_rail_v=1.0, noise_v_per_rthz=E_W, noise_a_per_rthz=I_W,
                 noise_corner_hz=FCV_HZ, current_noise_corner_hz=fci_hz)


# Non-inverting amplifier, gain 2, with 100 kΩ in series with the + input so that the current
# noise dominates below a few hundred Hz and the voltage noise above.
R_P, R_F, R_G = 100e3, 1e3, 1e3


def _circuit(model: OpAmp):
    return (resistor("Rp", "in", "p", R_P), resistor("Rf", "n", "out", R_F),
            resistor("Rg", "n", "0", R_G), opamp("U1", "p", "n", "out", model))


def _closed_form_psd(f_hz: np.ndarray, fci_hz: float) -> np.ndarray:
    """Output noise PSD, V^2/Hz, of the circuit above with an ideal op-amp and an ideal
    (0 Ω) source: noise gain G = 1 + Rf/Rg on e_n, on i_n+ Rp and on Rp's 4kTRp; i_n- sees
    Rf (the - input is a virtual node, Rg ∥ Rf's current flows in Rf); Rg's noise current
    4kT/Rg flows in Rf; Rf's own 4kTRf appears as is (standard op-amp noise analysis,
    Motchenbacher & Connelly 1993, ch. 4 [mem])."""
    g = 1 + R_F / R_G
    en2 = E_W**2 * (1 + FCV_HZ / f_hz)
    in2 = I_W**2 * (1 + fci_hz / f_hz)
    kt4 = 4 * K_B * T_K
    return (g**2 * (en2 + in2 * R_P**2 + kt4 * R_P) + in2 * R_F**2
            + kt4 / R_G * R_F**2 + kt4 * R_F)


def test_nodal_noise_follows_both_corners():
    """The nodal noise analysis against the closed form, to 1e-6 (float rounding and the
    1e9 Hz GBW); with a single corner (2 Hz for both) the 10 Hz density is far lower, so
    the test would fail if the current-noise corner were ignored."""
    f = np.geomspace(1.0, 1e4, 41)
    got = noise(_circuit(_model(FCI_HZ)), f, temperature_c=25.0).total_psd
    np.testing.assert_allclose(got, _closed_form_psd(f, FCI_HZ), rtol=1e-6)
    same = noise(_circuit(_model(None)), f, temperature_c=25.0).total_psd
    np.testing.assert_allclose(same, _closed_form_psd(f, FCV_HZ), rtol=1e-6)
    assert got[np.searchsorted(f, 10.0)] > 10 * same[np.searchsorted(f, 10.0)]


@pytest.mark.ngspice
def test_ngspice_noise_of_the_deck_follows_both_corners(tmp_path):
    """ngspice-39 `.noise` of the written deck against the closed form: within 0.05 dB at
    every point from 1 Hz to 10 kHz (the diode generators agree with the model to about
    1e-4 dB; ngspice's constants differ from SI 2019 in the seventh digit)."""
    els = _circuit(_model(FCI_HZ))
    deck = spice_deck(els, source_ohms=0.0, temperature_c=25.0, title="two corners")
    assert "di_" in deck     # the current noise has a diode model of its own
    spice = run_ngspice_noise(deck, 1.0, 1e4, 20, tmp_path)
    ref = _closed_form_psd(spice.freq_hz.real, FCI_HZ)
    err_db = 10 * np.log10(spice.onoise_v_per_rthz.real**2 / ref)
    assert np.max(np.abs(err_db)) < 0.05


def test_subckt_keeps_one_diode_model_when_the_corners_agree():
    """Equal corners: one diode model with KF = 2 q fc, as before the corners were split."""
    text = opamp_subckt(_model(None), temperature_c=25.0)
    assert text.count(".model") == 1
    kf = 2 * 1.602176634e-19 * FCV_HZ
    assert "KF=" in text and math.isclose(float(text.split("KF=")[1].split()[0]), kf, rel_tol=1e-9)


def _spec(amplifier: dict) -> dict:
    return {"passband": {"center_hz": 1000.0, "bandwidth_hz": 200.0, "max_loss_db": 1.0,
                         "gain_db": 0.0},
            "design": {"order": 2}, "input": {"max_vpk": 0.1},
            "supply": {"rails_v": [-12, 12]},
            "amplifier": amplifier}


def test_amplifier_key_and_its_default():
    """`[amplifier] current_noise_corner_hz` sets the current corner; without it the current
    corner is `noise_corner_hz`, also when that is overridden; the precision archetype (a
    bipolar-input class) has its current corner far above its voltage corner."""
    def model(amp):
        req = spec_from_dict(_spec(amp), path="spec.toml")
        return resolve_amplifier(req.amplifier, path="spec.toml")
    m = model({"archetype": "general", "noise_corner_hz": 7.0})
    assert m.current_noise_corner_hz == 7.0
    m = model({"archetype": "general", "current_noise_corner_hz": 900.0})
    assert (m.noise_corner_hz, m.current_noise_corner_hz) == (50.0, 900.0)
    p = archetype("precision")
    assert p.current_noise_corner_hz >= 10 * p.noise_corner_hz
    # The PSD itself, against the formula i_w^2 (1 + fci/f).
    f = np.array([1.0, 100.0])
    np.testing.assert_allclose(p.current_noise_psd(f),
                               p.noise_a_per_rthz**2 * (1 + p.current_noise_corner_hz / f))
    # Built without it, a model has one corner for both noises.
    one = OpAmp(name="x", gbw_hz=1e6, dc_gain_db=100.0, slew_v_per_us=1.0, swing_to_rail_v=1.0,
                noise_v_per_rthz=1e-8, noise_a_per_rthz=1e-13, noise_corner_hz=12.0)
    assert one.current_noise_corner_hz == 12.0


def test_bad_current_corner_names_the_key():
    from bandwright.errors import SpecError
    with pytest.raises(SpecError, match="amplifier.current_noise_corner_hz"):
        spec_from_dict(_spec({"current_noise_corner_hz": -1.0}), path="spec.toml")
