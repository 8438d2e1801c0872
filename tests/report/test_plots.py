"""Plots and schematics of every bundled scenario: made without warnings, of the size and
content promised, and drawn from the analyses and element lists they claim to show (the
schematic layout itself: tests/report/test_schematic_layout.py)."""

from __future__ import annotations

import io
import math
import struct
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import scipy.signal
from PIL import Image

from bandwright.parts.notation import format_si
from bandwright.report import plots
from bandwright.report.subject import subject_of

from report_cases import SCENARIO_NAMES, case

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
SVG_NS = "{http://www.w3.org/2000/svg}"


def _png_size(data: bytes) -> tuple[int, int]:
    """Width and height from the IHDR chunk (PNG specification, ISO/IEC 15948, §11.2.2)."""
    assert data[:8] == PNG_SIGNATURE
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def _ink(data: bytes) -> float:
    """Share of pixels that are not (near) white."""
    a = np.asarray(Image.open(io.BytesIO(data)).convert("L"))
    return float(np.mean(a < 235))


def _svg_text(data: bytes) -> str:
    root = ET.fromstring(data)
    assert root.tag == f"{SVG_NS}svg"
    return " ".join("".join(t.itertext()) for t in root.iter(f"{SVG_NS}text"))


def _expected_plots(c) -> set[str]:
    names = {"response", "levels", "noise", "poles"}
    if getattr(c.plan.chosen, "yield_result", None) is not None:
        names.add("yield")
    return names


@pytest.mark.parametrize("name", SCENARIO_NAMES)
def test_every_scenario_draws_its_plots_without_warnings(name):
    c = case(name)
    assert c.warnings == (), c.warnings
    for plot in _expected_plots(c):
        assert f"{plot}.png" in c.files and f"{plot}.svg" in c.files, plot


@pytest.mark.parametrize("name", SCENARIO_NAMES)
def test_pngs_are_1000_by_600_and_not_blank(name):
    c = case(name)
    for plot in _expected_plots(c):
        data = c.files[f"{plot}.png"]
        assert _png_size(data) == plots.SIZE_PX, plot
        assert _ink(data) > 0.02, f"{plot}.png is nearly blank"


@pytest.mark.parametrize("name", SCENARIO_NAMES)
def test_svgs_parse_and_label_their_axes(name):
    c = case(name)
    for plot in _expected_plots(c):
        text = _svg_text(c.files[f"{plot}.svg"])
        if plot in ("response", "levels", "noise", "yield"):
            assert "frequency (log scale)" in text, plot
    assert "gain (dB)" in _svg_text(c.files["response.svg"])
    assert "√Hz" in _svg_text(c.files["noise.svg"])
    assert "Vpk" in _svg_text(c.files["levels.svg"])


@pytest.mark.parametrize("name", SCENARIO_NAMES)
def test_legends_name_stages_by_position(name):
    c = case(name)
    chain = c.plan.chosen.chain
    text = _svg_text(c.files["levels.svg"])
    for st in chain.stages:
        assert f"stage {st.position} ({st.topology})" in text


@pytest.mark.parametrize("name", SCENARIO_NAMES)
def test_schematics_show_every_part_with_its_value(name):
    c = case(name)
    chain = c.plan.chosen.chain
    block = _svg_text(c.files["block.svg"])
    for st in chain.stages:
        text = _svg_text(c.files[f"schematic_stage{st.position}.svg"])
        for e in st.elements:
            assert e.name in text, (st.position, e.name)
            if e.kind in ("R", "C"):
                assert format_si(e.value, "Ω" if e.kind == "R" else "F") in text
        assert f"stage {st.position}" in block and st.topology in block


# --------------------------------------------------------------------------- figures


@pytest.fixture(scope="module")
def lockin():
    """A plan with tones, several stages and a gain stage."""
    c = case("lockin_mains")
    return c.plan, plots.plot_figures(c.plan)


def _lines(ax, **match):
    return [ln for ln in ax.get_lines()
            if all(getattr(ln, f"get_{k}")() == v for k, v in match.items())]


