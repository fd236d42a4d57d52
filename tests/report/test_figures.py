"""Tests of the report figures and the house style.

Each figure is checked against the table it was drawn from: the counts of points, arrows, bars
and of filled against hollow marks are recomputed here with plain pandas from the input table
(the oracle is the input itself, not the plotting code). The colour-vision checks use the
simulation matrices of Machado, Oliveira & Fernandes (2009, IEEE TVCG 15:1291; severity 1.0,
values from memory) and the CIE 1976 L*a*b* formulas (CIE 15:2004, sRGB per IEC 61966-2-1,
from memory). Inputs are small seeded tables made up for the test: figures are not statistics,
so only their structure is checked.
"""

from __future__ import annotations

import hashlib
import itertools
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import matplotlib as mpl
import numpy as np
import pandas as pd
import pytest
from matplotlib.colors import to_rgba
from matplotlib.figure import Figure
from matplotlib.patches import FancyArrowPatch

from gradients._errors import InputError
from gradients.report import _figures as F
from gradients.report import _style as S

# --------------------------------------------------------------------------------------------
# inputs


@pytest.fixture(scope="module")
def scores() -> pd.DataFrame:
    rng = np.random.default_rng(20)
    sites = [f"site{i:02d}" for i in range(23)]
    return pd.DataFrame(rng.normal(size=(23, 3)), index=sites, columns=["axis1", "axis2", "axis3"])


@pytest.fixture(scope="module")
def arrows() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "axis1": [0.8, -0.3, 0.1, 0.5, 0.0],
            "axis2": [0.2, 0.7, -0.1, -0.6, 0.3],
            "pvalue": [0.001, 0.02, 0.4, np.nan, 0.05],
        },
        index=["Cu", "Zn", "sand", "pH", "clay"],
    )


def tagged(ax, label: str) -> list:
    """Artists of an axes carrying one of the ``_gr:`` labels documented in the module."""
    return [a for a in ax.get_children() if a.get_label() == label]


def n_points(collections) -> int:
    return sum(len(c.get_offsets()) for c in collections)


def is_hollow(facecolor) -> bool:
    rgba = to_rgba(facecolor)
    return rgba[3] == 0 or rgba[:3] == to_rgba(S.HOLLOW)[:3]


def faces(collection) -> list:
    fc = collection.get_facecolors()
    return [tuple(c) for c in fc] * (len(collection.get_offsets()) if len(fc) == 1 else 1)


# --------------------------------------------------------------------------------------------
# 1. biplot


def test_biplot_counts_arrows_sites_and_fading(scores, arrows):
    centroids = pd.DataFrame(
        {
            "factor": ["land"] * 3,
            "level": ["forest", "pasture", "town"],
            "axis1": [0.5, -0.5, 0.1],
            "axis2": [0.3, 0.1, -0.8],
        }
    )
    taxa = pd.DataFrame({"axis1": [0.1, 0.2], "axis2": [0.3, -0.1]}, index=["Taxon a", "b"])
    fig = F.ordination_biplot(
        scores, arrows=arrows, centroids=centroids, taxa=taxa, explained=(0.312, 0.18), stress=0.1
    )
    assert isinstance(fig, Figure)
    ax = fig.axes[0]
    solid = tagged(ax, "_gr:arrow")
    faded = tagged(ax, "_gr:arrow-faded")
    # one arrow per row; faded = p > 0.05 or missing (pandas count on the input table)
    assert len(solid) + len(faded) == len(arrows)
    assert len(solid) == int((arrows["pvalue"] <= 0.05).sum())
    assert all(isinstance(a, FancyArrowPatch) for a in solid + faded)
    assert all(a.get_linestyle() != "-" for a in faded)
    assert n_points(tagged(ax, "_gr:sites")) == len(scores)
    assert n_points(tagged(ax, "_gr:centroids")) == len(centroids)
    assert n_points(tagged(ax, "_gr:taxa")) == len(taxa)
    assert ax.get_aspect() == 1.0
    assert ax.get_xlabel() == "Axis 1 (31.2 %)"
    assert ax.get_ylabel() == "Axis 2 (18.0 %)"
    assert "stress 0.100" in ax.get_title(loc="right")


