"""Typed, validated reads from a parsed TOML document; every error names file and key.

Shared by the requirement loader and the audit loader.
"""

from __future__ import annotations

import difflib
import math
import os
import re
import stat
import tomllib
from pathlib import Path
from typing import Any, Iterable

from bandwright.errors import SpecError, shown

__all__ = ["read_toml", "read_input_bytes", "TableReader", "number_hint", "key_lines",
           "with_line", "MAX_INPUT_BYTES"]

#: The largest input file read (1 MiB): a requirement or a chain of the largest size the
#: tool accepts is a few tens of kilobytes.
MAX_INPUT_BYTES = 1 << 20
_BOM = "\ufeff"

_LINE = re.compile(r"\(at line (\d+), column \d+\)")
_PREFIX = {"p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "m": 1e-3, "": 1.0, "k": 1e3, "K": 1e3,
           "M": 1e6, "G": 1e9}
_WITH_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([pnuµmkKMG]?)\s*"
                        r"(hz|v|vpk|vrms|ohms?|Ω|db|a|s|%)?\s*$", re.IGNORECASE)


def _kind_of_file(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a named pipe"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "a special file"


def read_input_bytes(path: str | Path) -> bytes:
    """The bytes of an input file: a regular file of at most MAX_INPUT_BYTES.

    A device (``/dev/zero``), a named pipe or a folder is refused before it is opened, so
    that nothing blocks or reads without end.
    """
    try:
        st = os.stat(path)
        if not stat.S_ISREG(st.st_mode):
            raise SpecError(str(path), "", f"is {_kind_of_file(st.st_mode)}, not a regular "
                            "file")
        if st.st_size > MAX_INPUT_BYTES:
            raise SpecError(str(path), "", f"is {st.st_size:,} bytes; an input file may hold "
                            f"at most {MAX_INPUT_BYTES:,} bytes (1 MiB)")
        with open(path, "rb") as f:
            raw = f.read(MAX_INPUT_BYTES + 1)
    except OSError as exc:
        raise SpecError(str(path), "", f"cannot read file: {exc.strerror or exc}") from None
    if len(raw) > MAX_INPUT_BYTES:  # it grew since stat
        raise SpecError(str(path), "", f"holds more than {MAX_INPUT_BYTES:,} bytes (1 MiB), "
                        "the most an input file may hold")
    return raw


def read_toml(path: str | Path) -> dict[str, Any]:
    """Parse a TOML file; syntax errors become a SpecError with the line.

    A UTF-8 byte-order mark at the start is accepted (and skipped); a document nested too
    deeply for the parser is refused.
    """
    raw = read_input_bytes(path)
    try:
        text = raw.decode("utf-8")
        return tomllib.loads(text[1:] if text.startswith(_BOM) else text)
    except RecursionError:
        raise SpecError(str(path), "", "arrays or tables nested too deeply for a TOML "
                        "parser (keep nesting to a few levels)") from None
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise SpecError(str(path), "", f"not a UTF-8 text file (byte {raw[exc.start]:#04x})",
                        line=line) from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = _LINE.search(msg)
        line = int(m.group(1)) if m else None
        raise SpecError(str(path), "", "TOML syntax error: " + _LINE.sub("", msg).strip(),
                        line=line) from None


def number_hint(text: str) -> str:
    """' (did you mean 10000?)' when `text` reads as a number with a prefix or unit."""
    m = _WITH_UNIT.match(text)
    if not m:
        return ""
    prefix = m.group(2)
    # "m" followed by nothing is ambiguous only for us, not for the user: treat as milli.
    value = float(m.group(1)) * _PREFIX.get(prefix, 1.0)
    return f" (did you mean {value:g}?)"


_HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_\-.\"' ]+?)\s*\]\]?\s*(?:#.*)?$")
_ASSIGN = re.compile(r"^\s*((?:[A-Za-z0-9_-]+|\"[^\"]*\"|'[^']*')"
                     r"(?:\s*\.\s*(?:[A-Za-z0-9_-]+|\"[^\"]*\"|'[^']*'))*)\s*=(.*)$")
