"""The data stage's modules import only the modules listed before them in the package docstring.

The order is the contributor's map of the stage (``gradients/data/__init__.py``); this test keeps
it true, so that the split of the survey builder cannot grow an import cycle.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import gradients.data

DATA = Path(gradients.data.__file__).parent


def _documented_order() -> list[str]:
    doc = gradients.data.__doc__ or ""
    return re.findall(r"^\d+\. ``(_\w+)``", doc, flags=re.MULTILINE)


def _local_imports(module: str) -> set[str]:
    tree = ast.parse((DATA / f"{module}.py").read_text(encoding="utf-8"))
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level == 1:
            if node.module:
                found.add(node.module.split(".")[0])
            else:  # from . import _x
                found.update(alias.name for alias in node.names)
    return found


def test_every_module_is_listed_once():
    order = _documented_order()
    on_disk = sorted(p.stem for p in DATA.glob("_*.py") if p.stem != "__init__")
    assert len(order) == len(set(order))
    assert sorted(order) == on_disk


def test_modules_import_only_those_listed_before_them():
    order = _documented_order()
    for i, module in enumerate(order):
        later = _local_imports(module) - set(order[:i])
        assert not later, f"{module} imports {sorted(later)}, listed after it (or not at all)"


def test_no_module_over_500_lines():
    # the survey builder was split to keep each part readable; the suite's limit is about 600
    for path in DATA.glob("*.py"):
        n = len(path.read_text(encoding="utf-8").splitlines())
        assert n <= 500, f"{path.name} has {n} lines"
