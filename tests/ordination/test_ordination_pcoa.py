"""PCoA against theory: Gower (1966) recovery of Euclidean configurations, SVD eigenvalues, and the
Lingoes (1971) / Cailliez (1983) corrections."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial import procrustes
from scipy.spatial.distance import pdist, squareform

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.ordination import PCoAResult, pcoa


def _labels(n: int) -> list[str]:
    return [f"s{i:02d}" for i in range(n)]


def _points(n: int = 15, p: int = 3, seed: int = 0) -> np.ndarray:
    return np.random.default_rng(seed).normal(size=(n, p))


def _gower_eigenvalues(square: np.ndarray) -> np.ndarray:
    """Independent eigenvalues of the Gower-centred matrix (Gower 1966), numpy only."""
    n = square.shape[0]
    j = np.eye(n) - np.ones((n, n)) / n
    return np.sort(np.linalg.eigvalsh(j @ (-0.5 * square**2) @ j))[::-1]


def _non_euclidean(n: int = 14, seed: int = 3) -> DistanceMatrix:
    # Bray-Curtis among random abundances is a semimetric with negative eigenvalues
    # (Legendre & Legendre 2012, sect. 9.3.4); checked below that it has some.
    y = np.random.default_rng(seed).poisson(2.0, size=(n, 8)) + 0.0
    y[:, 0] += 1  # no empty site
    return DistanceMatrix(pdist(y, "braycurtis"), _labels(n))


def test_recovers_euclidean_configuration_exactly():
    # Gower (1966): PCoA of Euclidean distances gives the points back up to rotation/reflection
    x = _points()
    res = pcoa(DistanceMatrix(pdist(x), _labels(15)))
    assert isinstance(res, PCoAResult)
    assert list(res.scores.columns) == ["axis1", "axis2", "axis3"]
    assert list(res.scores.index) == _labels(15)
    _, _, disparity = procrustes(x, res.scores.to_numpy())
    assert disparity < 1e-10
    # and the distances among the scores are the input distances
    np.testing.assert_allclose(pdist(res.scores.to_numpy()), pdist(x), rtol=1e-10, atol=1e-12)


def test_eigenvalues_are_squared_singular_values_of_centred_data():
    # Gower (1966): G = Xc Xc', so its eigenvalues are the squared singular values of Xc
    x = _points(12, 4, seed=5)
    xc = x - x.mean(axis=0)
    sv2 = np.linalg.svd(xc, compute_uv=False) ** 2
    res = pcoa(DistanceMatrix(pdist(x), _labels(12)))
    assert len(res.eigenvalues) == 12
    np.testing.assert_allclose(res.eigenvalues.to_numpy()[:4], sv2, rtol=1e-10)
    assert np.all(res.eigenvalues.to_numpy()[4:] == 0.0)  # rounding noise reported as 0
    assert list(res.eigenvalues.index[:2]) == ["axis1", "axis2"]
    # proportions relative to the positive sum (documented)
    np.testing.assert_allclose(res.proportion_explained.to_numpy(), sv2 / sv2.sum(), rtol=1e-10)
    np.testing.assert_allclose(res.table["cumulative"].iloc[-1], 1.0)
    assert res.correction is None and res.constant == 0.0 and res.notes == ()


def test_scores_are_eigenvectors_times_root_eigenvalue():
    # Gower (1966): column k of the scores is u_k sqrt(lambda_k), so scores' scores = lambda
    x = _points(10, 2, seed=9)
    res = pcoa(DistanceMatrix(pdist(x, "cityblock"), _labels(10)))
    s = res.scores.to_numpy()
    lam = res.eigenvalues.to_numpy()[: s.shape[1]]
    np.testing.assert_allclose(s.T @ s, np.diag(lam), atol=1e-10 * lam[0])
    np.testing.assert_allclose(s.mean(axis=0), 0.0, atol=1e-12)


def test_sign_convention_largest_magnitude_score_positive():
    x = _points(11, 3, seed=2)
    res = pcoa(DistanceMatrix(pdist(x), _labels(11)))
    s = res.scores.to_numpy()
    assert np.all(s[np.argmax(np.abs(s), axis=0), np.arange(s.shape[1])] > 0)
    # reflecting the input changes nothing (distances are the same)
    again = pcoa(DistanceMatrix(pdist(-x), _labels(11)))
    pd.testing.assert_frame_equal(res.scores, again.scores)


def test_negative_eigenvalues_reported_with_share_in_notes():
    dm = _non_euclidean()
    reference = _gower_eigenvalues(dm.square())
    assert reference.min() < -1e-6  # the test needs a non-Euclidean matrix
    res = pcoa(dm)
    ev = res.eigenvalues.to_numpy()
    np.testing.assert_allclose(ev[np.abs(ev) > 0], reference[np.abs(ev) > 0], atol=1e-12)
    negative = reference[reference < -1e-9 * reference[0]]
    assert np.count_nonzero(ev < 0) == negative.size
    positive_sum = reference[reference > 1e-9 * reference[0]].sum()
    np.testing.assert_allclose(res.proportion_explained.sum(), 1.0)
    share = 100 * -negative.sum() / positive_sum
    assert any("negative" in note and f"{share:.3g}%" in note for note in res.notes)
    # scores only for the positive axes
    assert res.scores.shape[1] == np.count_nonzero(ev > 0)


def test_lingoes_correction():
    dm = _non_euclidean()
    original = _gower_eigenvalues(dm.square())
    res = pcoa(dm, correction="lingoes")
    # Lingoes (1971); Legendre & Legendre 2012 sect. 9.3.4: c = -lambda_min, d' = sqrt(d^2 + 2c)
    c = -original.min()
    assert res.correction == "lingoes"
    np.testing.assert_allclose(res.constant, c, rtol=1e-10)
    corrected = squareform(res.distances.condensed)
    expected = np.sqrt(dm.square() ** 2 + 2 * c)
    np.fill_diagonal(expected, 0.0)
    np.testing.assert_allclose(corrected, expected, rtol=1e-12)
    ev = res.eigenvalues.to_numpy()
    assert ev.min() >= -1e-9 * ev.max()
    # theory: every non-trivial eigenvalue moves up by c (the trivial one, vector 1, stays 0)
    trivial = np.argmin(np.abs(original))
    shifted = np.sort(np.delete(original, trivial) + c)[::-1]
    np.testing.assert_allclose(_gower_eigenvalues(corrected)[:-1], shifted, atol=1e-10)
    assert any("Lingoes" in note for note in res.notes)
    from gradients.ordination._pcoa import lingoes_constant

    assert lingoes_constant(dm.square()) == pytest.approx(c, rel=1e-10)


def test_cailliez_correction():
    dm = _non_euclidean()
    res = pcoa(dm, correction="cailliez")
    c = res.constant
    assert res.correction == "cailliez" and c > 0
    # Cailliez (1983): d' = d + c between distinct sites
    corrected = squareform(res.distances.condensed)
    expected = dm.square() + c
    np.fill_diagonal(expected, 0.0)
    np.testing.assert_allclose(corrected, expected, rtol=1e-12)
    ev = _gower_eigenvalues(corrected)
    assert ev.min() >= -1e-8 * ev.max()
    assert res.eigenvalues.min() >= 0.0
    # ... and c is the smallest such constant (Cailliez 1983): a little less leaves a negative one
    less = dm.square() + 0.99 * c
    np.fill_diagonal(less, 0.0)
    assert _gower_eigenvalues(less).min() < -1e-6 * ev.max()


def test_correction_on_euclidean_matrix_changes_nothing():
    x = _points(9, 2, seed=4)
    dm = DistanceMatrix(pdist(x), _labels(9))
    plain = pcoa(dm)
    for method in ("lingoes", "cailliez"):
        res = pcoa(dm, correction=method)
        assert res.constant == 0.0
        assert res.distances == dm
        pd.testing.assert_frame_equal(res.scores, plain.scores)
        assert any("no correction" in note for note in res.notes)


def test_truncated_solver_agrees_with_full():
    # Lanczos (scipy.sparse.linalg.eigsh) for the leading axes against the full decomposition
    x = np.random.default_rng(7).normal(size=(260, 5))
    dm = DistanceMatrix(pdist(x, "cityblock"), range(260))
    full = pcoa(dm)
    part = pcoa(dm, dimensions=3)
    np.testing.assert_allclose(part.scores.to_numpy(), full.scores.to_numpy()[:, :3],
                               atol=1e-8)
    # every eigenvalue is still reported, negative ones included
    np.testing.assert_allclose(part.eigenvalues.to_numpy(), full.eigenvalues.to_numpy(),
                               rtol=1e-9, atol=1e-9)
    assert (part.eigenvalues < 0).sum() > 0
    np.testing.assert_allclose(part.proportion_explained.to_numpy(),
                               full.proportion_explained.to_numpy(), rtol=1e-9)
    assert part.notes == full.notes


def test_dimensions_and_square_input():
    x = _points(8, 3, seed=1)
    square = pd.DataFrame(squareform(pdist(x)), index=list("abcdefgh"), columns=list("abcdefgh"))
    res = pcoa(square, dimensions=2)
    assert list(res.scores.columns) == ["axis1", "axis2"]
    assert list(res.scores.index) == list("abcdefgh")
    res = pcoa(square, dimensions=6)
    assert res.scores.shape[1] == 3
    assert any("only 3 eigenvalues are positive" in note for note in res.notes)


def test_input_errors():
    dm = DistanceMatrix(pdist(_points(5, 2)), _labels(5))
    with pytest.raises(InputError, match="`correction` must be one of"):
        pcoa(dm, correction="sqrt")
    with pytest.raises(InputError, match="`dimensions` must be a positive integer"):
        pcoa(dm, dimensions=0)
    with pytest.raises(InputError, match="All distances are zero"):
        pcoa(DistanceMatrix(np.zeros(10), _labels(5)))
    with pytest.raises(InputError, match="symmetric"):
        pcoa(np.array([[0, 1, 2], [1, 0, 3], [2, 4, 0.0]]))


def test_cailliez_iterative_solver_agrees_with_dense():
    # Arnoldi (scipy.sparse.linalg.eigs) on the block matrix vs the dense eigenvalues
    from gradients.ordination._pcoa import cailliez_constant

    square = _non_euclidean(n=40, seed=11).square()
    dense = cailliez_constant(square)
    iterative = cailliez_constant(square, dense_max=10)
    assert dense > 0
    assert iterative == pytest.approx(dense, rel=1e-9)
