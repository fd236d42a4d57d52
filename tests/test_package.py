"""Package-level checks: the public names resolve, the stage order holds, the README quick
start and CI agree, the version is single-sourced, and docs/references.md covers every public
name with tests that exist."""

from __future__ import annotations

import ast
import re
import tomllib
from pathlib import Path

import pytest

import gradients

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "gradients"

# Data flows left to right; a stage may import only from stages before it.
STAGES = ["data", "distance", "ordination", "permutation", "fitting", "matrix", "ranking",
          "partition", "report"]
# fitting, matrix, ranking and partition are parallel consumers: none imports another.
PEERS = {"fitting", "matrix", "ranking", "partition"}


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


def _imported_stages(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = set()
    rel = path.relative_to(PACKAGE).parts
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level == 0 and node.module and node.module.startswith("gradients."):
                found.add(node.module.split(".")[1])
            elif node.level >= 2 and node.module:  # from ..stage import x
                found.add(node.module.split(".")[0])
            elif node.level == 1 and len(rel) == 1 and node.module:  # top-level module
                found.add(node.module.split(".")[0])
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("gradients."):
                    found.add(alias.name.split(".")[1])
    return found & set(STAGES)


def test_stages_import_only_from_stages_before_them():
    for path in PACKAGE.rglob("*.py"):
        parts = path.relative_to(PACKAGE).parts
        if len(parts) < 2 or parts[0] not in STAGES:
            continue
        stage = parts[0]
        allowed = set(STAGES[: STAGES.index(stage) + 1])
        if stage in PEERS:
            allowed -= PEERS - {stage}
        bad = _imported_stages(path) - allowed
        assert not bad, f"{path.relative_to(ROOT)} imports later stage(s) {sorted(bad)}"


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