def test_biplot_arrow_scaling(scores, arrows):
    # "auto": longest arrow = 0.85 x farthest site (documented rule), one common multiplier
    fig = F.ordination_biplot(scores, arrows=arrows)
    ax = fig.axes[0]
    drawn = tagged(ax, "_gr:arrow") + tagged(ax, "_gr:arrow-faded")
    tips = np.array([a._posA_posB[1] for a in drawn])
    r_sites = np.hypot(scores["axis1"], scores["axis2"]).max()
    assert np.hypot(*tips.T).max() == pytest.approx(0.85 * r_sites)
    given = arrows[["axis1", "axis2"]].to_numpy()
    ratio = np.hypot(*tips.T) / np.hypot(*given[[0, 1, 4, 2, 3]].T)  # solid first, then faded
    assert np.allclose(ratio, ratio[0])
    # a fixed multiplier draws the tips as given times the multiplier
    fig = F.ordination_biplot(scores, arrows=arrows.drop(columns="pvalue"), arrow_scale=1.0)
    tips = np.array([a._posA_posB[1] for a in tagged(fig.axes[0], "_gr:arrow")])
    assert np.allclose(tips, given)


def test_biplot_groups_colour_and_shape(scores):
    groups = pd.Series(["upper", "lower", "middle"] * 7 + ["upper", None], index=scores.index)
    fig = F.ordination_biplot(scores, groups=groups.iloc[::-1])  # alignment is by label
    ax = fig.axes[0]
    cols = tagged(ax, "_gr:sites")
    assert len(cols) == 4  # three groups and "no group"
    assert n_points(cols) == len(scores)
    counts = sorted(len(c.get_offsets()) for c in cols)
    assert counts == sorted([*groups.value_counts().tolist(), 1])
    shapes = {c.get_paths()[0].vertices.tobytes() for c in cols[:3]}
    assert len(shapes) == 3  # groups differ by marker shape, not only by colour
    legend_text = [t.get_text() for t in fig.legends[0].get_texts()]
    assert legend_text == ["upper", "lower", "middle", "no group"]
    # a categorical Series keeps its category order (unused categories are left out)
    ordered = pd.Categorical(groups, categories=["lower", "unused", "middle", "upper"])
    fig = F.ordination_biplot(scores, groups=pd.Series(ordered, index=scores.index))
    legend_text = [t.get_text() for t in fig.legends[0].get_texts()]
    assert legend_text == ["lower", "middle", "upper", "no group"]
    # numeric groups in increasing order
    numbers = pd.Series([3, 1, 2] * 7 + [1, 2], index=scores.index)
    fig = F.ordination_biplot(scores, groups=numbers)
    assert [t.get_text() for t in fig.legends[0].get_texts()] == ["1", "2", "3"]


def test_biplot_bad_inputs(scores, arrows):
    with pytest.raises(InputError, match=r"missing column.*'axis2'") as err:
        F.ordination_biplot(scores.drop(columns="axis2"))
    assert err.value.columns == ("axis2",)
    with pytest.raises(InputError, match=r"`arrows` is missing column.*'axis1'"):
        F.ordination_biplot(scores, arrows=arrows.drop(columns="axis1"))
    with pytest.raises(InputError, match=r"`centroids` is missing column.*'level'"):
        F.ordination_biplot(
            scores, centroids=pd.DataFrame({"factor": ["a"], "axis1": [0.0], "axis2": [0.0]})
        )
    groups = pd.Series(["a"] * (len(scores) - 1), index=scores.index[1:])
    with pytest.raises(InputError, match=r"no group for 1 site.*'site00'"):
        F.ordination_biplot(scores, groups=groups)
    bad = scores.copy()
    bad.loc["site03", "axis1"] = np.nan
    with pytest.raises(InputError, match=r"'axis1' has missing or infinite.*'site03'"):
        F.ordination_biplot(bad)
    text = scores.astype(object)
    text.loc["site05", "axis2"] = "n.d."
    with pytest.raises(InputError, match=r"'axis2' must hold numbers.*'site05'"):
        F.ordination_biplot(text)
    with pytest.raises(InputError, match="`explained` must be two proportions"):
        F.ordination_biplot(scores, explained=(31.2, 18.0))
    with pytest.raises(InputError, match="must be a pandas DataFrame"):
        F.ordination_biplot(scores.to_numpy())


