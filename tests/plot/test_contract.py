"""The contract every function of ``gradients.plot`` keeps, checked for each one in turn.

matplotlib's own conventions for plotting functions (the "ax=" pattern of its
"Architecture / the object-oriented interface" guide; matplotlib documentation, from memory):
a function given axes draws into them and returns them, without a window or global state; a
function without axes makes its own figure. Ours also never writes a file, and draws a new
figure in the house style only when it makes the figure itself.
"""

from __future__ import annotations

import re
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path
from types import SimpleNamespace

import matplotlib as mpl
import pandas as pd
import pytest
from matplotlib.axes import Axes
from matplotlib.figure import Figure, SubFigure

import gradients
from gradients import plot
from gradients._errors import InputError
from gradients.data._demo import DEMO_DIR
from gradients.plot._kit import made_here

ROOT = Path(__file__).resolve().parents[2]

RANKING = pd.DataFrame({"variable": ["Cu", "sand"], "r2": [0.5, 0.1], "pvalue": [0.001, 0.4]})
POWER = SimpleNamespace(  # the fields of a SurveyPowerResult that power_curve reads
    table=pd.DataFrame({"hypothesis": ["Cu", "Cu", "Cu"], "test": ["mantel"] * 3,
                        "n_sites": [10, 20, 10], "method": ["simulation"] * 2 + ["subsample"],
                        "power": [0.3, 0.7, 0.4], "power_low": [0.2, 0.6, 0.3],
                        "power_high": [0.4, 0.8, 0.5]}),
    target_power=0.8, alpha=0.05)
CURVES = pd.DataFrame({"variable": ["Cu"] * 3 + ["sand"] * 3, "value": [0.0, 5, 10] * 2,
                       "turnover": [0.0, 0.4, 0.5, 0.0, 0.1, 0.2]})


def _calls(demo) -> dict[str, Callable[..., object]]:
    """One call per public drawing function, from result objects of the demo survey."""
    return {
        "sites": lambda **kw: plot.sites(demo.pcoa, **kw),
        "taxa": lambda **kw: plot.taxa(demo.taxa, **kw),
        "arrows": lambda **kw: plot.arrows(demo.vectors, **kw),
        "centroids": lambda **kw: plot.centroids(demo.factors, **kw),
        "biplot": lambda **kw: plot.biplot(demo.nmds, vectors=demo.vectors, factors=demo.factors,
                                           taxa=demo.taxa, **kw),
        "surface": lambda **kw: plot.surface(demo.surface, demo.pcoa, **kw),
        "shepard": lambda **kw: plot.shepard(demo.nmds, **kw),
        "correlogram": lambda **kw: plot.correlogram(demo.correlogram, **kw),
        "distance_decay": lambda **kw: plot.distance_decay(demo.decay, **kw),
        "hypotheses": lambda **kw: plot.hypotheses({"metals": demo.partial}, **kw),
        "ranking": lambda **kw: plot.ranking(RANKING, **kw),
        "power_curve": lambda **kw: plot.power_curve(POWER, **kw),
        "partition": lambda **kw: plot.partition(demo.parts, **kw),
        "dendrogram": lambda **kw: plot.dendrogram(demo.clusters, **kw),
        "dispersion": lambda **kw: plot.dispersion(demo.dispersion, **kw),
        "texture_triangle": lambda **kw: plot.texture_triangle(
            demo.survey.environment if demo else None, **kw),
        "quotient_map": lambda **kw: plot.quotient_map(
            gradients.guideline_quotients(demo.survey, DEMO_DIR / "screening.csv"),
            demo.survey.locations, **kw),
    }


AXES_FUNCTIONS = sorted(_calls(None))
#: Names of gradients.plot that are not drawing functions of one axes.
OTHERS = {"legend", "house_style", "turnover_curves", "spatial_eigenvector_map"}


def test_every_public_name_is_covered_here():
    assert set(plot.__all__) == set(AXES_FUNCTIONS) | OTHERS


@pytest.fixture
def no_files(tmp_path, monkeypatch):
    """Run in an empty folder and fail on any attempt to save a figure."""
    monkeypatch.chdir(tmp_path)

    def refuse(*args, **kwargs):
        raise AssertionError("a plot function tried to save a figure")

    monkeypatch.setattr(Figure, "savefig", refuse)
    yield tmp_path
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("name", AXES_FUNCTIONS)
def test_draws_into_a_given_axes_and_returns_it(name, demo, no_files):
    fig = Figure()
    ax = fig.add_subplot()
    before = dict(mpl.rcParams)
    out = _calls(demo)[name](ax=ax)
    assert out is ax
    assert ax.has_data() or ax.patches or ax.collections
    assert not made_here(ax) and not made_here(fig)
    assert dict(mpl.rcParams) == before  # no global state changed
    # the caller's frame is left as the caller set it (matplotlib's default spine position)
    assert ax.spines["bottom"].get_position() == ("outward", 0.0)
    assert ax.spines["top"].get_visible()


@pytest.mark.parametrize("name", AXES_FUNCTIONS)
def test_makes_a_house_style_figure_without_axes(name, demo, no_files):
    out = _calls(demo)[name]()
    assert isinstance(out, Axes)
    assert isinstance(out.figure, Figure) and made_here(out)
    assert out.spines["bottom"].get_position() == ("outward", 4)  # house style frame
    assert not out.spines["top"].get_visible()  # open frame (house style)
    assert out.figure.get_layout_engine() is not None  # constrained layout


