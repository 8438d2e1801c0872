"""The monomial expansion of every topology against the determinant path.

Reference: ``figures._scaled_polynomials`` (det(G + sC) on a circle, Cramer's rule,
Ho/Ruehli/Brennan MNA stamps), which the expansion must reproduce to rounding for every
topology module, with ideal and finite-GBW op-amps, ideal and resistive sources.
"""

from __future__ import annotations

import importlib
import math
from dataclasses import replace

import numpy as np
import pytest

from bandwright.circuits import figures
from bandwright.parts.catalogue import archetype
from bandwright.sections.section import Section

MODULES = ["mfb_bandpass", "sallen_key_bandpass", "dual_amp_bandpass", "state_variable",
           "tow_thomas", "mfb_lowpass", "mfb_highpass", "sallen_key_lowpass",
           "sallen_key_highpass", "inverting_gain", "noninverting_gain"]


@pytest.mark.parametrize("name", MODULES)
@pytest.mark.parametrize("gbw_hz", [2e6, math.inf])
@pytest.mark.parametrize("source_ohms", [0.0, 50.0])
def test_expansion_matches_determinants(name, gbw_hz, source_ohms):
    topo = importlib.import_module(f"bandwright.circuits.{name}")
    kind = topo.KIND
    sec = Section(kind, 0.0 if kind == "gain" else 2000.0,
                  0.0 if kind == "gain" else (5.0 if kind == "bandpass" else 0.7), 2.0)
    model = replace(archetype("fast"), gbw_hz=gbw_hz)
    el = topo.elements(topo.design(sec, c_farads=1e-8), model)
    nominal = np.array([e.value for e in el if e.kind in ("R", "C")])
    rng = np.random.default_rng(3)
    values = nominal * np.exp(rng.normal(0.0, 0.05, (40, nominal.size)))
    kw = dict(out_net="out", input_net="in", source_ohms=source_ohms, values=values)
    n1, d1, w1 = figures._scaled_polynomials(el, **kw)
    n2, d2, w2 = figures._scaled_expanded(el, **kw)
    np.testing.assert_allclose(w1, w2)
    np.testing.assert_allclose(d2, d1, atol=1e-12)
    np.testing.assert_allclose(n2, n1, atol=1e-12)
    near = sec.f0_hz or 1.0
    a = figures.section_figures_batch(el, kind=kind, near_hz=near, values=values,
                                      source_ohms=source_ohms)
    b = figures.section_figures_batch(el, kind=kind, near_hz=near, values=values,
                                      source_ohms=source_ohms, method="expansion")
    for x, y in zip(a, b):
        np.testing.assert_allclose(y, x, rtol=1e-9, atol=1e-300)


@pytest.mark.parametrize("name", MODULES)
@pytest.mark.parametrize("gbw_hz", [2e6, math.inf])
@pytest.mark.parametrize("source_ohms", [0.0, 50.0])
def test_auto_method_matches_determinants(name, gbw_hz, source_ohms):
    # Reference: the determinant path (det(G + sC) on a circle), as above; "auto" takes
    # the expansion with monomials by a matrix multiply of logs, and closed-form quadratic
    # roots, which must agree to rounding.
    topo = importlib.import_module(f"bandwright.circuits.{name}")
    kind = topo.KIND
    sec = Section(kind, 0.0 if kind == "gain" else 2000.0,
                  0.0 if kind == "gain" else (5.0 if kind == "bandpass" else 0.7), 2.0)
    model = replace(archetype("fast"), gbw_hz=gbw_hz)
    el = topo.elements(topo.design(sec, c_farads=1e-8), model)
    nominal = np.array([e.value for e in el if e.kind in ("R", "C")])
    rng = np.random.default_rng(5)
    values = nominal * np.exp(rng.normal(0.0, 0.05, (64, nominal.size)))
    gbw = np.exp(rng.normal(0.0, 0.1, 64)) if math.isfinite(gbw_hz) else None
    nets = sorted({e.nets[2] for e in el if e.kind == "opamp"})
    for vals in (values, None):
        g = gbw if vals is not None else None
        n1, d1 = figures.transfer_polynomials_many(el, out_nets=nets, source_ohms=source_ohms,
                                                   values=vals, gbw_scale=g)
        n2, d2 = figures.transfer_polynomials_many(el, out_nets=nets, source_ohms=source_ohms,
                                                   values=vals, gbw_scale=g, method="auto")
        assert n2.shape == n1.shape and d2.shape == d1.shape
        # Compare in sigma = s / w_c, where the denominator's largest coefficient is 1.
        w_c = figures._scale_rad_s(el, nominal if vals is None else vals)
        powers = np.asarray(w_c)[..., None] ** np.arange(d1.shape[-1])
        np.testing.assert_allclose(d2 * powers, d1 * powers, atol=1e-12)
        np.testing.assert_allclose(n2 * powers, n1 * powers, atol=1e-12)
    near = sec.f0_hz or 1.0
    a = figures.section_figures_batch(el, kind=kind, near_hz=near, values=values,
                                      gbw_scale=gbw, source_ohms=source_ohms)
    b = figures.section_figures_batch(el, kind=kind, near_hz=near, values=values,
                                      gbw_scale=gbw, source_ohms=source_ohms, method="auto")
    for x, y in zip(a, b):
        np.testing.assert_allclose(y, x, rtol=1e-9, atol=1e-300)


@pytest.mark.parametrize("name", MODULES)
@pytest.mark.parametrize("gbw_hz", [2e6, math.inf])
def test_part_sweep_matches_determinants(name, gbw_hz):
    # Reference: section_figures_batch on the determinant path with the swept part set in
    # the values; the sweep's a + x b split of the expansion must agree to rounding.
    topo = importlib.import_module(f"bandwright.circuits.{name}")
    kind = topo.KIND
    sec = Section(kind, 0.0 if kind == "gain" else 2000.0,
                  0.0 if kind == "gain" else (5.0 if kind == "bandpass" else 0.7), 2.0)
    model = replace(archetype("fast"), gbw_hz=gbw_hz)
    el = topo.elements(topo.design(sec, c_farads=1e-8), model)
    nominal = np.array([e.value for e in el if e.kind in ("R", "C")])
    rng = np.random.default_rng(7)
    values = nominal * np.exp(rng.normal(0.0, 0.05, (32, nominal.size)))
    near = sec.f0_hz or 1.0
    for part in range(nominal.size):
        sweep = figures.part_sweep_figures(el, kind=kind, near_hz=near, values=values,
                                           part=part, source_ohms=50.0)
        for factor in (0.8, 1.3):
            moved = values.copy()
            moved[:, part] *= factor
            a = figures.section_figures_batch(el, kind=kind, near_hz=near, values=moved,
                                              source_ohms=50.0)
            b = sweep(moved[:, part])
            for x, y in zip(a, b):
                np.testing.assert_allclose(y, x, rtol=1e-9, atol=1e-300)


@pytest.mark.parametrize("k", [1, 2, 3, 5, 8, 11, 15])
def test_subset_products_equal_the_masked_products(k):
    """Property: the folded batch's products built from their prefixes
    (``expansion._subset_products``) are the masked products bit for bit: both multiply
    each monomial's variables in order, one at a time."""
    from bandwright.circuits.expansion import _monomials, _subset_products
    rng = np.random.default_rng(k)
    x = np.exp(5 * rng.standard_normal((243, k)))
    codes = np.unique(rng.integers(0, 1 << k, size=40))
    bits = (codes[:, None] >> np.arange(k)) & 1 == 1
    assert np.array_equal(_subset_products(codes, x), _monomials(bits, x))
