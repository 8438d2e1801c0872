"""Numerical health in near-degenerate cases: bands a ten-thousandth of their centre wide
(section pairs whose f0 differ by parts in 1e5), poles a thousandth of their magnitude from
the imaginary axis (Q 500 built, Q 5000 ideal), op-amp poles seven decades from the section.

The reference throughout is **mpmath at 50 significant digits**, computed independently of
the package: prototype poles from their closed forms (docs/methods.md, "Prototype scaling"),
the bandpass substitution solved as a quadratic, the bandpass magnitude from the closed-form
prototype magnitude through Ω(f) = (f² − f0²)/(f·BW) (docs/methods.md, "Mask → order";
Williams & Taylor 2006, §2 and §5.1 [mem]), and a small modified-nodal-analysis solver of our
element lists written here (standard MNA stamps; the op-amp row is docs/design.md's single-pole
model V_out = A0/(1 + s·A0/ωt) · (V+ − V−)). scipy.signal.lp2bp_zpk, in float64, is also held
to the mpmath poles, to show the float64 split is as good as scipy's.
"""

from __future__ import annotations

import math

import mpmath as mp
import numpy as np
import pytest
from scipy import signal

from bandwright.candidates import LOSS_SHARE
from bandwright.circuits.nodal import ac_solve
from bandwright.planner import plan
from bandwright.prototype import prototype
from bandwright.sections import Section, bandpass_sections, section_response, sections_from_poles
from bandwright.sections.split import cascade_response
from bandwright.inputs import spec_from_dict

DIGITS = 50

NARROW = [("butterworth", 4, 3.0103, 1e-4), ("chebyshev", 5, 0.5, 1e-4),
          ("butterworth", 2, 1.0, 1e-6), ("chebyshev", 8, 0.1, 1e-4),
          ("chebyshev", 12, 0.5, 1e-3)]


@pytest.fixture(autouse=True)
def _precision():
    with mp.workdps(DIGITS):
        yield


def _mp_prototype_poles(family: str, order: int, ripple_db: float) -> list:
    """Closed forms of docs/methods.md "Prototype scaling", in mpmath."""
    eps = mp.sqrt(mp.power(10, mp.mpf(ripple_db) / 10) - 1)
    a = mp.asinh(1 / eps) / order
    poles = []
    for k in range(1, order + 1):
        th = (2 * k - 1) * mp.pi / (2 * order)
        if family == "butterworth":
            poles.append((-mp.sin(th) + 1j * mp.cos(th)) * mp.power(eps, mp.mpf(-1) / order))
        else:
            poles.append(-mp.sinh(a) * mp.sin(th) + 1j * mp.cosh(a) * mp.cos(th))
    return poles


def _mp_sections(family, order, ripple_db, f0_hz, bw_hz) -> list[tuple]:
    """(f0, Q) of every bandpass section: roots of s^2 - p B s + w0^2 = 0 per pole p."""
    w0, b = 2 * mp.pi * mp.mpf(f0_hz), 2 * mp.pi * mp.mpf(bw_hz)
    tiny = mp.mpf(10) ** (-DIGITS + 10)
    out = []
    for p in _mp_prototype_poles(family, order, ripple_db):
        if mp.im(p) < -tiny:
            continue
        if abs(mp.im(p)) <= tiny:
            out.append((mp.mpf(f0_hz), w0 / (-mp.re(p) * b)))
            continue
        pb = p * b
        d = mp.sqrt(pb * pb - 4 * w0 ** 2)
        out += [(abs(q) / (2 * mp.pi), abs(q) / (2 * abs(mp.re(q)))) for q in ((pb + d) / 2,
                                                                             (pb - d) / 2)]
    return sorted(out, key=lambda t: t[0])


@pytest.mark.parametrize("family,order,ripple_db,fbw", NARROW)
def test_section_split_of_narrow_bands_matches_mpmath(family, order, ripple_db, fbw):
    """Section f0 offsets from the centre (parts in 1e4 to 1e6) to 1e-9 of themselves and Q
    to 1e-12; scipy's float64 lp2bp_zpk agrees with mpmath to the same order."""
    f0, bw = 1000.0, 1000.0 * fbw
    proto = prototype(family, order, ripple_db)
    ref = _mp_sections(family, order, ripple_db, f0, bw)
    got = sections_from_poles(proto.poles, f0, bw)
    assert len(got) == len(ref)
    _, p, _ = signal.lp2bp_zpk([], np.array(proto.poles), 1.0, wo=2 * math.pi * f0,
                               bw=2 * math.pi * bw)
    upper = sorted((x for x in p if x.imag > 0), key=abs)
    scipy_f0 = [abs(x) / (2 * math.pi) for x in upper]
    for sec, (rf0, rq), sf0 in zip(got, ref, scipy_f0):
        offset = rf0 / f0 - 1
        for f in (sec.f0_hz, sf0):
            assert abs((mp.mpf(f) / f0 - 1) - offset) <= 1e-9 * abs(offset) + 1e-15
        assert abs(mp.mpf(sec.q) - rq) <= 1e-12 * rq
    # Near-degenerate indeed: neighbouring sections closer than 1e-3 of f0.
    fs = np.array([s.f0_hz for s in got])
    assert np.min(np.diff(fs)) / f0 < 1e-3


