"""DistanceMatrix: validation messages, metric and Euclidean properties."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist, squareform

from gradients import InputError
from gradients.distance import DistanceMatrix, as_distance_matrix


def _square(rows, labels):
    return pd.DataFrame(np.asarray(rows, dtype=float), index=labels, columns=labels)


# ------------------------------------------------------------------ validation names the cells
def test_asymmetric_cell_named():
    df = _square([[0, 1, 2], [1, 0, 3], [2, 3.5, 0]], ["a", "b", "c"])
    with pytest.raises(InputError, match=r"symmetric.*\('b', 'c'\)"):
        DistanceMatrix.from_frame(df)


def test_nonzero_diagonal_named():
    df = _square([[0, 1], [1, 0.2]], ["a", "b"])
    with pytest.raises(InputError, match=r"diagonal; non-zero at 'b'"):
        DistanceMatrix.from_square(df)


def test_missing_cell_named():
    df = _square([[0, np.nan], [np.nan, 0]], ["a", "b"])
    with pytest.raises(InputError, match=r"finite.*\('a', 'b'\)"):
        DistanceMatrix.from_square(df)


def test_negative_pair_named():
    with pytest.raises(InputError, match=r"non-negative; negative for \('x', 'z'\)"):
        DistanceMatrix([1.0, -2.0, 3.0], ["x", "y", "z"])


def test_not_square():
    with pytest.raises(InputError, match="square"):
        DistanceMatrix.from_square(np.zeros((2, 3)))


def test_from_frame_is_from_square_and_round_trips():
    df = _square([[0, 1, 2], [1, 0, 3], [2, 3, 0]], ["a", "b", "c"])
    d = DistanceMatrix.from_frame(df, metric="test")
    assert d == DistanceMatrix.from_square(df)
    pd.testing.assert_frame_equal(d.to_frame(), df)
    assert as_distance_matrix(df) == d
    assert d["c", "b"] == 3.0


# ------------------------------------------------------------------ is_metric
def test_triangle_violation_found():
    # hand-built: d(a, c) = 3 > d(a, b) + d(b, c) = 2 (theory: triangle inequality)
    d = DistanceMatrix([1.0, 3.0, 1.0], ["a", "b", "c"])
    assert not d.is_metric()
    assert not d.is_metric(sample=2000, rng=1)


def test_euclidean_points_are_metric_exact_and_sampled():
    x = np.random.default_rng(3).normal(size=(40, 3))
    d = DistanceMatrix(pdist(x), range(40))
    assert d.is_metric()
    assert d.is_metric(sample=5000, rng=2)


def test_large_violation_found_by_sampling():
    # n above the exact limit, so triples are sampled. Sites 1..519 are 0.5 apart; site 0 is
    # 1.0 from the first half and 1.4 from the second: metric (1.4 <= 1.0 + 0.5).
    n = 520
    sq = np.full((n, n), 0.5)
    half = np.arange(1, n) >= n // 2
    sq[0, 1:] = sq[1:, 0] = np.where(half, 1.4, 1.0)
    np.fill_diagonal(sq, 0)
    assert DistanceMatrix(squareform(sq), range(n)).is_metric(rng=0)
    # now 2.0 > 1.0 + 0.5 for every (0, far, near) triple: about 1 sampled triple in 1000
    sq[0, 1:] = sq[1:, 0] = np.where(half, 2.0, 1.0)
    assert not DistanceMatrix(squareform(sq), range(n)).is_metric(rng=0)


def test_is_metric_checks_arguments():
    d = DistanceMatrix([1.0, 1.0, 1.0], ["a", "b", "c"])
    with pytest.raises(InputError, match="`sample` must be a positive integer"):
        d.is_metric(sample=0)


# ------------------------------------------------------------------ is_euclidean
def test_points_are_euclidean():
    # theory: distances between points of R^3 are Euclidean (Gower 1966)
    x = np.random.default_rng(5).normal(size=(25, 3))
    assert DistanceMatrix(pdist(x), range(25)).is_euclidean()
    assert DistanceMatrix(pdist(x), range(25), dtype=np.float32).is_euclidean()


def test_star_metric_is_not_euclidean():
    # Hand-built 4-point example (theory): a centre c at 1 from three leaves that are 2 apart.
    # It is metric, but in a Euclidean space c would have to be the midpoint of every pair of
    # leaves, impossible for three distinct leaves; so G = -1/2 J D^2 J has a negative
    # eigenvalue.
    sq = np.array([[0, 1, 1, 1], [1, 0, 2, 2], [1, 2, 0, 2], [1, 2, 2, 0.0]])
    d = DistanceMatrix.from_square(sq, labels=["c", "x", "y", "z"])
    assert d.is_metric()
    assert not d.is_euclidean()


def test_float32_storage_size_for_5000_sites():
    # memory: 5000 sites stored condensed as float32 take n(n-1)/2 * 4 bytes = 50 MB
    n = 5000
    d = DistanceMatrix(np.zeros(n * (n - 1) // 2, dtype=np.float32), range(n),
                       dtype=np.float32, validate=False)
    assert d.condensed.nbytes == n * (n - 1) // 2 * 4
    assert d.condensed.nbytes < 2**30 / 20


def test_condensed_position_inverse_matches_numpy():
    # reference library: numpy.triu_indices gives the (i, j) of every condensed position
    from gradients.distance._tables import condensed_positions_for, pair_of_position

    for n in (2, 3, 7, 5000):
        i, j = np.triu_indices(n, k=1)
        pos = np.unique(np.r_[0, i.size - 1, np.random.default_rng(n).integers(0, i.size, 999)])
        pi, pj = pair_of_position(pos, n)
        np.testing.assert_array_equal(pi, i[pos])
        np.testing.assert_array_equal(pj, j[pos])
    n = 9
    i, j = np.triu_indices(n, k=1)
    for site in range(n):
        np.testing.assert_array_equal(np.sort(condensed_positions_for(site, n)),
                                      np.flatnonzero((i == site) | (j == site)))
