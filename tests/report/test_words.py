"""The figures of the check tables (report/words.py), as the terminal and the HTML print them.

Reference: SI style, a space between number and unit and the prefix chosen from the value
(BIPM SI Brochure, 9th ed., §5.4.3 [mem]); the JSON keeps the SI floats.
"""

from __future__ import annotations

from types import SimpleNamespace

from bandwright.report.words import check_figure, checks_sentence
from bandwright.report import words


def test_a_followers_gbw_need_reads_negligible_not_zero():
    assert check_figure(0.0, "Hz") == "negligible"
    assert check_figure(7677.0, "Hz") == "7.677 kHz"


def test_volts_take_the_prefix_of_their_value():
    assert check_figure(5e-3, "Vrms") == "5 mV rms"
    assert check_figure(0.15, "Vpk") == "150 mVpk"
    assert check_figure(2.68e3, "ohm") == "2.68 kΩ"


def test_counts_agree_in_number():
    assert check_figure(1.0, "parts") == "1 part"
    assert check_figure(2.0, "parts") == "2 parts"
    one = [SimpleNamespace(status="pass")]
    assert checks_sentence(one) == "1 check: 1 pass, 0 WARN, 0 FAIL."


def test_the_lump_of_other_noise_sources_agrees_with_its_count():
    assert words.other_sources(1) == "1 other source together"
    assert words.other_sources(12) == "12 other sources together"
