"""Gower's centred matrix and the batched trace kernel, against closed forms, the PCoA code and
brute-force permutation with numpy indexing."""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import numba
import numpy as np
import pytest
from scipy.spatial.distance import pdist, squareform

from gradients import InputError
from gradients.distance import (
    DistanceMatrix,
    gower_centred,
    permuted_products,
    permuted_traces,
)
from gradients.distance._centred import PermutedTraces, _cailliez_constant
from gradients.ordination import pcoa
from gradients.ordination._pcoa import cailliez_constant, lingoes_constant


def _labels(n):
    return [f"s{i}" for i in range(n)]


def _bray(n, seed):
    rng = np.random.default_rng(seed)
    counts = rng.poisson(2.0, size=(n, 12)) + rng.integers(0, 2, size=(n, 12))
    counts[:, 0] += 1
    return DistanceMatrix(pdist(counts, "braycurtis"), _labels(n), metric="bray-curtis")


def test_centred_matrix_of_euclidean_distances_is_the_cross_product_of_centred_data():
    # Gower (1966): for Euclidean distances among the rows of Y, -1/2 J D^2 J = Yc Yc'.
    y = np.random.default_rng(1).normal(size=(9, 4))
    g = gower_centred(DistanceMatrix(pdist(y), _labels(9)))
    yc = y - y.mean(axis=0)
    np.testing.assert_allclose(g.matrix, yc @ yc.T, atol=1e-12)
    # tr(G) = sum_{i<j} d_ij^2 / n (common identity: the total sum of squares from distances)
    assert g.total == pytest.approx(float(np.sum(pdist(y) ** 2) / 9), rel=1e-12)
    np.testing.assert_allclose(g.matrix.sum(axis=0), 0.0, atol=1e-12)
    assert not g.matrix.flags.writeable
    assert g.spectrum_notes() == ()


def test_eigenvalues_and_negative_report_agree_with_pcoa():
    # Two computations that must agree: the PCoA stage's eigenvalues of the same matrix.
    d = _bray(15, 2)
    g = gower_centred(d)
    ref = pcoa(d).eigenvalues.to_numpy()
    np.testing.assert_allclose(g.eigenvalues, ref, atol=1e-10)
    assert (g.eigenvalues < 0).any()
    (note,) = g.spectrum_notes()
    assert "not Euclidean" in note and "correction='lingoes'" in note
    neg = -ref[ref < 0].sum() / ref[ref > 0].sum()
    assert g.negative_share == pytest.approx(neg, rel=1e-9)


def test_lingoes_correction_adds_the_constant_to_the_spectrum_and_matches_pcoa_code():
    # Lingoes (1971): d' = sqrt(d^2 + 2c), c = -lambda_min; every non-trivial eigenvalue + c.
    d = _bray(14, 3)
    before = gower_centred(d)
    g = gower_centred(d, correction="lingoes")
    c = lingoes_constant(d.square())
    assert g.constant == pytest.approx(c, rel=1e-10)
    assert g.constant == pytest.approx(-before.eigenvalues.min(), rel=1e-10)
    # the cheap form G + cJ equals centring the corrected distances from scratch
    again = gower_centred(g.distances)
    np.testing.assert_allclose(g.matrix, again.matrix, atol=1e-12)
    assert g.eigenvalues.min() >= -1e-9 * g.eigenvalues.max()
    assert "Lingoes correction applied" in g.notes[0]


def test_cailliez_correction_matches_pcoa_code_and_makes_the_matrix_euclidean():
    # Cailliez (1983); the ordination stage's implementation is the second computation.
    d = _bray(16, 4)
    g = gower_centred(d, correction="cailliez")
    assert g.constant == pytest.approx(cailliez_constant(d.square()), rel=1e-8)
    np.testing.assert_allclose(squareform(g.distances.condensed),
                               d.square() + g.constant * (1 - np.eye(16)), atol=1e-12)
    assert g.eigenvalues.min() >= -1e-7 * g.eigenvalues.max()
    # the iterative path (used above 400 sites) gives the dense answer
    sq = d.square()
    a = -0.5 * sq**2
    j = np.eye(16) - 1 / 16
    assert _cailliez_constant(sq, j @ a @ j, dense_max=4) == pytest.approx(g.constant, rel=1e-7)


