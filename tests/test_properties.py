"""Properties of the public API on random data (hypothesis): what must hold for any survey.

- Row order: the same sites given in another order give the same results, p-values included
  (the engine draws its random orders over the sites sorted by label, and bootstraps over the
  label-sorted sites).
- Relabelling: renaming the sites leaves every statistic unchanged (the random orders may
  differ, so p-values are only required to stay valid).
- Symmetry: the Mantel statistic of (x, y) is that of (y, x), the partial one too
  (r_xy.z = r_yx.z, Smouse, Long & Sokal 1986); dissimilarity matrices are symmetric with a
  zero diagonal.
- p-values lie in (0, 1] (Phipson & Smyth 2010: never 0 for a Monte Carlo test).

Each property is checked on small random surveys (6 to 13 sites, with or without tied values)
drawn by hypothesis with a fixed derandomised seed, so the suite stays deterministic.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats
from scipy.spatial.distance import pdist

from gradients import (
    DistanceMatrix,
    dissimilarity,
    distance_decay,
    fit_factors,
    fit_surface,
    fit_vectors,
    gower_distance,
    mantel,
    mantel_correlogram,
    matrix_regression,
    partial_mantel,
    pcoa,
)
from gradients.partition import dbrda

PROPERTY = settings(max_examples=12, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.too_slow])

surveys = st.tuples(st.integers(6, 13), st.integers(0, 2**32 - 1), st.booleans())


class Survey:
    """A small random survey: locations, two site tables, a community, a factor."""

    def __init__(self, n: int, seed: int, ties: bool) -> None:
        rng = np.random.default_rng(seed)
        self.n = n
        self.labels = [f"site-{i:02d}" for i in rng.permutation(n)]
        self.order = rng.permutation(n)
        self.rename = {s: f"other-{k:02d}" for s, k in zip(self.labels, rng.permutation(n),
                                                            strict=True)}
        draw = (lambda *shape: np.round(rng.normal(size=shape))) if ties else \
            (lambda *shape: rng.normal(size=shape))
        self.xy = rng.uniform(0, 10, size=(n, 2))
        self.env = draw(n, 2)
        self.other = draw(n, 2)
        self.control = draw(n, 2)
        self.community = pd.DataFrame(rng.poisson(2.0, size=(n, 6)) + (np.arange(6) == 0),
                                      index=self.labels, columns=[f"t{k}" for k in range(6)])
        self.classes = pd.Series(np.resize(["fen", "bog", "carr"], n), index=self.labels)
        self.seed = int(rng.integers(1000))

    def matrix(self, table: np.ndarray) -> DistanceMatrix:
        return DistanceMatrix(pdist(table), self.labels)

    def reordered(self, d: DistanceMatrix) -> DistanceMatrix:
        return d.subset([self.labels[i] for i in self.order])

    def renamed(self, d: DistanceMatrix) -> DistanceMatrix:
        return DistanceMatrix(d.condensed, [self.rename[s] for s in d.labels])

    def frame(self, table: np.ndarray, columns: list[str]) -> pd.DataFrame:
        return pd.DataFrame(table, index=self.labels, columns=columns)


def _valid(p: float) -> bool:
    return 0.0 < p <= 1.0


@PROPERTY
@given(surveys, st.sampled_from(["pearson", "spearman", "kendall"]))
def test_mantel_symmetric_order_free_and_relabelling_free(case, method):
    s = Survey(*case)
    x, y = s.matrix(s.env), s.matrix(s.other)
    res = mantel(x, y, method=method, n_resamples=49, rng=s.seed)
    assert _valid(res.pvalue)
    swapped = mantel(y, x, method=method, n_resamples=49, rng=s.seed)
    assert swapped.statistic == pytest.approx(res.statistic, abs=1e-12)
    moved = mantel(s.reordered(x), s.reordered(y), method=method, n_resamples=49, rng=s.seed)
    assert moved.statistic == pytest.approx(res.statistic, abs=1e-12)
    assert moved.pvalue == res.pvalue
    renamed = mantel(s.renamed(x), s.renamed(y), method=method, n_resamples=49, rng=s.seed)
    assert renamed.statistic == pytest.approx(res.statistic, abs=1e-12)
    assert _valid(renamed.pvalue)
    # and the statistic is the correlation of the condensed vectors (scipy)
    ref = {"pearson": stats.pearsonr, "spearman": stats.spearmanr,
           "kendall": stats.kendalltau}[method](x.condensed, y.condensed).statistic
    assert res.statistic == pytest.approx(ref, abs=1e-10)


@PROPERTY
@given(surveys, st.sampled_from(["raw", "residuals"]))
def test_partial_mantel_symmetric_and_order_free(case, permute):
    s = Survey(*case)
    x, y, z = s.matrix(s.env), s.matrix(s.other), s.matrix(s.control)
    res = partial_mantel(x, y, z, permute=permute, n_resamples=49, rng=s.seed)
    assert _valid(res.pvalue)
    assert partial_mantel(y, x, z, permute=permute, n_resamples=9,
                          rng=1).statistic == pytest.approx(res.statistic, abs=1e-10)
    moved = partial_mantel(s.reordered(x), s.reordered(y), s.reordered(z), permute=permute,
                           n_resamples=49, rng=s.seed)
    assert moved.pvalue == res.pvalue
    assert moved.statistic == pytest.approx(res.statistic, abs=1e-12)
    renamed = partial_mantel(s.renamed(x), s.renamed(y), s.renamed(z), permute=permute,
                             n_resamples=49, rng=s.seed)
    assert renamed.statistic == pytest.approx(res.statistic, abs=1e-12)


@PROPERTY
@given(surveys)
def test_correlogram_regression_and_decay_order_free(case):
    s = Survey(*case)
    d, geo, other = s.matrix(s.env), s.matrix(s.xy), s.matrix(s.other)
    cor = mantel_correlogram(d, geo, classes=3, min_pairs=1, n_resamples=49, rng=s.seed)
    cor2 = mantel_correlogram(s.reordered(d), s.reordered(geo), classes=3, min_pairs=1,
                              n_resamples=49, rng=s.seed)
    pd.testing.assert_frame_equal(cor.table, cor2.table, rtol=1e-10)
    tested = cor.table["pvalue"].dropna()
    assert tested.between(0, 1, inclusive="right").all()
    reg = matrix_regression(d, {"geo": geo, "other": other}, n_resamples=49, rng=s.seed)
    reg2 = matrix_regression(s.reordered(d), {"geo": s.reordered(geo),
                                              "other": s.reordered(other)},
                             n_resamples=49, rng=s.seed)
    pd.testing.assert_frame_equal(reg.table, reg2.table, rtol=1e-10)
    assert reg2.pvalue == reg.pvalue and _valid(reg.pvalue)
    # the order in which predictors are given changes nothing but the rows' order
    swapped = matrix_regression(d, {"other": other, "geo": geo}, n_resamples=49, rng=s.seed)
    assert swapped.r2 == pytest.approx(reg.r2, rel=1e-10)
    pd.testing.assert_frame_equal(swapped.table.loc[reg.table.index, ["coefficient", "vif"]],
                                  reg.table[["coefficient", "vif"]], rtol=1e-9)
    sim = DistanceMatrix(np.clip(d.condensed / (1 + d.condensed.max()), 0, 1), s.labels)
    dec = distance_decay(sim, geo, n_resamples=49, rng=s.seed)
    dec2 = distance_decay(s.reordered(sim), s.reordered(geo), n_resamples=49, rng=s.seed)
    pd.testing.assert_frame_equal(dec.table, dec2.table, rtol=1e-10)


@PROPERTY
@given(surveys)
def test_fits_order_free_and_relabelling_free(case):
    s = Survey(*case)
    sc = s.frame(s.env, ["axis1", "axis2"])
    env = s.frame(s.other, ["pH", "zinc"])
    fac = s.classes.to_frame("habitat")
    rows = [s.labels[i] for i in s.order]
    a = fit_vectors(sc, env, n_resamples=49, rng=s.seed)
    b = fit_vectors(sc.loc[rows], env.loc[rows], n_resamples=49, rng=s.seed)
    # a variable exactly uncorrelated with the scores (possible with tied values) has r2 = 0
    # to rounding and no direction: its cosines normalise rounding noise, so they are compared
    # only where r2 is not zero
    defined = a.table["r2"] > 1e-12
    pd.testing.assert_frame_equal(a.table[defined], b.table[defined], rtol=1e-10)
    pd.testing.assert_frame_equal(a.table.drop(columns=["axis1", "axis2"]),
                                  b.table.drop(columns=["axis1", "axis2"]), rtol=1e-10,
                                  atol=1e-12)
    assert a.table["pvalue"].between(0, 1, inclusive="right").all()
    f = fit_factors(sc, fac, n_resamples=49, rng=s.seed)
    g = fit_factors(sc.loc[rows], fac.loc[rows], n_resamples=49, rng=s.seed)
    pd.testing.assert_frame_equal(f.table, g.table, rtol=1e-10)
    assert f.table["pvalue"].between(0, 1, inclusive="right").all()
    # renaming the classes changes no statistic
    h = fit_factors(sc, fac.replace({"fen": "marsh", "bog": "mire"}), n_resamples=49,
                    rng=s.seed)
    assert h.table["r2"].iloc[0] == pytest.approx(f.table["r2"].iloc[0], abs=1e-12)
    if s.n >= 8:
        y = env["pH"].rename("pH")
        u = fit_surface(sc, y, smoothing=0.1, n_resamples=0)
        v = fit_surface(sc.loc[rows], y.loc[rows], smoothing=0.1, n_resamples=0)
        assert v.edf == pytest.approx(u.edf, abs=1e-8)
        pd.testing.assert_series_equal(v.fitted.loc[u.fitted.index], u.fitted, atol=1e-8)


@PROPERTY
@given(surveys, st.sampled_from(["bray-curtis", "jaccard", "hellinger", "gower"]))
def test_dissimilarities_symmetric_and_order_free(case, metric):
    s = Survey(*case)
    table = s.community
    rows = [s.labels[i] for i in s.order]
    d = dissimilarity(table, metric)
    square = d.square()
    np.testing.assert_array_equal(square, square.T)
    assert np.all(np.diag(square) == 0) and np.all(d.condensed >= 0)
    moved = dissimilarity(table.loc[rows], metric)
    np.testing.assert_allclose(moved.subset(s.labels).condensed, d.condensed, rtol=1e-12)
    mixed = pd.DataFrame({"ph": s.env[:, 0], "soil": s.classes.to_numpy(),
                          "wet": s.other[:, 0] > 0}, index=s.labels)
    gd = gower_distance(mixed)
    np.testing.assert_allclose(gower_distance(mixed.loc[rows]).subset(s.labels).condensed,
                               gd.condensed, rtol=1e-12)
    assert gd.condensed.max() <= 1 + 1e-12


@PROPERTY
@given(surveys)
def test_ordination_and_dbrda_order_free(case):
    s = Survey(*case)
    d = dissimilarity(s.community, "hellinger")
    rows = [s.labels[i] for i in s.order]
    a, b = pcoa(d), pcoa(d.subset(rows))
    np.testing.assert_allclose(a.eigenvalues.to_numpy(), b.eigenvalues.to_numpy(),
                               atol=1e-10)
    pred = s.frame(s.env, ["temp", "ph"])
    r = dbrda(d, pred, n_resamples=49, rng=s.seed)
    q = dbrda(d.subset(rows), pred.loc[rows], n_resamples=49, rng=s.seed)
    pd.testing.assert_frame_equal(r.table, q.table, rtol=1e-9, atol=1e-12)
    p = r.table["pvalue"].dropna()
    assert p.between(0, 1, inclusive="right").all()