def test_hostile_labels_drawn_as_typed(scores):
    # '$' must not be parsed as mathematics (an unbalanced '$' would otherwise fail to draw)
    hostile = scores.iloc[:3].copy()
    hostile.index = ['=HYPERLINK("x")', "a $ b", "../../x\nsecond line"]
    arrows = pd.DataFrame({"axis1": [0.5], "axis2": [0.5]}, index=["$Cu_{2}"])
    fig = F.ordination_biplot(hostile, arrows=arrows, labels=True)
    texts = [t for t in fig.axes[0].texts]
    drawn = {t.get_text() for t in texts}
    assert {'=HYPERLINK("x")', "a $ b", "../../x second line", "$Cu_{2}"} <= drawn
    assert not any(t.get_parse_math() for t in texts)


# --------------------------------------------------------------------------------------------
# 2. surface


@pytest.fixture(scope="module")
def grid() -> pd.DataFrame:
    xs = np.linspace(-2.0, 2.0, 15)
    x, y = np.meshgrid(xs, xs)
    z = np.where(x**2 + y**2 < 3.5, 2.0 + x + 0.3 * y, np.nan)
    return pd.DataFrame({"x": x.ravel(), "y": y.ravel(), "fitted": z.ravel()})


def test_surface_levels_points_and_given_lines(scores, grid):
    levels = [0.0, 1.0, 2.0, 3.0, 4.0]
    fig = F.surface_contours(scores, grid, variable="Cu", levels=levels)
    ax = fig.axes[0]
    (filled,) = tagged(ax, "_gr:surface")
    assert list(filled.levels) == levels
    assert n_points(tagged(ax, "_gr:sites")) == len(scores)
    assert len(fig.axes) == 2 and fig.axes[1].get_ylabel() == "Cu"  # colour bar
    contours = pd.DataFrame(
        {
            "level": [1.0] * 3 + [2.0] * 2,
            "path": [0, 0, 0, 1, 1],
            "x": [0, 1, 2, 0, 1],
            "y": [0, 1, 1, 2, 2],
        }
    )
    fig = F.surface_contours(scores, grid, variable="Cu", contours=contours)
    assert len(tagged(fig.axes[0], "_gr:contours")) == contours["path"].nunique()


def test_surface_masks_outside_hull(scores, grid):
    # the filled bands must cover no node whose fitted value is NaN: test the node farthest
    # from the centre (a corner, outside the disc of the surface)
    fig = F.surface_contours(scores, grid, variable="Cu")
    (filled,) = tagged(fig.axes[0], "_gr:surface")
    corner = (-2.0, -2.0)
    inside = (0.0, 0.0)
    paths = filled.get_paths()
    assert not any(p.contains_point(corner) for p in paths)
    assert any(p.contains_point(inside) for p in paths)


def test_surface_bad_inputs(scores, grid):
    with pytest.raises(InputError, match=r"`grid` is missing column.*'fitted'") as err:
        F.surface_contours(scores, grid.drop(columns="fitted"), variable="Cu")
    assert err.value.columns == ("fitted",)
    with pytest.raises(InputError, match="more than one row for node"):
        F.surface_contours(scores, pd.concat([grid, grid.iloc[:1]]), variable="Cu")
    with pytest.raises(InputError, match="no finite value"):
        F.surface_contours(scores, grid.assign(fitted=np.nan), variable="Cu")
    with pytest.raises(InputError, match="`levels` must be"):
        F.surface_contours(scores, grid, variable="Cu", levels=[3.0, 1.0])
    with pytest.raises(InputError, match=r"`contours` is missing column.*'path'"):
        F.surface_contours(
            scores,
            grid,
            variable="Cu",
            contours=pd.DataFrame({"level": [1.0], "x": [0.0], "y": [0.0]}),
        )


# --------------------------------------------------------------------------------------------
# 3. Shepard


def test_shepard_step_line_monotone():
    rng = np.random.default_rng(3)
    d = rng.uniform(0, 1, 120)
    dist = d + rng.normal(0, 0.15, 120)
    # fitted values: monotone regression of distance on dissimilarity (scipy's PAVA)
    from scipy.optimize import isotonic_regression

    order = np.argsort(d)
    fitted = np.empty_like(d)
    fitted[order] = isotonic_regression(dist[order]).x
    table = pd.DataFrame({"dissimilarity": d, "distance": dist, "fitted": fitted})
    fig = F.shepard_diagram(table, stress=0.0834)
    ax = fig.axes[0]
    assert n_points(tagged(ax, "_gr:pairs")) == len(table)
    (line,) = tagged(ax, "_gr:fit")
    assert line.get_drawstyle() == "steps-post"
    y = np.asarray(line.get_ydata())
    assert np.all(np.diff(y) >= 0)
    assert np.all(np.diff(np.asarray(line.get_xdata())) >= 0)
    assert "stress 0.083" in ax.get_title(loc="right")
    with pytest.raises(InputError, match=r"`shepard` is missing column.*'fitted'"):
        F.shepard_diagram(table.drop(columns="fitted"))


