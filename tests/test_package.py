"""Package-level checks: the public names resolve, the stage order holds and the import graph has
no cycle, the README quick start and CI agree, the version is single-sourced, and
docs/references.md covers every public name with tests that exist."""

from __future__ import annotations

import ast
import re
import tomllib
from pathlib import Path
from typing import NamedTuple

import pytest

import gradients

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "gradients"

# Stage order (the project's design notes): data flows left to right, and a stage imports only
# from stages on levels before its own. The stages on one level are peers and never import each
# other. Stages not built yet are listed so that they are checked from their first file.
STAGE_LEVELS: list[tuple[str, ...]] = [
    ("data",), ("distance",), ("ordination",), ("permutation",),
    ("fitting", "matrix", "partition", "groups"),
    ("ranking",), ("plot",), ("report",), ("planning",), ("cli",),
]
LEVEL = {stage: i for i, level in enumerate(STAGE_LEVELS) for stage in level}
# Private top-level modules (_errors.py, _result.py, _validation.py, ...) sit below every stage:
# any stage may import them, and they import no stage.
BASE = "(shared private modules)"
# Import cycles known when this check was written, each broken by a change under way on another
# branch; an entry must be removed once its cycle is gone (the test says so).
KNOWN_CYCLES: dict[frozenset[str], str] = {}


def test_version_single_sourced():
    meta = tomllib.loads((ROOT / "pyproject.toml").read_text())
    assert gradients.__version__ == meta["project"]["version"]


@pytest.mark.parametrize("name", sorted(gradients._EXPORTS))
def test_public_name_resolves(name):
    assert getattr(gradients, name) is not None
    assert name in dir(gradients)


def test_unknown_name_is_an_attribute_error():
    with pytest.raises(AttributeError, match="no attribute 'nonexistent'"):
        gradients.nonexistent  # noqa: B018


# ------------------------------------------------------------------ import graph
class Import(NamedTuple):
    target: str  # the gradients module imported ("gradients" for the package facade)
    line: int
    runtime: bool  # False inside `if TYPE_CHECKING:` (never executed)


def _module_of(path: Path, root: Path = ROOT) -> str:
    parts = path.relative_to(root).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _import_graph(package: Path = PACKAGE) -> dict[str, list[Import]]:
    """Every module of gradients/ -> the gradients modules it imports (from the source, by ast).

    ``from X import name`` points at ``X.name`` when that is a module, else at ``X``; a name
    taken from the package facade (``from gradients import fit_vectors``) points at the stage
    that defines it, as the facade's lazy loader would import it.
    """
    paths = {_module_of(p, package.parent): p for p in sorted(package.rglob("*.py"))}
    graph: dict[str, list[Import]] = {}
    for module, path in paths.items():
        is_package = path.name == "__init__.py"
        found: list[Import] = []

        def add(target: str, line: int, runtime: bool, found: list[Import] = found) -> None:
            if target == "gradients" or target.startswith("gradients."):
                found.append(Import(target, line, runtime))

        def visit(node: ast.AST, runtime: bool, module: str = module,
                  is_package: bool = is_package, add=add) -> None:
            if isinstance(node, ast.If) and _is_type_checking(node.test):
                for child in node.body:
                    visit(child, False)
                for child in node.orelse:
                    visit(child, runtime)
                return
            if isinstance(node, ast.Import):
                for alias in node.names:
                    add(alias.name, node.lineno, runtime)
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    package = module if is_package else module.rpartition(".")[0]
                    for _ in range(node.level - 1):
                        package = package.rpartition(".")[0]
                    base = f"{package}.{node.module}" if node.module else package
                else:
                    base = node.module or ""
                for alias in node.names:
                    if f"{base}.{alias.name}" in paths:
                        add(f"{base}.{alias.name}", node.lineno, runtime)
                    elif base == "gradients" and alias.name in gradients._EXPORTS:
                        add(f"gradients.{gradients._EXPORTS[alias.name]}", node.lineno, runtime)
                    else:
                        add(base, node.lineno, runtime)
            for child in ast.iter_child_nodes(node):
                visit(child, runtime)

        visit(ast.parse(path.read_text(encoding="utf-8")), True)
        graph[module] = found
    return graph


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _stage_of(module: str) -> str | None:
    """The stage a module belongs to; BASE for private top-level modules; None for the facade."""
    parts = module.split(".")
    if len(parts) == 1:
        return None  # gradients/__init__.py: the lazy facade over every stage
    if len(parts) == 2 and parts[1].startswith("_"):
        return BASE
    return parts[1]


