"""Engineering notation for part values: reading "16.2k", "4k7", "10nF"; writing them back.

Conventions (decided here, used everywhere in bandwright):

- **Prefixes** ``f p n u µ m k M G T`` are the SI ones, case-sensitive except that ``K``
  also means kilo and ``P``, ``N``, ``U``, ``g``, ``t`` are read as their usual
  counterparts (pico, nano, micro, giga, tera). ``meg`` in any case (``1meg``, ``1MEG``,
  ``1Meg``) means mega, as SPICE writes it.
- **"M" is mega, "m" is milli**, as on part markings and in the RKM code. SPICE reads
  both ``m`` and ``M`` as milli (it ignores case), so a SPICE deck must never carry a
  bare "M": write decks with :func:`format_spice`, which prints ``Meg``.
- **RKM code** (letter as decimal point): ``4k7`` = 4.7 k, ``4R7`` = 4.7, ``R47`` = 0.47,
  ``4n7`` = 4.7 n, ``2M2`` = 2.2 M. ``R`` also ends a plain value (``220R`` = 220).
- **Units** are tolerated and dropped: ``Ω`` (either code point), ``ohm``/``ohms`` (any
  case) and ``F``. A lowercase ``f`` right after a number is femto (``10f`` = 1e-14);
  after a prefix it is the farad unit (``10uf`` = 10 µ).
- Zero parses (it is validated elsewhere); negative values, NaN and infinities do not.
- Printing uses the ASCII ``u`` for micro so that the text survives TOML, shells and
  SPICE.

References
----------
.. [1] IEC 60062:2016, *Marking codes for resistors and capacitors*, §4 (the RKM code,
   letters in place of the decimal point) [mem].
.. [2] ngspice-39 User's Manual, §2.3 (scale factors: ``M`` and ``m`` are milli, ``Meg``
   is mega; letters after a number are ignored) [mem; checked against ngspice-39 in the
   tests].
"""

from __future__ import annotations

import math
import re
from decimal import Decimal, InvalidOperation
from numbers import Real

__all__ = ["parse_value", "format_value", "format_spice", "format_exact", "format_hz",
           "format_si", "format_hz_range", "format_pct", "format_fixed", "format_sig", "plural",
           "format_slew", "SLEW_FLOOR_V_PER_US"]

#: Below this a slew-rate need is printed as "< 0.001 V/µs": it is nothing beside any op-amp's
#: slew rate, and a figure like 1.13e-05 V/µs would only be read as an exponent.
SLEW_FLOOR_V_PER_US = 1e-3

_PREFIX_EXPONENT: dict[str, int] = {
    "f": -15,
    "p": -12, "P": -12,
    "n": -9, "N": -9,
    "u": -6, "U": -6, "µ": -6, "μ": -6,
    "m": -3,
    "R": 0, "r": 0,
    "k": 3, "K": 3,
    "M": 6,
    "G": 9, "g": 9,
    "T": 12, "t": 12,
}
_PREFIX_CHARS = "".join(_PREFIX_EXPONENT)
_UNIT = r"(?:(?i:ohms?)|\u03a9|\u2126|[Ff])"
_NUMBER = r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"

# "16.2k", "1e3", "1meg", "220R", "10 nF": a number, then a prefix, then a unit.
_DECIMAL_RE = re.compile(
    rf"^\+?(?P<number>{_NUMBER})\s*(?P<prefix>(?i:meg)|[{_PREFIX_CHARS}])?\s*(?P<unit>{_UNIT})?$")
# "4k7", "R47", "4n7F": the prefix letter stands where the decimal point would be (RKM).
_RKM_RE = re.compile(
    rf"^\+?(?P<whole>\d*)(?P<prefix>[{_PREFIX_CHARS}])(?P<fraction>\d+)\s*(?P<unit>{_UNIT})?$")
_LEADING_NUMBER_RE = re.compile(rf"^\+?{_NUMBER}")

_PRINT_PREFIXES: dict[int, str] = {-15: "f", -12: "p", -9: "n", -6: "u", -3: "m", 0: "",
                                   3: "k", 6: "M", 9: "G", 12: "T"}
_SPICE_PREFIXES: dict[int, str] = {**_PRINT_PREFIXES, 6: "Meg"}


def _exponent_of(prefix: str | None) -> int:
    if not prefix:
        return 0
    if prefix.lower() == "meg":
        return 6
    return _PREFIX_EXPONENT[prefix]