# --------------------------------------------------------------------------------------------
# 4. correlogram


@pytest.fixture(scope="module")
def classes() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "midpoint": [2.5, 7.5, 12.5, 17.5, 22.5, 27.5, 32.5],
            "statistic": [0.31, 0.18, 0.06, -0.02, -0.11, np.nan, -0.2],
            "pvalue": [0.001, 0.004, 0.09, 0.6, 0.01, np.nan, 0.03],
            "pvalue_adjusted": [0.005, 0.02, 0.27, 1.0, 0.06, np.nan, 0.03],
            "n_pairs": [60, 70, 80, 75, 50, 0, 9],
            "flagged": [False, False, False, False, False, True, True],
        }
    )


def test_correlogram_fill_matches_adjusted_significance(classes):
    fig = F.correlogram(classes, distance_unit="km")
    ax = fig.axes[0]
    drawn = classes[classes["statistic"].notna()]
    sig = drawn["pvalue_adjusted"] <= 0.05  # NaN compares False: not significant
    filled = tagged(ax, "_gr:classes-filled")
    hollow = tagged(ax, "_gr:classes-hollow")
    assert n_points(filled) == int(sig.sum()) == 3
    assert n_points(hollow) == int((~sig).sum()) == 3
    assert all(not is_hollow(fc) for c in filled for fc in faces(c))
    assert all(is_hollow(fc) for c in hollow for fc in faces(c))
    zero = [ln for ln in ax.lines if list(ln.get_ydata()) == [0, 0]]
    assert zero, "the zero line is drawn"
    assert ax.get_xlabel().endswith("(km)")
    # a stricter alpha leaves only the first class filled
    fig = F.correlogram(classes, alpha=0.01)
    assert n_points(tagged(fig.axes[0], "_gr:classes-filled")) == 1


def test_correlogram_bad_inputs(classes):
    with pytest.raises(InputError, match=r"missing column.*'pvalue_adjusted'") as err:
        F.correlogram(classes.drop(columns=["pvalue_adjusted"]))
    assert err.value.columns == ("pvalue_adjusted",)
    with pytest.raises(InputError, match="'flagged' must be True or False"):
        F.correlogram(classes.assign(flagged=["yes"] * len(classes)))
    with pytest.raises(InputError, match="`alpha` must be a number between 0 and 1"):
        F.correlogram(classes, alpha=5)


# --------------------------------------------------------------------------------------------
# 5. distance decay


def test_distance_decay_points_curve_halving():
    rng = np.random.default_rng(5)
    d = rng.uniform(0, 40, 1600)
    pairs = pd.DataFrame({"distance": d, "similarity": 0.7 * np.exp(-d / 12)})
    grid = np.linspace(0, 40, 30)
    curve = pd.DataFrame({"distance": grid[::-1], "fitted": 0.7 * np.exp(-grid[::-1] / 12)})
    halving = 12 * np.log(2)  # ln 2 / slope for slope 1/12 (Nekola & White 1999)
    fig = F.distance_decay_plot(pairs, curve, halving=halving, distance_unit="km")
    ax = fig.axes[0]
    (pts,) = tagged(ax, "_gr:pairs")
    assert len(pts.get_offsets()) == len(pairs)
    assert pts.get_rasterized()  # many points are rasterised inside the SVG
    assert pts.get_alpha() < 1
    (line,) = tagged(ax, "_gr:curve")
    assert np.all(np.diff(line.get_xdata()) > 0)  # drawn in order of distance
    (vline,) = tagged(ax, "_gr:halving")
    assert vline.get_xdata()[0] == pytest.approx(halving)
    (pt,) = tagged(ax, "_gr:halving-point")
    assert pt.get_offsets()[0][1] == pytest.approx(0.35, abs=1e-3)  # half of 0.7
    fig = F.distance_decay_plot(pairs.iloc[:50], halving=500.0)
    assert not tagged(fig.axes[0], "_gr:halving")
    assert "beyond the data" in fig.axes[0].get_title(loc="right")
    with pytest.raises(InputError, match=r"`pairs` is missing column.*'similarity'"):
        F.distance_decay_plot(pairs.drop(columns="similarity"))
    with pytest.raises(InputError, match="`halving` must be a positive finite number"):
        F.distance_decay_plot(pairs.iloc[:50], halving=np.inf)


