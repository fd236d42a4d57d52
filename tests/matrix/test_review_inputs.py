"""Review checks of the matrix stage: site-label order, labelled strata and spatial distances
with integer site IDs, and constant matrices that only look non-constant after rounding."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.matrix import (
    distance_decay,
    mantel,
    mantel_correlogram,
    matrix_regression,
    partial_mantel,
)

# A site order that is not a symmetry of the strata pattern used below.
_ORDER = np.array([3, 0, 6, 1, 5, 2, 4])


def _data(labels, seed=5):
    rng = np.random.default_rng(seed)
    n = len(labels)
    xy = rng.uniform(size=(n, 2))
    a = xy + 0.4 * rng.normal(size=(n, 2))
    b = 0.3 * a + rng.normal(size=(n, 2))
    c = rng.normal(size=(n, 2))
    return [DistanceMatrix(pdist(v), labels) for v in (a, b, c, xy)]


def _reordered(dm):
    return dm.subset(dm.labels[_ORDER])


def test_exact_results_do_not_depend_on_the_site_order_of_the_inputs():
    # Theory: with all 7! = 5040 permutations enumerated the null distribution is the same
    # set of values whatever order the sites are listed in, so every statistic and p-value of
    # matrices listed in another order (matched by label) must equal those of aligned ones.
    labels = [f"s{i}" for i in range(7)]
    x, y, z, geo = _data(labels)
    xr, zr = _reordered(x), _reordered(z)
    kw = {"n_resamples": 5040, "rng": 0}
    for alt in ("greater", "two-sided"):
        a, b = mantel(x, y, alternative=alt, **kw), mantel(xr, y, alternative=alt, **kw)
        assert a.exact and b.exact
        assert b.statistic == pytest.approx(a.statistic, abs=1e-12)
        assert b.pvalue == pytest.approx(a.pvalue, abs=1e-12)
    for permute in ("raw", "residuals"):
        a = partial_mantel(x, y, z, permute=permute, **kw)
        b = partial_mantel(xr, y, zr, permute=permute, **kw)
        assert b.statistic == pytest.approx(a.statistic, abs=1e-12)
        assert b.pvalue == pytest.approx(a.pvalue, abs=1e-12)
    a = matrix_regression(x, {"b": y, "c": z}, **kw)
    b = matrix_regression(xr, {"b": y, "c": zr}, **kw)
    pd.testing.assert_frame_equal(a.table, b.table, atol=1e-10)
    assert b.pvalue == pytest.approx(a.pvalue, abs=1e-12)
    a = mantel_correlogram(x, geo, classes=3, min_pairs=1, **kw)
    b = mantel_correlogram(xr, geo, classes=3, min_pairs=1, **kw)
    pd.testing.assert_frame_equal(a.table, b.table, atol=1e-10)


@pytest.mark.parametrize("labels", [range(7), range(1, 8)])
def test_strata_series_with_integer_site_ids_is_matched_by_label(labels):
    # A strata Series indexed by the sites' own integer IDs (a RangeIndex) must be matched by
    # label like any other labelled Series. Theory: the exact p-value (all 3! 2! 2! = 24
    # within-stratum permutations) is then the same for the reordered matrices.
    # A default 0..n-1 index over sites labelled 0..n-1 in another order could also be read
    # by position: that one case is refused, and an explicit index of labels is matched.
    x, y, _, _ = _data(pd.Index(labels))
    strata = pd.Series(["a", "b", "c", "a", "b", "c", "a"], index=labels)
    aligned = mantel(x, y, strata=strata, n_resamples=999, rng=1)
    assert aligned.exact and aligned.n_resamples == 24
    if labels == range(7):
        with pytest.raises(InputError, match="unclear whether its values follow"):
            mantel(_reordered(x), y, strata=strata, n_resamples=999, rng=1)
        strata = pd.Series(strata.to_numpy(), index=pd.Index(list(labels)))
    shuffled = mantel(_reordered(x), y, strata=strata, n_resamples=999, rng=1)
    assert shuffled.pvalue == pytest.approx(aligned.pvalue, abs=1e-12)


def test_spatial_distances_with_integer_site_ids_are_matched_by_label():
    # The check for spatial structure is a deterministic statistic (the Mantel r of each
    # matrix with distance in space): it must not change when the matrices list their
    # integer-labelled sites in another order than the spatial distance matrix.
    rng = np.random.default_rng(8)
    n = 12
    xy = rng.uniform(size=(n, 2))
    labels = pd.RangeIndex(n)
    x = DistanceMatrix(pdist(xy + 0.2 * rng.normal(size=(n, 2))), labels)
    y = DistanceMatrix(pdist(xy + 0.2 * rng.normal(size=(n, 2))), labels)
    geo = DistanceMatrix(pdist(xy), labels)
    order = rng.permutation(n)
    a = mantel(x, y, n_resamples=99, n_surrogates=19, rng=1, spatial_null=geo)
    b = mantel(x.subset(labels[order]), y, n_resamples=99, n_surrogates=19, rng=1,
               spatial_null=geo)
    np.testing.assert_allclose(b.spatial_structure["statistic"],
                               a.spatial_structure["statistic"], atol=1e-12)


@pytest.mark.parametrize("value", [0.1, 0.7, 1 / 3])
def test_constant_matrices_with_rounding_in_their_mean_are_refused(value):
    # np.mean of m copies of 0.1 is not exactly 0.1, so the centred vector is rounding noise
    # (~1e-17), not zero: a constant matrix must still be named as constant, not analysed.
    labels = [f"s{i}" for i in range(8)]
    x, y, _, _ = _data(labels)
    const = DistanceMatrix(np.full(28, value), labels)
    with pytest.raises(InputError, match="collinear \\(or constant\\): z"):
        partial_mantel(x, y, const, n_resamples=9, rng=0)
    with pytest.raises(InputError, match="`response` has the same value for every pair"):
        matrix_regression(const, {"b": y}, n_resamples=9, rng=0)
    with pytest.raises(InputError, match="same similarity for every pair"):
        distance_decay(const, y, n_resamples=9, rng=0)


def test_partial_mantel_with_no_residual_freedom_is_refused():
    # Theory: with 3 sites there are 3 pairs; an intercept and one control leave residuals in
    # a 1-dimensional space, where any two vectors correlate at +1 or -1, so the "partial
    # correlation" carries no information. With 4 sites (6 pairs) 4 degrees are left.
    x3, y3, z3, _ = _data([f"s{i}" for i in range(3)])
    with pytest.raises(InputError, match="partial correlation is fixed at \\+1 or -1"):
        partial_mantel(x3, y3, z3, n_resamples=9, rng=0)
    x4, y4, z4, _ = _data([f"s{i}" for i in range(4)])
    res = partial_mantel(x4, y4, z4, n_resamples=99, rng=0)
    assert res.exact and res.n_resamples == 24 and abs(res.statistic) < 1
