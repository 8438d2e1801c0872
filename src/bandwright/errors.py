"""Errors of bandwright: bad input is kept apart from an unmeetable requirement."""

from __future__ import annotations

import reprlib

__all__ = ["BandwrightError", "SpecError", "InfeasibleDesign", "shown"]

# The longest key, value and explanation one message line shows; the rest becomes "…".
_KEY_CHARS, _VALUE_CHARS, _DETAIL_CHARS = 80, 80, 400
_VALUES = reprlib.Repr()
_VALUES.maxstring = _VALUE_CHARS
_VALUES.maxother = _VALUE_CHARS
_VALUES.maxlevel = 3
_VALUES.maxlist = _VALUES.maxdict = _VALUES.maxtuple = 6


def shown(text: str, limit: int) -> str:
    """`text` fit for one line of a terminal: control characters (newlines, ANSI escapes)
    written as Python escapes, and cut to `limit` characters with a final "…"."""
    out = "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)
    return out if len(out) <= limit else out[:limit - 1] + "…"


def _value(value: object) -> str:
    try:
        text = _VALUES.repr(value)
    except RecursionError:
        text = f"<a {type(value).__name__} nested too deeply>"
    return shown(text, _VALUE_CHARS)


class BandwrightError(Exception):
    """Base of every error this package raises on purpose."""


class SpecError(BandwrightError, ValueError):
    """Bad input: a requirement or chain file that cannot be read as asked.

    Carries the file, the dotted key and the offending value, so that the CLI can print
    one line such as ``spec.toml: passband.bandwidth_hz = -4000.0: must be > 0``.
    """

    def __init__(self, path: str, key: str, message: str, *, value: object = None,
                 line: int | None = None) -> None:
        self.path = str(path)
        self.key = key
        self.value = value
        self.line = line
        self.detail = message
        super().__init__(self.render())

    def render(self) -> str:
        """One line; the key, the value and the explanation are escaped and shortened, as
        they may hold whatever the file holds."""
        where = shown(self.path, 4 * _KEY_CHARS)
        if self.line is not None:
            where += f":{self.line}"
        detail = shown(self.detail, _DETAIL_CHARS)
        if not self.key:
            return f"{where}: {detail}"
        key = shown(self.key, _KEY_CHARS)
        if self.value is None:
            return f"{where}: {key}: {detail}"
        return f"{where}: {key} = {_value(self.value)}: {detail}"


class InfeasibleDesign(BandwrightError):
    """A valid requirement that no design meets; reported as a failing check (exit 1)."""
