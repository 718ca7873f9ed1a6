"""The package's import graph: no cycles among its modules, and no module imports the package root.

The graph is read from the source with :mod:`ast` (nothing is imported): every ``import`` and
``from ... import`` of a specbench module, at module level or inside a function (a lazy import
is still a dependency), except under ``if TYPE_CHECKING:``.  ``from pkg import name`` is an
edge to the submodule ``pkg.name`` when there is one, else to ``pkg`` itself (its
``__init__``).  The implicit edge from a module to the ``__init__`` of its own package, which
Python runs first, is not counted (every package's ``__init__`` imports its own modules).
Cycles are the strongly connected components of more than one module (Tarjan, "Depth-first search and linear graph
algorithms", SIAM J. Computing 1(2), 1972).

The root ``specbench/__init__.py`` may import anything (it is the top: its lazy
``__getattr__`` loads the widgets on first use); no other module may import the root
(``import specbench``, ``from specbench import X``, ``from .. import X`` with X not a module).
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "specbench"


def _modules(package: Path) -> dict[str, tuple[Path, bool]]:
    out = {}
    for path in sorted(package.rglob("*.py")):
        parts = list(path.relative_to(package.parent).with_suffix("").parts)
        is_pkg = parts[-1] == "__init__"
        if is_pkg:
            parts = parts[:-1]
        out[".".join(parts)] = (path, is_pkg)
    return out


def _type_checking_nodes(tree: ast.AST) -> set[int]:
    """ids of the nodes under ``if TYPE_CHECKING:`` (annotations only, never executed)."""
    skip: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If):
            test = node.test
            name = test.id if isinstance(test, ast.Name) else test.attr if isinstance(test, ast.Attribute) else ""
            if name == "TYPE_CHECKING":
                for child in node.body:
                    skip |= {id(n) for n in ast.walk(child)}
    return skip


def import_graph(package: Path) -> dict[str, dict[str, list[int]]]:
    """module -> {imported module: [line numbers]} for the modules of ``package``."""
    root = package.name
    mods = _modules(package)
    graph: dict[str, dict[str, list[int]]] = {m: {} for m in mods}
    for mod, (path, is_pkg) in mods.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        skip = _type_checking_nodes(tree)
        for node in ast.walk(tree):
            if id(node) in skip:
                continue
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names if a.name == root or a.name.startswith(root + ".")]
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = mod.split(".") if is_pkg else mod.split(".")[:-1]
                    base = base[: len(base) - (node.level - 1)]
                    target = ".".join(base + ([node.module] if node.module else []))
                else:
                    target = node.module or ""
                    if not (target == root or target.startswith(root + ".")):
                        continue
                targets = [f"{target}.{a.name}" if f"{target}.{a.name}" in mods else target for a in node.names]
            for t in targets:
                if t != mod:
                    graph[mod].setdefault(t, []).append(node.lineno)
    return graph


def cycles(graph: dict[str, dict[str, list[int]]]) -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan 1972), each sorted."""
    sys.setrecursionlimit(max(sys.getrecursionlimit(), 10_000))
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    out: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, {}):
            if w not in graph:
                continue
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in graph:
        if v not in index:
            visit(v)
    return out


def _describe(graph, comp) -> str:
    edges = [f"{a} -> {b} (line {', '.join(map(str, graph[a][b]))})" for a in comp for b in graph[a] if b in comp]
    return "import cycle among " + ", ".join(comp) + ":\n  " + "\n  ".join(edges)


def root_imports(graph: dict[str, dict[str, list[int]]], root: str) -> dict[str, list[int]]:
    return {m: targets[root] for m, targets in graph.items() if m != root and root in targets}


def test_the_package_has_no_import_cycle():
    graph = import_graph(PACKAGE)
    assert len(graph) > 50 and "specbench.data._signal" in graph  # the walk found the package
    found = cycles(graph)
    assert not found, "\n".join(_describe(graph, c) for c in found)


def test_no_module_imports_the_package_root():
    graph = import_graph(PACKAGE)
    bad = root_imports(graph, "specbench")
    assert not bad, "modules importing the package root (import the submodule instead): " + ", ".join(
        f"{m} (line {', '.join(map(str, lines))})" for m, lines in sorted(bad.items()))


def test_layers_point_down():
    """The layers of DEVELOPERS.md: estimators/ imports no other subpackage of specbench; data/ only
    estimators/; freeze/ neither widgets/ nor the command line."""
    graph = import_graph(PACKAGE)

    def reaches(prefix: str, other: str) -> list[str]:
        return [f"{m} -> {t}" for m, ts in graph.items() if m.startswith(prefix) for t in ts
                if t.startswith(other)]

    for other in ("specbench.data", "specbench.freeze", "specbench.widgets", "specbench.measure",
                  "specbench.models", "specbench.cli"):
        assert not reaches("specbench.estimators", other), reaches("specbench.estimators", other)
    for other in ("specbench.freeze", "specbench.widgets", "specbench.measure", "specbench.models", "specbench.cli"):
        assert not reaches("specbench.data", other), reaches("specbench.data", other)
    for other in ("specbench.widgets", "specbench.cli"):
        assert not reaches("specbench.freeze", other), reaches("specbench.freeze", other)


def test_the_checker_finds_what_it_looks_for(tmp_path):
    """A small package with a lazy cycle, a TYPE_CHECKING-only import and a root import."""
    pkg = tmp_path / "toy"
    (pkg / "sub").mkdir(parents=True)
    (pkg / "__init__.py").write_text("from . import a\n")
    (pkg / "a.py").write_text("from .sub import b\n")
    (pkg / "sub" / "__init__.py").write_text("from . import b, c\n")
    (pkg / "sub" / "b.py").write_text("def f():\n    from ..a import g\n")  # lazy: still a cycle a <-> b
    (pkg / "sub" / "c.py").write_text("from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from ..a import g\n"
                                      "def h():\n    import toy\n")
    graph = import_graph(pkg)
    assert cycles(graph) == [["toy.a", "toy.sub.b"]]
    assert "toy.a" not in graph["toy.sub.c"]  # annotations only
    assert root_imports(graph, "toy") == {"toy.sub.c": [5]}
