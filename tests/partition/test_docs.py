"""The example at the top of docs/partition.md runs as printed on the bundled demo survey."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def test_partition_page_example_runs():
    text = (ROOT / "docs" / "partition.md").read_text(encoding="utf-8")
    code = re.search(r"```python\n(.*?)```", text, re.S).group(1)
    namespace: dict[str, object] = {}
    exec(compile(code, "docs/partition.md", "exec"), namespace)
    parts = namespace["parts"]
    kept = parts.table[parts.table["kind"] != "combined"]["r2_adjusted"]
    assert kept.sum() == pytest.approx(1.0, abs=1e-12)  # the fractions and the residual
    assert namespace["space"].selected and namespace["env"].selected
