"""The example notebook runs from top to bottom, so that it cannot rot.

It is executed with nbclient (the Jupyter project's notebook runner) in a kernel started from
the interpreter running the tests, in an empty folder: every cell must run without error, the
figures must be drawn, and nothing may be written beside it.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import nbclient
import nbformat
import pytest

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOK = ROOT / "examples" / "python_route.ipynb"


@pytest.fixture
def kernel(tmp_path, monkeypatch) -> str:
    """A kernel spec running this interpreter (so the notebook sees the gradients under test)."""
    spec = tmp_path / "jupyter" / "kernels" / "gradients-tests"
    spec.mkdir(parents=True)
    (spec / "kernel.json").write_text(json.dumps({
        "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
        "display_name": "gradients tests", "language": "python"}), encoding="utf-8")
    monkeypatch.setenv("JUPYTER_PATH", str(tmp_path / "jupyter"))
    monkeypatch.setenv("MPLBACKEND", "agg")
    return "gradients-tests"


def test_notebook_is_committed_without_outputs():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    nbformat.validate(nb)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert code and all(not c.outputs and c.execution_count is None for c in code)


def test_notebook_runs_top_to_bottom(kernel, tmp_path):
    nb = nbformat.read(NOTEBOOK, as_version=4)
    work = tmp_path / "run"
    work.mkdir()
    client = nbclient.NotebookClient(nb, kernel_name=kernel, timeout=300,
                                     resources={"metadata": {"path": str(work)}})
    client.execute()  # raises CellExecutionError, naming the cell, if any cell fails
    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs]
    assert not [o for o in outputs if o.output_type == "error"]
    images = [o for o in outputs if "image/png" in o.get("data", {})]
    # the Shepard diagram, biplot, surface, hypotheses, correlogram, decay and the panels
    assert len(images) == 7
    text = "".join(o.get("text", "") for o in outputs if o.output_type == "stream")
    assert "contamination: partial Mantel r" in text
    assert list(work.iterdir()) == []  # the notebook writes no file
