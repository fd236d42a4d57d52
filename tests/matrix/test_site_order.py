"""Matrix tests give the same p-values for the same seed whatever order the sites come in.

Theory: the Mantel null distribution is a property of the two matrices, not of the order of
their rows; the engine draws its random orders over the sites sorted by label.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.matrix import mantel, mantel_correlogram, matrix_regression, partial_mantel


def _matrices(n=30, seed=1):
    rng = np.random.default_rng(seed)
    labels = [f"core-{i:02d}" for i in rng.permutation(n)]
    pts = rng.uniform(0, 10, size=(n, 2))
    env = pts[:, :1] + rng.normal(0, 2, size=(n, 1))
    com = 0.5 * env + rng.normal(size=(n, 3))
    return (DistanceMatrix(pdist(com), labels), DistanceMatrix(pdist(env), labels),
            DistanceMatrix(pdist(pts), labels))


def test_mantel_family_does_not_depend_on_site_order():
    y, x, geo = _matrices()
    order = list(np.random.default_rng(4).permutation(y.labels))
    y2, x2, geo2 = y.subset(order), x.subset(order), geo.subset(order)
    strata = pd.Series(np.arange(y.n) % 3, index=y.labels)
    for kw in ({}, {"strata": strata}):
        a = mantel(y, x, n_resamples=199, rng=7, **kw)
        b = mantel(y2, x2, n_resamples=199, rng=7, **kw)
        assert a.pvalue == b.pvalue
        np.testing.assert_allclose(np.sort(a.null_distribution), np.sort(b.null_distribution),
                                   rtol=1e-12)
    a = partial_mantel(y, x, geo, n_resamples=199, rng=7)
    b = partial_mantel(y2, x2, geo2, n_resamples=199, rng=7)
    assert a.pvalue == b.pvalue
    a = mantel_correlogram(y, geo, n_resamples=99, rng=7)
    b = mantel_correlogram(y2, geo2, n_resamples=99, rng=7)
    pd.testing.assert_series_equal(a.table["pvalue"], b.table["pvalue"])
    a = matrix_regression(y, {"env": x, "space": geo}, n_resamples=99, rng=7)
    b = matrix_regression(y2, {"env": x2, "space": geo2}, n_resamples=99, rng=7)
    pd.testing.assert_series_equal(a.table["pvalue"], b.table["pvalue"])


def test_distance_decay_bootstrap_does_not_depend_on_site_order():
    # The site bootstrap draws its multinomial counts over the label-sorted sites.
    from gradients.matrix import distance_decay

    rng = np.random.default_rng(3)
    n = 25
    labels = [f"q{i:02d}" for i in rng.permutation(n)]
    pts = rng.uniform(0, 100, size=(n, 2))
    g = pdist(pts)
    s = 0.8 * np.exp(-0.02 * g + rng.normal(0, 0.05, g.size))
    d, geo = DistanceMatrix(1 - s, labels), DistanceMatrix(g, labels)
    order = list(rng.permutation(labels))
    a = distance_decay(d, geo, n_resamples=200, rng=5)
    b = distance_decay(d.subset(order), geo.subset(order), n_resamples=200, rng=5)
    pd.testing.assert_frame_equal(a.table, b.table, rtol=1e-9)


def test_strata_on_a_default_index_with_integer_site_labels_is_refused():
    # Integer site labels 0..n-1 in another order: a Series on a default RangeIndex could be
    # read by label or by position, with different answers, so it is refused with the fix.
    import pytest

    from gradients import InputError

    rng = np.random.default_rng(0)
    labels = [5, 4, 3, 2, 1, 0]
    pts = rng.normal(size=(6, 2))
    x = DistanceMatrix(pdist(pts), labels)
    y = DistanceMatrix(pdist(pts + rng.normal(0, 0.5, size=(6, 2))), labels)
    strata = pd.Series([0, 0, 0, 1, 1, 1])
    with pytest.raises(InputError, match="unclear whether its values follow the site labels"):
        mantel(x, y, strata=strata)
    by_position = mantel(x, y, strata=strata.to_numpy())
    by_label = mantel(x, y, strata=pd.Series([0, 0, 0, 1, 1, 1], index=pd.Index(labels)))
    assert by_position.pvalue == by_label.pvalue  # the same assignment, said two clear ways
