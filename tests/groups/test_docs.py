"""The example at the top of docs/groups.md runs as printed on the bundled demo survey, and says
what the page says it finds."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_groups_page_example_runs():
    text = (ROOT / "docs" / "groups.md").read_text(encoding="utf-8")
    code = re.search(r"```python\n(.*?)```", text, re.S).group(1)
    namespace: dict[str, object] = {}
    exec(compile(code, "docs/groups.md", "exec"), namespace)
    res = namespace["res"]
    p = res.pvalue
    assert p["habitat"] <= 0.001 and p["copper"] <= 0.001 and p["habitat:copper"] > 0.05
    assert res.table.set_index("term").loc["habitat:copper", "df"] == 1
    assert any("Only 1 of the 2 columns of 'habitat:copper'" in n for n in res.notes)
    assert res.dispersion["copper"].differs and not res.dispersion["habitat"].differs
    assert any("Spreads differ among the classes of 'copper'" in n for n in res.notes)
    anosim_res, mrpp_res = namespace["same"]
    assert anosim_res.pvalue < 0.05 and mrpp_res.agreement > 0
