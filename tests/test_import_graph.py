"""The import graph of ``gradients`` has no circle.

Every ``import`` and ``from ... import`` statement of every module, at any depth (an import
inside a function is still an edge of the design), is read with :mod:`ast`, resolved to the
module of ``gradients`` it names, and the graph is searched for circles (strongly connected
components of more than one module, or a module importing itself). The implicit import of a
parent package, which Python runs before any of its modules, is not an edge: it would make
every package ``__init__`` that re-exports its modules a circle.

Run as a script to print the graph's circles: ``python tests/test_import_graph.py``.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "gradients"


def _module_name(path: Path, root: Path) -> str:
    parts = list(path.relative_to(root.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _resolve(current: str, is_package: bool, level: int, module: str | None) -> str:
    """The absolute name of ``from <level dots><module> import ...`` written in ``current``."""
    if level == 0:
        return module or ""
    base = current.split(".")
    if not is_package:
        base = base[:-1]  # a module's own package
    base = base[: len(base) - (level - 1)]
    return ".".join([*base, module] if module else base)


def import_graph(root: Path = ROOT) -> dict[str, set[str]]:
    """``{module: modules of the package it imports}`` for every module under ``root``."""
    files = {_module_name(p, root): p for p in root.rglob("*.py")}
    package = root.name
    graph: dict[str, set[str]] = {name: set() for name in files}
    for name, path in files.items():
        is_package = path.name == "__init__.py"
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom):
                # ``from pkg import name``: the module pkg.name when there is one (the package
                # itself then runs only as the implicit parent import), else pkg's namespace
                base = _resolve(name, is_package, node.level, node.module)
                targets = [f"{base}.{alias.name}" if f"{base}.{alias.name}" in files else base
                           for alias in node.names]
            for target in targets:
                if target in files and target != name and target.split(".")[0] == package:
                    graph[name].add(target)
    return graph


def find_cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    cycles: list[list[str]] = []
    counter = 0

    def visit(v: str) -> None:
        nonlocal counter
        index[v] = low[v] = counter
        counter += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                cycles.append(sorted(component))

    sys.setrecursionlimit(max(sys.getrecursionlimit(), 10_000))
    for v in sorted(graph):
        if v not in index:
            visit(v)
    return sorted(cycles)


def test_the_graph_is_read_from_the_sources():
    # A known edge of each kind: a relative import inside a package, one across packages, a
    # package __init__ re-exporting its module. An empty graph would pass the test below.
    graph = import_graph()
    assert "gradients.ordination._common" in graph["gradients.ordination._pcoa"]
    assert "gradients.distance._matrix" in graph["gradients.ordination._pcoa"]
    assert "gradients.ordination._pcoa" in graph["gradients.ordination"]
    assert "gradients.distance._kernels" in graph["gradients.distance._dissimilarity"]
    assert "gradients.distance" not in graph["gradients.distance._dissimilarity"]


def test_cycles_are_found():
    # Tarjan's algorithm on a small graph with a known circle a -> b -> c -> a and a tail.
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a", "d"}, "d": set()}
    assert find_cycles(graph) == [["a", "b", "c"]]
    assert find_cycles({"a": {"b"}, "b": set()}) == []


def test_the_package_has_no_import_circle():
    cycles = find_cycles(import_graph())
    assert not cycles, "import circles: " + "; ".join(" <-> ".join(c) for c in cycles)


if __name__ == "__main__":
    found = find_cycles(import_graph())
    for cycle in found:
        print(" <-> ".join(cycle))
    print(f"{len(found)} circle(s)")
    sys.exit(1 if found else 0)
