"""report.html: self-contained, every section present for every scenario, renders in
headless Chromium, and shows the same figures as the JSON and the terminal report."""

from __future__ import annotations

import json
import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from bandwright.audit import audit
from bandwright.planner import plan
from bandwright.report.files import audit_files, plan_files
from bandwright.report.html import SECTION_IDS, html_report
from bandwright.report.json_out import audit_to_dict, dumps, plan_to_dict
from bandwright.parts.notation import format_hz as fmt_hz
from bandwright.parts.notation import format_fixed, format_si
from bandwright.report.terminal import render_audit
from bandwright.inputs.loader import spec_from_dict

from report_cases import SCENARIO_NAMES, case, chromium_render, terminal_text


class _Page(HTMLParser):
    """Tags, ids, attributes and visible text of an HTML document."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.ids: set[str] = set()
        self.tags: list[str] = []
        self.attrs: list[tuple[str, str, str]] = []
        self.text: list[str] = []
        self._skip = 0

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for k, v in attrs:
            self.attrs.append((tag, k, v or ""))
            if k == "id":
                self.ids.add(v)
        if tag in ("style", "svg"):
            self._skip += 1

    def handle_endtag(self, tag):
        if tag in ("style", "svg"):
            self._skip -= 1

    def handle_data(self, data):
        if not self._skip:
            self.text.append(data)


def _page(text: str) -> _Page:
    p = _Page()
    p.feed(text)
    return p


def _visible(text: str) -> str:
    """Text outside tags, inline SVG and CSS, white space collapsed."""
    return " ".join(" ".join(_page(text).text).split())


def _assert_self_contained(page: _Page, raw: str) -> None:
    assert "script" not in page.tags
    for tag in ("link", "img", "iframe", "object", "embed"):
        assert tag not in page.tags, tag
    for tag, k, v in page.attrs:
        if k in ("src", "href") or k.endswith(":href"):
            assert v.startswith("#"), f"<{tag} {k}={v!r}> points outside the page"
    assert "@import" not in raw and "url(http" not in raw


@pytest.mark.parametrize("name", SCENARIO_NAMES)
def test_every_scenario_report_has_every_section(name):
    c = case(name)
    assert c.warnings == (), c.warnings
    raw = c.files["report.html"].decode()
    page = _page(raw)
    assert set(SECTION_IDS) <= page.ids
    _assert_self_contained(page, raw)
    svgs = [n for n in c.files if n.endswith(".svg")]
    assert page.tags.count("svg") == len(svgs)
    assert raw.count('id="plot-') >= 4


# --------------------------------------------------------------------------- same figures


def _same_figures(doc: dict) -> list[tuple[str, str]]:
    """The figures all three must show, formatted as the reports print them."""
    figures = [("output noise", format_si(doc["noise"]["integrated_vrms"], "V rms",
                                                 significant=4))]
    for st in doc["stages"]:
        if st["kind"] != "gain":
            figures.append((f"stage {st['position']} built f0", fmt_hz(st["built"]["f0_hz"])))
    worst = min(n["margin_db"] for n in doc["nodes"])
    figures.append(("worst headroom margin", f"{format_fixed(worst, 1, sign=True)} dB"))
    for n in doc["nodes"]:
        figures.append((f"{n['net']} peak", format_si(n["peak_vpk"], "Vpk")))
    if doc.get("yield"):
        figures.append(("yield", f"{100 * doc['yield']['yield']:.1f} %"))
    return figures


@pytest.mark.parametrize("name", SCENARIO_NAMES)
def test_json_terminal_and_html_show_the_same_figures(name):
    c = case(name)
    doc = json.loads(c.json_text)
    page = _visible(c.files["report.html"].decode())
    for what, shown in _same_figures(doc):
        assert shown in c.terminal_text, f"terminal lacks {what} = {shown}"
        assert shown in page, f"HTML lacks {what} = {shown}"


def test_figures_survive_json_round_trip():
    """The JSON holds the analysis numbers themselves (not rounded), so the formatted
    figures above come from the same values as the reports'."""
    c = case(SCENARIO_NAMES[0])
    doc = json.loads(c.json_text)
    an = c.plan.chosen.analyses
    assert doc["noise"]["integrated_vrms"] == an.noise.integrated_vrms
    assert [n["margin_db"] for n in doc["nodes"]] == [n.margin_db for n in an.nodes]


