"""Engineering notation: reading and printing part values.

References: SI prefixes (BIPM, *The International System of Units*, 9th ed., 2019,
Table 7); the RKM code of IEC 60062:2016 §4 [mem] ("4k7", "4R7"); SPICE scale factors as
read by ngspice-39 (the installed Debian package, run below: "M" is milli, "Meg" mega).
"""

import re
import subprocess

import numpy as np
import pytest

from bandwright.parts.eseries import series_mantissas
from bandwright.parts.notation import (format_hz, format_si, format_spice, format_value,
                                       parse_value)

# (text, value): SI prefixes per BIPM SI Brochure Table 7; RKM per IEC 60062 §4 [mem].
EXAMPLES = [
    ("16.2k", 16.2e3), ("10n", 10e-9), ("4k7", 4.7e3), ("4.7n", 4.7e-9), ("1M", 1e6),
    ("2.2u", 2.2e-6), ("2.2\u00b5", 2.2e-6), ("2.2\u03bc", 2.2e-6), ("100p", 100e-12),
    ("1meg", 1e6), ("1MEG", 1e6), ("1Meg", 1e6), ("0.5", 0.5), ("1e3", 1e3), ("220R", 220.0),
    ("4R7", 4.7), ("R47", 0.47), ("4n7", 4.7e-9), ("2M2", 2.2e6), ("1m", 1e-3),
    ("10k\u03a9", 10e3), ("10k\u2126", 10e3), ("10 kohm", 10e3), ("4.7kOhms", 4.7e3),
    ("4.7nF", 4.7e-9), ("10 nF", 10e-9), ("10uf", 10e-6), ("1F", 1.0), ("10f", 10e-15),
    ("1.5fF", 1.5e-15), ("3G", 3e9), ("1T", 1e12), ("0", 0.0), ("  47k  ", 47e3),
    ("+3k3", 3.3e3), (".5", 0.5), ("1E-6", 1e-6), ("2.5e-3k", 2.5), ("4K7", 4.7e3),
]


@pytest.mark.parametrize("text, value", EXAMPLES)
def test_parse_examples(text, value):
    # Exact: the parser rounds the decimal text once, as Python's float("4.7e-9") does.
    assert parse_value(text) == value


def test_parse_accepts_numbers():
    assert parse_value(4700) == 4700.0
    assert parse_value(4.7e-9) == 4.7e-9


@pytest.mark.parametrize("text, reason", [
    ("", "empty"), ("   ", "empty"), ("abc", "does not start with a number"),
    ("-1k", "negative"), ("\u22124k7", "negative"), ("16.2x", "unknown suffix 'x'"),
    ("1k2k", "unknown suffix"), ("1..2", "unknown suffix"), ("k", "does not start"),
    ("nan", "does not start"), ("inf", "does not start"), ("1e999", "not a finite"),
    ("4.7 V", "unknown suffix"),
])
def test_parse_rejects_junk_with_a_reason(text, reason):
    with pytest.raises(ValueError, match=re.escape(reason)):
        parse_value(text)


@pytest.mark.parametrize("bad", [-1.0, float("nan"), float("inf"), True, None])
def test_parse_rejects_bad_numbers(bad):
    with pytest.raises(ValueError):
        parse_value(bad)


@pytest.mark.parametrize("value, text", [
    (16.2e3, "16.2k"), (4.7e-9, "4.7n"), (1e6, "1M"), (220.0, "220"), (10e-9, "10n"),
    (100e-12, "100p"), (2.2e-6, "2.2u"), (1e-3, "1m"), (0.0, "0"), (999.96, "1k"),
    (79577.4715, "79.6k"), (1.5e-18, "1.5e-18"), (3e15, "3e15"), (-4.7e3, "-4.7k"),
    (1.0, "1"), (0.47, "470m"),
])
def test_format_value_examples(value, text):
    assert format_value(value) == text


def test_format_value_unit_and_digits():
    assert format_value(4.7e-9, "F") == "4.7nF"
    assert format_value(16.2e3, "\u03a9") == "16.2k\u03a9"
    assert format_value(79577.4715, significant=5) == "79.577k"


@pytest.mark.parametrize("bad", [float("nan"), float("inf")])
def test_format_rejects_non_finite(bad):
    with pytest.raises(ValueError):
        format_value(bad)
    with pytest.raises(ValueError):
        format_spice(bad)


def test_round_trip_every_e192_value_in_every_decade():
    """format_value keeps 3 digits, enough for IEC 60063 Table 2: value -> text -> same double."""
    values = np.outer(10.0 ** np.arange(-15, 13), series_mantissas("E192")).ravel()
    # Rounding through a decimal string gives the double of the printed decimal value.
    values = np.array([float(f"{v:.2e}") for v in values])
    back = np.array([parse_value(format_value(v)) for v in values])
    np.testing.assert_array_equal(back, values)


