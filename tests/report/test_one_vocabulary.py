"""One plan and one audit, each rendered to the terminal, report.html and plan.json: the same
word for every state and the same figure, to the digits shown, for every value.

No outside reference: the outputs are checked against each other and against the words the
user guide lists (docs/user-guide.md, "Words the reports use"). The figures come from the
JSON's SI floats through the one formatter the reports use (``report.words.check_figure``,
``parts.notation``), so a report that rounds or words a figure its own way fails here.
"""

from __future__ import annotations

import json
import math
import re
from types import SimpleNamespace

import pytest

from report_cases import ROOT, SCENARIO_NAMES, case, terminal_text
from test_html import _visible

from bandwright.analysis.noise import LISTED_SOURCES, source_words
from bandwright.audit import audit
from bandwright.parts.notation import format_fixed, format_si, format_sig, format_slew
from bandwright.report import words
from bandwright.report.files import audit_files
from bandwright.report.json_out import audit_to_dict, dumps
from bandwright.report.terminal import render_audit

PLAN = "lockin_mains"

# Figures a person should never meet: raw exponents, negative zeros, counts not agreeing with
# their noun, internal names and ASCII stand-ins for units.
FORBIDDEN = {
    "raw exponent": re.compile(r"\d[eE][+-]?\d"),
    "negative zero": re.compile(r"(?<![\w.])[-−]0(?:\.0+)?(?![\d.])"),
    "1 with a plural": re.compile(r"(?<![\d.,])1 (?:warnings|parts|checks|sources|boards|poles"
                                  r"|sections|stages|op-amps)\b"),
    "symbol for Q sensitivity": re.compile(r"\|S_Q\|"),
    "noise source key": re.compile(r"\bU\d+_s\d+ current[+-]"),
    "ASCII ohm": re.compile(r"\d ?ohms?\b"),
    "ASCII micro": re.compile(r"\d ?u[VAF]\b"),
}


def _outputs_of_plan():
    c = case(PLAN)
    return (json.loads(c.json_text), c.terminal_text,
            _visible(c.files["report.html"].decode()))


@pytest.fixture(scope="module")
def audited(tmp_path_factory):
    """The plan's own chain.toml, audited: JSON, terminal, HTML text."""
    work = tmp_path_factory.mktemp("vocab")
    path = work / "chain.toml"
    path.write_bytes(case(PLAN).files["chain.toml"])
    a = audit(path)
    text = dumps(audit_to_dict(a))
    files = audit_files(a, text)
    return json.loads(text), terminal_text(render_audit, a), _visible(
        files["report.html"].decode())


@pytest.fixture(scope="module")
def unasked(tmp_path_factory):
    """The same chain with its mask tables taken out: an audit with nothing asked."""
    work = tmp_path_factory.mktemp("vocab_unasked")
    text = case(PLAN).files["chain.toml"].decode()
    text = re.sub(r"(?ms)^\[(?:passband|\[stopband\]|tolerance)\]\n.*?(?=^\[|\Z)", "", text)
    path = work / "chain.toml"
    path.write_text(text)
    a = audit(path)
    files = audit_files(a, dumps(audit_to_dict(a)))
    return a, terminal_text(render_audit, a), _visible(files["report.html"].decode())


def _check_rows_shown(doc: dict, text: str, where: str) -> list[str]:
    """Each JSON check's state word, value and limit, in that order, in `text`."""
    missing = []
    for k in doc["checks"]:
        word = words.STATUS_WORD[k["status"]]
        assert word.lower() == k["status"], "the JSON keeps the reports' word in lower case"
        row = r"\s+".join(re.escape(x) for x in (
            word, words.check_figure(k["value"], k["unit"]),
            words.check_figure(k["limit"], k["unit"])))
        if not re.search(r"(?<!\S)" + row + r"(?!\S)", text):
            missing.append(f"{where}: {k['id']} {k.get('net') or k.get('stage')}: {row}")
    return missing


def _noise_sources_shown(doc: dict, text: str, where: str) -> list[str]:
    shown = []
    sources = doc["noise"]["contributions"]
    for name, vrms in [(c["source"], c["vrms"]) for c in sources[:LISTED_SOURCES]]:
        if not re.search(re.escape(source_words(name)) + r"\s+" + re.escape(f"{vrms * 1e6:.3g}"),
                         text):
            shown.append(f"{where}: noise source {name} as {source_words(name)!r}")
    rest = len(sources) - LISTED_SOURCES
    if rest > 0 and f"{rest} other sources together" not in text:
        shown.append(f"{where}: the lump of the {rest} other sources")
    return shown


def test_plan_checks_read_the_same_in_all_three():
    doc, term, page = _outputs_of_plan()
    assert _check_rows_shown(doc, term, "terminal") + _check_rows_shown(doc, page, "HTML") == []
    sentence = words.checks_sentence([SimpleNamespace(**k) for k in doc["checks"]])
    assert sentence in term and sentence in page


