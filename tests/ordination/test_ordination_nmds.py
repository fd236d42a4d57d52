"""NMDS against Kruskal's (1964a, b) stress-1 definition, recomputed independently with
scipy.optimize.isotonic_regression, and against known configurations."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import isotonic_regression
from scipy.spatial import procrustes
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.ordination import NMDSResult, nmds, stress_verdict
from gradients.ordination._kernels import MonotoneOrder, StressFunction, _sort_ties


def _labels(n: int) -> list[str]:
    return [f"site{i}" for i in range(n)]


def _truth(n: int = 18, seed: int = 0) -> np.ndarray:
    return np.random.default_rng(seed).uniform(0, 10, size=(n, 2))


def _stress_primary(scores: np.ndarray, delta: np.ndarray) -> tuple[float, np.ndarray]:
    """Kruskal (1964a) stress-1, primary approach to ties (Kruskal 1964b), written afresh."""
    d = pdist(scores)
    order = np.lexsort((d, delta))  # by dissimilarity, ties by distance
    fitted = np.empty_like(d)
    fitted[order] = isotonic_regression(d[order]).x
    return float(np.sqrt(np.sum((d - fitted) ** 2) / np.sum(d**2))), fitted


def _stress_secondary(scores: np.ndarray, delta: np.ndarray) -> float:
    """Stress-1 with tied dissimilarities sharing one fitted value (secondary approach)."""
    d = pdist(scores)
    _, inverse, counts = np.unique(delta, return_inverse=True, return_counts=True)
    means = np.bincount(inverse, weights=d) / counts
    fitted = isotonic_regression(means, weights=counts).x[inverse]
    return float(np.sqrt(np.sum((d - fitted) ** 2) / np.sum(d**2)))


def _tied_dissimilarities(n: int = 16, seed: int = 4) -> DistanceMatrix:
    # noisy, rounded to one decimal so that many values tie
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(n, 3))
    delta = np.round(pdist(x) + rng.normal(scale=0.3, size=n * (n - 1) // 2).clip(-0.5, 0.5), 1)
    return DistanceMatrix(np.abs(delta), _labels(n))


def test_reported_stress_matches_published_formula():
    dm = _tied_dissimilarities()
    delta = dm.condensed
    assert len(np.unique(delta)) < delta.size / 2  # many ties: the primary approach matters
    res = nmds(dm, starts=3, rng=11)
    assert isinstance(res, NMDSResult)
    stress, fitted = _stress_primary(res.scores.to_numpy(), delta)
    assert res.stress == pytest.approx(stress, rel=1e-10, abs=1e-12)
    assert 0.05 < res.stress < 0.5  # a noisy fit, not a trivial one
    # the Shepard data are those of the final configuration
    sh = res.shepard
    assert len(sh) == dm.n * (dm.n - 1) // 2
    merged = pd.Series(fitted, index=pd.MultiIndex.from_arrays(
        [np.array(dm.labels)[np.triu_indices(dm.n, 1)[0]],
         np.array(dm.labels)[np.triu_indices(dm.n, 1)[1]]]))
    got = sh.set_index(["site_a", "site_b"])["fitted"]
    np.testing.assert_allclose(got.loc[merged.index].to_numpy(), merged.to_numpy(), atol=1e-12)
    dist = sh.set_index(["site_a", "site_b"])["distance"]
    np.testing.assert_allclose(dist.loc[merged.index].to_numpy(), pdist(res.scores.to_numpy()),
                               rtol=1e-12)
    assert np.all(np.diff(sh["dissimilarity"].to_numpy()) >= 0)
    assert np.all(np.diff(sh["fitted"].to_numpy()) >= -1e-12)  # monotone step line


def test_secondary_approach_stress_matches_formula():
    dm = _tied_dissimilarities(seed=8)
    res = nmds(dm, starts=2, rng=3, ties="secondary")
    assert res.ties == "secondary"
    assert res.stress == pytest.approx(_stress_secondary(res.scores.to_numpy(), dm.condensed),
                                       rel=1e-10)
    # tied dissimilarities share one fitted value
    assert (res.shepard.groupby("dissimilarity")["fitted"].nunique() == 1).all()


def test_gradient_matches_finite_differences():
    # analytic gradient of stress-1 against central differences (theory: calculus)
    dm = _tied_dissimilarities(n=10, seed=1)
    mono = MonotoneOrder.build(np.asarray(dm.condensed))
    f = StressFunction(10, 2, mono)
    x = np.random.default_rng(0).normal(size=20)
    _, grad = f(x)
    h = 1e-6
    numeric = np.array([(f(x + h * e)[0] - f(x - h * e)[0]) / (2 * h) for e in np.eye(20)])
    np.testing.assert_allclose(grad, numeric, atol=1e-7)


@pytest.mark.parametrize("scramble", [False, True])
def test_tie_sort_is_a_stable_sort_of_each_block(scramble):
    # the result must not depend on which sort runs (insertion, or merge sort after too many
    # moves): each block ends as a stable sort of its previous order, equal distances included
    rng = np.random.default_rng(7)
    sizes = [2, 3, 31, 32, 33, 64, 65, 100, 257, 1000, 1500]
    bounds, pos = [], 0
    for size in sizes:
        pos += 1  # an untied pair between blocks
        bounds += [pos, pos + size]
        pos += size
    blocks = np.array(bounds, dtype=np.int64)
    ds = rng.integers(0, 40, size=pos + 1).astype(np.float64)  # many equal distances
    if not scramble:  # nearly sorted, as left by the previous evaluation
        for lo, hi in blocks.reshape(-1, 2):
            ds[lo:hi] = np.sort(ds[lo:hi])
            swap = rng.integers(lo, hi - 1, size=max(1, (hi - lo) // 20))
            ds[swap], ds[swap + 1] = ds[swap + 1], ds[swap].copy()
    pairs = np.arange(ds.size, dtype=np.uint32)
    want_d, want_p = ds.copy(), pairs.copy()
    for lo, hi in blocks.reshape(-1, 2):
        idx = np.argsort(ds[lo:hi], kind="stable")
        want_d[lo:hi] = ds[lo:hi][idx]
        want_p[lo:hi] = pairs[lo:hi][idx]
    longest = max(sizes)
    _sort_ties(ds, pairs, blocks, np.empty(longest), np.empty(longest, dtype=np.uint32))
    np.testing.assert_array_equal(ds, want_d)
    np.testing.assert_array_equal(pairs, want_p)


def test_recovers_configuration_from_monotone_dissimilarities():
    # Shepard-Kruskal: with dissimilarities a monotone function of true distances the
    # configuration is recovered up to similarity transformation, stress ~ 0
    x = _truth(18)
    delta = np.expm1(pdist(x) / 4.0) ** 1.5  # strictly increasing, strongly non-linear
    res = nmds(DistanceMatrix(delta, _labels(18)), starts=4, rng=5)
    assert res.stress < 0.01
    _, _, disparity = procrustes(x, res.scores.to_numpy())
    assert disparity < 1e-3
    assert res.converged and res.n_agreeing >= 2
    assert res.stress_verdict.startswith("excellent")


def test_same_rng_same_result_whatever_n_jobs():
    dm = _tied_dissimilarities(n=14, seed=6)
    one = nmds(dm, starts=4, rng=123, n_jobs=1)
    two = nmds(dm, starts=4, rng=123, n_jobs=2)
    pd.testing.assert_frame_equal(one.scores, two.scores, check_exact=True)
    pd.testing.assert_series_equal(one.start_stresses, two.start_stresses, check_exact=True)
    assert one.stress == two.stress
    gen = nmds(dm, starts=4, rng=np.random.default_rng(123))
    pd.testing.assert_frame_equal(one.scores, gen.scores, check_exact=True)
    other = nmds(dm, starts=4, rng=124)
    assert not np.array_equal(other.start_stresses.to_numpy()[1:],
                              one.start_stresses.to_numpy()[1:])


def test_final_solution_centred_principal_axes_scaled_and_oriented():
    dm = _tied_dissimilarities(n=15, seed=2)
    res = nmds(dm, starts=2, rng=1, dimensions=3)
    s = res.scores.to_numpy()
    assert list(res.scores.columns) == ["axis1", "axis2", "axis3"]
    assert list(res.scores.index) == list(dm.labels)
    np.testing.assert_allclose(s.mean(axis=0), 0.0, atol=1e-12)
    cov = s.T @ s
    np.testing.assert_allclose(cov - np.diag(np.diag(cov)), 0.0, atol=1e-9 * cov[0, 0])
    assert np.all(np.diff(np.diag(cov)) <= 0)  # axis1 has the largest variance
    # documented scale: RMS distance equals RMS dissimilarity
    assert np.sqrt(np.mean(pdist(s) ** 2)) == pytest.approx(
        np.sqrt(np.mean(dm.condensed**2)), rel=1e-10)
    assert np.all(s[np.argmax(np.abs(s), axis=0), np.arange(3)] > 0)


def test_start_bookkeeping_and_agreement():
    x = _truth(12, seed=3)
    res = nmds(DistanceMatrix(pdist(x) ** 2, _labels(12)), starts=5, rng=2)
    assert list(res.start_stresses.index) == ["pcoa", "random1", "random2", "random3",
                                              "random4"]
    assert res.stress == pytest.approx(res.start_stresses.min(), abs=1e-9)
    assert res.best_start in res.start_stresses.index
    t = res.table
    assert list(t.columns) == ["stress", "iterations", "reached_max_iter", "disparity",
                               "agrees"]
    assert res.n_agreeing == int(t["agrees"].sum())
    assert t.loc[res.best_start, "disparity"] == 0.0
    # the documented rule: stress within 1e-3 of the best and Procrustes disparity below 1e-3
    assert t["disparity"].notna().all()
    rule = (t["stress"] - t["stress"].min() <= 1e-3) & (t["disparity"] < 1e-3)
    pd.testing.assert_series_equal(t["agrees"], rule, check_names=False)
    single = nmds(DistanceMatrix(pdist(x) ** 2, _labels(12)), starts=1, rng=2)
    assert not single.converged and single.n_agreeing == 1
    assert any("one start" in note for note in single.notes)


def test_init_aligned_by_label():
    dm = _tied_dissimilarities(n=12, seed=5)
    rng = np.random.default_rng(0)
    init = pd.DataFrame(rng.normal(size=(12, 2)), index=dm.labels, columns=["a", "b"])
    res = nmds(dm, starts=1, init=init, rng=0)
    shuffled = nmds(dm, starts=1, init=init.iloc[::-1], rng=0)
    pd.testing.assert_frame_equal(res.scores, shuffled.scores)
    assert res.best_start == "init"
    with pytest.raises(InputError, match="site0"):
        nmds(dm, starts=1, init=init.iloc[1:], rng=0)
    with pytest.raises(InputError, match="dimensions=3"):
        nmds(dm, starts=1, init=init, dimensions=3, rng=0)


def test_stress_verdicts_follow_clarke_1993():
    # Clarke (1993) rule of thumb, from memory: <0.05 excellent, <0.1 good, <0.2 usable,
    # >0.3 close to arbitrary; the class 0.2-0.3 ("poor") is our own, marked as such in the
    # docstring. Every bound is checked from both sides.
    assert stress_verdict(0.03).startswith("excellent")
    assert stress_verdict(0.07).startswith("good")
    assert stress_verdict(0.15).startswith("usable with care")
    assert stress_verdict(0.25).startswith("poor")
    assert stress_verdict(0.35).startswith("close to arbitrary")
    assert stress_verdict(0.05).startswith("good")  # boundaries belong to the worse class
    for bound, below, at in ((0.05, "excellent", "good"), (0.10, "good", "usable with care"),
                             (0.20, "usable with care", "poor"),
                             (0.30, "poor", "close to arbitrary")):
        assert stress_verdict(np.nextafter(bound, 0)).startswith(below)
        assert stress_verdict(bound).startswith(at)
    assert "our own" in stress_verdict.__doc__


def test_input_errors():
    dm = _tied_dissimilarities(n=8)
    with pytest.raises(InputError, match="`dimensions` must be an integer of at least 1"):
        nmds(dm, dimensions=0)
    with pytest.raises(InputError, match="`starts` must be an integer of at least 1"):
        nmds(dm, starts=0)
    with pytest.raises(InputError, match="`ties` must be one of"):
        nmds(dm, ties="tertiary")
    with pytest.raises(InputError, match="`n_jobs`"):
        nmds(dm, n_jobs=0)
    with pytest.raises(InputError, match="`tol` must be a positive number"):
        nmds(dm, tol=-1.0)
    with pytest.raises(InputError, match="at least 5 sites"):
        nmds(DistanceMatrix(pdist(_truth(4)), _labels(4)), dimensions=3)
    with pytest.raises(InputError, match="All dissimilarities are equal"):
        nmds(DistanceMatrix(np.ones(28), _labels(8)))
    with pytest.raises(InputError, match="`rng`"):
        nmds(dm, rng=-1)
