"""The layers keep to their places: read from every module's import statements (its AST).

- the core (xlpolicy/core) imports nothing from reading, writing, the API or the CLI;
- writing imports nothing from reading;
- no module imports itself back through others (no import cycle), imports made inside
  functions included, those under ``if TYPE_CHECKING:`` left out (they never run).

An edge is a module named by an import statement (``from .x import y`` is an edge to
``x.y`` when that is a module, else to ``x``). A package's ``__init__`` importing its own
modules is an edge like any other; Python importing a package before its modules is not.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[2] / "xlpolicy"


def _modules(root: Path) -> dict[str, Path]:
    """Dotted module name -> file, for every .py file under the package ``root``."""
    out = {}
    for path in sorted(root.rglob("*.py")):
        parts = list(path.relative_to(root.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = path
    return out


def _runtime_nodes(tree: ast.AST) -> list[ast.AST]:
    """Every node of ``tree`` outside ``if TYPE_CHECKING:`` blocks."""
    out, todo = [], [tree]
    while todo:
        node = todo.pop()
        out.append(node)
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            todo.extend(node.orelse)
            continue
        todo.extend(ast.iter_child_nodes(node))
    return out


def import_graph(root: Path) -> dict[str, set[str]]:
    """For each module of the package at ``root``, the package's modules it imports."""
    modules = _modules(root)
    top = root.name
    graph: dict[str, set[str]] = {}
    for name, path in modules.items():
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        found: set[str] = set()
        for node in _runtime_nodes(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                found.update(a.name for a in node.names)
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package.split(".")[: len(package.split(".")) - node.level + 1]
                    source = ".".join(base + ([node.module] if node.module else []))
                else:
                    source = node.module or ""
                for alias in node.names:
                    sub = f"{source}.{alias.name}"
                    found.add(sub if sub in modules else source)
        graph[name] = {m for m in found if m in modules and m.split(".")[0] == top}
    return graph


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """The import cycles: strongly connected groups of two or more modules, or a module
    importing itself (Tarjan's algorithm, iterative)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    for start in sorted(graph):
        if start in index:
            continue
        work = [(start, iter(sorted(graph[start])))]
        index[start] = low[start] = len(index)
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[node])
            if low[node] == index[node]:
                group = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    group.append(member)
                    if member == node:
                        break
                if len(group) > 1 or node in graph[node]:
                    found.append(sorted(group))
    return found


def _in(module: str, layer: str) -> bool:
    return module == layer or module.startswith(layer + ".")


GRAPH = import_graph(PACKAGE)

FORBIDDEN = [
    ("xlpolicy.core", "xlpolicy.reading"),
    ("xlpolicy.core", "xlpolicy.writing"),
    ("xlpolicy.core", "xlpolicy.api"),
    ("xlpolicy.core", "xlpolicy.cli"),
    ("xlpolicy.writing", "xlpolicy.reading"),
]


@pytest.mark.parametrize(("layer", "banned"), FORBIDDEN)
def test_layer_does_not_import(layer: str, banned: str) -> None:
    modules = [m for m in GRAPH if _in(m, layer)]
    assert modules, f"no modules found in {layer}"
    wrong = sorted(f"{m} -> {t}" for m in modules for t in GRAPH[m] if _in(t, banned))
    assert not wrong, f"{layer} must not import {banned}: " + "; ".join(wrong)


def test_no_import_cycles() -> None:
    found = cycles(GRAPH)
    assert not found, "import cycles: " + "; ".join(" <-> ".join(c) for c in found)


def test_the_graph_sees_relative_imports() -> None:
    """The walk must see what the rules are about, or every check above passes vacuously."""
    assert "xlpolicy.reading.filekind" in GRAPH["xlpolicy.reading.guard"]  # from .filekind
    assert "xlpolicy.fastzlib" in GRAPH["xlpolicy.reading.workbook"]  # from .. import fastzlib
    assert "xlpolicy.contract" in GRAPH["xlpolicy.core.policy"]  # from ..contract import
    assert sum(1 for targets in GRAPH.values() if targets) > 20


def test_cycles_and_banned_imports_are_found(tmp_path: Path) -> None:
    """The checks themselves, on a made-up package with a cycle through a lazy import."""
    pkg = tmp_path / "toy"
    (pkg / "core").mkdir(parents=True)
    (pkg / "reading").mkdir()
    (pkg / "__init__.py").write_text("")
    (pkg / "core" / "__init__.py").write_text("")
    (pkg / "core" / "maths.py").write_text("from ..reading import guard\n")
    (pkg / "reading" / "__init__.py").write_text("")
    (pkg / "reading" / "guard.py").write_text("def f():\n    from .sources import g\n")
    (pkg / "reading" / "sources.py").write_text("from . import guard\n")
    (pkg / "reading" / "hints.py").write_text(
        "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from . import hints\n"
    )
    graph = import_graph(pkg)
    assert graph["toy.core.maths"] == {"toy.reading.guard"}
    assert graph["toy.reading.hints"] == set()
    assert cycles(graph) == [["toy.reading.guard", "toy.reading.sources"]]
    assert cycles({"a": {"a"}}) == [["a"]]