def test_plan_candidate_states_read_the_same():
    doc, term, page = _outputs_of_plan()
    for c in doc["candidates"]:
        state = words.candidate_state(c["buildable"], c["failed_check_count"])
        path = words.path_label(c["path"])
        for where, text in (("terminal", term), ("HTML", page)):
            assert re.search(re.escape(c["family"]) + r"\s+" + re.escape(path), text), where
            assert state in text, (where, state)


def test_plan_stage_figures_use_the_three_words():
    doc, term, page = _outputs_of_plan()
    assert {"target", "ideal_parts", "built"} <= set(doc["stages"][1])
    for where, text in (("terminal", term), ("HTML", page)):
        for word in (words.TARGET, words.IDEAL_PARTS, words.BUILT):
            assert word in text, (where, word)
        for stale in ("exact parts", "series parts", "asked →", "as generated"):
            assert stale not in text, (where, stale)


def _stage_and_node_figures(doc: dict) -> list[tuple[str, str]]:
    """Each built stage's Q and gain in dB, each part value, each net's bias, slew and load,
    formatted by the reports' own formatters from the JSON's floats."""
    out = []
    for st in doc["stages"]:
        b = st["built"]
        if st["kind"] != "gain":
            out.append((f"stage {st['position']} built Q", format_sig(b["q"])))
        out.append((f"stage {st['position']} built gain",
                    format_fixed(20 * math.log10(abs(b["gain"])), 2, sign=True)))
        for name, value in st["components"].items():
            out.append((f"stage {st['position']} {name}",
                        format_si(value, "Ω" if name.startswith("R") else "F")))
    for n in doc["nodes"]:
        out.append((f"{n['net']} bias", format_si(n["dc_v"], "V", significant=4, sign=True)))
        out.append((f"{n['net']} slew", format_slew(n["slew_needed_v_per_us"])))
        if n["load_ohms"] is not None:
            out.append((f"{n['net']} load", format_si(n["load_ohms"], "Ω")))
    return out


def test_plan_stage_and_node_figures_read_the_same():
    doc, term, page = _outputs_of_plan()
    missing = [(where, what, shown) for what, shown in _stage_and_node_figures(doc)
               for where, text in (("terminal", term), ("HTML", page)) if shown not in text]
    assert missing == []


def test_plan_noise_sources_read_the_same():
    doc, term, page = _outputs_of_plan()
    assert _noise_sources_shown(doc, term, "terminal") + _noise_sources_shown(doc, page, "HTML") \
        == []


@pytest.mark.slow
def test_audit_reads_the_same_in_all_three(audited):
    doc, term, page = audited
    assert _check_rows_shown(doc, term, "terminal") + _check_rows_shown(doc, page, "HTML") == []
    assert _noise_sources_shown(doc, term, "terminal") + _noise_sources_shown(doc, page, "HTML") \
        == []
    for where, text in (("terminal", term), ("HTML", page)):
        assert words.AUDIT_IDEAL_NOTE.split(";")[0] in text, where


def _stray(term: str, page: str) -> list[tuple[str, str, str, str]]:
    return [(where, what, m.group(0), text[max(0, m.start() - 40):m.end() + 20])
            for where, text in (("terminal", term), ("HTML", page))
            for what, pattern in FORBIDDEN.items() for m in pattern.finditer(text)]


@pytest.mark.parametrize("name", SCENARIO_NAMES)
def test_no_stray_number_formats_or_internal_names_in_any_plan(name):
    c = case(name)
    assert _stray(c.terminal_text, _visible(c.files["report.html"].decode())) == []


def test_no_stray_number_formats_or_internal_names_in_the_audits(audited, unasked):
    assert _stray(*audited[1:]) == []
    assert _stray(*unasked[1:]) == []


@pytest.mark.slow
def test_audit_without_a_mask_says_what_it_read_and_what_it_skips(unasked):
    a, term, page = unasked
    assert not a.has_mask
    said = words.unasked_band(a.requirement.passband)
    for where, text in (("terminal", term), ("HTML", page)):
        assert " ".join(said.split()) in " ".join(text.split()), where
        assert "dB loss in band" not in text and "± " + "0.5 dB" not in text, where
    assert not any(k.id in ("mask", "yield") for k in a.checks)


def test_user_guide_lists_the_same_state_words():
    guide = (ROOT / "docs" / "user-guide.md").read_text(encoding="utf-8")
    status = " / ".join(words.STATUS_WORD.values())
    json_status = " / ".join(f"`{w}`" for w in words.STATUS_WORD)
    assert f"| a check's status | {status} | {json_status} |" in guide
    assert "| a candidate's state | " + " / ".join(
        [words.candidate_state(True, 0), words.candidate_state(True, 9).replace("9", "N"),
         words.candidate_state(False, 0)]) + " |" in guide
    assert (f"| a stage's figures | {words.TARGET} / {words.IDEAL_PARTS} / {words.BUILT} "
            f"(an audit: {words.AUDIT_IDEAL} / {words.BUILT}) |") in guide