def test_response_plot_draws_the_analysed_response(lockin):
    """The renderer reads Analyses.response: the plotted built curve is that array."""
    p, figs = lockin
    ax = figs["response"].axes[0]
    (built,) = _lines(ax, color=plots.BUILT, linestyle="-")
    an = p.chosen.analyses
    np.testing.assert_array_equal(built.get_xdata(), an.response.freq_hz)
    np.testing.assert_array_equal(built.get_ydata(), an.response.gain_db)


def test_ideal_curve_matches_scipy_for_the_candidate_sections(lockin):
    """Reference curve against scipy.signal.freqs of each section's biquad
    (bandpass K (w0/Q) s / (s^2 + (w0/Q) s + w0^2), Schaumann & Van Valkenburg 2001, ch. 4)."""
    p, figs = lockin
    ax = figs["response"].axes[0]
    (ideal,) = _lines(ax, color=plots.IDEAL)
    f = np.asarray(ideal.get_xdata())
    h = np.ones(f.shape, dtype=complex)
    for sec in p.chosen.candidate.sections:
        w0 = 2 * np.pi * sec.f0_hz
        _, hs = scipy.signal.freqs([sec.gain * w0 / sec.q, 0.0], [1.0, w0 / sec.q, w0**2],
                                   worN=2 * np.pi * f)
        h = h * hs
    np.testing.assert_allclose(ideal.get_ydata(), 20 * np.log10(np.abs(h)), atol=1e-9)


def test_noise_curves_add_up_in_power_to_the_total(lockin):
    """Uncorrelated sources add in power (Motchenbacher & Connelly 1993, ch. 2 [mem]): the
    plotted top contributors and the 'others' curve square-sum to the plotted total."""
    p, figs = lockin
    ax = figs["noise"].axes[0]
    lines = [ln for ln in ax.get_lines() if len(ln.get_xdata()) > 2]
    total = lines[0]
    parts = np.array([ln.get_ydata() for ln in lines[1:]])
    np.testing.assert_allclose(np.sqrt(np.sum(parts**2, axis=0)), total.get_ydata(),
                               rtol=1e-9)
    nz = p.chosen.analyses.noise
    assert format_si(nz.integrated_vrms, "V rms", significant=4) in total.get_label()


def test_tone_markers_add_up_to_the_worst_case_peak(lockin):
    """Worst case = in-band signal + every tone, amplitudes added (docs/methods.md,
    "Headroom / slew"): the plotted tone levels at each net plus NodeLevel.signal_vpk give
    NodeLevel.peak_vpk."""
    p, figs = lockin
    ax = figs["levels"].axes[0]
    an = p.chosen.analyses
    markers = [ln for ln in ax.get_lines() if ln.get_marker() == "D" and len(ln.get_xdata())]
    assert len(markers) == len(an.nodes)
    for node, m in zip(an.nodes, markers):
        assert node.signal_vpk + float(np.sum(m.get_ydata())) == pytest.approx(node.peak_vpk,
                                                                               rel=1e-9)
    bars = figs["levels"].axes[1]
    widths = [patch.get_width() for patch in bars.patches]
    assert widths == pytest.approx([n.margin_db for n in an.nodes])


def test_pole_map_matches_the_roots_of_each_section(lockin):
    """Poles of s^2 + (w0/Q) s + w0^2 against numpy's companion-matrix roots."""
    p, figs = lockin
    for st in p.chosen.chain.stages:
        if st.kind == "gain":
            continue
        w0 = 2 * math.pi * st.built.f0_hz
        want = np.sort_complex(np.roots([1.0, w0 / st.built.q, w0**2]) / (2 * math.pi))
        got = np.sort_complex(plots._poles_of(st.built.f0_hz, st.built.q))
        np.testing.assert_allclose(got, want, rtol=1e-12)


def test_no_yield_plot_without_a_monte_carlo_result(lockin):
    from dataclasses import replace
    p, _ = lockin
    s = replace(subject_of(p), yield_result=None)
    assert "yield" not in plots.plot_figures(s)