# --------------------------------------------------------------------------- audit, no chain


@pytest.fixture(scope="module")
def audited(tmp_path_factory):
    """The lock-in plan's chain.toml, audited: the audit's files and its terminal text."""
    work = tmp_path_factory.mktemp("audit")
    chain_toml = work / "chain.toml"
    text = case("lockin_mains").files["chain.toml"].decode()
    # This test is about the report: leave out a [tolerance] table whether or not the audit
    # reader takes it (the audit needs no yield to be reported).
    text = re.sub(r"(?ms)^\[tolerance\]\n.*?(?=^\[|\Z)", "", text)
    chain_toml.write_text(text)
    a = audit(chain_toml)
    text = dumps(audit_to_dict(a))
    files = audit_files(a, text)
    return a, text, files, terminal_text(render_audit, a), work


@pytest.mark.slow
def test_audit_report_has_every_section_and_the_same_figures(audited):
    a, text, files, term, _ = audited
    raw = files["report.html"].decode()
    page = _page(raw)
    assert set(SECTION_IDS) <= page.ids
    _assert_self_contained(page, raw)
    assert {f"schematic_stage{st.position}.svg" for st in a.chain.stages} <= set(files)
    visible = _visible(raw)
    assert "Audit of the chain" in visible
    for what, shown in _same_figures(json.loads(text)):
        assert shown in term, f"terminal lacks {what} = {shown}"
        assert shown in visible, f"HTML lacks {what} = {shown}"


def test_unbuildable_plan_still_writes_a_report():
    """A 10 kHz, 100 Hz wide band with a 20 kHz GBW op-amp: no candidate builds; the
    report says why and draws nothing."""
    p = plan(spec_from_dict({"passband": {"center_hz": 10000, "bandwidth_hz": 100,
                                          "max_loss_db": 1, "gain_db": 20},
                             "stopband": [{"freq_hz": 9000, "min_loss_db": 40}],
                             "amplifier": {"gbw_hz": 20000}}))
    assert p.chosen.chain is None
    files = plan_files(p, dumps(plan_to_dict(p)))
    assert not any(n.endswith((".png", ".svg")) for n in files)
    raw = files["report.html"].decode()
    page = _page(raw)
    assert set(SECTION_IDS) <= page.ids
    assert "No circuit builds at least one section" in _visible(raw)
    assert "FAIL" in _visible(raw)


# --------------------------------------------------------------------------- Chromium

needs_chromium = pytest.mark.chromium


def _check_render(html_path: Path, work: Path) -> None:
    dom, shot = chromium_render(html_path, work, size=(1200, 3000))
    ids = set(re.findall(r'\bid="([^"]+)"', dom))
    assert set(SECTION_IDS) <= ids, f"sections missing in the DOM: {set(SECTION_IDS) - ids}"
    assert dom.count("<svg") >= 5
    assert shot.exists(), "no screenshot"
    img = Image.open(shot)
    assert img.size == (1200, 3000)
    grey = np.asarray(img.convert("L"))
    assert float(np.mean(grey < 235)) > 0.02, "screenshot nearly blank"
    assert len(np.unique(np.asarray(img.convert("RGB")).reshape(-1, 3), axis=0)) > 50


@needs_chromium
@pytest.mark.slow
def test_plan_report_renders_in_headless_chromium(tmp_path):
    page = tmp_path / "report.html"
    page.write_bytes(case("ultrasonic_ranging").files["report.html"])
    _check_render(page, tmp_path)


@needs_chromium
@pytest.mark.slow
def test_audit_report_renders_in_headless_chromium(audited, tmp_path):
    _, _, files, _, _ = audited
    page = tmp_path / "report.html"
    page.write_bytes(files["report.html"])
    _check_render(page, tmp_path)


@pytest.mark.slow
def test_html_report_is_the_same_when_it_draws_for_itself():
    """html_report with no drawings passed in makes them itself: the same page."""
    c = case("tone_detector")
    assert html_report(c.plan).encode() == c.files["report.html"]
