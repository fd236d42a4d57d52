"""Multiplicity adjustment checked against the reference library and the definitions."""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests

from gradients.permutation import adjust_pvalues


@pytest.mark.parametrize("method", ["holm", "fdr_bh"])
@pytest.mark.parametrize("m", [1, 2, 7, 40])
def test_matches_statsmodels_multipletests(method, m):
    # Reference library: statsmodels.stats.multitest.multipletests, same method names.
    rng = np.random.default_rng(m)
    for _ in range(20):
        p = rng.uniform(size=m) ** 3
        p[rng.uniform(size=m) < 0.3] = p[0]  # ties, as permutation p-values often have
        np.testing.assert_allclose(adjust_pvalues(p, method), multipletests(p, method=method)[1],
                                   rtol=1e-14, atol=0)


def test_holm_and_bh_by_hand():
    # Holm (1979): sorted p times (m, m-1, ..., 1), running maximum. BH (1995): m p_(i) / i,
    # running minimum from the top. Worked by hand for p = (0.01, 0.04, 0.03, 0.2).
    p = np.array([0.01, 0.04, 0.03, 0.2])
    np.testing.assert_allclose(adjust_pvalues(p, "holm"), [0.04, 0.09, 0.09, 0.2])
    np.testing.assert_allclose(adjust_pvalues(p, "fdr_bh"), [0.04, 0.04 * 4 / 3, 0.04 * 4 / 3,
                                                              0.2])


def test_nan_left_out_of_the_family_and_cap_at_one():
    p = np.array([0.5, np.nan, 0.6, 0.01])
    out = adjust_pvalues(p, "holm")
    assert np.isnan(out[1])
    np.testing.assert_allclose(out[[0, 2, 3]], multipletests(p[[0, 2, 3]], method="holm")[1])
    assert np.nanmax(out) <= 1.0
    assert np.isnan(adjust_pvalues([np.nan], "fdr_bh")).all()
    np.testing.assert_array_equal(adjust_pvalues(p, None), p)


def test_bad_method_named():
    with pytest.raises(ValueError, match="method"):
        adjust_pvalues([0.1], "bonferroni-ish")
