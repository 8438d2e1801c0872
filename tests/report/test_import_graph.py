"""The package's module-level imports form a graph without a cycle.

A static check: every module under src/bandwright is parsed with `ast` (nothing is imported),
its module-level `import`/`from ... import` statements (also those under a top-level `if`/`try`,
but not under `if TYPE_CHECKING:`) become edges, and a depth-first search looks for a back edge.
Imports inside functions are deferred on purpose and are not edges of the package graph; within
report/ they are (a view never reaches back into the renderer that includes it).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[2] / "src"
PACKAGE = "bandwright"


def _modules() -> dict[str, Path]:
    out = {}
    for path in sorted((SRC / PACKAGE).rglob("*.py")):
        parts = list(path.relative_to(SRC).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = path
    return out


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _top_level_imports(body: list[ast.stmt]) -> list[ast.Import | ast.ImportFrom]:
    found: list[ast.Import | ast.ImportFrom] = []
    for node in body:
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            found.append(node)
        elif isinstance(node, ast.If) and not _is_type_checking(node.test):
            found += _top_level_imports(node.body) + _top_level_imports(node.orelse)
        elif isinstance(node, ast.Try):
            for block in (node.body, node.orelse, node.finalbody,
                          *(h.body for h in node.handlers)):
                found += _top_level_imports(block)
    return found


def _all_imports(tree: ast.Module) -> list[ast.Import | ast.ImportFrom]:
    """Every import of the module, also those inside functions (not under TYPE_CHECKING)."""
    skipped = {id(n) for node in ast.walk(tree)
               if isinstance(node, ast.If) and _is_type_checking(node.test)
               for n in ast.walk(node)}
    return [n for n in ast.walk(tree)
            if isinstance(n, (ast.Import, ast.ImportFrom)) and id(n) not in skipped]


def _edges(name: str, path: Path, modules: dict[str, Path], *,
           deferred: bool = False) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    is_package = path.name == "__init__.py"
    targets: set[str] = set()
    for node in (_all_imports(tree) if deferred else _top_level_imports(tree.body)):
        if isinstance(node, ast.Import):
            targets |= {alias.name for alias in node.names}
            continue
        base = node.module or ""
        if node.level:
            anchor = name.split(".") if is_package else name.split(".")[:-1]
            anchor = anchor[:len(anchor) - (node.level - 1)]
            base = ".".join(anchor + ([base] if base else []))
        targets.add(base)
        # `from pkg import mod` imports the submodule `pkg.mod` when there is one.
        targets |= {f"{base}.{alias.name}" for alias in node.names}
    # A submodule naming its own package is not an edge: Python has imported the package
    # (its __init__) before the submodule runs, so that import never starts one.
    return {t for t in targets if t in modules and t != name and not name.startswith(t + ".")}


def _graph(*, deferred: bool = False) -> dict[str, set[str]]:
    modules = _modules()
    return {name: _edges(name, path, modules, deferred=deferred)
            for name, path in modules.items()}


def _find_cycle(graph: dict[str, set[str]]) -> list[str] | None:
    state: dict[str, int] = {}  # 1 on the current path, 2 finished
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph[node]):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state and (cycle := visit(nxt)):
                return cycle
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state and (cycle := visit(node)):
            return cycle
    return None


def test_the_graph_sees_the_package():
    graph = _graph()
    assert "bandwright.report.files" in graph
    assert "bandwright.report.bom" in graph["bandwright.report.files"]


def test_no_import_cycle_among_modules():
    cycle = _find_cycle(_graph())
    assert cycle is None, "module-level import cycle: " + " -> ".join(cycle)


def test_no_import_cycle_in_the_report_even_deferred():
    """Within report/, an import inside a function is an edge too: a view never reaches back
    into the renderer that includes it."""
    graph = _graph(deferred=True)
    report = {k: {t for t in v if t.startswith("bandwright.report")}
              for k, v in graph.items() if k.startswith("bandwright.report")}
    cycle = _find_cycle(report)
    assert cycle is None, "import cycle in report/ (deferred imports included): " + \
        " -> ".join(cycle)


@pytest.mark.parametrize("graph, has_cycle", [
    ({"a": {"b"}, "b": {"c"}, "c": set()}, False),
    ({"a": {"b"}, "b": {"c"}, "c": {"a"}}, True),
])
def test_the_search_itself(graph, has_cycle):
    assert (_find_cycle(graph) is not None) == has_cycle


def test_html_does_not_import_files():
    """report.files writes report.html; report.html must not reach back, even deferred."""
    tree = ast.parse((SRC / PACKAGE / "report" / "html.py").read_text(encoding="utf-8"))
    names = {n.module for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
    assert "bandwright.report.files" not in names
