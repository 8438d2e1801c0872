"""Errors of bandwright: bad input is kept apart from an unmeetable requirement."""

from __future__ import annotations

__all__ = ["BandwrightError", "SpecError", "InfeasibleDesign"]


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
        where = self.path
        if self.line is not None:
            where += f":{self.line}"
        if not self.key:
            return f"{where}: {self.detail}"
        if self.value is None:
            return f"{where}: {self.key}: {self.detail}"
        return f"{where}: {self.key} = {self.value!r}: {self.detail}"


class InfeasibleDesign(BandwrightError):
    """A valid requirement that no design meets; reported as a failing check (exit 1)."""