# --------------------------------------------------------------------------------------------
# 6. ranking


@pytest.fixture(scope="module")
def ranking() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "variable": ["Cu", "Zn", "sand", "clay", "pH", "Pb"],
            "r2": [0.41, 0.62, 0.2, 0.05, 0.11, 0.38],
            "pvalue": [0.002, 0.001, 0.04, 0.5, np.nan, 0.07],
        }
    )


def test_ranking_bars_sorted_and_filled_by_significance(ranking):
    fig = F.ranking_plot(ranking)
    ax = fig.axes[0]
    (bars,) = [c for c in ax.containers if c.get_label() == "_gr:bars"]
    assert len(bars) == len(ranking)
    # top to bottom in decreasing r2
    ordered = sorted(bars.patches, key=lambda p: -p.get_y())
    widths = [p.get_width() for p in ordered]
    assert widths == sorted(ranking["r2"], reverse=True)
    labels = [t.get_text() for t in ax.get_yticklabels()]
    by_pos = dict(zip(ax.get_yticks(), labels, strict=True))
    top = max(by_pos)
    assert by_pos[top] == "Zn"
    n_sig = int((ranking["pvalue"] <= 0.05).sum())
    assert sum(not is_hollow(p.get_facecolor()) for p in bars.patches) == n_sig
    assert sum(is_hollow(p.get_facecolor()) for p in bars.patches) == len(ranking) - n_sig
    assert ax.get_xlabel() == "r²"
    fig = F.ranking_plot(ranking, top=2, pvalue=None)
    (bars,) = [c for c in fig.axes[0].containers if c.get_label() == "_gr:bars"]
    assert len(bars) == 2 and not any(is_hollow(p.get_facecolor()) for p in bars.patches)


def test_ranking_bad_inputs(ranking):
    with pytest.raises(InputError, match=r"missing column.*'r2'") as err:
        F.ranking_plot(ranking.rename(columns={"r2": "R2"}))
    assert err.value.columns == ("r2",)
    with pytest.raises(InputError, match=r"missing column.*'pvalue_adjusted'"):
        F.ranking_plot(ranking, pvalue="pvalue_adjusted")
    with pytest.raises(InputError, match="`top` must be a positive integer"):
        F.ranking_plot(ranking, top=0)


# --------------------------------------------------------------------------------------------
# 7. hypotheses


def test_hypothesis_dots_and_methods():
    table = pd.DataFrame(
        {
            "hypothesis": ["contamination", "texture", "space"] * 2,
            "method": ["partial Mantel"] * 3 + ["matrix regression"] * 3,
            "statistic": [0.41, 0.12, 0.22, 0.35, -0.05, 0.2],
            "pvalue": [0.001, 0.2, 0.01, 0.002, 0.6, 0.06],
            "low": [0.3, 0.0, 0.1, 0.2, -0.2, 0.05],
            "high": [0.5, 0.2, 0.3, 0.45, 0.1, 0.3],
        }
    )
    fig = F.hypothesis_plot(table, interval=("low", "high"))
    ax = fig.axes[0]
    n_sig = int((table["pvalue"] <= 0.05).sum())
    assert n_points(tagged(ax, "_gr:dots-filled")) == n_sig
    assert n_points(tagged(ax, "_gr:dots-hollow")) == len(table) - n_sig
    assert len(tagged(ax, "_gr:interval")) == len(table)
    assert [t.get_text() for t in ax.get_yticklabels()] == ["contamination", "texture", "space"]
    # one marker shape per method (first 2 of the house markers)
    legend_text = [t.get_text() for t in fig.legends[0].get_texts()]
    assert legend_text[:2] == ["partial Mantel", "matrix regression"]
    # without a method column: one series, labels from the index
    fig = F.hypothesis_plot(table.iloc[:3].set_index("hypothesis").drop(columns="method"))
    assert n_points(tagged(fig.axes[0], "_gr:dots-filled")) == 2
    with pytest.raises(InputError, match=r"missing column.*'pvalue'"):
        F.hypothesis_plot(table.drop(columns="pvalue"))
    with pytest.raises(InputError, match=r"missing column.*'upper'"):
        F.hypothesis_plot(table, interval=("low", "upper"))


