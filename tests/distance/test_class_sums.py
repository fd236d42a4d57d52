"""The class-block kernel beside the trace kernel: two ways (np.ix_ on every rearranged block;
the trace kernel against the centred class basis) must agree."""

from __future__ import annotations

import numpy as np
import pytest

from gradients import InputError
from gradients.distance._centred import permuted_traces
from gradients.distance._class_sums import PermutedClassSums


def test_class_sums_equal_the_rearranged_blocks():
    rng = np.random.default_rng(0)
    a = rng.normal(size=(23, 23))
    m = a + a.T
    codes = rng.integers(0, 4, size=23)
    orders = np.array([rng.permutation(23) for _ in range(17)])
    got = PermutedClassSums(m, codes)(orders)
    for b, o in enumerate(orders):
        mo = m[np.ix_(o, o)]
        for c in range(4):
            idx = np.flatnonzero(codes == c)
            assert got[b, c] == pytest.approx(mo[np.ix_(idx, idx)].sum(), rel=1e-12)


def test_one_way_sum_of_squares_equals_the_trace_kernel():
    # tr(Q' G_o Q) for the orthonormal basis of the centred class indicators equals
    # sum_c S_c / n_c when G's rows sum to zero (Gower's centred matrix)
    rng = np.random.default_rng(1)
    y = rng.normal(size=(30, 3))
    yc = y - y.mean(axis=0)
    g = yc @ yc.T
    codes = np.repeat([0, 1, 2], [7, 10, 13])
    x = np.eye(3)[codes]
    q, _ = np.linalg.qr(x - x.mean(axis=0))
    q = q[:, :2]
    orders = np.array([rng.permutation(30) for _ in range(9)])
    sums = PermutedClassSums(g, codes)(orders)
    np.testing.assert_allclose((sums / np.bincount(codes)).sum(axis=1),
                               permuted_traces(g, q, orders), rtol=1e-10)


def test_class_sums_refuse_bad_codes():
    with pytest.raises(InputError, match="class number"):
        PermutedClassSums(np.eye(3), np.array([0, 1]))


def test_row_sums_within_blocks_equal_the_rearranged_rows():
    # two ways: each class's multiset of (row sum within the block, diagonal entry) equals the
    # one computed with np.ix_ on the rearranged matrix
    rng = np.random.default_rng(2)
    a = rng.normal(size=(14, 14))
    m = a + a.T
    codes = rng.integers(0, 3, size=14)
    kernel = PermutedClassSums(m, codes)
    orders = np.array([rng.permutation(14) for _ in range(6)])
    rows, diag = kernel.rows(orders)
    for b, o in enumerate(orders):
        mo = m[np.ix_(o, o)]
        for c in range(3):
            idx = np.flatnonzero(codes == c)
            lo, hi = kernel.bounds[c], kernel.bounds[c + 1]
            expected = sorted(zip(mo[np.ix_(idx, idx)].sum(axis=1), np.diag(mo)[idx],
                                  strict=True))
            got = sorted(zip(rows[b, lo:hi], diag[b, lo:hi], strict=True))
            np.testing.assert_allclose(np.array(got), np.array(expected), rtol=1e-12)