def _mp_bandpass_db(family, order, ripple_db, f0_hz, bw_hz, f_hz):
    """Closed-form prototype magnitude through the bandpass map: Butterworth
    1/(1 + eps^2 W^2N), Chebyshev 1/(1 + eps^2 T_N(W)^2), peak 0 dB."""
    eps2 = mp.power(10, mp.mpf(ripple_db) / 10) - 1
    f, c, b = mp.mpf(f_hz), mp.mpf(f0_hz), mp.mpf(bw_hz)
    w = (f * f - c * c) / (f * b)
    if family == "butterworth":
        t2 = w ** (2 * order)
    else:
        t = mp.cosh(order * mp.acosh(abs(w))) if abs(w) >= 1 else mp.cos(order * mp.acos(w))
        t2 = t * t
    return -10 * mp.log10(1 + eps2 * t2)


@pytest.mark.parametrize("family,order,ripple_db,fbw", NARROW)
def test_cascade_response_of_narrow_bands_matches_mpmath(family, order, ripple_db, fbw):
    """Across the passband and six bandwidths either side, down to -316 dB: within 1e-7 dB."""
    f0, bw = 1000.0, 1000.0 * fbw
    secs = bandpass_sections(prototype(family, order, ripple_db), center_hz=f0,
                             bandwidth_hz=bw, gain=1.0)
    low = (math.sqrt(bw * bw + 4 * f0 * f0) - bw) / 2
    f = np.concatenate([np.geomspace(low, low + bw, 101), f0 + bw * np.linspace(-6, 6, 49)])
    got = 20 * np.log10(np.abs(cascade_response(secs, f)))
    ref = np.array([float(_mp_bandpass_db(family, order, ripple_db, f0, bw, x)) for x in f])
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-7)


def test_section_response_at_q_5000_matches_mpmath():
    """Poles 1e-4 of their magnitude from the axis: H within 1e-10 relative."""
    sec = Section(kind="bandpass", f0_hz=1000.0, q=5000.0, gain=1.0)
    f = 1000.0 * (1 + np.linspace(-1e-3, 1e-3, 41))
    got = section_response(sec, f)
    w0 = 2 * mp.pi * 1000
    for g, x in zip(got, f):
        s = 2j * mp.pi * mp.mpf(x)
        ref = (w0 / 5000) * s / (s * s + (w0 / 5000) * s + w0 ** 2)
        assert abs(g - complex(ref)) <= 1e-10 * abs(ref)


# ----- built stages: the nodal solver and the built figures against an mpmath MNA ------------

def _mp_system(elements, s, source_ohms: float = 0.0):
    """MNA matrix and right-hand side of an element list at complex frequency s (mpmath)."""
    nets = sorted({n for e in elements for n in e.nets if n != "0"})
    idx = {n: i for i, n in enumerate(nets)}
    ops = [e for e in elements if e.kind == "opamp"]
    size = len(nets) + len(ops) + (1 if source_ohms == 0 else 0)
    y, rhs = mp.matrix(size, size), mp.matrix(size, 1)

    def add(i, j, v):
        if i is not None and j is not None:
            y[i, j] += v

    for e in elements:
        if e.kind in ("R", "C"):
            g = 1 / mp.mpf(e.value) if e.kind == "R" else s * mp.mpf(e.value)
            a, b = (idx.get(n) for n in e.nets)
            add(a, a, g), add(b, b, g), add(a, b, -g), add(b, a, -g)
    for k, e in enumerate(ops):
        row = len(nets) + k
        plus, minus, out = (idx.get(n) for n in e.nets)
        a0 = mp.power(10, mp.mpf(e.model.dc_gain_db) / 20)
        wt = 2 * mp.pi * mp.mpf(e.model.gbw_hz)
        add(row, out, (1 + s * a0 / wt) / a0), add(row, plus, -1), add(row, minus, 1)
        add(out, row, 1)
    if source_ohms == 0:
        y[size - 1, idx["in"]] = y[idx["in"], size - 1] = 1
        rhs[size - 1] = 1
    else:
        y[idx["in"], idx["in"]] += 1 / mp.mpf(source_ohms)
        rhs[idx["in"]] = 1 / mp.mpf(source_ohms)
    return y, rhs, idx