def _finite_non_negative(value: float, shown: object) -> float:
    if math.isnan(value) or math.isinf(value):
        raise ValueError(f"cannot read {shown!r} as a part value: it is not a finite number")
    if value < 0:
        raise ValueError(f"cannot read {shown!r} as a part value: it is negative")
    return value


def parse_value(text: str | float) -> float:
    """Read a part value written in engineering notation.

    Parameters
    ----------
    text : str or float
        For example "16.2k", "10n", "4k7", "4.7nF", "1M", "2.2µ", "1meg", "220R", "4R7",
        "1e3", "0.5", "10 kΩ". A real number is accepted as it is.

    Returns
    -------
    float
        The value in base units (ohms, farads), correctly rounded from the decimal text.

    Raises
    ------
    ValueError
        If the text is empty, negative, not a number or carries an unknown suffix; the
        message says which.

    Notes
    -----
    "M" is mega and "m" is milli (part-marking convention); "meg" in any case is mega.
    The RKM code of IEC 60062 [1]_ is read too ("4k7" = 4700).

    References
    ----------
    .. [1] IEC 60062:2016, §4 [mem].

    Examples
    --------
    >>> parse_value("16.2k"), parse_value("4k7"), parse_value("1MEG"), parse_value("4.7nF")
    (16200.0, 4700.0, 1000000.0, 4.7e-09)
    """
    if isinstance(text, bool):
        raise ValueError(f"cannot read {text!r} as a part value: it is a boolean")
    if isinstance(text, Real):
        return _finite_non_negative(float(text), text)
    if not isinstance(text, str):
        raise ValueError(f"cannot read {text!r} as a part value: expected text or a number")
    s = text.strip()
    if not s:
        raise ValueError("cannot read an empty string as a part value")
    if s[0] in "-\u2212":
        raise ValueError(f"cannot read {text!r} as a part value: it is negative")

    match = _DECIMAL_RE.match(s)
    if match:
        digits = match["number"]
    else:
        match = _RKM_RE.match(s)
        if match is None:
            raise ValueError(_junk_reason(text, s))
        digits = f"{match['whole'] or '0'}.{match['fraction']}"
    try:
        exact = Decimal(digits).scaleb(_exponent_of(match["prefix"]))
    except InvalidOperation:  # pragma: no cover - the regexes only pass decimal digits
        raise ValueError(f"cannot read {text!r} as a part value") from None
    # float(Decimal) is correctly rounded, so "16.2k" gives exactly the double of 16200.
    return _finite_non_negative(float(exact), text)


def _junk_reason(text: str, s: str) -> str:
    head = _LEADING_NUMBER_RE.match(s)
    if head is None:
        return f"cannot read {text!r} as a part value: it does not start with a number"
    return (f"cannot read {text!r} as a part value: unknown suffix {s[head.end():]!r} "
            "(expected a prefix f p n u µ m k M meg G T or R, or RKM like 4k7, "
            "then optionally Ω, ohm or F)")


