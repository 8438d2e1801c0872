"""Plain-text primitives of the terminal report (rich): printing without markup and tables
whose cells are text. The terminal report and the views it includes share them, so that a
view never imports the renderer that includes it."""

from __future__ import annotations

from typing import Any

from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

__all__ = ["say", "row", "table"]


def say(console: Console, *objects: Any, **kwargs: Any) -> None:
    """Print without markup: requirement text and messages may hold brackets ("[tolerance]")."""
    console.print(*objects, markup=False, **kwargs)


def row(t: Table, *cells: str) -> None:
    """Add a row whose cells are plain text, never markup."""
    t.add_row(*(Text(c) for c in cells))


def table(title: str, *cols: str, wrap: tuple[str, ...] = ()) -> Table:
    """A plain table; only the columns named in `wrap` may fold, the others never break."""
    t = Table(title=title, box=box.SIMPLE_HEAD, title_justify="left", title_style="bold",
              pad_edge=False, padding=(0, 1))
    for c in cols:
        if c in wrap:
            t.add_column(c, overflow="fold", ratio=1)
        else:
            t.add_column(c, no_wrap=True)
    return t
