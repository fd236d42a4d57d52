"""The README's Python example runs as printed, on the bundled demo files."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import gradients

ROOT = Path(__file__).resolve().parents[1]
DEMO = Path(gradients.__file__).parent / "data" / "demo"


def test_readme_python_example_runs(tmp_path, monkeypatch, capsys):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    code = re.search(r"```python\n(.*?)```", text, re.S).group(1)
    shutil.copy(DEMO / "community.csv", tmp_path / "community.csv")
    shutil.copy(DEMO / "environment.csv", tmp_path / "environment.csv")
    shutil.copy(DEMO / "locations.gpkg", tmp_path / "sites.gpkg")
    monkeypatch.chdir(tmp_path)
    # fewer permutations than printed, to keep the suite quick; the code is otherwise verbatim
    code = code.replace("n_resamples=9999", "n_resamples=199")
    namespace: dict[str, object] = {}
    exec(compile(code, "README.md", "exec"), namespace)
    out = capsys.readouterr().out
    assert "r2" in out and "pvalue" in out
    # the demo plants a strong contamination gradient (gradients.data.simulate_survey)
    assert namespace["vectors"].table.loc["Cu", "pvalue"] <= 0.01