@pytest.mark.parametrize("text, _", EXAMPLES)
def test_round_trip_text_value_text(text, _):
    value = parse_value(text)
    assert parse_value(format_value(value)) == pytest.approx(value, rel=5e-3, abs=0)
    assert parse_value(format_spice(value)) == pytest.approx(value, rel=1e-6, abs=0)


@pytest.mark.parametrize("value, text", [
    (1e6, "1Meg"), (2.2e6, "2.2Meg"), (1e-3, "1m"), (16.2e3, "16.2k"), (79577.4715, "79.5775k"),
    (4.7e-9, "4.7n"), (1e-15, "1f"), (1e12, "1T"),
])
def test_format_spice_examples(value, text):
    assert format_spice(value) == text


def _ngspice_dc_levels(values: list[str]) -> np.ndarray:
    """DC voltage of a source written with each text, as ngspice-39 reads it."""
    lines = ["scale factor check"]
    for i, text in enumerate(values, start=1):
        lines += [f"V{i} n{i} 0 DC {text}", f"R{i} n{i} 0 1k"]
    lines += [".control", "op"] + [f"print v(n{i})" for i in range(1, len(values) + 1)]
    lines += ["quit 0", ".endc", ".end", ""]
    run = subprocess.run(["ngspice", "-b", "/dev/stdin"], input="\n".join(lines),
                         capture_output=True, text=True, timeout=30)
    found = dict(re.findall(r"v\(n(\d+)\)\s*=\s*(\S+)", run.stdout))
    assert len(found) == len(values), run.stdout + run.stderr
    return np.array([float(found[str(i)]) for i in range(1, len(values) + 1)])


@pytest.mark.ngspice
def test_ngspice_reads_format_spice_as_meant():
    """ngspice-39 reads every format_spice text back to the value (7 printed digits)."""
    values = np.array([1.23456e-15, 4.7e-12, 9.87654e-9, 2.2e-6, 3.3e-3, 0.5, 1.0, 220.0,
                       16.2e3, 79577.4715, 1e6, 2.2e6, 4.7e9, 1.5e12])
    got = _ngspice_dc_levels([format_spice(v) for v in values])
    np.testing.assert_allclose(got, values, rtol=1e-6)


@pytest.mark.ngspice
def test_ngspice_reads_bare_M_as_milli():
    """Why format_spice exists: ngspice-39 reads "1M" and "1m" as 1e-3 and "1Meg" as 1e6."""
    got = _ngspice_dc_levels(["1M", "1m", "1Meg", "1MEG"])
    np.testing.assert_allclose(got, [1e-3, 1e-3, 1e6, 1e6], rtol=1e-9)
    assert parse_value("1M") == 1e6  # the part-marking convention differs on purpose


@pytest.mark.parametrize("value_hz,text", [(20.2e6, "20.2 MHz"), (2.69e6, "2.69 MHz"),
                                           (40e3, "40 kHz"), (3.16227766, "3.162 Hz"),
                                           (0.5, "500 mHz"), (2.1e9, "2.1 GHz"),
                                           (999.96, "1 kHz"), (float("inf"), "inf Hz")])
def test_format_hz_puts_a_space_before_the_prefixed_unit(value_hz, text):
    """SI style (a space between number and unit, the prefix on the unit; BIPM SI Brochure,
    9th ed., §5.4.3 [mem]), four significant digits, and the value read back by parse_value
    to those digits."""
    assert format_hz(value_hz) == text
    if value_hz != float("inf"):
        number, unit = text.split(" ")
        back = parse_value(number + unit[:-2])
        assert back == pytest.approx(value_hz, rel=5e-4)


@pytest.mark.parametrize("value,unit,text", [
    (1.2, "V", "+1.2 V"), (-3e-3, "V", "-3 mV"), (5e-4, "V", "+500 µV"),
    (-0.0, "V", "+0 V"), (4.2e-3, "Vpk", "+4.2 mVpk"), (2e6, "Hz", "+2 MHz")])
def test_format_si_sign_marks_a_shift(value, unit, text):
    """sign=True puts "+" before a value that is not negative (a margin or a shift), never
    "-0" (a value that rounds to zero is unsigned zero), and the prefix still follows the
    value (BIPM SI Brochure, 9th ed., §5.4.3 [mem])."""
    assert format_si(value, unit, sign=True) == text
    assert format_si(value, unit, sign=True).lstrip("+") == format_si(value, unit)


def test_format_si_chooses_the_prefix_from_the_value():
    """A 5 mV budget reads "5 mV rms", not "5000 µV rms" (SI Brochure §5.4.3 [mem])."""
    assert format_si(5e-3, "V rms", significant=4) == "5 mV rms"
    assert format_si(16.89e-6, "V rms", significant=4) == "16.89 µV rms"
    assert format_si(122e-6, "s") == "122 µs"
    assert format_si(29e-9, "V/√Hz", significant=2) == "29 nV/√Hz"
