"""float32 storage in the Mantel family: the bound on r and on p against float64 runs.

Outside source for the bound: closed-form rounding theory. A float32 value carries a relative
error of at most u = 2**-24 (IEEE 754 round to nearest; Higham, Accuracy and Stability of
Numerical Algorithms, 2nd ed. 2002, section 2.2); the product of two float32 values is exact
in float64 (24 + 24 significant bits < 53); recursive summation of N terms errs by at most
about N 2**-53 times the sum of their magnitudes (Higham section 4.2); and
sum |a_k b_k| <= |a| |b| (Cauchy-Schwarz). The derivation is in gradients.matrix._precision.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy.spatial.distance import pdist

from gradients import DistanceMatrix, InputError, mantel, partial_mantel
from gradients.matrix._precision import FLOAT32_UNIT, float32_bound

U = FLOAT32_UNIT


def _data(n, seed, rho=0.3):
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(n, 3))
    b = rho * a + rng.normal(size=(n, 3))
    z = 0.5 * a[:, :2] + rng.normal(size=(n, 2))
    return pdist(a), pdist(b), pdist(z)


@pytest.mark.parametrize("seed", [0, 1])
def test_float32_storage_of_float64_inputs_within_theory(seed):
    n = 120
    x, y, _ = _data(n, seed)
    lab = range(n)
    r64 = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), n_resamples=999, rng=seed)
    r32 = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), n_resamples=999, rng=seed,
                 dtype=np.float32)
    # theory: storage 2u + u^2, summation 4 n 2**-53 (float64 inputs: no kappa term)
    eps = 2 * U + U * U + 4 * n * 2.0**-53
    assert float32_bound(x, y, n) == pytest.approx(eps)
    assert abs(r32.statistic - r64.statistic) <= eps
    assert np.max(np.abs(r32.null_distribution - r64.null_distribution)) <= eps
    # the bound is worst-case: actual rounding errors largely cancel (far below eps), but the
    # difference is not zero, so float32 was really used
    assert 0 < np.max(np.abs(r32.null_distribution - r64.null_distribution)) < eps / 10
    near = np.count_nonzero(np.abs(r64.null_distribution - r64.statistic) <= 2 * eps)
    assert abs(r32.pvalue - r64.pvalue) * 1000 <= near
    assert any(note.startswith("Stored in float32") for note in r32.notes)


def test_float32_distances_add_the_centring_term():
    n = 150
    x, y, _ = _data(n, 3)
    lab = range(n)
    x32, y32 = (DistanceMatrix(v, lab, dtype=np.float32) for v in (x, y))
    r64 = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), n_resamples=499, rng=2)
    r32 = mantel(x32, y32, n_resamples=499, rng=2, dtype=np.float32)
    kappa = [np.sqrt(1 + v.mean() ** 2 / v.var()) for v in (x, y)]
    eps = 2 * U + U * U + 4 * n * 2.0**-53 + 2 * U * sum(kappa)
    assert float32_bound(x32.condensed, y32.condensed, n) == pytest.approx(eps, rel=1e-6)
    assert np.max(np.abs(r32.null_distribution - r64.null_distribution)) <= eps
    assert abs(r32.statistic - r64.statistic) <= eps


def test_spearman_float32_of_float64_inputs():
    n = 80
    x, y, _ = _data(n, 4)
    lab = range(n)
    kw = {"method": "spearman", "n_resamples": 499, "rng": 5}
    r64 = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), **kw)
    r32 = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), dtype="float32", **kw)
    eps = float32_bound(x, y, n, ranked=True)
    assert np.max(np.abs(r32.null_distribution - r64.null_distribution)) <= eps
    assert r32.pvalue == r64.pvalue


def test_exact_ties_survive_float32():
    # Six points of a regular hexagon: the 12 symmetries of the hexagon map the matrix onto
    # itself, so 12 of the 720 orders tie the observed r exactly (exact enumeration; the
    # symmetry group of the hexagon has order 12, common practice). Ties are where float32
    # could move p; the stored values are the same at symmetric positions, so it does not.
    t = np.arange(6) * np.pi / 3
    pts = np.c_[np.cos(t), np.sin(t)]
    rng = np.random.default_rng(0)
    x = DistanceMatrix(pdist(pts), range(6))
    y = DistanceMatrix(pdist(pts + rng.normal(scale=0.01, size=pts.shape)), range(6))
    r64 = mantel(x, x, n_resamples=999, rng=1)
    r32 = mantel(x, x, n_resamples=999, rng=1, dtype=np.float32)
    assert r64.exact and r32.exact
    assert r64.pvalue == r32.pvalue == pytest.approx(12 / 720)
    assert "12 permuted value(s) are near enough" in " ".join(r32.notes)
    r64 = mantel(x, y, n_resamples=999, rng=1)
    r32 = mantel(x, y, n_resamples=999, rng=1, dtype=np.float32)
    assert r64.pvalue == r32.pvalue


def test_partial_mantel_float32_within_its_bound():
    n = 100
    x, y, z = _data(n, 6)
    lab = range(n)
    rng = np.random.default_rng(7)
    w = pdist(rng.normal(size=(n, 2)))
    d = {k: DistanceMatrix(v, lab) for k, v in dict(x=x, y=y, z=z, w=w).items()}
    kw = {"n_resamples": 499, "rng": 8}
    r64 = partial_mantel(d["x"], d["y"], {"z": d["z"], "w": d["w"]}, **kw)
    r32 = partial_mantel(d["x"], d["y"], {"z": d["z"], "w": d["w"]}, dtype=np.float32, **kw)
    note = next(s for s in r32.notes if s.startswith("Stored in float32"))
    eps = float(note.split("within ")[1].split(" of")[0])
    # first-order bound delta (1/w + |r| sqrt(k)/w^2) >= delta
    assert eps >= 2 * U
    assert np.max(np.abs(r32.null_distribution - r64.null_distribution)) <= eps
    assert r32.statistic == r64.statistic  # the observed value is computed in float64
    assert r32.pvalue == r64.pvalue


def test_float32_refused_for_kendall_and_unknown_types():
    x, y, _ = _data(10, 0)
    lab = range(10)
    with pytest.raises(InputError, match="Kendall"):
        mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), method="kendall",
               dtype=np.float32, n_resamples=9, rng=0)
    with pytest.raises(InputError, match="float64 or float32"):
        mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), dtype=np.float16,
               n_resamples=9, rng=0)


def test_float64_default_unchanged_by_the_option():
    # the default path is the one the suite has always run: passing float64 explicitly is
    # the same computation, bit for bit
    x, y, _ = _data(40, 9)
    lab = range(40)
    a = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), n_resamples=199, rng=3)
    b = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), n_resamples=199, rng=3,
               dtype=np.float64)
    assert a.statistic == b.statistic
    np.testing.assert_array_equal(a.null_distribution, b.null_distribution)
    assert not any(n.startswith("Stored in float32") for n in a.notes)


def test_enumerated_orders_agree_one_by_one():
    # every one of the 5! orders of a 5-site problem, float32 against float64
    rng = np.random.default_rng(11)
    x, y = pdist(rng.normal(size=(5, 2))), pdist(rng.normal(size=(5, 2)))
    lab = range(5)
    r64 = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), n_resamples=999, rng=1)
    r32 = mantel(DistanceMatrix(x, lab), DistanceMatrix(y, lab), n_resamples=999, rng=1,
                 dtype=np.float32)
    assert r64.n_resamples == len(list(itertools.permutations(range(5))))
    eps = float32_bound(x, y, 5)
    assert np.max(np.abs(r32.null_distribution - r64.null_distribution)) <= eps
