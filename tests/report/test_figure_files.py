"""The report's figure files: PNG and SVG written with reproducible bytes.

The PNG signature and the SVG's XML declaration are those of the formats' specifications
(PNG: ISO/IEC 15948, section 5.2; SVG 1.1: W3C, from memory).
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
from matplotlib.figure import Figure

from gradients._errors import InputError
from gradients.report._figure_files import save_figure

#: Draws a small biplot from made-up scores and vectors; run here and in a fresh interpreter.
SMALL_FIGURE = textwrap.dedent(
    """
    import numpy as np, pandas as pd
    import gradients
    from gradients import plot

    rng = np.random.default_rng(8)
    s = pd.DataFrame(rng.normal(size=(12, 2)), columns=["axis1", "axis2"],
                     index=[f"s{i}" for i in range(12)])
    s = s - s.mean()
    env = pd.DataFrame({"Cu": s["axis1"] + rng.normal(0, 0.3, 12),
                        "sand": rng.normal(size=12)}, index=s.index)
    fit = gradients.fit_vectors(s, env, n_resamples=99, rng=1)
    fig = plot.biplot(s, vectors=fit, groups=pd.Series(list("ab") * 6, index=s.index),
                      figsize=(3.6, 2.8)).figure
    """
)


def _small_figure() -> Figure:
    space: dict[str, object] = {}
    exec(SMALL_FIGURE, space)
    return space["fig"]  # type: ignore[return-value]


def _digest(paths: list[Path]) -> list[str]:
    return [hashlib.sha256(p.read_bytes()).hexdigest() for p in paths]


def test_save_figure_writes_both_files_identically(tmp_path):
    first = save_figure(_small_figure(), tmp_path / "biplot", dpi=120)
    assert [p.name for p in first] == ["biplot.png", "biplot.svg"]
    assert all(p.stat().st_size > 1000 for p in first)
    (tmp_path / "again").mkdir()
    second = save_figure(_small_figure(), tmp_path / "again" / "biplot.svg", dpi=120)
    assert [p.name for p in second] == ["biplot.png", "biplot.svg"]
    assert _digest(first) == _digest(second)  # PNG and SVG byte-identical across runs
    svg = first[1].read_text(encoding="utf-8")
    assert "<dc:date>" not in svg
    assert "<dc:title>Ordination of sites</dc:title>" in svg  # the figure's title as metadata
    assert svg.lstrip().startswith("<?xml")
    png = first[0].read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    assert b"Software" not in png and b"Matplotlib" not in png


def test_save_figure_identical_in_a_fresh_process(tmp_path):
    # a second interpreter with another string-hash seed must write the same SVG bytes
    here = save_figure(_small_figure(), tmp_path / "here", formats=("svg",))
    code = SMALL_FIGURE + textwrap.dedent(
        f"""
        from gradients.report._figure_files import save_figure
        save_figure(fig, {str(tmp_path / "there")!r}, formats=("svg",))
        """
    )
    env = dict(os.environ, PYTHONHASHSEED="12345", MPLBACKEND="agg")
    subprocess.run([sys.executable, "-c", code], check=True, env=env, timeout=120)
    assert _digest(here) == _digest([tmp_path / "there.svg"])


def test_save_figure_bad_inputs(tmp_path):
    fig = _small_figure()
    with pytest.raises(InputError, match="does not exist; create it first"):
        save_figure(fig, tmp_path / "absent" / "fig")
    with pytest.raises(InputError, match="`formats` must be chosen from"):
        save_figure(fig, tmp_path / "fig", formats=("jpg",))
    with pytest.raises(InputError, match="must be a matplotlib Figure"):
        save_figure("fig", tmp_path / "fig")
    with pytest.raises(InputError, match="`dpi` must be an integer between 30 and 1200"):
        save_figure(fig, tmp_path / "fig", dpi=10)