def test_correction_of_a_euclidean_matrix_does_nothing_and_says_so():
    y = np.random.default_rng(5).normal(size=(8, 3))
    d = DistanceMatrix(pdist(y), _labels(8))
    g = gower_centred(d, correction="cailliez")
    assert g.constant == 0.0 and g.distances is d
    assert "no correction was applied" in g.notes[0]


def test_bad_correction_and_tiny_matrix_are_refused():
    d = _bray(6, 1)
    with pytest.raises(InputError, match="`correction` must be one of 'lingoes', 'cailliez'"):
        gower_centred(d, correction="sqrt")
    with pytest.raises(InputError, match="at least 2 sites"):
        gower_centred(DistanceMatrix([], ["a"]))


# --------------------------------------------------------------------------- kernel
def _brute_traces(g, bases, orders):
    # The plain way: build every permuted matrix with np.ix_ and take tr(Q' G_o Q).
    return np.array([[np.trace(q.T @ g[np.ix_(o, o)] @ q) for q in bases] for o in orders])


def _setup(n, widths, seed=0, k=11):
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(n, n))
    g = a + a.T
    bases = [np.linalg.qr(rng.normal(size=(n, w)))[0] if w else np.empty((n, 0))
             for w in widths]
    orders = np.array([rng.permutation(n) for _ in range(k)])
    return g, bases, orders


@pytest.mark.parametrize("method", ["gather", "products"])
@pytest.mark.parametrize("widths", [(3,), (2, 5), (1, 4, 2), (0, 3)])
def test_batched_traces_equal_brute_force(method, widths):
    # two ways that must agree: the kernel and the explicit permuted matrices
    g, bases, orders = _setup(13, widths, k=11)  # 11: not a multiple of the 4-order groups
    got = PermutedTraces(g, bases, method=method)(orders)
    np.testing.assert_allclose(got, _brute_traces(g, bases, orders), rtol=1e-11, atol=1e-10)


def test_function_forms_and_identity_order():
    g, (q,), orders = _setup(10, (3,), seed=2, k=5)
    one = permuted_traces(g, q, orders)
    assert one.shape == (5,)
    np.testing.assert_allclose(one, _brute_traces(g, [q], orders)[:, 0], rtol=1e-11)
    ident = np.arange(10)[None, :]
    assert permuted_traces(g, q, ident)[0] == pytest.approx(np.trace(q.T @ g @ q), rel=1e-12)
    prods = permuted_products(g, q, orders)
    ref = np.array([q.T @ g[np.ix_(o, o)] @ q for o in orders])
    np.testing.assert_allclose(prods, ref, rtol=1e-11, atol=1e-11)


def test_kernel_is_the_same_on_one_or_two_threads_and_from_worker_threads():
    # the statistic of one order must not depend on who computes it (threads-safe kernel)
    g, bases, orders = _setup(40, (3, 6), seed=3, k=64)
    kernel = PermutedTraces(g, bases, method="gather")
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        serial = kernel(orders)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        parallel = kernel(orders)
    finally:
        numba.set_num_threads(before)
    np.testing.assert_array_equal(serial, parallel)

    def one_thread(chunk):
        numba.set_num_threads(1)
        return kernel(chunk)

    with ThreadPoolExecutor(max_workers=2) as pool:
        parts = list(pool.map(one_thread, np.array_split(orders, 4)))
    np.testing.assert_array_equal(np.vstack(parts), serial)


def test_kernel_input_errors():
    g, (q,), orders = _setup(6, (2,), k=2)
    with pytest.raises(InputError, match="must be a square matrix"):
        permuted_traces(g[:, :5], q, orders)
    with pytest.raises(InputError, match=r"one row per site \(6\)"):
        permuted_traces(g, q[:5], orders)
    with pytest.raises(InputError, match=r"`orders` must have shape \(k, 6\)"):
        permuted_traces(g, q, orders[:, :5])
    with pytest.raises(InputError, match="`bases` is empty"):
        PermutedTraces(g, [])
    with pytest.raises(InputError, match="`method` must be one of"):
        PermutedTraces(g, q, method="fast")
