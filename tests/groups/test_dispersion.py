"""The dispersion test (Anderson 2006) against distances to centroids computed directly, in
Euclidean space and in the principal-coordinate space of a non-Euclidean matrix (real and
imaginary axes), against scipy's one-way F, and the warning it adds beside PERMANOVA."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.spatial.distance import pdist, squareform

from gradients import DistanceMatrix, dispersion_test, permanova


def _sites(n):
    return [f"s{i:02d}" for i in range(n)]


def test_euclidean_distances_to_centroids_and_f_equal_scipy():
    # Anderson (2006, Biometrics 62:245): z_ij = distance of site j to the centroid (mean
    # vector) of its group; F is the one-way ANOVA F of z (scipy.stats.f_oneway)
    rng = np.random.default_rng(1)
    groups = np.repeat(["a", "b", "c"], [6, 8, 7])
    y = rng.normal(size=(21, 3)) * np.where(groups == "c", 2.0, 1.0)[:, None]
    z = np.empty(21)
    for g in "abc":
        idx = groups == g
        z[idx] = np.linalg.norm(y[idx] - y[idx].mean(axis=0), axis=1)
    sites = _sites(21)
    res = dispersion_test(DistanceMatrix(pdist(y), sites), pd.Series(groups, index=sites),
                          rng=2, n_resamples=199)
    np.testing.assert_allclose(res.distances["distance"].to_numpy(), z, rtol=1e-9)
    ref = stats.f_oneway(*[z[groups == g] for g in "abc"])
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-9)
    assert (res.df, res.df_residual) == (2, 18)
    means = res.table.set_index("group")["mean_distance"]
    assert means["c"] == pytest.approx(z[groups == "c"].mean())


def test_non_euclidean_distances_use_real_minus_imaginary_axes():
    # Anderson (2006, eq. 3): with PCoA axes from all eigenvalues of Gower's centred matrix,
    # the squared distance to a centroid is the sum over axes of positive eigenvalues minus the
    # sum over axes of negative ones (coordinates u_k sqrt(|lambda_k|)). Eigenvectors from
    # numpy.linalg.eigh, written out here.
    rng = np.random.default_rng(4)
    counts = rng.poisson(2.0, size=(14, 9))
    counts[counts.sum(axis=1) == 0, 0] = 1
    groups = np.repeat(["p", "q"], 7)
    d = squareform(pdist(counts, "braycurtis"))
    n = len(groups)
    j = np.eye(n) - 1 / n
    g = -0.5 * j @ (d * d) @ j
    lam, vec = np.linalg.eigh(g)
    keep = np.abs(lam) > 1e-10 * np.abs(lam).max()
    assert (lam[keep] < 0).any()  # Bray-Curtis here is not Euclidean
    coords = vec[:, keep] * np.sqrt(np.abs(lam[keep]))
    sign = np.sign(lam[keep])
    z2 = np.empty(n)
    for lev in "pq":
        idx = groups == lev
        dev = coords[idx] - coords[idx].mean(axis=0)
        z2[idx] = (dev * dev) @ sign
    sites = _sites(n)
    res = dispersion_test(DistanceMatrix.from_square(d, sites), groups, rng=1, n_resamples=99)
    np.testing.assert_allclose(res.distances["distance"].to_numpy() ** 2,
                               np.clip(z2, 0, None), rtol=1e-8, atol=1e-12)
    assert any("imaginary" in note for note in res.notes)


def _f_of_centroid_distances(y, labels):
    z = np.empty(len(labels))
    for g in np.unique(labels):
        idx = labels == g
        z[idx] = np.linalg.norm(y[idx] - y[idx].mean(axis=0), axis=1)
    return stats.f_oneway(*[z[labels == g] for g in np.unique(labels)]).statistic


def test_exact_dispersion_pvalue_equals_listing_every_split():
    # Exact enumeration, written out: the sites' deviations from their class centroids are
    # reassigned to the classes in every one of the C(8, 4) / 2 = 35 splits, the centroids of
    # the reassigned deviations recomputed, and F (scipy f_oneway) of the new distances taken
    # (Anderson 2006: permutation of residuals).
    y = np.array([[0.0, 0.1], [0.2, 0.0], [0.1, 0.3], [0.05, 0.2],
                  [3.0, 1.0], [1.0, 3.0], [-1.0, 2.0], [2.5, -0.5]])
    groups = np.array(list("aaaabbbb"))
    resid = y.copy()
    for g in "ab":
        resid[groups == g] -= y[groups == g].mean(axis=0)
    res = dispersion_test(DistanceMatrix(pdist(y), _sites(8)), groups, rng=0)
    values = []
    for first in itertools.combinations(range(8), 4):
        if 0 not in first:  # the other labelling of a split already listed
            continue
        lab = np.where(np.isin(np.arange(8), first), "a", "b")
        values.append(_f_of_centroid_distances(resid, lab))
    assert len(values) == 35
    assert res.exact and res.n_resamples == 35
    assert res.statistic == pytest.approx(_f_of_centroid_distances(y, groups), rel=1e-9)
    np.testing.assert_allclose(np.sort(res.null_distribution[1:]),
                               np.sort(np.delete(values, 0)), rtol=1e-8)
    assert res.pvalue == pytest.approx(np.mean(np.array(values) >= res.statistic - 1e-9))


def test_permuted_statistic_equals_recomputing_centroids_on_bray_curtis():
    # two ways on a non-Euclidean matrix: the kernel's F for random reassignments against
    # PCoA coordinates of all axes (real minus imaginary, numpy eigh) moved and re-centred
    from gradients.distance import gower_centred
    from gradients.groups._dispersion import _residual_batch

    rng = np.random.default_rng(8)
    counts = rng.poisson(2.0, size=(15, 8))
    counts[counts.sum(axis=1) == 0, 0] = 1
    codes = np.repeat([0, 1, 2], [4, 5, 6])
    dm = DistanceMatrix(pdist(counts, "braycurtis"), _sites(15))
    g = np.asarray(gower_centred(dm).matrix)
    lam, vec = np.linalg.eigh(g)
    keep = np.abs(lam) > 1e-10 * np.abs(lam).max()
    coords = vec[:, keep] * np.sqrt(np.abs(lam[keep]))
    sign = np.sign(lam[keep])
    resid = coords.copy()
    for c in range(3):
        resid[codes == c] -= coords[codes == c].mean(axis=0)
    orders = np.array([rng.permutation(15) for _ in range(12)])
    got = _residual_batch(g, codes)(orders)
    for o, value in zip(orders, got, strict=True):
        moved = resid[o]
        z = np.empty(15)
        for c in range(3):
            dev = moved[codes == c] - moved[codes == c].mean(axis=0)
            z[codes == c] = np.sqrt(np.clip((dev * dev) @ sign, 0, None))
        assert value == pytest.approx(stats.f_oneway(*[z[codes == c] for c in range(3)])
                                      .statistic, rel=1e-8)


def _spread_survey(spreads, seed):
    rng = np.random.default_rng(seed)
    groups = np.repeat(["reference", "impact"], 15)
    scale = np.where(groups == "reference", spreads[0], spreads[1])
    y = rng.normal(size=(30, 4)) * scale[:, None]
    sites = _sites(30)
    return DistanceMatrix(pdist(y), sites), pd.DataFrame({"zone": groups}, index=sites)


def test_planted_unequal_spreads_raise_the_confounding_warning():
    # Anderson (2006); Anderson & Walsh (2013): same centroids, spreads 1 and 3: the
    # dispersion test detects it and PERMANOVA's notes warn that its location test is
    # confounded; with equal spreads (seed fixed) no warning.
    d, design = _spread_survey((1.0, 3.0), seed=1)
    res = permanova(d, design, rng=2)
    assert res.dispersion["zone"].pvalue < 0.01
    assert any(n.startswith("Spreads differ") and "confounded" in n for n in res.notes)
    assert res.dispersion_table.loc[0, "term"] == "zone"
    d, design = _spread_survey((1.0, 1.0), seed=1)
    res = permanova(d, design, rng=2)
    assert res.dispersion["zone"].pvalue > 0.05
    assert not any("confounded" in n for n in res.notes)
    assert any(n.startswith("Spreads do not differ") for n in res.notes)


def test_classes_of_two_sites_cannot_compare_spreads():
    # by hand: in a class of two sites both are at half their distance from the centroid,
    # so with only such classes every z is d/2 of its pair; with equal pairs nothing varies
    y = np.array([[0.0], [1.0], [5.0], [6.0]])
    from gradients import InputError

    with pytest.raises(InputError, match="same distance from the centroid"):
        dispersion_test(DistanceMatrix(pdist(y), _sites(4)), list("aabb"))
