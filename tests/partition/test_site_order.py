"""The partition stage gives the same answers, p-values included, whatever order the sites
come in (theory: the tests are properties of the data, not of the row order; the engine draws
its random orders over the label-sorted sites)."""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.partition import forward_select, partition_variation, spatial_eigenvectors


def _survey(n=40, seed=3):
    rng = np.random.default_rng(seed)
    lab = [f"site-{i:02d}" for i in rng.permutation(n)]
    xy = rng.uniform(0, 50, size=(n, 2))
    env = pd.DataFrame({"a": rng.normal(size=n) + xy[:, 0] / 25, "b": rng.normal(size=n),
                        "f": rng.choice(["x", "y"], size=n)}, index=lab)
    y = np.column_stack([env["a"], np.sin(xy[:, 1] / 8)]) @ rng.normal(size=(2, 4))
    d = DistanceMatrix(pdist(y + rng.normal(size=(n, 4))), lab)
    return d, env, DistanceMatrix(pdist(xy), lab), lab


def test_spatial_eigenvectors_and_selection_do_not_depend_on_site_order():
    d, _env, geo, lab = _survey()
    order = list(np.random.default_rng(0).permutation(lab))
    a = spatial_eigenvectors(geo)
    b = spatial_eigenvectors(geo.subset(order))
    pd.testing.assert_frame_equal(a.vectors.loc[order], b.vectors, atol=1e-8)
    pd.testing.assert_frame_equal(a.table, b.table, atol=1e-8)
    sa = forward_select(d, a.vectors, n_resamples=199, rng=4)
    sb = forward_select(d.subset(order), b.vectors.loc[lab], n_resamples=199, rng=4)
    assert sa.selected == sb.selected
    np.testing.assert_array_equal(sa.table["pvalue"], sb.table["pvalue"])


def test_partition_does_not_depend_on_site_order():
    d, env, geo, lab = _survey(seed=5)
    space = spatial_eigenvectors(geo).vectors.iloc[:, :4]
    order = list(np.random.default_rng(1).permutation(lab))
    a = partition_variation(d, env, space, n_resamples=199, rng=6)
    b = partition_variation(d.subset(order), env.loc[order], space, n_resamples=199, rng=6)
    pd.testing.assert_frame_equal(a.table, b.table, atol=1e-10)