# --------------------------------------------------------------------------------------------
# turnover curves and partitions


def test_turnover_panels_ordered_by_total():
    x = np.linspace(0, 1, 10)
    curves = pd.concat(
        [
            pd.DataFrame({"variable": v, "value": x, "turnover": h * x})
            for v, h in [("sand", 0.1), ("Cu", 0.5), ("pH", 0.3), ("Zn", 0.2)]
        ]
    )
    fig = F.turnover_curves(curves, ncols=3)
    shown = [ax for ax in fig.axes if ax.get_visible()]
    assert len(shown) == 4 and len(fig.axes) == 6
    assert [ax.get_title(loc="left") for ax in shown] == ["Cu", "pH", "Zn", "sand"]
    assert all(len(tagged(ax, "_gr:curve")) == 1 for ax in shown)
    with pytest.raises(InputError, match=r"missing column.*'turnover'"):
        F.turnover_curves(curves.drop(columns="turnover"))


def test_partition_bar_adds_to_one():
    fractions = pd.DataFrame(
        {
            "fraction": [
                "contamination only",
                "space only",
                "contamination & space",
                "texture only",
            ],
            "r2_adjusted": [0.21, 0.09, 0.07, -0.01],
        }
    )
    fig = F.partition_plot(fractions)
    ax = fig.axes[0]
    bars = [p for c in ax.containers if c.get_label() == "_gr:fractions" for p in c.patches]
    widths = [p.get_width() for p in bars]
    assert widths == pytest.approx([0.21, 0.09, 0.07, 1 - 0.37])  # residual = 1 - sum(>0)
    assert bars[2].get_hatch()  # shared fraction hatched
    assert "texture only" in ax.get_title(loc="right")  # negative fraction listed, not drawn
    with pytest.raises(InputError, match=r"missing column.*'r2_adjusted'"):
        F.partition_plot(fractions.drop(columns="r2_adjusted"))


# --------------------------------------------------------------------------------------------
# saving


def _small_figure() -> Figure:
    rng = np.random.default_rng(8)
    s = pd.DataFrame(
        rng.normal(size=(12, 2)), columns=["axis1", "axis2"], index=[f"s{i}" for i in range(12)]
    )
    a = pd.DataFrame(
        {"axis1": [0.5, -0.2], "axis2": [0.1, 0.6], "pvalue": [0.01, 0.3]}, index=["Cu", "sand"]
    )
    return F.ordination_biplot(
        s,
        arrows=a,
        groups=pd.Series(list("ab") * 6, index=s.index),
        stress=0.09,
        figsize=(3.6, 2.8),
    )


def _digest(paths: list[Path]) -> list[str]:
    return [hashlib.sha256(p.read_bytes()).hexdigest() for p in paths]


def test_save_figure_writes_both_files_identically(tmp_path):
    first = F.save_figure(_small_figure(), tmp_path / "biplot", dpi=120)
    assert [p.name for p in first] == ["biplot.png", "biplot.svg"]
    assert all(p.stat().st_size > 1000 for p in first)
    (tmp_path / "again").mkdir()
    second = F.save_figure(_small_figure(), tmp_path / "again" / "biplot.svg", dpi=120)
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
    here = F.save_figure(_small_figure(), tmp_path / "here", formats=("svg",))
    code = textwrap.dedent(
        f"""
        import sys
        sys.path.insert(0, {str(Path(__file__).parent)!r})
        import importlib.util
        spec = importlib.util.spec_from_file_location("tf", {str(Path(__file__))!r})
        tf = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(tf)
        from gradients.report import _figures as F
        F.save_figure(tf._small_figure(), {str(tmp_path / "there")!r}, formats=("svg",))
        """
    )
    env = dict(os.environ, PYTHONHASHSEED="12345", MPLBACKEND="agg")
    subprocess.run([sys.executable, "-c", code], check=True, env=env, timeout=60)
    assert _digest(here) == _digest([tmp_path / "there.svg"])


def test_save_figure_bad_inputs(tmp_path):
    fig = _small_figure()
    with pytest.raises(InputError, match="does not exist; create it first"):
        F.save_figure(fig, tmp_path / "absent" / "fig")
    with pytest.raises(InputError, match="`formats` must be chosen from"):
        F.save_figure(fig, tmp_path / "fig", formats=("jpg",))
    with pytest.raises(InputError, match="must be a matplotlib Figure"):
        F.save_figure("fig", tmp_path / "fig")


