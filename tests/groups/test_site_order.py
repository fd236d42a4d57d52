"""The order of the sites in the inputs does not change any result of the group tests (the
engine draws over label-sorted sites; PERMANOVA works on label-sorted sites throughout, so its
whole-unit exchanges do not depend on the row order either)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import DistanceMatrix, anosim, dispersion_test, mrpp, permanova


def _survey(seed=0):
    rng = np.random.default_rng(seed)
    zone = np.repeat(["a", "b", "c"], 8)
    site = np.tile(np.repeat(list("1234"), 2), 3)
    period = np.tile(["x", "y"], 12)
    y = rng.normal(size=(24, 3)) + (zone == "a")[:, None]
    sites = [f"q{i:02d}" for i in rng.permutation(24)]  # labels not in row order
    design = pd.DataFrame({"zone": zone, "site": site, "period": period}, index=sites)
    return DistanceMatrix(pdist(y), sites), design


def _shuffled(d, design, seed=1):
    order = np.random.default_rng(seed).permutation(d.n)
    labels = d.labels[order]
    return d.subset(labels), design.loc[labels[::-1]]


@pytest.mark.parametrize("terms", [["zone*period"], ["zone", "site(zone)", "period"]])
def test_permanova_same_whatever_the_row_order(terms):
    d, design = _survey()
    d2, design2 = _shuffled(d, design)
    one = permanova(d, design, terms=terms, rng=3, n_resamples=199)
    two = permanova(d2, design2, terms=terms, rng=3, n_resamples=199)
    pd.testing.assert_frame_equal(one.table, two.table, check_exact=False, rtol=1e-9)
    pd.testing.assert_frame_equal(one.pairwise, two.pairwise, check_exact=False, rtol=1e-9)
    for t, r in one.dispersion.items():
        assert r.pvalue == two.dispersion[t].pvalue
        # distances to centroids come back in the order of the given distance matrix
        assert list(two.dispersion[t].distances.index) == list(d2.labels)


@pytest.mark.parametrize("fn", [anosim, mrpp, dispersion_test])
def test_group_tests_same_whatever_the_row_order(fn):
    d, design = _survey(4)
    d2, design2 = _shuffled(d, design, seed=5)
    one = fn(d, design["zone"], rng=6, n_resamples=199)
    two = fn(d2, design2["zone"], rng=6, n_resamples=199)
    assert one.statistic == pytest.approx(two.statistic, rel=1e-12)
    assert one.pvalue == two.pvalue and not one.exact