_INLINE_KEY = re.compile(r"(?:^|[{,])\s*([A-Za-z0-9_-]+)\s*=")
_INDEX = re.compile(r"\[\d+\]$")


def _dotted(name: str) -> list[str]:
    return [part.strip().strip("\"'") for part in name.split(".")]


def key_lines(text: str) -> dict[str, int]:
    """Map each dotted key of a TOML text, as the readers name them (``stage[1].parts.R3``),
    to the 1-based line that sets it; tables map to their header line.

    A line scanner, not a parser: it runs only after `tomllib` accepted the text, and serves
    only to point an error message at a line. Keys inside multi-line strings may be
    mistaken for assignments; deeper inline tables are not followed.
    """
    lines: dict[str, int] = {}
    counts: dict[str, int] = {}
    current = ""

    def resolve(parts: list[str]) -> str:
        # A header's leading parts refer to the latest element of an array of tables.
        path = ""
        for part in parts:
            path = f"{path}.{part}" if path else part
            if path in counts:
                path += f"[{counts[path] - 1}]"
        return path

    for number, raw in enumerate(text.splitlines(), start=1):
        m = _HEADER.match(raw)
        if m and not _ASSIGN.match(raw):
            parts = _dotted(m.group(2))
            if m.group(1) == "[[":
                parent = resolve(parts[:-1])
                base = f"{parent}.{parts[-1]}" if parent else parts[-1]
                lines.setdefault(base, number)
                counts[base] = counts.get(base, 0) + 1
                current = f"{base}[{counts[base] - 1}]"
            else:
                current = resolve(parts)
            lines.setdefault(current, number)
            continue
        m = _ASSIGN.match(raw)
        if not m:
            continue
        full = ".".join(([current] if current else []) + _dotted(m.group(1)))
        lines.setdefault(full, number)
        value = m.group(2).strip()
        if value.startswith("{"):
            for inner in _INLINE_KEY.findall(value):
                lines.setdefault(f"{full}.{inner}", number)
    return lines


def with_line(exc: SpecError) -> SpecError:
    """`exc` with the line of its key in its file, when the file names the key (or, for a
    missing key, the table that lacks it); `exc` itself otherwise."""
    if exc.line is not None or not exc.key:
        return exc
    try:
        found = key_lines(read_input_bytes(exc.path).decode("utf-8-sig"))
    except (OSError, UnicodeDecodeError, ValueError):
        return exc
    key = exc.key
    while key:
        if key in found:
            return SpecError(exc.path, exc.key, exc.detail, value=exc.value, line=found[key])
        key = _INDEX.sub("", key) if _INDEX.search(key) else key.rpartition(".")[0]
    return exc