@pytest.mark.parametrize("name", ["biplot", "surface", "shepard", "correlogram",
                                  "distance_decay", "hypotheses", "ranking", "partition",
                                  "dendrogram", "dispersion"])
def test_whole_figures_have_a_title_and_honour_figsize(name, demo):
    ax = _calls(demo)[name](figsize=(4.0, 3.0), title="My title")
    assert ax.get_title(loc="left") == "My title"
    assert tuple(ax.figure.get_size_inches()) == (4.0, 3.0)


def test_turnover_curves_returns_a_figure_or_draws_into_one(no_files):
    fig = plot.turnover_curves(CURVES)
    assert isinstance(fig, Figure) and made_here(fig)
    given = Figure()
    sub = given.subfigures(1, 2)[1]
    out = plot.turnover_curves(CURVES, fig=sub, ncols=2)
    assert out is sub and isinstance(out, SubFigure)
    assert len([a for a in given.axes if a.get_visible()]) == 2
    with pytest.raises(InputError, match="`fig` must be a matplotlib Figure or SubFigure"):
        plot.turnover_curves(CURVES, fig="figure")


def test_eigenvector_map_returns_a_figure_or_draws_into_one(demo, no_files):
    fig = plot.spatial_eigenvector_map(demo.eigenvectors, demo.survey.locations)
    assert isinstance(fig, Figure) and made_here(fig)
    assert fig.get_layout_engine() is not None
    given = Figure()
    sub = given.subfigures(1, 2)[0]
    out = plot.spatial_eigenvector_map(demo.eigenvectors, demo.survey.locations, fig=sub,
                                       vectors=["space1", "space2"], ncols=1)
    assert out is sub and isinstance(out, SubFigure)
    assert len([a for a in given.axes if a.get_visible()]) == 2
    assert not made_here(given)
    with pytest.raises(InputError, match="`fig` must be a matplotlib Figure or SubFigure"):
        plot.spatial_eigenvector_map(demo.eigenvectors, demo.survey.locations, fig="figure")


@pytest.mark.parametrize("name", AXES_FUNCTIONS)
def test_refuses_what_is_not_axes(name, demo):
    with pytest.raises(InputError, match="`ax` must be a matplotlib Axes; got str"):
        _calls(demo)[name](ax="axes")


def test_results_of_the_wrong_kind_are_named(demo):
    with pytest.raises(InputError, match="`ordination` must be an ordination result"):
        plot.biplot(demo.vectors)
    with pytest.raises(InputError, match="`vectors` must be the result of fit_vectors"):
        plot.arrows(demo.factors)
    with pytest.raises(InputError, match="`factors` must be the result of fit_factors"):
        plot.centroids(demo.vectors)
    with pytest.raises(InputError, match="`fit` must be the result of fit_surface"):
        plot.surface(demo.vectors)
    with pytest.raises(InputError, match="`result` must be the result of nmds"):
        plot.shepard(demo.pcoa)
    with pytest.raises(InputError, match="`result` must be the result of mantel_correlogram"):
        plot.correlogram(object())
    with pytest.raises(InputError, match="`result` must be the result of distance_decay"):
        plot.distance_decay(demo.correlogram)
    with pytest.raises(InputError, match="has no `statistic` and `pvalue`"):
        plot.hypotheses({"metals": demo.pcoa})
    with pytest.raises(InputError, match="`result` must be the result of partition_variation"):
        plot.partition(demo.pcoa)
    with pytest.raises(InputError, match="`eigenvectors` must be the result of "
                                         "spatial_eigenvectors"):
        plot.spatial_eigenvector_map(demo.parts, demo.survey.locations)
    with pytest.raises(InputError, match="`result` must be the result of cluster_sites"):
        plot.dendrogram(demo.pcoa)
    with pytest.raises(InputError, match="`result` must be the result of dispersion_test"):
        plot.dispersion(demo.clusters)


def test_reachable_from_the_package():
    # gradients.plot is loaded on first use, like every other public name
    code = ("import sys, gradients; assert 'gradients.plot' not in sys.modules; "
            "assert gradients.plot.biplot is not None; import gradients.plot as p; "
            "assert p is gradients.plot; assert 'plot' in dir(gradients); "
            "assert 'matplotlib.pyplot' not in sys.modules")
    subprocess.run([sys.executable, "-c", code], check=True, timeout=120)
    assert gradients.plot is plot


def test_every_public_name_is_documented():
    docs = "\n".join(p.read_text(encoding="utf-8") for p in (ROOT / "docs").glob("*.md"))
    undocumented = [n for n in plot.__all__
                    if not re.search(rf"`(plot\.)?{n}(\(|`)", docs)]
    assert not undocumented


def test_the_first_example_of_the_docs_page_runs_as_printed(tmp_path, monkeypatch):
    text = (ROOT / "docs" / "plot.md").read_text(encoding="utf-8")
    code = re.search(r"```python\n(.*?)```", text, re.S).group(1)
    monkeypatch.chdir(tmp_path)
    namespace: dict[str, object] = {}
    exec(compile(code, "docs/plot.md", "exec"), namespace)
    ax = namespace["ax"]
    assert isinstance(ax, Axes) and (tmp_path / "biplot.png").stat().st_size > 1000
    assert len([p for p in ax.patches if p.get_label().startswith("_gr:arrow")]) == len(
        namespace["vectors"].table)