def _engineering(value: float, significant: int, prefixes: dict[int, str]) -> str:
    if not math.isfinite(value):
        raise ValueError(f"cannot print {value!r} as a part value: it is not finite")
    if int(significant) != significant or significant < 1:
        raise ValueError(f"significant must be a whole number >= 1, got {significant!r}")
    if value == 0:
        return "0"
    sign = "-" if value < 0 else ""
    # Round through the decimal string first, so that 999.96 becomes "1k", not "1000".
    mantissa, exp_text = f"{abs(value):.{int(significant) - 1}e}".split("e")
    exponent = int(exp_text)
    digits = mantissa.replace(".", "")
    exp3 = 3 * (exponent // 3)
    if exp3 not in prefixes:
        short = mantissa.rstrip("0").rstrip(".")
        return f"{sign}{short}e{exponent}"
    shift = exponent - exp3 + 1
    digits = digits.ljust(shift, "0")
    whole, fraction = digits[:shift], digits[shift:].rstrip("0")
    return f"{sign}{whole}{'.' + fraction if fraction else ''}{prefixes[exp3]}"


def format_value(value: float, unit: str = "", *, significant: int = 3) -> str:
    """Print a part value in engineering notation, for people and for chain files.

    Parameters
    ----------
    value : float
        Value in base units (ohms, farads).
    unit : str, optional
        Appended as given ("Ω", "F"); empty by default.
    significant : int, optional
        Significant digits kept (3 by default, enough for every E192 value).

    Returns
    -------
    str
        The value with trailing zeros removed and an SI prefix (``u`` for micro, ``M`` for
        mega): "16.2k", "4.7n", "1M", "220". Values outside femto … tera print as
        "1.5e-18". :func:`parse_value` reads every result back.

    Raises
    ------
    ValueError
        If `value` is not finite or `significant` < 1.

    Examples
    --------
    >>> format_value(16200.0), format_value(4.7e-9, "F"), format_value(1e6), format_value(220)
    ('16.2k', '4.7nF', '1M', '220')
    """
    return _engineering(float(value), significant, _PRINT_PREFIXES) + unit


def format_exact(value: float) -> str:
    """A part value in engineering notation with the fewest digits (at least three) that
    `parse_value` reads back as exactly `value`: "16.2k", "4.7n", "3.333333333333333k".

    `parse_value` rounds the decimal text correctly, so 17 significant digits always read
    back exactly; a value that is not finite or is negative raises ``ValueError`` (as
    `format_value`).

    Examples
    --------
    >>> format_exact(16200.0), format_exact(1.5e-09), format_exact(123456.789)
    ('16.2k', '1.5n', '123.456789k')
    """
    for n in range(3, 18):
        text = format_value(value, significant=n)
        if parse_value(text) == value:
            return text
    return repr(float(value))  # pragma: no cover - 17 digits always read back exactly


def format_hz(value_hz: float, *, significant: int = 4) -> str:
    """Print a frequency for people: the value, a space, the prefixed unit.

    The one Hz formatter of the package: reports, reasons and check messages all print
    frequencies with it.

    Parameters
    ----------
    value_hz : float
        Frequency, Hz.
    significant : int, optional
        Significant digits kept (4 by default).

    Returns
    -------
    str
        "20.2 MHz", "40 kHz", "3.162 Hz", "500 mHz"; a value that is not finite prints as
        itself ("inf Hz"), so that a reason can say a GBW cannot be reached.

    Examples
    --------
    >>> format_hz(20.2e6), format_hz(40e3), format_hz(0.5), format_hz(float("inf"))
    ('20.2 MHz', '40 kHz', '500 mHz', 'inf Hz')
    """
    value_hz = float(value_hz)
    if not math.isfinite(value_hz):
        return f"{value_hz} Hz"
    return format_si(value_hz, "Hz", significant=significant)


_PEOPLE_PREFIXES: dict[int, str] = {**_PRINT_PREFIXES, -6: "µ"}


def format_si(value: float, unit: str, *, significant: int = 3, sign: bool = False) -> str:
    """Print a figure for people: the number, a space, the SI prefix and the unit.

    The one engineering formatter of the reports (terminal, HTML, plots, messages); JSON
    keeps plain SI floats. Units that carry a qualifier take the prefix in front:
    "2.28 Vpk", "5 mV rms", "185 µV".

    Parameters
    ----------
    value : float
    unit : str
        "V", "Vpk", "V rms", "Ω", "F", "Hz", "V/µs", "A"...
    significant : int, optional
        Significant digits kept (3 by default).
    sign : bool, optional
        Print "+" before a value that is not negative (a shift or a margin: "+1.2 V").

    Returns
    -------
    str
        "20.2 MHz", "185 µV", "11.5 kΩ", "0 V" (never "-0"); a value outside femto … tera
        prints as "1.5e-18 V"; a value that is not finite as itself ("inf Hz").

    Examples
    --------
    >>> format_si(1.15e4, "Ω"), format_si(4.681e-5, "V rms"), format_si(5e-3, "V rms")
    ('11.5 kΩ', '46.8 µV rms', '5 mV rms')
    """
    value = float(value)
    if not math.isfinite(value):
        return f"{'+' if sign and value > 0 else ''}{value} {unit}".strip()
    text = _engineering(value, significant, _PEOPLE_PREFIXES)
    if text.startswith("-") and text.strip("-0.") == "":
        text = "0"
    if sign and not text.startswith("-"):
        text = "+" + text
    if "e" in text:
        return f"{text} {unit}".strip()
    number = text.rstrip("fpnµmkMGT")
    return f"{number} {text[len(number):]}{unit}".rstrip()


def format_hz_range(low_hz: float, high_hz: float, *, significant: int = 4) -> str:
    """Print a frequency range: "37.11–43.11 kHz" when both ends share a prefix, else
    "995.5 Hz–1.005 kHz".

    Examples
    --------
    >>> format_hz_range(37.11e3, 43.11e3), format_hz_range(995.5, 1005)
    ('37.11–43.11 kHz', '995.5 Hz–1.005 kHz')
    """
    lo, hi = format_hz(low_hz, significant=significant), format_hz(high_hz,
                                                                  significant=significant)
    lo_num, _, lo_unit = lo.partition(" ")
    hi_num, _, hi_unit = hi.partition(" ")
    if lo_unit == hi_unit and "e" not in lo_num + hi_num:
        return f"{lo_num}–{hi_num} {hi_unit}"
    return f"{lo}–{hi}"


def format_fixed(value: float, decimals: int, *, sign: bool = False) -> str:
    """A figure with a fixed number of decimals that never prints "-0.00".

    Examples
    --------
    >>> format_fixed(-0.0001, 2, sign=True), format_fixed(-1.234, 1)
    ('+0.00', '-1.2')
    """
    value = round(float(value), decimals) + 0.0  # + 0.0 turns -0.0 into 0.0
    return f"{value:{'+' if sign else ''}.{decimals}f}"


def format_sig(value: float, significant: int = 4) -> str:
    """A plain number with `significant` digits, without an exponent between 1e-4 and 1e7
    and never "-0": 0.9775 prints "0.9775", 12345.6 "12350", -0.0001 at 2 digits "-0.0001".

    Examples
    --------
    >>> format_sig(0.9775), format_sig(12345.6), format_sig(-1e-12, 2), format_sig(2e8)
    ('0.9775', '12350', '-1e-12', '2e+08')
    """
    value = float(value)
    if not math.isfinite(value) or value == 0:
        return "0" if value == 0 else str(value)
    if not 1e-4 <= abs(value) < 1e7:
        return f"{value:.{significant}g}"
    digits = significant - 1 - math.floor(math.log10(abs(float(f"{value:.{significant}g}"))))
    text = f"{round(value, digits) + 0.0:.{max(digits, 0)}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def format_slew(v_per_us: float) -> str:
    """A slew rate in V/µs, the unit op-amp slew rates are given in: "0.138 V/µs",
    "7 V/µs"; a positive need below `SLEW_FLOOR_V_PER_US` prints "< 0.001 V/µs".

    Examples
    --------
    >>> format_slew(0.138), format_slew(7.0), format_slew(1.13e-5), format_slew(0.0)
    ('0.138 V/µs', '7 V/µs', '< 0.001 V/µs', '0 V/µs')
    """
    if 0 < v_per_us < SLEW_FLOOR_V_PER_US:
        return f"< {format_sig(SLEW_FLOOR_V_PER_US)} V/µs"
    return f"{format_sig(v_per_us, 3)} V/µs"


def format_pct(fraction: float, *, decimals: int = 1) -> str:
    """A share as a percentage: 0.9775 prints "97.8 %" (never "0.9775 share").

    Examples
    --------
    >>> format_pct(0.9775), format_pct(0.5, decimals=0)
    ('97.8 %', '50 %')
    """
    return f"{format_fixed(100 * fraction, decimals)} %"


def plural(count: int, noun: str, plural_noun: str | None = None) -> str:
    """A count and its noun, singular or plural: "1 part", "2 parts", "1 warning".

    Examples
    --------
    >>> plural(1, "part"), plural(3, "warning"), plural(2, "stage", "stages")
    ('1 part', '3 warnings', '2 stages')
    """
    return f"{count} {noun if count == 1 else (plural_noun or noun + 's')}"


def format_spice(value: float, *, significant: int = 6) -> str:
    """Print a value for a SPICE deck.

    Parameters
    ----------
    value : float
        Value in base units.
    significant : int, optional
        Significant digits kept (6 by default, so that the deck carries the analysed
        values, not a 3-digit label of them).

    Returns
    -------
    str
        The value with SPICE scale factors ``f p n u m k Meg G T``: "16.2k", "1Meg",
        "4.7n". No unit is appended: SPICE would ignore it anyway.

    Raises
    ------
    ValueError
        If `value` is not finite or `significant` < 1.

    Notes
    -----
    SPICE reads ``M`` as milli, so mega must be written ``Meg`` (ngspice-39 User's
    Manual, §2.3 [mem; checked with ngspice in the tests]).

    Examples
    --------
    >>> format_spice(1e6), format_spice(79577.4715), format_spice(1e-3)
    ('1Meg', '79.5775k', '1m')
    """
    return _engineering(float(value), significant, _SPICE_PREFIXES)
