"""The dendrogram: the tree drawn is the tree computed, clusters told apart by colour and shape."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.cluster.hierarchy import dendrogram as scipy_dendrogram

from gradients import DistanceMatrix, InputError, cluster_sites, plot


def _result(values, **kwargs):
    v = np.asarray(values, dtype=float)
    d = DistanceMatrix.from_square(np.abs(v[:, None] - v[None, :]),
                                   labels=[f"s{i + 1}" for i in range(len(v))])
    return cluster_sites(d, "average", **kwargs)


def _by_label(ax, label):
    return [c for c in ax.collections if c.get_label() == label]


def test_leaves_in_the_tree_order_and_merges_at_their_heights():
    res = _result([0.0, 3.0, 0.4, 7.0, 7.5, 3.6, 12.0], k=3)
    ax = plot.dendrogram(res)
    # leaf order: scipy's dendrogram layout of the same merges (reference library), the
    # first leaf at the top
    leaves = scipy_dendrogram(res.linkage, no_plot=True)["leaves"]
    ticks = [t.get_text() for t in ax.get_yticklabels()]
    positions = list(ax.get_yticks())
    shown = [name for _, name in sorted(zip(positions, ticks, strict=True), reverse=True)]
    assert shown == [res.labels[i] for i in leaves]
    (branches,) = [c for c in ax.collections if c.get_label() == "_gr:branches"]
    segments = branches.get_segments()
    assert len(segments) == 3 * (len(res.labels) - 1)
    # the vertical bar of merge i stands at its height
    bars = sorted(float(s[0, 0]) for s in segments if s[0, 0] == s[1, 0] and s[0, 1] != s[1, 1])
    np.testing.assert_allclose(bars, np.sort(res.linkage[:, 2]), rtol=1e-12)


def test_clusters_have_their_own_colour_and_shape_and_the_cut_is_marked():
    res = _result([0.0, 3.0, 0.4, 7.0, 7.5, 3.6, 12.0], k=3)
    ax = plot.dendrogram(res)
    leaves = _by_label(ax, "_gr:leaves")
    assert len(leaves) == 3
    assert sorted(len(c.get_offsets()) for c in leaves) == sorted(res.clusters["n_sites"])
    colours = {tuple(np.round(c.get_facecolor()[0], 3)) for c in leaves}
    shapes = {id(c.get_paths()[0]) for c in leaves}
    assert len(colours) == 3 and len(shapes) == 3
    (cut,) = [line for line in ax.lines if line.get_label() == "_gr:cut"]
    h = res.linkage[:, 2]
    x = cut.get_xdata()[0]
    assert h[-3] < x < h[-2]  # between the last merge kept and the first undone
    labels = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert labels == [f"cluster {c} ({n} site{'' if n == 1 else 's'})" for c, n in
                      zip(res.clusters["cluster"], res.clusters["n_sites"], strict=True)]


def test_a_tree_with_reversals_shows_no_cut_line():
    res = _result([0, 10, 0.7, 10.4, 20], k=2, contiguous="transect")
    assert any("reversal" in n for n in res.notes)
    ax = plot.dendrogram(res)
    assert not [line for line in ax.lines if line.get_label() == "_gr:cut"]
    assert "contiguous (transect)" in ax.get_title(loc="right")


def test_labels_left_out_for_many_sites_unless_asked():
    rng = np.random.default_rng(1)
    res = _result(rng.normal(size=130), k=4)
    assert list(plot.dendrogram(res).get_yticks()) == []
    assert len(plot.dendrogram(res, show_labels=True).get_yticklabels()) == 130


def test_wrong_result_is_named():
    with pytest.raises(InputError, match="`result` must be the result of cluster_sites"):
        plot.dendrogram(object())


def test_dispersion_rows_hold_every_site_at_its_distance():
    # the distances drawn are the result's (Anderson 2006: distance to the class centroid);
    # counts and means recomputed from the result's table with pandas
    from gradients import dispersion_test

    rng = np.random.default_rng(3)
    pts = np.vstack([rng.normal(0, 1, (8, 2)), rng.normal(0, 3, (9, 2))])
    d = DistanceMatrix.from_square(np.sqrt(((pts[:, None] - pts[None]) ** 2).sum(-1)),
                                   labels=[f"p{i}" for i in range(17)])
    res = dispersion_test(d, ["tight"] * 8 + ["loose"] * 9, n_resamples=99, rng=1)
    ax = plot.dispersion(res, alpha=0.05)
    rows = _by_label(ax, "_gr:distances")
    levels = list(res.table["group"])  # rows in the result's class order, first at the top
    assert [len(c.get_offsets()) for c in rows] == list(res.table["n_sites"])
    for c, level in zip(rows, levels, strict=True):
        want = np.sort(res.distances.loc[res.distances["group"] == level, "distance"])
        np.testing.assert_allclose(np.sort(c.get_offsets()[:, 0]), want, rtol=1e-12)
    means = sorted(line.get_xdata()[0] for line in ax.lines if line.get_label() == "_gr:mean")
    np.testing.assert_allclose(means, sorted(res.table["mean_distance"]), rtol=1e-12)
    filled = res.pvalue <= 0.05
    face = rows[0].get_facecolor()[0]
    assert (tuple(face[:3]) != (1.0, 1.0, 1.0)) == filled
    assert f"p = {res.pvalue:.3f}" in ax.get_title(loc="right")
