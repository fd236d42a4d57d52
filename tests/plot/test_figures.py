"""Tests of the figures of ``gradients.plot``, each drawn from result objects.

Each figure is checked against the result it was drawn from: the counts of points, arrows, bars
and of filled against hollow marks are recomputed here with plain pandas from the result's own
tables (the oracle is the input itself, not the plotting code). Results come from the bundled
demo survey (``conftest.py``); where a test needs particular values (a missing p-value, a class
with too few pairs) they are put into a real result object with :func:`dataclasses.replace`.
Figures are not statistics, so only their structure is checked.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from matplotlib.colors import to_rgba
from matplotlib.figure import Figure
from matplotlib.patches import FancyArrowPatch

import gradients
from gradients import plot
from gradients._errors import InputError
from gradients.plot import _style as S

# --------------------------------------------------------------------------------------------
# helpers


@pytest.fixture(scope="module")
def scores() -> pd.DataFrame:
    """Imported site scores (a plain table, as from another program), centred."""
    rng = np.random.default_rng(20)
    sites = [f"site{i:02d}" for i in range(23)]
    s = pd.DataFrame(rng.normal(size=(23, 3)), index=sites, columns=["axis1", "axis2", "axis3"])
    return s - s.mean()


def tagged(ax, label: str) -> list:
    """Artists of an axes carrying one of the ``_gr:`` labels documented in the modules."""
    return [a for a in ax.get_children() if a.get_label() == label]


def n_points(collections) -> int:
    return sum(len(c.get_offsets()) for c in collections)


def is_hollow(facecolor) -> bool:
    rgba = to_rgba(facecolor)
    return rgba[3] == 0 or rgba[:3] == to_rgba(S.HOLLOW)[:3]


def faces(collection) -> list:
    fc = collection.get_facecolors()
    return [tuple(c) for c in fc] * (len(collection.get_offsets()) if len(fc) == 1 else 1)


def arrow_tips(ax) -> np.ndarray:
    """Tips of the arrows drawn, in drawing order."""
    drawn = [p for p in ax.patches if p.get_label().startswith("_gr:arrow")]
    return np.array([p._posA_posB[1] for p in drawn])


# --------------------------------------------------------------------------------------------
# 1. biplot and its layers


def test_biplot_counts_arrows_sites_and_fading(demo):
    table = demo.vectors.table.copy()
    table.loc[table.index[0], "pvalue"] = np.nan  # missing: not significant
    table.loc[table.index[1], "pvalue"] = 0.05  # at the level: significant (p <= alpha)
    vectors = replace(demo.vectors, table=table)
    ax = plot.biplot(demo.pcoa, vectors=vectors, factors=demo.factors, taxa=demo.taxa)
    solid = tagged(ax, "_gr:arrow")
    faded = tagged(ax, "_gr:arrow-faded")
    # one arrow per variable; faded = p > 0.05 or missing (pandas count on the input table)
    assert len(solid) + len(faded) == len(table)
    assert len(solid) == int((table["pvalue"] <= 0.05).sum())
    assert all(isinstance(a, FancyArrowPatch) for a in solid + faded)
    assert all(a.get_linestyle() != "-" for a in faded)
    assert n_points(tagged(ax, "_gr:sites")) == len(demo.pcoa.scores)
    assert n_points(tagged(ax, "_gr:centroids")) == len(demo.factors.centroids)
    assert n_points(tagged(ax, "_gr:taxa")) == len(demo.taxa)
    assert ax.get_aspect() == 1.0
    share = demo.pcoa.proportion_explained
    assert ax.get_xlabel() == f"Axis 1 ({100 * share['axis1']:.1f} %)"
    assert ax.get_ylabel() == f"Axis 2 ({100 * share['axis2']:.1f} %)"
    assert ax.get_title(loc="right").endswith(f"{len(demo.pcoa.scores)} sites")


def test_biplot_of_an_nmds_gives_its_stress_and_plain_axis_titles(demo):
    ax = plot.biplot(demo.nmds)
    assert f"stress {demo.nmds.stress:.3f}" in ax.get_title(loc="right")
    assert (ax.get_xlabel(), ax.get_ylabel()) == ("Axis 1", "Axis 2")


def test_biplot_draws_the_arrows_of_the_vector_fit(demo):
    # the drawn tips are the fit's own arrows ("auto" and a fixed multiplier alike); the note
    # says the multiplier
    ax = plot.biplot(demo.pcoa, vectors=demo.vectors)
    expected = demo.vectors.arrows("auto")
    assert np.allclose(arrow_tips(ax), expected[["axis1", "axis2"]].to_numpy(), rtol=0, atol=0)
    assert f"arrows ×{expected.attrs['multiplier']:.3g}" in ax.get_title(loc="right")
    ax = plot.biplot(demo.pcoa, vectors=demo.vectors, arrow_scale=1.0)
    raw = demo.vectors.table[["axis1", "axis2"]].to_numpy() * np.sqrt(
        demo.vectors.table[["r2"]].to_numpy())
    assert np.allclose(arrow_tips(ax), raw)
    assert "arrows ×" not in ax.get_title(loc="right")


def test_layers_drawn_one_by_one_make_the_same_marks(demo):
    whole = plot.biplot(demo.pcoa, vectors=demo.vectors, factors=demo.factors)
    fig = Figure()
    ax = fig.add_subplot()
    plot.sites(demo.pcoa, ax=ax)
    plot.arrows(demo.vectors, ax=ax)
    plot.centroids(demo.factors, ax=ax)
    plot.legend(ax)
    for label in ("_gr:sites", "_gr:centroids"):
        assert n_points(tagged(ax, label)) == n_points(tagged(whole, label))
    assert np.array_equal(arrow_tips(ax), arrow_tips(whole))
    legend_text = [t.get_text() for t in ax.get_legend().get_texts()]
    assert legend_text == [t.get_text() for t in whole.figure.legends[0].get_texts()]
    # on the caller's axes the legend goes inside them, not on the figure
    assert not fig.legends


def test_biplot_groups_colour_and_shape(scores):
    groups = pd.Series(["upper", "lower", "middle"] * 7 + ["upper", None], index=scores.index)
    ax = plot.biplot(scores, groups=groups.iloc[::-1])  # alignment is by label
    cols = tagged(ax, "_gr:sites")
    assert len(cols) == 4  # three groups and "no group"
    assert n_points(cols) == len(scores)
    counts = sorted(len(c.get_offsets()) for c in cols)
    assert counts == sorted([*groups.value_counts().tolist(), 1])
    shapes = {c.get_paths()[0].vertices.tobytes() for c in cols[:3]}
    assert len(shapes) == 3  # groups differ by marker shape, not only by colour
    legend_text = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert legend_text == ["upper", "lower", "middle", "no group"]
    # a categorical Series keeps its category order (unused categories are left out)
    ordered = pd.Categorical(groups, categories=["lower", "unused", "middle", "upper"])
    ax = plot.biplot(scores, groups=pd.Series(ordered, index=scores.index))
    legend_text = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert legend_text == ["lower", "middle", "upper", "no group"]
    # numeric groups in increasing order
    numbers = pd.Series([3, 1, 2] * 7 + [1, 2], index=scores.index)
    ax = plot.biplot(scores, groups=numbers)
    assert [t.get_text() for t in ax.figure.legends[0].get_texts()] == ["1", "2", "3"]


def test_biplot_bad_inputs(scores, demo):
    with pytest.raises(InputError, match=r"missing column.*'axis2'") as err:
        plot.biplot(scores.drop(columns="axis2"))
    assert err.value.columns == ("axis2",)
    with pytest.raises(InputError, match=r"`taxa` is missing column.*'axis1'"):
        plot.biplot(scores, taxa=demo.taxa.drop(columns="axis1"))
    bad_centroids = replace(demo.factors, centroids=demo.factors.centroids.drop(columns="level"))
    with pytest.raises(InputError, match=r"`centroids` is missing column.*'level'"):
        plot.biplot(demo.pcoa, factors=bad_centroids)
    groups = pd.Series(["a"] * (len(scores) - 1), index=scores.index[1:])
    with pytest.raises(InputError, match=r"no group for 1 site.*'site00'"):
        plot.biplot(scores, groups=groups)
    bad = scores.copy()
    bad.loc["site03", "axis1"] = np.nan
    with pytest.raises(InputError, match=r"'axis1' has missing or infinite.*'site03'"):
        plot.biplot(bad)
    text = scores.astype(object)
    text.loc["site05", "axis2"] = "n.d."
    with pytest.raises(InputError, match=r"'axis2' must hold numbers.*'site05'"):
        plot.biplot(text)
    with pytest.raises(InputError, match="`ordination` must be an ordination result"):
        plot.biplot(scores.to_numpy())
    with pytest.raises(InputError, match=r"fitted on axes 'axis1', 'axis2', not on 'axis3'"):
        plot.biplot(demo.pcoa, vectors=demo.vectors, axes=("axis1", "axis3"))
    with pytest.raises(InputError, match="`pvalue` names 'pvalue_spatial'"):
        plot.arrows(demo.vectors, pvalue="pvalue_spatial")
    with pytest.raises(InputError, match="`axes` must be two different column names"):
        plot.sites(scores, axes=("axis1", "axis1"))


def test_hostile_labels_drawn_as_typed(scores):
    # '$' must not be parsed as mathematics (an unbalanced '$' would otherwise fail to draw),
    # also on the caller's axes with matplotlib's default settings (text.parse_math on)
    hostile = scores.iloc[:6].copy()
    hostile = hostile - hostile.mean()
    hostile.index = ['=HYPERLINK("x")', "a $ b", "../../x\nsecond line", "s4", "s5", "s6"]
    env = pd.DataFrame({"$Cu_{2}": hostile["axis1"] + 0.1 * np.arange(6)}, index=hostile.index)
    fit = gradients.fit_vectors(hostile, env, n_resamples=9, rng=1)
    groups = pd.Series(["$a", "b$"] * 3, index=hostile.index)
    for ax in (None, Figure().add_subplot()):
        ax = plot.biplot(hostile, vectors=fit, groups=groups, site_labels=True, ax=ax)
        ax.figure.draw_without_rendering()
        texts = list(ax.texts)
        drawn = {t.get_text() for t in texts}
        assert {'=HYPERLINK("x")', "a $ b", "../../x second line", "$Cu_{2}"} <= drawn
        assert not any(t.get_parse_math() for t in texts)
        legend = ax.get_legend() or ax.figure.legends[0]
        assert not any(t.get_parse_math() for t in legend.get_texts())


def test_nearly_coincident_arrows_share_one_stacked_label(demo):
    # Strongly correlated variables point the same way; their names are stacked in one label
    # at the longer tip instead of printed over each other. Distinct arrows keep their own.
    table = pd.DataFrame({"axis1": [0.99, 0.98, 0.0], "axis2": [0.11, 0.2, 1.0],
                          "r2": [0.8, 0.75, 0.6], "pvalue": [0.01] * 3},
                         index=["Cu", "Zn", "sand"])
    vectors = replace(demo.vectors, table=table)
    ax = plot.biplot(demo.pcoa, vectors=vectors)
    drawn = [t.get_text() for t in ax.texts]
    assert "Cu\nZn" in drawn and "sand" in drawn
    assert not {"Cu", "Zn"} & set(drawn)
    assert len(arrow_tips(ax)) == 3  # every arrow is still drawn


# --------------------------------------------------------------------------------------------
# 2. surface


def test_surface_levels_sites_and_the_fit_s_own_contour_lines(demo):
    fit = demo.surface
    levels = [0.0, 40.0, 80.0, 120.0, 160.0]
    ax = plot.surface(fit, demo.pcoa, levels=levels)
    (filled,) = tagged(ax, "_gr:surface")
    assert list(filled.levels) == levels
    assert n_points(tagged(ax, "_gr:sites")) == len(demo.pcoa.scores)
    assert len(ax.figure.axes) == 2 and ax.figure.axes[1].get_ylabel() == "Cu"  # colour bar
    lines = fit.contours(5)
    ax = plot.surface(fit, line_levels=5)
    drawn = tagged(ax, "_gr:contours")
    assert len(drawn) == lines.groupby(["level", "line"]).ngroups
    first = lines[(lines["level"] == lines["level"].iloc[0]) & (lines["line"] == 0)]
    assert np.allclose(drawn[0].get_xydata(), first[["x", "y"]].to_numpy())
    assert not tagged(ax, "_gr:sites")  # no ordination given: no sites
    assert ax.get_title(loc="left") == "Cu over the ordination"


def test_surface_masks_outside_hull(demo):
    # the filled bands cover no node whose fitted value is NaN (outside the sites' hull)
    grid = demo.surface.grid
    ax = plot.surface(demo.surface)
    (filled,) = tagged(ax, "_gr:surface")
    paths = filled.get_paths()
    outside = grid[grid["fitted"].isna()].iloc[0]
    centre = grid.loc[grid["fitted"].notna()].iloc[len(grid.dropna()) // 2]
    assert not any(p.contains_point((outside.x, outside.y)) for p in paths)
    assert any(p.contains_point((centre.x, centre.y)) for p in paths)


def test_surface_bad_inputs(demo):
    fit = demo.surface
    with pytest.raises(InputError, match=r"`grid` is missing column.*'fitted'") as err:
        plot.surface(replace(fit, grid=fit.grid.drop(columns="fitted")))
    assert err.value.columns == ("fitted",)
    with pytest.raises(InputError, match="more than one row for node"):
        plot.surface(replace(fit, grid=pd.concat([fit.grid, fit.grid.iloc[:1]])))
    with pytest.raises(InputError, match="no finite value"):
        plot.surface(replace(fit, grid=fit.grid.assign(fitted=np.nan)))
    with pytest.raises(InputError, match="`levels` must be"):
        plot.surface(fit, levels=[3.0, 1.0])
    with pytest.raises(InputError, match=r"`scores` is missing column.*'axis2'"):
        plot.surface(fit, demo.pcoa.scores[["axis1"]])


# --------------------------------------------------------------------------------------------
# 3. Shepard


def test_shepard_step_line_monotone(demo):
    rng = np.random.default_rng(3)
    d = rng.uniform(0, 1, 120)
    dist = d + rng.normal(0, 0.15, 120)
    # fitted values: monotone regression of distance on dissimilarity (scipy's PAVA)
    from scipy.optimize import isotonic_regression

    order = np.argsort(d)
    fitted = np.empty_like(d)
    fitted[order] = isotonic_regression(dist[order]).x
    table = pd.DataFrame({"dissimilarity": d, "distance": dist, "fitted": fitted})
    ax = plot.shepard(replace(demo.nmds, shepard=table, stress=0.0834))
    assert n_points(tagged(ax, "_gr:pairs")) == len(table)
    (line,) = tagged(ax, "_gr:fit")
    assert line.get_drawstyle() == "steps-post"
    assert np.all(np.diff(np.asarray(line.get_ydata())) >= 0)
    assert np.all(np.diff(np.asarray(line.get_xdata())) >= 0)
    assert "stress 0.083" in ax.get_title(loc="right")
    with pytest.raises(InputError, match=r"`shepard` is missing column.*'fitted'"):
        plot.shepard(replace(demo.nmds, shepard=table.drop(columns="fitted")))
    # the NMDS's own table: one point per pair of sites
    ax = plot.shepard(demo.nmds, xlabel="Bray-Curtis dissimilarity")
    n = len(demo.nmds.scores)
    assert n_points(tagged(ax, "_gr:pairs")) == n * (n - 1) // 2
    assert ax.get_xlabel() == "Bray-Curtis dissimilarity"


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
            "tested": [True, True, True, True, True, False, False],
        }
    )


def test_correlogram_fill_matches_adjusted_significance(demo, classes):
    ax = plot.correlogram(replace(demo.correlogram, table=classes), distance_unit="km")
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
    legend_text = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert legend_text[-1] == "too few pairs"  # an untested class is drawn and explained
    # a stricter alpha leaves only the first class filled
    ax = plot.correlogram(replace(demo.correlogram, table=classes), alpha=0.01)
    assert n_points(tagged(ax, "_gr:classes-filled")) == 1
    # the result's own table: one mark per class with a statistic
    ax = plot.correlogram(demo.correlogram)
    n_classes = int(demo.correlogram.table["statistic"].notna().sum())
    assert n_points(tagged(ax, "_gr:classes-filled") + tagged(ax, "_gr:classes-hollow")) \
        == n_classes


def test_correlogram_bad_inputs(demo, classes):
    with pytest.raises(InputError, match=r"missing column.*'pvalue_adjusted'") as err:
        plot.correlogram(replace(demo.correlogram,
                                 table=classes.drop(columns=["pvalue_adjusted"])))
    assert err.value.columns == ("pvalue_adjusted",)
    with pytest.raises(InputError, match="'tested' must be True or False"):
        plot.correlogram(replace(demo.correlogram,
                                 table=classes.assign(tested=["yes"] * len(classes))))
    with pytest.raises(InputError, match="`alpha` must be a number between 0 and 1"):
        plot.correlogram(demo.correlogram, alpha=5)


# --------------------------------------------------------------------------------------------
# 5. distance decay


def test_distance_decay_points_curve_halving(demo):
    rng = np.random.default_rng(5)
    d = rng.uniform(0, 40, 1600)
    used = np.ones(len(d), dtype=bool)
    used[:50] = False  # pairs left out of the fit are not drawn
    pairs = pd.DataFrame({"distance": d, "similarity": 0.7 * np.exp(-d / 12), "used": used})
    grid = np.linspace(0, 40, 30)
    curve = pd.DataFrame({"distance": grid[::-1], "fitted": 0.7 * np.exp(-grid[::-1] / 12)})
    halving = 12 * np.log(2)  # ln 2 / slope for slope 1/12 (Nekola & White 1999)
    result = replace(demo.decay, pairs=pairs, curve=curve, halving=halving, model="exponential")
    ax = plot.distance_decay(result, distance_unit="km")
    (pts,) = tagged(ax, "_gr:pairs")
    assert len(pts.get_offsets()) == int(used.sum())
    assert pts.get_rasterized()  # many points are rasterised inside the SVG
    assert pts.get_alpha() < 1
    (line,) = tagged(ax, "_gr:curve")
    assert np.all(np.diff(line.get_xdata()) > 0)  # drawn in order of distance
    (vline,) = tagged(ax, "_gr:halving")
    assert vline.get_xdata()[0] == pytest.approx(halving)
    (pt,) = tagged(ax, "_gr:halving-point")
    assert pt.get_offsets()[0][1] == pytest.approx(0.35, abs=1e-3)  # half of 0.7
    ax = plot.distance_decay(replace(result, pairs=pairs.iloc[50:100], halving=500.0))
    assert not tagged(ax, "_gr:halving")
    assert "beyond the data" in ax.get_title(loc="right")
    # no decline: an infinite halving distance is not drawn at all
    ax = plot.distance_decay(replace(result, halving=np.inf))
    assert not tagged(ax, "_gr:halving") and "halving" not in ax.get_title(loc="right")
    # the power model's halving is a factor of distance, not a distance: note only
    ax = plot.distance_decay(replace(result, model="power", halving=2.5))
    assert not tagged(ax, "_gr:halving")
    assert "halving factor ×2.5" in ax.get_title(loc="right")
    with pytest.raises(InputError, match=r"`pairs` is missing column.*'similarity'"):
        plot.distance_decay(replace(result, pairs=pairs.drop(columns="similarity")))


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
    ax = plot.ranking(ranking)
    (bars,) = [c for c in ax.containers if c.get_label() == "_gr:bars"]
    assert len(bars) == len(ranking)
    # top to bottom in decreasing r2
    ordered = sorted(bars.patches, key=lambda p: -p.get_y())
    widths = [p.get_width() for p in ordered]
    assert widths == sorted(ranking["r2"], reverse=True)
    labels = [t.get_text() for t in ax.get_yticklabels()]
    by_pos = dict(zip(ax.get_yticks(), labels, strict=True))
    assert by_pos[max(by_pos)] == "Zn"
    n_sig = int((ranking["pvalue"] <= 0.05).sum())
    assert sum(not is_hollow(p.get_facecolor()) for p in bars.patches) == n_sig
    assert sum(is_hollow(p.get_facecolor()) for p in bars.patches) == len(ranking) - n_sig
    assert ax.get_xlabel() == "r²"
    ax = plot.ranking(ranking, top=2, pvalue=None)
    (bars,) = [c for c in ax.containers if c.get_label() == "_gr:bars"]
    assert len(bars) == 2 and not any(is_hollow(p.get_facecolor()) for p in bars.patches)


def test_ranking_of_a_vector_fit_table(demo):
    ax = plot.ranking(demo.vectors.table, top=3)
    (bars,) = [c for c in ax.containers if c.get_label() == "_gr:bars"]
    top3 = demo.vectors.table["r2"].sort_values(ascending=False).head(3)
    assert sorted(p.get_width() for p in bars.patches) == sorted(top3)


def test_ranking_bad_inputs(ranking):
    with pytest.raises(InputError, match=r"missing column.*'r2'") as err:
        plot.ranking(ranking.rename(columns={"r2": "R2"}))
    assert err.value.columns == ("r2",)
    with pytest.raises(InputError, match=r"missing column.*'pvalue_adjusted'"):
        plot.ranking(ranking, pvalue="pvalue_adjusted")
    with pytest.raises(InputError, match="`top` must be a positive integer"):
        plot.ranking(ranking, top=0)


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
    ax = plot.hypotheses(table, interval=("low", "high"))
    n_sig = int((table["pvalue"] <= 0.05).sum())
    assert n_points(tagged(ax, "_gr:dots-filled")) == n_sig
    assert n_points(tagged(ax, "_gr:dots-hollow")) == len(table) - n_sig
    assert len(tagged(ax, "_gr:interval")) == len(table)
    assert [t.get_text() for t in ax.get_yticklabels()] == ["contamination", "texture", "space"]
    # one marker shape per method (first 2 of the house markers)
    legend_text = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert legend_text[:2] == ["partial Mantel", "matrix regression"]
    # without a method column: one series, labels from the index
    ax = plot.hypotheses(table.iloc[:3].set_index("hypothesis").drop(columns="method"))
    assert n_points(tagged(ax, "_gr:dots-filled")) == 2
    with pytest.raises(InputError, match=r"missing column.*'pvalue'"):
        plot.hypotheses(table.drop(columns="pvalue"))
    with pytest.raises(InputError, match=r"missing column.*'upper'"):
        plot.hypotheses(table, interval=("low", "upper"))


def test_hypotheses_from_test_results(demo):
    # a mapping of hypothesis -> result reads each result's statistic and p-value
    significant = replace(demo.partial, pvalue=0.01)
    not_significant = replace(demo.partial, statistic=-0.02, pvalue=0.7)
    ax = plot.hypotheses({"metals": significant, "texture": not_significant})
    assert [t.get_text() for t in ax.get_yticklabels()] == ["metals", "texture"]
    (filled,) = tagged(ax, "_gr:dots-filled")
    assert filled.get_offsets()[0][0] == pytest.approx(significant.statistic)
    assert n_points(tagged(ax, "_gr:dots-hollow")) == 1
    # method -> hypothesis -> result: one series per method
    ax = plot.hypotheses({"partial Mantel": {"metals": significant},
                          "Mantel": {"metals": not_significant}})
    legend_text = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert legend_text[:2] == ["partial Mantel", "Mantel"]
    with pytest.raises(InputError, match="non-empty mapping"):
        plot.hypotheses({})


# --------------------------------------------------------------------------------------------
# turnover curves


def test_turnover_panels_ordered_by_total():
    x = np.linspace(0, 1, 10)
    curves = pd.concat(
        [
            pd.DataFrame({"variable": v, "value": x, "turnover": h * x})
            for v, h in [("sand", 0.1), ("Cu", 0.5), ("pH", 0.3), ("Zn", 0.2)]
        ]
    )
    fig = plot.turnover_curves(curves, ncols=3)
    shown = [ax for ax in fig.axes if ax.get_visible()]
    assert len(shown) == 4 and len(fig.axes) == 6
    assert [ax.get_title(loc="left") for ax in shown] == ["Cu", "pH", "Zn", "sand"]
    assert all(len(tagged(ax, "_gr:curve")) == 1 for ax in shown)
    with pytest.raises(InputError, match=r"missing column.*'turnover'"):
        plot.turnover_curves(curves.drop(columns="turnover"))


def _fractions(values: dict[str, float], names=("environment", "space")):
    """A VariationPartitionResult with chosen adjusted fractions (only its table is drawn)."""
    from gradients.partition import VariationPartitionResult

    rows = []
    for tables, v in values.items():
        if tables == "":
            rows.append({"fraction": "unexplained", "kind": "residual", "tables": "",
                         "r2_adjusted": v, "testable": False, "pvalue": np.nan})
            continue
        alone = " & " not in tables
        rows.append({"fraction": f"{tables} only" if alone else f"shared by {tables}",
                     "kind": "individual", "tables": tables, "r2_adjusted": v,
                     "testable": alone, "pvalue": 0.01 if alone else np.nan})
    return VariationPartitionResult(table=pd.DataFrame(rows), names=tuple(names), n_sites=30,
                                    n_resamples=99, total=1.0, exact=False, scheme="free")


def _bars(ax) -> list:
    return [p for c in ax.containers if c.get_label() == "_gr:fractions" for p in c.patches]


def test_partition_bar_is_the_fractions_in_reading_order(demo):
    # the result's own table is the oracle: environment only, shared, space only, unexplained
    parts = _fractions({"space": 0.09, "environment & space": 0.07, "environment": 0.21,
                        "": 0.63})
    ax = plot.partition(parts)
    bars = _bars(ax)
    assert [p.get_width() for p in bars] == pytest.approx([0.21, 0.07, 0.09, 0.63])
    assert [p.get_x() for p in bars] == pytest.approx([0.0, 0.21, 0.28, 0.37])
    assert bars[1].get_hatch() and not bars[0].get_hatch()  # shared fraction hatched
    assert to_rgba(bars[3].get_facecolor()) == to_rgba(S.HOLLOW)  # unexplained in white
    printed = [t.get_text() for t in ax.texts]
    assert printed == ["21.0 %", "7.0 %", "9.0 %", "63.0 %"]
    labels = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert labels[0] == "environment only (21.0 %, p = 0.010)"  # testable: its p-value
    assert labels[1] == "shared by environment & space (7.0 %)"
    # a real partitioning draws its positive individual fractions and the residual
    real = demo.parts.table
    drawn = real[(real["kind"] != "combined") & (real["r2_adjusted"] > 0)]
    assert sorted(p.get_width() for p in _bars(plot.partition(demo.parts))) == \
        pytest.approx(sorted(drawn["r2_adjusted"]))


def test_partition_lists_negative_fractions_and_prints_narrow_ones_above():
    parts = _fractions({"environment": 0.30, "environment & space": -0.02, "space": 0.03,
                        "": 0.69})
    ax = plot.partition(parts)
    assert [p.get_width() for p in _bars(ax)] == pytest.approx([0.30, 0.03, 0.69])
    assert "shared by environment & space" in ax.get_title(loc="right")  # listed, not drawn
    narrow = [t for t in ax.texts if t.get_text() == "3.0 %"]
    assert len(narrow) == 1 and narrow[0].get_position()[1] > 0.25  # above the bar
    with pytest.raises(InputError, match="`result` must be the result of partition_variation"):
        plot.partition(parts.table)


def test_partition_of_three_tables_keeps_the_first_two_side_by_side():
    parts = _fractions({"environment": 0.2, "space": 0.1, "covariables": 0.05,
                        "environment & space": 0.04, "environment & covariables": 0.03,
                        "space & covariables": 0.02, "environment & space & covariables": 0.01,
                        "": 0.55}, names=("environment", "space", "covariables"))
    ax = plot.partition(parts)
    assert [p.get_width() for p in _bars(ax)] == pytest.approx(
        [0.2, 0.04, 0.1, 0.05, 0.03, 0.02, 0.01, 0.55])


# --------------------------------------------------------------------------------------------
# spatial eigenvector maps


def test_eigenvector_map_marks_each_site_by_sign_and_size(demo, demo_network):
    network, points = demo_network
    sev = gradients.spatial_eigenvectors(gradients.geographic_distance(
        points, method="network", network=network))
    fig = plot.spatial_eigenvector_map(sev, points, vectors=["space2", "space1", "space3"],
                                       network=network, distance_unit="m")
    panels = [ax for ax in fig.axes if ax.get_visible()]
    assert [ax.get_title(loc="left") for ax in panels] == ["space2", "space1", "space3"]
    for ax, name in zip(panels, ["space2", "space1", "space3"], strict=True):
        v = sev.vectors[name]
        pos, neg = tagged(ax, "_gr:sites-positive"), tagged(ax, "_gr:sites-negative")
        assert n_points(pos) == int((v >= 0).sum()) and n_points(neg) == int((v < 0).sum())
        # marker area grows with the absolute value (the oracle: the vector itself)
        sizes = np.r_[pos[0].get_sizes(), neg[0].get_sizes()]
        order = np.r_[np.abs(v[v >= 0]), np.abs(v[v < 0])]
        assert np.all(np.diff(sizes[np.argsort(order)]) >= -1e-12)
        # the river lines, every part of the network, in km of the UTM zone
        (lines,) = tagged(ax, "_gr:network")
        assert len(lines.get_segments()) == len(network)
        assert ax.get_xlabel() in ("Easting (km)", "")
        assert "scale" in ax.get_title(loc="right") and " m" in ax.get_title(loc="right")
    x = tagged(panels[0], "_gr:sites-positive")[0].get_offsets()[:, 0]
    assert x.max() < 1000  # metres drawn as km
    assert len(fig.axes) == 4  # 2 x 2 panels, the last hidden


def test_eigenvector_map_in_longitude_latitude_and_its_checks(demo):
    fig = plot.spatial_eigenvector_map(demo.eigenvectors, demo.survey.locations)
    panels = [ax for ax in fig.axes if ax.get_visible()]
    assert len(panels) == min(4, demo.eigenvectors.vectors.shape[1])
    lat = float(demo.survey.locations.geometry.y.mean())
    # a degree of longitude is cos(latitude) of a degree of latitude on the ground
    assert panels[0].get_aspect() == pytest.approx(1 / np.cos(np.radians(lat)))
    assert panels[0].get_ylabel() == "Latitude (°)"
    with pytest.raises(InputError, match="`vectors` names 'space99'"):
        plot.spatial_eigenvector_map(demo.eigenvectors, demo.survey.locations,
                                     vectors=["space99"])
    with pytest.raises(InputError, match=r"`locations` has no point for site\(s\) 'FB01'"):
        plot.spatial_eigenvector_map(demo.eigenvectors, demo.survey.locations.drop("FB01"))
    with pytest.raises(InputError, match="`locations` must be a GeoDataFrame"):
        plot.spatial_eigenvector_map(demo.eigenvectors, demo.survey.environment)