def test_every_subpackage_and_module_has_a_place_in_the_stage_order():
    unknown = sorted({f"gradients/{m.split('.')[1]}" for m in _import_graph()
                      if _stage_of(m) not in (None, BASE, *LEVEL)})
    assert not unknown, (
        f"{unknown} are not in the stage order; add each to STAGE_LEVELS in "
        "tests/test_package.py where the design notes place it (or make a shared top-level "
        "module private, with a leading underscore)")


def test_stages_import_only_from_stages_before_them():
    problems = []
    for module, imports in _import_graph().items():
        stage = _stage_of(module)
        if stage is None or (stage != BASE and stage not in LEVEL):
            continue  # the facade; unknown stages fail the test above
        for imp in imports:
            other = _stage_of(imp.target)
            if other is None or (other == BASE and stage != BASE) or other == stage:
                continue
            if stage == BASE:
                why = "a shared private module imports no stage"
            elif other not in LEVEL:
                why = f"'{other}' is not in the stage order"
            elif LEVEL[other] > LEVEL[stage]:
                why = f"'{other}' comes after '{stage}' in the stage order"
            elif LEVEL[other] == LEVEL[stage]:
                why = f"'{stage}' and '{other}' are peers, which never import each other"
            else:
                continue
            path = _module_path(module)
            problems.append(f"{path}:{imp.line} imports {imp.target}: {why}")
    assert not problems, "\n".join(problems)


def _module_path(module: str) -> str:
    path = ROOT.joinpath(*module.split("."))
    return (path / "__init__.py" if path.is_dir() else path.with_suffix(".py")).relative_to(
        ROOT).as_posix()


