"""The same data in another row order gives the same permutation results for the same seed.

Theory: a permutation test's null distribution is a property of the data, not of the order of
the rows; the engine draws its random orders over the sites sorted by label, so shuffling the
input rows must leave every p-value unchanged (and exact tests were invariant already).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from gradients.fitting import fit_factors, fit_surface, fit_vectors


def _data(n=40, seed=0):
    rng = np.random.default_rng(seed)
    sites = pd.Index([f"plot-{i:03d}" for i in rng.permutation(n)], name="site")
    sc = pd.DataFrame(rng.normal(size=(n, 2)), index=sites, columns=["axis1", "axis2"])
    env = pd.DataFrame({"pH": 0.4 * sc.axis1 + rng.normal(size=n),
                        "clay": rng.normal(size=n), "zinc": 0.3 * sc.axis2 + rng.normal(size=n)},
                       index=sites)
    fac = pd.DataFrame({"habitat": rng.choice(["fen", "bog", "carr"], size=n)}, index=sites)
    strata = pd.Series(np.where(np.arange(n) % 2 == 0, "north", "south"), index=sites)
    return sc, env, fac, strata


@pytest.mark.parametrize("with_strata", [False, True])
def test_vectors_and_factors_do_not_depend_on_row_order(with_strata):
    sc, env, fac, strata = _data()
    shuffled = np.random.default_rng(9).permutation(len(sc))
    sc2, env2, fac2 = sc.iloc[shuffled], env.iloc[shuffled], fac.iloc[shuffled]
    st = strata if with_strata else None
    a = fit_vectors(sc, env, n_resamples=199, rng=4, strata=st)
    b = fit_vectors(sc2, env2, n_resamples=199, rng=4, strata=st)
    pd.testing.assert_series_equal(a.pvalue, b.pvalue)
    np.testing.assert_allclose(np.sort(a.null_distribution, axis=0),
                               np.sort(b.null_distribution, axis=0), rtol=1e-12)
    fa = fit_factors(sc, fac, n_resamples=199, rng=4, strata=st)
    fb = fit_factors(sc2, fac2, n_resamples=199, rng=4, strata=st)
    pd.testing.assert_series_equal(fa.pvalue, fb.pvalue)


def test_surface_does_not_depend_on_row_order():
    sc, env, _, _ = _data(n=60, seed=3)
    shuffled = np.random.default_rng(2).permutation(len(sc))
    a = fit_surface(sc, env["pH"], n_resamples=99, rng=5)
    b = fit_surface(sc.iloc[shuffled], env["pH"].iloc[shuffled], n_resamples=99, rng=5)
    assert a.pvalue == b.pvalue
    np.testing.assert_allclose(np.sort(a.null_distribution), np.sort(b.null_distribution),
                               rtol=1e-8)


def test_gappy_columns_do_not_depend_on_column_order_or_company():
    # With missing='complete' each set of sites with values has its own random stream keyed
    # by its site labels: a column's p-value is the same whatever the column order and
    # whichever other columns are in the call.
    sc, env, _, _ = _data()
    env = env.copy()
    env.iloc[[1, 5, 9], 0] = np.nan  # pH has gaps
    a = fit_vectors(sc, env[["pH", "clay", "zinc"]], missing="complete", rng=3).pvalue
    b = fit_vectors(sc, env[["zinc", "clay", "pH"]], missing="complete", rng=3).pvalue
    alone = fit_vectors(sc, env[["pH"]], missing="complete", rng=3).pvalue
    full = fit_vectors(sc, env[["clay"]], rng=3).pvalue
    pd.testing.assert_series_equal(a, b[a.index])
    assert a["pH"] == alone["pH"] and a["clay"] == full["clay"]
