"""The compiled moments of surrogate distances and the Pearson statistics built on them.

Sources: scipy's ``pdist`` (the reference library for the distances); the algebra of least
squares for the partial correlation (the residual of ``d`` on an intercept and orthonormal
controls ``Q`` has squared length ``|d - mean(d)|^2 - |Q' d|^2`` and the same product as ``d``
with any vector orthogonal to them; e.g. Seber & Lee, *Linear Regression Analysis*, 2nd ed.,
chapter 3); and the surrogates' own definition in Wagner & Dray (2015) for the path that
builds each surrogate's distances one at a time, against which the batched path is checked.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.distance import pdist

import gradients.matrix._mantel as mantel_module
import gradients.matrix._partial as partial_module
import gradients.matrix._spatial_check as spatial_module
from gradients import DistanceMatrix, mantel, partial_mantel
from gradients.matrix._kernels import numba_threads
from gradients.matrix._spatial import MoranSurrogates, spatial_weights
from gradients.matrix._spatial_check import PearsonForm
from gradients.matrix._surrogate_kernels import surrogate_moments


@pytest.mark.parametrize(("k", "n", "p", "n_f"), [(1, 2, 1, 1), (3, 3, 2, 2), (5, 17, 3, 1),
                                                 (9, 40, 1, 4), (4, 25, 6, 3)])
def test_moments_equal_sums_over_scipy_distances(k: int, n: int, p: int, n_f: int) -> None:
    rng = np.random.default_rng(k * 100 + n)
    z = rng.normal(size=(k, n, p))
    f = rng.normal(size=(n * (n - 1) // 2, n_f))
    shift = 0.3
    got = surrogate_moments(z, f.T, shift)
    for b in range(k):
        d = pdist(z[b])  # reference: scipy
        want = np.concatenate([d @ f, [np.sum(d - shift), np.sum((d - shift) ** 2)]])
        np.testing.assert_allclose(got[b], want, rtol=1e-12, atol=1e-12 * np.abs(want).max())


def test_moments_do_not_depend_on_threads_or_batch_split() -> None:
    rng = np.random.default_rng(3)
    z = rng.normal(size=(11, 60, 3))
    f = rng.normal(size=(2, 60 * 59 // 2))
    with numba_threads(1):
        one = surrogate_moments(z, f, 1.0)
    with numba_threads(2):
        two = surrogate_moments(z, f, 1.0)
        parts = np.vstack([surrogate_moments(z[:5], f, 1.0), surrogate_moments(z[5:], f, 1.0)])
    assert np.array_equal(one, two) and np.array_equal(one, parts)


def test_pearson_form_is_the_simple_and_the_partial_correlation() -> None:
    rng = np.random.default_rng(8)
    n = 30
    m = n * (n - 1) // 2
    y = rng.normal(size=m)
    controls = rng.normal(size=(m, 2))
    d = np.abs(rng.normal(size=m)) + 1.0
    # simple: Pearson r of d and y (numpy's corrcoef as the reference)
    ys = (y - y.mean()) / np.linalg.norm(y - y.mean())
    moments = np.concatenate([d @ ys[:, None], [np.sum(d - 1.0), np.sum((d - 1.0) ** 2)]])
    simple = PearsonForm(ys[None, :]).values(moments[None])[0]
    assert simple == pytest.approx(np.corrcoef(d, y)[0, 1], rel=1e-12)
    # partial: correlation of the least-squares residuals of d and y on [1, controls]
    design = np.column_stack([np.ones(m), controls])
    def resid(v: np.ndarray) -> np.ndarray:
        return v - design @ np.linalg.lstsq(design, v, rcond=None)[0]
    q, _ = np.linalg.qr(controls - controls.mean(axis=0))
    e_y = resid(y)
    fixed = np.column_stack([e_y, q])
    moments = np.concatenate([d @ fixed, [np.sum(d - 1.0), np.sum((d - 1.0) ** 2)]])
    partial = PearsonForm(fixed.T.copy(), float(np.linalg.norm(e_y))).values(moments[None])[0]
    assert partial == pytest.approx(np.corrcoef(resid(d), e_y)[0, 1], rel=1e-10)


def test_batched_coordinates_equal_one_product_per_surrogate() -> None:
    rng = np.random.default_rng(4)
    xy = rng.uniform(size=(25, 2))
    msr = MoranSurrogates.from_coordinates(rng.normal(size=(25, 3)), spatial_weights(pdist(xy)))
    signs = msr.draw(rng, 7)
    batch = msr.batch_coordinates(signs)
    for b in range(7):
        np.testing.assert_allclose(batch[b], msr.coordinates(signs[b]), rtol=0, atol=1e-12)


@pytest.mark.parametrize("test", ["mantel", "partial"])
def test_the_compiled_null_gives_the_p_values_of_the_surrogate_by_surrogate_path(
        test: str, monkeypatch: pytest.MonkeyPatch) -> None:
    rng = np.random.default_rng(11)
    n = 40
    xy = rng.uniform(size=(n, 2))
    env = np.column_stack([xy[:, 0] + rng.normal(scale=0.5, size=n), rng.normal(size=n)])
    com = np.column_stack([env[:, 0] + rng.normal(scale=0.5, size=n), rng.normal(size=n)])
    labels = [f"s{i}" for i in range(n)]
    x, y = DistanceMatrix(pdist(env), labels), DistanceMatrix(pdist(com), labels)
    z = DistanceMatrix(pdist(xy[:, 1:] + rng.normal(scale=0.3, size=(n, 1))), labels)

    def run() -> object:
        if test == "mantel":
            return mantel(x, y, n_resamples=99, rng=2, spatial_null=xy, n_surrogates=199)
        return partial_mantel(x, y, [z], n_resamples=99, rng=2, spatial_null=xy,
                              n_surrogates=199)

    fast = run()
    real = spatial_module.spatial_check

    def one_by_one(*args: object, form: object = None, **kwargs: object) -> object:
        return real(*args, **kwargs)  # the statistic evaluated on each surrogate's pdist

    monkeypatch.setattr(mantel_module, "spatial_check", one_by_one)
    monkeypatch.setattr(partial_module, "spatial_check", one_by_one)
    slow = run()
    assert fast.pvalue_spatial == slow.pvalue_spatial
    assert fast.statistic_spatial == pytest.approx(slow.statistic_spatial, abs=1e-13)
    np.testing.assert_allclose(fast.null_distribution_spatial, slow.null_distribution_spatial,
                               rtol=0, atol=1e-13)