def _mp_transfer(elements, f_hz: float):
    y, rhs, idx = _mp_system(elements, 2j * mp.pi * mp.mpf(f_hz))
    return mp.lu_solve(y, rhs)[idx["out"]]


def _mp_pole_pair(elements, near_hz: float, points: int = 16):
    """The pole pair nearest `near_hz`: det Y(s) sampled on a circle of radius w0 and turned
    into polynomial coefficients by a discrete Fourier transform (exact below `points`),
    then mpmath.polyroots."""
    w0 = 2 * mp.pi * mp.mpf(near_hz)
    dets = [mp.det(_mp_system(elements, w0 * mp.expjpi(mp.mpf(2 * k) / points))[0])
            for k in range(points)]
    coefs = [sum(d * mp.expjpi(-mp.mpf(2 * k * n) / points) for k, d in enumerate(dets))
             / points for n in range(points)]
    top = max(abs(c) for c in coefs)
    while abs(coefs[-1]) < top * mp.mpf(10) ** (-DIGITS + 15):
        coefs.pop()
    roots = [r * w0 for r in mp.polyroots(coefs[::-1], maxsteps=300, extraprec=300)]
    upper = [r for r in roots if mp.im(r) > 0]
    return min(upper, key=lambda r: abs(mp.log(abs(r) / w0)))


def _spec(f0_hz, fbw, order, archetype, max_loss_db=1.0):
    return {"passband": {"center_hz": f0_hz, "bandwidth_hz": f0_hz * fbw,
                         "max_loss_db": max_loss_db},
            "design": {"order": order, "family": "butterworth"},
            "input": {"max_vpk": 0.1}, "amplifier": {"archetype": archetype},
            "tolerance": {"samples": 10}}


# Order 1: the one real prototype pole is -1/eps, eps at the share of max_loss_db the planner
# designs the prototype for, so Q = Qbp * eps (docs/methods.md, "Prototype → sections").
_EPS = math.sqrt(10 ** (LOSS_SHARE * 3.0103 / 10) - 1)
BUILT = {
    # A section of Q 500 asked (three op-amps): poles 1e-3 of |p| from the axis.
    "Q500 at 1 kHz": _spec(1e3, _EPS / 500, 1, "fast", max_loss_db=3.0103),
    # 0.1 Hz sections, op-amp poles at 30 Hz and 3 MHz: seven decades of spread.
    "0.1 Hz": _spec(0.1, 0.1, 4, "general"),
    # 10 MHz on a 200 MHz op-amp.
    "10 MHz": _spec(1e7, 0.5, 1, "fast"),
}


@pytest.mark.parametrize("name", list(BUILT))
def test_built_stages_match_an_mpmath_nodal_solution(name):
    """The float64 nodal solver within 1e-8 of the mpmath MNA around each stage's f0, and the
    built f0 and Q (``circuits.figures.section_figures``) within 1e-8 and 1e-7 of the mpmath
    pole pair."""
    p = plan(spec_from_dict(BUILT[name]))
    assert p.chosen.buildable
    for st in p.chosen.chain.stages:
        if st.kind == "gain":
            continue
        f0, q = st.built.f0_hz, st.built.q
        span = 1 + 3 / (2 * max(q, 0.5))
        f = f0 * np.geomspace(1 / span, span, 13)
        got = ac_solve(st.elements, f).at("out")
        for g, x in zip(got, f):
            ref = complex(_mp_transfer(st.elements, x))
            assert abs(g - ref) <= 1e-8 * abs(ref), (st.topology, x)
        pole = _mp_pole_pair(st.elements, f0)
        ref_f0 = abs(pole) / (2 * mp.pi)
        ref_q = -abs(pole) / (2 * mp.re(pole))
        assert abs(mp.mpf(f0) - ref_f0) <= 1e-8 * ref_f0, st.topology
        assert abs(mp.mpf(q) - ref_q) <= 1e-7 * ref_q, st.topology
    if name.startswith("Q500"):
        # The section asked really is the Q 500 the case is named for (its only section).
        (asked,) = [st.target.q for st in p.chosen.chain.stages if st.kind != "gain"]
        assert asked == pytest.approx(500, rel=1e-9)
        # The planner may trim the section's parts against the passband (a mask with no
        # stopband point lets Q fall a little): the pole pair stays within 1/600 of |p| of
        # the axis.
        assert max(st.built.q for st in p.chosen.chain.stages) > 300
