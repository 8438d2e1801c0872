"""Part windows and impedance scaling.

References: impedance scaling (R·k, C/k keeps every RC product) per Schaumann & Van
Valkenburg, *Design of Analog Filters*, 2001, §6 [mem]; the multiple-feedback bandpass
check values of docs/methods.md (f0 40 kHz, Q 10, H0 10, C 1 nF → R2 79.577 kΩ,
R1a 3.9789 kΩ, R1b 209.41 Ω [calc]); scipy.signal.freqs and scipy.optimize as independent
references for the response and the optimum.
"""

import numpy as np
import pytest
from scipy import optimize, signal

from bandwright.parts.windows import PartWindows, impedance_scale, violations

MFB = {"R1a": 3978.9, "R1b": 209.41, "R2": 79577.0, "C1": 1e-9, "C2": 1e-9}


def scaled(values, k):
    return {n: v * k if n[0] == "R" else v / k for n, v in values.items()}


def worst_log_violation(values, windows, log_k):
    """Largest log-distance of any part outside its window after scaling by exp(log_k)."""
    parts = scaled(values, np.exp(log_k))
    worst = 0.0
    for name, v in parts.items():
        lo, hi = ((windows.r_min_ohms, windows.r_max_ohms) if name[0] == "R"
                  else (windows.c_min_farads, windows.c_max_farads))
        worst = max(worst, np.log(lo / v), np.log(v / hi))
    return worst


def test_default_windows():
    w = PartWindows()
    assert (w.r_min_ohms, w.r_max_ohms, w.c_min_farads, w.c_max_farads) == (1e3, 1e6, 100e-12, 1e-6)


@pytest.mark.parametrize("kwargs", [{"r_min_ohms": 0.0}, {"c_max_farads": -1.0},
                                    {"r_min_ohms": 2e6}, {"c_min_farads": 2e-6},
                                    {"r_max_ohms": float("inf")}])
def test_bad_windows_are_value_errors(kwargs):
    with pytest.raises(ValueError):
        PartWindows(**kwargs)


def test_mfb_example_is_centred_in_the_allowed_range():
    """Allowed k: R1b needs k >= 1k/209.41; R2 allows k <= 12.6 but C1 = C2 = 1 nF need
    C/k >= 100 pF, so k <= 10 decides."""
    k_low, k_high = 1e3 / 209.41, 1e-9 / 100e-12
    k = impedance_scale(MFB, PartWindows())
    assert k == pytest.approx(np.sqrt(k_low * k_high), rel=1e-12)
    assert violations(scaled(MFB, k), PartWindows()) == []


def test_scaling_keeps_the_mfb_response():
    """scipy.signal.freqs of the equal-C MFB bandpass before and after scaling by k.

    H(s) = -(s/(R1a C)) / (s² + 2s/(R2 C) + (1/R1a + 1/R1b)/(R2 C²)) (nodal analysis of the
    circuit in docs/methods.md [calc]).
    """
    def response(p):
        c = p["C1"]
        b = [-1 / (p["R1a"] * c), 0.0]
        a = [1.0, 2 / (p["R2"] * c), (1 / p["R1a"] + 1 / p["R1b"]) / (p["R2"] * c * c)]
        return signal.freqs(b, a, worN=2 * np.pi * np.geomspace(4e3, 400e3, 300))[1]

    k = impedance_scale(MFB, PartWindows())
    np.testing.assert_allclose(response(scaled(MFB, k)), response(MFB), rtol=1e-12)


def test_feasible_k_agrees_with_a_scan_of_the_allowed_range():
    """Independent check: scan log k, keep the k with no violation, take the geometric centre."""
    values = {"R1": 150.0, "R2": 12e3, "C1": 4.7e-6, "C2": 22e-6}
    windows = PartWindows()
    log_k = np.linspace(np.log(1e-3), np.log(1e4), 200001)
    ok = np.array([worst_log_violation(values, windows, x) == 0 for x in log_k[::50]])
    allowed = log_k[::50][ok]
    expected = np.exp(0.5 * (allowed.min() + allowed.max()))
    assert impedance_scale(values, windows) == pytest.approx(expected, rel=5e-3)


@pytest.mark.parametrize("values", [
    {"R1": 100.0, "R2": 1e8, "C1": 1e-9},          # spread 1e6 > the window's 1e3
    {"R1": 1e4, "C1": 1e-12, "C2": 1e-3},          # capacitors alone cannot fit
    {"R1": 10.0, "R2": 4e3, "C1": 1e-3},            # resistors pull down, C pulls up
])
def test_infeasible_k_minimises_the_worst_violation(values):
    """scipy.optimize.minimize_scalar on the worst log-violation finds the same k."""
    windows = PartWindows()
    assert violations(scaled(values, impedance_scale(values, windows)), windows)
    best = optimize.minimize_scalar(lambda x: worst_log_violation(values, windows, x),
                                    bounds=(np.log(1e-12), np.log(1e12)), method="bounded",
                                    options={"xatol": 1e-10})
    k = impedance_scale(values, windows)
    assert worst_log_violation(values, windows, np.log(k)) == pytest.approx(best.fun, rel=1e-6)
    assert np.log(k) == pytest.approx(best.x, abs=1e-4)


def test_only_resistors_or_only_capacitors():
    assert impedance_scale({"R1": 10.0, "R2": 100.0}) == 1000.0
    # C window 100 pF … 1 µF, one capacitor of 1 nF: k from 1e-3 to 10, centre 0.1.
    assert impedance_scale({"C1": 1e-9}) == pytest.approx(0.1, rel=1e-12)
    assert impedance_scale({}) == 1.0


def test_violations_describe_each_offender_in_order():
    got = violations({"R2": 2.2e6, "C1": 10e-12, "R1": 4.7e3, "C2": 1e-7})
    assert got == ["R2 = 2.2 M\u03a9 is above the resistor window 1 k\u03a9 \u2026 1 M\u03a9",
                   "C1 = 10 pF is below the capacitor window 100 pF \u2026 1 \u00b5F"]
    assert violations({"R1": 1e3, "R2": 1e6, "C1": 100e-12, "C2": 1e-6}) == []


@pytest.mark.parametrize("values", [{"U1": 1.0}, {"": 1.0}, {"R1": 0.0}, {"C1": -1e-9},
                                    {"R1": float("nan")}])
def test_bad_parts_are_value_errors(values):
    with pytest.raises(ValueError):
        impedance_scale(values)
    with pytest.raises(ValueError):
        violations(values)