class TableReader:
    """Reads one TOML table at dotted `prefix`, tracking which keys were used."""

    def __init__(self, path: str, prefix: str, table: Any, allowed: Iterable[str]) -> None:
        self.path = path
        self.prefix = prefix
        if not isinstance(table, dict):
            raise SpecError(path, prefix, f"must be a table, got {_kind(table)}", value=table)
        self.table = table
        self.allowed = tuple(allowed)
        for key in table:
            if key not in self.allowed:
                # 0.6: "gbw" still finds "gbw_hz", "filter" no longer finds "amplifier".
                close = difflib.get_close_matches(key, self.allowed, n=1, cutoff=0.6)
                hint = f"; did you mean '{close[0]}'?" if close else \
                    f"; allowed: {', '.join(self.allowed)}"
                raise SpecError(path, self.key(key), "unknown key" + hint)

    def key(self, name: str) -> str:
        return f"{self.prefix}.{name}" if self.prefix else name

    def has(self, name: str) -> bool:
        return name in self.table

    def error(self, name: str, message: str) -> SpecError:
        return SpecError(self.path, self.key(name), message, value=self.table.get(name))

    def number(self, name: str, default: float | None = None, *, required: bool = False,
               positive: bool = False, nonnegative: bool = False,
               low: float | None = None, high: float | None = None) -> float | None:
        """A finite float (ints accepted), with optional bounds."""
        if name not in self.table:
            if required:
                raise SpecError(self.path, self.key(name), "missing (a number is required)")
            return default
        v = self.table[name]
        return self._check_number(self.key(name), v, positive=positive, nonnegative=nonnegative,
                                  low=low, high=high)

    def _check_number(self, key: str, v: Any, *, positive: bool = False,
                      nonnegative: bool = False, low: float | None = None,
                      high: float | None = None) -> float:
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            hint = number_hint(v) if isinstance(v, str) else ""
            raise SpecError(self.path, key, f"expected a number, got {_kind(v)}{hint}", value=v)
        x = float(v)
        if not math.isfinite(x):
            raise SpecError(self.path, key, "must be a finite number", value=v)
        if positive and not x > 0:
            raise SpecError(self.path, key, "must be > 0", value=v)
        if nonnegative and x < 0:
            raise SpecError(self.path, key, "must be >= 0", value=v)
        if low is not None and x < low:
            raise SpecError(self.path, key, f"must be >= {low:g}", value=v)
        if high is not None and x > high:
            raise SpecError(self.path, key, f"must be <= {high:g}", value=v)
        return x

    def integer(self, name: str, default: int | None = None, *, low: int, high: int) -> int | None:
        if name not in self.table:
            return default
        v = self.table[name]
        if isinstance(v, bool) or not isinstance(v, int):
            if isinstance(v, float) and v.is_integer():
                v = int(v)
            else:
                raise self.error(name, f"expected a whole number, got {_kind(v)}")
        if not low <= v <= high:
            raise self.error(name, f"must be from {low} to {high}")
        return int(v)

    def string(self, name: str, default: str | None = None, *,
               choices: Iterable[str] | None = None) -> str | None:
        if name not in self.table:
            return default
        v = self.table[name]
        if not isinstance(v, str):
            raise self.error(name, f"expected a string, got {_kind(v)}")
        if choices is not None:
            options = tuple(choices)
            folded = {c.lower(): c for c in options}
            if v.lower() not in folded:
                close = difflib.get_close_matches(v.lower(), list(folded), n=1, cutoff=0.5)
                hint = f"; did you mean '{folded[close[0]]}'?" if close else ""
                raise self.error(name, f"must be one of {', '.join(options)}{hint}")
            v = folded[v.lower()]
        return v

    def pair(self, name: str, *, positive: bool = False, low: float | None = None,
             high: float | None = None) -> tuple[float, float] | None:
        """A two-number array, each number within the bounds."""
        if name not in self.table:
            return None
        v = self.table[name]
        if not isinstance(v, list) or len(v) != 2:
            raise self.error(name, "expected an array of two numbers")
        return (self._check_number(self.key(name) + "[0]", v[0], positive=positive, low=low,
                                   high=high),
                self._check_number(self.key(name) + "[1]", v[1], positive=positive, low=low,
                                   high=high))

    def tables(self, name: str) -> list[Any]:
        """An array of tables (``[[name]]``); missing means empty."""
        if name not in self.table:
            return []
        v = self.table[name]
        if not isinstance(v, list):
            raise self.error(name, f"expected an array of tables ([[{self.key(name)}]]), "
                             f"got {_kind(v)}")
        return v


def _kind(v: Any) -> str:
    if isinstance(v, bool):
        return "a boolean"
    if isinstance(v, str):
        return f"the string {shown(repr(v), 60)}"
    if isinstance(v, dict):
        return "a table"
    if isinstance(v, list):
        return "an array"
    if isinstance(v, (int, float)):
        return "a number"
    return type(v).__name__