def _cycles(graph: dict[str, list[Import]]) -> list[list[str]]:
    """Strongly connected groups of more than one module (or a module importing itself),
    over the imports that run (Tarjan's algorithm)."""
    edges = {m: sorted({i.target for i in imps if i.runtime and i.target in graph})
             for m, imps in graph.items()}
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups: list[list[str]] = []

    def connect(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in edges[v]:
            if w not in index:
                connect(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1 or v in edges[v]:
                groups.append(sorted(group))

    for v in sorted(edges):
        if v not in index:
            connect(v)
    return groups


def _describe_cycle(group: list[str], graph: dict[str, list[Import]]) -> str:
    lines = [f"{_module_path(m)}:{i.line} imports {i.target}"
             for m in group for i in graph[m] if i.runtime and i.target in group]
    return "; ".join(sorted(set(lines)))


def test_no_import_cycles():
    # Function-level imports count (they run when the function is called); imports under
    # `if TYPE_CHECKING:` do not.
    graph = _import_graph()
    groups = _cycles(graph)
    new = [g for g in groups if frozenset(g) not in KNOWN_CYCLES]
    assert not new, "import cycles: " + "\n".join(_describe_cycle(g, graph) for g in new)
    gone = [sorted(k) for k in KNOWN_CYCLES if list(sorted(k)) not in groups]
    assert not gone, (f"the known import cycle(s) {gone} are gone (or changed): remove them "
                      "from KNOWN_CYCLES in tests/test_package.py")


def test_the_import_graph_reads_every_kind_of_import(tmp_path):
    # The checks above are only as good as the graph: a throwaway package laid out like ours,
    # whose imports are known by construction.
    files = {
        "__init__.py": "from ._errors import InputError\n",
        "_errors.py": "",
        "alpha/__init__.py": "from ._one import f\n",
        "alpha/_one.py": (
            "from typing import TYPE_CHECKING\n"
            "from .. import _errors\n"                # a module through its package
            "from .._errors import InputError\n"      # a name from a module
            "if TYPE_CHECKING:\n"
            "    from ._two import T\n"               # type-only: no cycle
            "def f():\n"
            "    from gradients import mantel\n"     # facade name -> its stage
            "    import gradients.beta._three\n"      # absolute, in a function
            "    from . import _two\n"
        ),
        "alpha/_two.py": "from ._one import f\nfrom .. import __version__\n",
        "beta/_three.py": "",
    }
    for name, text in files.items():
        path = tmp_path / "gradients" / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    graph = _import_graph(tmp_path / "gradients")
    assert graph["gradients.alpha._one"] == [
        Import("gradients._errors", 2, True), Import("gradients._errors", 3, True),
        Import("gradients.alpha._two", 5, False), Import("gradients.matrix", 7, True),
        Import("gradients.beta._three", 8, True), Import("gradients.alpha._two", 9, True)]
    assert graph["gradients.alpha._two"] == [Import("gradients.alpha._one", 1, True),
                                              Import("gradients", 2, True)]
    assert _cycles(graph) == [["gradients.alpha._one", "gradients.alpha._two"]]
    del graph["gradients.alpha._one"][-1]  # only the type-only import is left: no cycle
    assert _cycles(graph) == []
    assert _stage_of("gradients._errors") == BASE and _stage_of("gradients") is None
    assert _stage_of("gradients.report.steps.verdicts") == "report"


def _quick_start_commands() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = re.search(r"(?im)^#+\s*quick\s*start.*?$(.*?)(?=^#+\s|\Z)", text, re.S | re.M)
    assert section, "README.md has no Quick start section"
    blocks = re.findall(r"```[a-z]*\n(.*?)```", section.group(1), re.S)
    lines = [ln.strip() for b in blocks for ln in b.splitlines()]
    return [ln[2:] if ln.startswith("$ ") else ln for ln in lines
            if ln and not ln.startswith("#")]


def test_readme_quick_start_has_two_commands_and_ci_runs_the_test_one():
    commands = _quick_start_commands()
    assert len(commands) == 2
    demo, test = commands
    assert "gradients demo" in demo
    assert "pytest" in test
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert test in ci.splitlines() or any(line.strip() == test for line in ci.splitlines())


# ------------------------------------------------------------------ docs/references.md
REFERENCES = ROOT / "docs" / "references.md"
_SECTION = re.compile(r"^###\s+`([^`]+)`\s*$")
_TEST_REF = re.compile(r"`(tests/[^`:\s]+\.py)::([A-Za-z_]\w*(?:::[A-Za-z_]\w*)?)`")


def _reference_sections() -> dict[str, list[tuple[int, str, str]]]:
    """Section name -> the (line number, file, test) entries listed under it."""
    sections: dict[str, list[tuple[int, str, str]]] = {}
    current = None
    for number, line in enumerate(REFERENCES.read_text(encoding="utf-8").splitlines(), 1):
        heading = _SECTION.match(line)
        if heading:
            current = heading.group(1)
            sections.setdefault(current, [])
        elif line.startswith("#"):
            current = None
        elif current is not None:
            sections[current].extend((number, f, name) for f, name in _TEST_REF.findall(line))
    return sections


def _test_names(path: Path) -> set[str]:
    """Test functions of a file: ``name`` at top level, ``Class::name`` in classes."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names = set()
    for node in tree.body:
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
            names.add(node.name)
        elif isinstance(node, ast.ClassDef):
            names.update(f"{node.name}::{item.name}" for item in node.body
                         if isinstance(item, ast.FunctionDef | ast.AsyncFunctionDef))
    return names


def test_references_cover_every_public_name():
    sections = _reference_sections()
    public = [*sorted(gradients._EXPORTS)]
    if (PACKAGE / "plot").is_dir():
        public.append("plot")
    missing = [n for n in public if n not in sections and f"gradients.{n}" not in sections]
    assert not missing, (
        f"docs/references.md has no '### `name`' section for public name(s) {missing}; add one "
        "listing the outside checks (source, test, tolerance) that back each")
    empty = [n for n, refs in sections.items() if not refs]
    assert not empty, (
        f"docs/references.md sections {empty} name no test; cite at least one as "
        "`tests/<path>.py::<test_function>`")


def test_references_name_existing_tests():
    every: dict[str, list[str]] = {}  # test name -> files defining it, for the hints
    for path in sorted((ROOT / "tests").rglob("test_*.py")):
        for name in _test_names(path):
            every.setdefault(name, []).append(path.relative_to(ROOT).as_posix())
    problems = []
    for section, refs in _reference_sections().items():
        for number, file, name in refs:
            path = ROOT / file
            if path.is_file() and name in _test_names(path):
                continue
            where = every.get(name)
            hint = f"; a test of that name is in {', '.join(where)}" if where else ""
            reason = "has no such test" if path.is_file() else "does not exist"
            problems.append(f"docs/references.md:{number} (section `{section}`) cites "
                            f"{file}::{name}, but {file} {reason}{hint}")
    assert not problems, "\n".join(problems)
