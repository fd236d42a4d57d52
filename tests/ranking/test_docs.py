"""The example at the top of docs/ranking.md runs as printed on the bundled demo survey."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_ranking_page_example_runs():
    text = (ROOT / "docs" / "ranking.md").read_text(encoding="utf-8")
    code = re.search(r"```python\n(.*?)```", text, re.S).group(1)
    namespace: dict[str, object] = {}
    exec(compile(code, "docs/ranking.md", "exec"), namespace)
    ranked, model = namespace["ranked"], namespace["model"]
    # the demo's planted truth: the metals and the texture balances rank above pH and organic
    # matter, which the generator made inert
    order = list(ranked.order)
    for inert in ("pH", "organic_matter"):
        assert all(order.index(v) < order.index(inert)
                   for v in ("Cu", "Zn", "Pb", "Cd", "ilr_1", "ilr_2"))
    assert "geography" in model.table.index
    assert namespace["best"].search == "exhaustive"