# --------------------------------------------------------------------------------------------
# house style

_MACHADO_2009 = {  # severity 1.0, linear RGB (Machado et al. 2009; from memory)
    "protanopia": [
        [0.152286, 1.052583, -0.204868],
        [0.114503, 0.786281, 0.099216],
        [-0.003882, -0.048116, 1.051998],
    ],
    "deuteranopia": [
        [0.367322, 0.860646, -0.227968],
        [0.280085, 0.672501, 0.047413],
        [-0.011820, 0.042940, 0.968881],
    ],
    "tritanopia": [
        [1.255528, -0.076749, -0.178779],
        [-0.078411, 0.930809, 0.147602],
        [0.004733, 0.691367, 0.303900],
    ],
    "normal": np.eye(3).tolist(),
}


def _lab(rgb: np.ndarray, matrix) -> np.ndarray:
    """sRGB (0-1) -> simulated CIE L*a*b* (D65), per IEC 61966-2-1 and CIE 15 (from memory)."""
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    lin = np.clip(np.asarray(matrix) @ lin, 0, 1)
    xyz = (
        np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
        @ lin
    )
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > (6 / 29) ** 3, np.cbrt(t), t / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


@pytest.mark.parametrize("vision", list(_MACHADO_2009))
def test_palette_separable_under_colour_vision_deficiency(vision):
    labs = [_lab(np.array(to_rgba(c)[:3]), _MACHADO_2009[vision]) for c in S.PALETTE[:6]]
    gaps = [np.linalg.norm(a - b) for a, b in itertools.combinations(labs, 2)]
    # CIE76 difference of 15 or more: clearly different side by side (common practice: ~2.3
    # is a just-noticeable difference, ~10 easy to tell apart)
    assert min(gaps) >= 15


@pytest.mark.parametrize("vision", ["normal", "deuteranopia", "protanopia"])
def test_sequential_map_lightness_monotone(vision):
    rgb = S.SEQUENTIAL_CMAP(np.linspace(0, 1, 64))[:, :3]
    lightness = np.array([_lab(c, _MACHADO_2009[vision])[0] for c in rgb])
    assert np.all(np.diff(lightness) < 0)  # greyscale print keeps the order
    assert lightness[0] - lightness[-1] > 60


def test_house_style_is_scoped_and_not_the_default():
    before = dict(mpl.rcParams)
    with S.house_style(**{"font.size": 9.5}):
        assert mpl.rcParams["font.size"] == 9.5
        assert mpl.rcParams["svg.hashsalt"] == "gradients-figure"
        assert mpl.rcParams["text.parse_math"] is False
    assert dict(mpl.rcParams) == before
    defaults = mpl.rcParamsDefault
    differs = [
        k
        for k in (
            "axes.titlelocation",
            "axes.spines.top",
            "axes.grid",
            "axes.prop_cycle",
            "axes.edgecolor",
            "font.size",
            "legend.frameon",
        )
        if S.HOUSE_RC[k] != defaults[k]
    ]
    assert len(differs) == 7
    # the figures draw with the house style even though it is off outside them
    fig = F.ranking_plot(pd.DataFrame({"r2": [0.3]}, index=["Cu"]), pvalue=None)
    ax = fig.axes[0]
    assert not ax.spines["top"].get_visible()
    assert ax.get_title(loc="left") == "Ranking of variables"  # titles flush left
    assert ax.get_title(loc="center") == ""
    assert ax.get_xticklabels()[0].get_fontsize() == S.HOUSE_RC["xtick.labelsize"]


def test_nearly_coincident_arrows_share_one_stacked_label(scores):
    # Strongly correlated variables point the same way; their names are stacked in one label
    # at the longer tip instead of printed over each other. Distinct arrows keep their own.
    arrows = pd.DataFrame({"axis1": [0.9, 0.88, 0.0], "axis2": [0.1, 0.12, 0.9]},
                          index=["Cu", "Zn", "sand"])
    fig = F.ordination_biplot(scores, arrows=arrows, arrow_scale=1.0)
    drawn = [t.get_text() for t in fig.axes[0].texts]
    assert "Cu\nZn" in drawn and "sand" in drawn
    assert not {"Cu", "Zn"} & set(drawn)
    patches = [p for p in fig.axes[0].patches if p.get_label().startswith("_gr:arrow")]
    assert len(patches) == 3  # every arrow is still drawn
