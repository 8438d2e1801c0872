"""DEVELOPERS.md's "Layout: the data flow" table matches the tree of src/bandwright.

No outside reference: the check is the repository against its own documentation.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "src" / "bandwright"
TABLE_HEADING = "## Layout: the data flow"
# A module or package name in backticks: `x.py` or `x/` (a path inside a package allowed).
NAME = re.compile(r"`([A-Za-z_][\w/]*(?:\.py|/))`")


def _table_rows() -> list[tuple[str, str]]:
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    section = text.split(TABLE_HEADING, 1)[1].split("\n## ", 1)[0]
    rows = []
    for line in section.splitlines():
        if not line.startswith("| ") or line.startswith("| place") or line.startswith("| ---"):
            continue
        # Cells hold escaped bars (\\|): split on the unescaped ones only.
        cells = re.split(r"(?<!\\)\|", line.strip().strip("|"))
        rows.append((cells[0], "|".join(cells[1:])))
    return rows


def _top_level() -> set[str]:
    return {p.name + ("/" if p.is_dir() else "") for p in PACKAGE.iterdir()
            if p.name != "__pycache__" and (p.is_dir() or p.suffix == ".py")}


def test_table_found():
    assert len(_table_rows()) > 10


def test_every_top_level_entry_is_listed_and_every_listed_one_exists():
    listed = {n for place, _ in _table_rows() for n in NAME.findall(place)}
    tree = _top_level()
    assert sorted(tree - listed) == [], "in src/bandwright but not in the table"
    assert sorted(listed - tree) == [], "in the table but not in src/bandwright"


_PACKAGE_ROWS = [r for r in _table_rows() if "/" in r[0]]


@pytest.mark.parametrize("place,holds", _PACKAGE_ROWS, ids=[r[0].strip(" `/") for r in _PACKAGE_ROWS])
def test_names_a_package_holds_exist(place, holds):
    package = PACKAGE / NAME.findall(place)[0]
    names = NAME.findall(holds)
    missing = []
    for name in names:
        # `montecarlo/` opens a sub-package: the names after it may live inside it.
        candidates = [package / name] + [p / name for p in package.iterdir() if p.is_dir()]
        if not any(c.exists() for c in candidates):
            missing.append(name)
    assert missing == [], f"{place}: named in DEVELOPERS.md but not in the tree"


def test_every_module_of_a_package_is_named():
    """Each package's row names each of its modules and sub-packages (private ones too)."""
    for place, holds in _table_rows():
        if not place.strip().startswith("`") or "/" not in place:
            continue
        package = PACKAGE / NAME.findall(place)[0]
        if package.name == "circuits":
            # One module per topology is the rule, not a list: the topologies are named in
            # circuits/__init__.py (TOPOLOGY_NAMES) and tested there.
            from bandwright.circuits import TOPOLOGY_NAMES
            skip = {f"{n}.py" for n in TOPOLOGY_NAMES}
        else:
            skip = set()
        named = set(NAME.findall(holds))
        present = {p.name + ("/" if p.is_dir() else "") for p in package.iterdir()
                   if p.name not in ("__pycache__", "__init__.py")
                   and (p.is_dir() or p.suffix == ".py")}
        assert sorted(present - named - skip) == [], f"{place}: not named in its row"
