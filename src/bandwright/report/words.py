"""The words the reports use for each state, written once (terminal, HTML, user guide; the
JSON keeps the same words in lower case or as keys):

- a check's status: ``pass`` / ``WARN`` / ``FAIL`` (JSON ``pass`` / ``warn`` / ``fail``);
- a candidate's state: ``meets all`` / ``N failing`` / ``no circuit``;
- a stage's figures: ``target`` / ``ideal parts`` / ``built`` (JSON ``target`` (the stage's
  top-level ``f0_hz``, ``q``, ``gain``) / ``ideal_parts`` / ``built``); in an audit the
  target is what the parts give with an ideal op-amp, and is called ``ideal``;
- the candidate paths: ``bandpass`` and ``highpass + lowpass`` (JSON ``hp_lp``).
"""

from __future__ import annotations

from typing import Any, Sequence

from bandwright.candidates import path_label
from bandwright.parts.notation import (format_hz, format_pct, format_si, format_sig, format_slew,
                                       plural)

__all__ = ["STATUS_WORD", "candidate_state", "path_label", "checks_sentence",
           "check_figure", "unasked_band", "other_sources", "TARGET", "IDEAL_PARTS", "BUILT",
           "AUDIT_IDEAL", "AUDIT_IDEAL_NOTE"]

STATUS_WORD = {"pass": "pass", "warn": "WARN", "fail": "FAIL"}

TARGET, IDEAL_PARTS, BUILT = "target", "ideal parts", "built"
AUDIT_IDEAL = "ideal"
AUDIT_IDEAL_NOTE = ("ideal: the parts as given with an ideal op-amp (no GBW limit, no "
                    "source resistance); built: with this op-amp, the first stage driven by "
                    "the source")


def unasked_band(pb: Any) -> str:
    """What an audit without a mask says instead of a requirement (terminal and HTML alike):
    the band and gain it prints are read from the response, and what is skipped."""
    return (f"none stated in the audit file: the band {format_hz(pb.low_hz)} to "
            f"{format_hz(pb.high_hz)} (its −3 dB points) and the gain "
            f"{format_sig(pb.gain_db, 4)} dB "
            f"(its peak) are read from the response; the mask and yield checks are skipped, "
            f"having nothing to check against")


def other_sources(count: int) -> str:
    """The noise table's and plot's last line: "12 other sources together"."""
    return f"{plural(count, 'other source')} together"


def candidate_state(buildable: bool, failures: int) -> str:
    """"no circuit", "2 failing" or "meets all"."""
    if not buildable:
        return "no circuit"
    return f"{failures} failing" if failures else "meets all"


def checks_sentence(checks: Sequence[Any]) -> str:
    """"14 checks: 12 pass, 1 WARN, 1 FAIL." (the same line in terminal and HTML)."""
    n = {s: sum(k.status == s for k in checks) for s in STATUS_WORD}
    return (f"{plural(len(checks), 'check')}: {n['pass']} pass, {n['warn']} WARN, "
            f"{n['fail']} FAIL.")


# A check's unit (as the JSON carries it) → how its value and limit read.
_SI_UNIT = {"ohm": "Ω", "Vrms": "V rms", "Vpk": "Vpk", "V": "V"}
_COUNTED = {"parts": "part", "poles": "pole", "sections": "section"}


def check_figure(x: float | None, unit: str) -> str:
    """A check's value or limit as the terminal and the HTML print it: "11.5 kΩ",
    "46.8 µV rms", "20.2 MHz", "97.8 %", "1 part" (the JSON keeps the SI float). Hz figures
    are GBWs; one of exactly 0 (what a follower needs) reads "negligible", as its message."""
    if x is None:
        return "—"
    if unit == "Hz":
        return "negligible" if x == 0 else format_hz(x)
    if unit in _SI_UNIT:
        return format_si(x, _SI_UNIT[unit])
    if unit == "share":
        return format_pct(x)
    if unit in _COUNTED and float(x).is_integer():
        return plural(int(x), _COUNTED[unit])
    if unit == "order":
        return f"order {format_sig(x)}"
    if unit == "Q":
        return f"Q {format_sig(x)}"
    if unit == "V/us":
        return format_slew(x)
    return f"{format_sig(x)} {unit}".strip()
