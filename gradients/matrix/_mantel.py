"""Simple Mantel tests, with an optional spatially constrained null."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from .._errors import InputError
from .._result import ResultMixin
from .._validation import RNGLike, check_choice, check_rng
from ..permutation import PermutationPlan
from ._inputs import (
    MatrixLike,
    align_matrices,
    build_plan,
    check_precision,
    rank_condensed,
    standardise,
)
from ._mantel_core import (
    KENDALL_MAX_WORK,
    check_common,
    early_stop_note,
    exact_note,
    mantel_kendall,
    mantel_pearson,
    pearson_side,
)
from ._precision import float32_bound, float32_note
from ._spatial_check import NOT_CHECKED, PearsonForm, spatial_check

__all__ = ["KENDALL_MAX_WORK", "METHODS", "MantelResult", "mantel"]

METHODS = ("pearson", "spearman", "kendall")


@dataclass(frozen=True, repr=False)
class MantelResult(ResultMixin):
    """Outcome of :func:`mantel`.

    Attributes
    ----------
    statistic : float
        Mantel statistic: the correlation (Pearson, Spearman or Kendall tau-b) between the
        ``n_pairs`` off-diagonal entries of the two matrices.
    pvalue : float
        Permutation p-value (rows and columns of ``y`` permuted together).
    null_distribution : ndarray, shape (n_resamples,)
        Statistics under the permutations.
    n_resamples : int
        Permutations that count toward the p-value (all ``n!`` when exact).
    exact : bool
        True when every permutation of the sites was enumerated.
    method, alternative, scheme : str
    n_sites, n_pairs : int
    stopped_early : bool
        True when the run stopped under ``early_stop`` (Besag & Clifford 1991).
    pvalue_spatial : float or None
        p-value under the spatially constrained null (Moran spectral randomisation of ``x``),
        when ``spatial_null`` was given.
    statistic_spatial : float or None
        The observed statistic that ``pvalue_spatial`` compares against: equal to
        ``statistic`` unless ``x`` is not Euclidean (then computed on its Euclidean part).
    null_distribution_spatial : ndarray or None
        Statistics under the spatial surrogates.
    spatial_structure : DataFrame or None
        Check for spatial structure: one row per matrix (``x``, ``y``) with the Mantel
        correlation with distance between sites (``statistic``), its ``pvalue`` and
        ``structured`` (p <= 0.05).
    notes : tuple of str
    """

    statistic: float
    pvalue: float
    null_distribution: np.ndarray
    n_resamples: int
    exact: bool
    method: str
    alternative: str
    n_sites: int
    n_pairs: int
    scheme: str
    stopped_early: bool = False
    pvalue_spatial: float | None = None
    statistic_spatial: float | None = None
    null_distribution_spatial: np.ndarray | None = None
    spatial_structure: pd.DataFrame | None = None
    notes: tuple[str, ...] = ()



def mantel(
    x: MatrixLike,
    y: MatrixLike,
    *,
    method: str = "pearson",
    alternative: str = "greater",
    n_resamples: int = 9999,
    rng: RNGLike = None,
    strata: Sequence[object] | pd.Series | None = None,
    scheme: str | PermutationPlan | None = None,
    n_jobs: int | None = -1,
    early_stop: int | None = None,
    spatial_null: object = None,
    n_surrogates: int = 999,
    dtype: type | np.dtype | None = None,
) -> MantelResult:
    r"""Mantel test: correlation between two distance matrices, tested by permutation.

    Parameters
    ----------
    x, y : DistanceMatrix, square array or square DataFrame
        The two matrices, e.g. community dissimilarity and environmental distance. Labelled
        inputs are matched by site label (a mismatch raises an :class:`InputError` listing the
        sites on each side); a bare array is taken in the order of the labelled input.
    method : {'pearson', 'spearman', 'kendall'}, default 'pearson'
        Correlation between the off-diagonal entries. Spearman ranks the entries once and
        then uses the Pearson kernel. Kendall's tau-b costs ``O(m log m)`` per permutation
        (``m`` pairs of sites) and is refused beyond :data:`KENDALL_MAX_WORK`
        pair-permutations.
    alternative : {'greater', 'less', 'two-sided'}, default 'greater'
        'greater' tests for a positive association (sites that differ more in ``x`` differ
        more in ``y``).
    n_resamples : int, default 9999
        Random permutations; when ``n!`` (or the number of distinct restricted permutations)
        is no more, all are enumerated and the test is exact.
    rng : int, numpy.random.Generator or None
        Source of the permutations. When `rng` is None, a new `numpy.random.Generator` is
        created using entropy from the operating system.
    strata : sequence or Series, optional
        Group label per site (a Series is matched by site label): permute only within groups.
    scheme : str or PermutationPlan, optional
        Permutation scheme of :func:`gradients.permutation.permutation_plan` ('free',
        'strata', 'cyclic', ...), or a ready plan for designs that need more arguments
        (toroidal grids, blocks); a plan brings its own ``n_resamples``, ``rng`` and strata
        (``strata`` given beside a plan is an error). 'cyclic' and 'toroidal' shift the sites
        in the order of ``x``: put the matrices in transect or grid order first.
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.
    early_stop : int, optional
        Stop once this many permuted statistics are at least as extreme as the observed one
        (Besag & Clifford 1991 sequential p-value), saving time when p is clearly large.
    spatial_null : coordinates or distance matrix, optional
        Site locations: an array ``(n, d)`` of coordinates in site order, a DataFrame of
        coordinates indexed by site, a GeoDataFrame of points in a projected CRS, or a
        DistanceMatrix of geographic / in-stream distances. Adds a check of each matrix for
        spatial structure and a p-value under a spatially constrained null (see Notes).
    n_surrogates : int, default 999
        Number of spatial surrogates for ``pvalue_spatial``.
    dtype : {numpy.float64, numpy.float32}, optional
        Storage of the permuted matrix and the standardised vectors (default float64).
        float32 halves the memory of the test (for large ``n``); products and sums stay
        float64, and the result's notes give the bound on the difference from float64 and
        whether it can touch the p-value (see Notes). Pearson and Spearman only; the spatial
        part is computed in float64.

    Returns
    -------
    MantelResult

    Notes
    -----
    The Mantel statistic [1]_ is the correlation between the ``m = n(n-1)/2`` entries above
    the diagonal of the two matrices. Its null distribution comes from permuting the sites
    (rows and columns of ``y`` together) [1]_, [2]_, through the suite's permutation engine,
    which gives ``p = (b + 1)/(P + 1)`` for random permutations and ``b / n!`` for complete
    enumeration. For Pearson and Spearman the kernel evaluates, for a batch of orders ``p``,

    .. math:: r_p = \sum_{i<j} \tilde x_{ij}\, \tilde y_{p(i)p(j)}

    with ``x~`` and ``y~`` centred and scaled to unit length: mean and length are the same
    under any permutation, so no permuted matrix is ever built. The exact permutation mean
    of ``r`` is 0 [1]_; it is the centre of the two-sided test under free permutation.

    **Spatial autocorrelation.** When both matrices are spatially structured, the Mantel
    test rejects a true null far too often [3]_. With ``spatial_null`` the function tests
    each matrix against distance in space (Pearson Mantel test, one-sided, 999 permutations,
    level 0.05), says in ``notes`` when both are structured, and adds ``pvalue_spatial``:
    surrogates of ``x`` with the spatial spectrum of ``x`` kept, by Moran spectral
    randomisation [4]_, [5]_. ``x`` is represented by its principal coordinates; the spatial
    weights are ``exp(-(d / 2t)^2)``, ``t`` the longest edge of the minimum spanning tree of
    the sites; every surrogate flips the signs of the coordinates' projections on the
    Moran eigenvector maps (the same signs for every coordinate), which keeps each
    coordinate's Moran's I and their covariance exactly. The surrogate distance matrices are
    correlated with the fixed ``y``.

    **float32 storage.** With ``u = 2**-24``, storing the unit-length vectors in float32
    moves ``r`` by at most ``2u + u^2`` (Cauchy-Schwarz; float32 products are exact in
    float64); distances that were themselves built in float32 add ``2u kappa`` per matrix,
    ``kappa = sqrt(1 + mean^2/sd^2)`` of its entries; float64 summation adds at most
    ``4 n 2**-53``. Permutations keep mean and spread, so the same bound ``eps`` holds for
    every permuted ``r``, and with the same ``rng`` the p-value can differ from the float64
    one only through permuted values within ``2 eps`` of the observed ``r`` (derivation in
    ``gradients.matrix._precision``; checked against float64 runs in the tests).

    References
    ----------
    .. [1] Mantel, N. (1967). The detection of disease clustering and a generalized regression
       approach. Cancer Research 27: 209-220.
    .. [2] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed., ch. 10.
       Elsevier, Amsterdam.
    .. [3] Guillot, G. & Rousset, F. (2013). Dismantling the Mantel tests. Methods in Ecology
       and Evolution 4: 336-344.
    .. [4] Wagner, H. H. & Dray, S. (2015). Generating spatially constrained null models for
       irregularly spaced data using Moran spectral randomization methods. Methods in Ecology
       and Evolution 6: 1169-1178.
    .. [5] Crabot, J., Clappe, S., Dray, S. & Datry, T. (2019). Testing the Mantel statistic
       with a spatially-constrained permutation procedure. Methods in Ecology and Evolution
       10: 1640-1650.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, mantel
    >>> rng = np.random.default_rng(0)
    >>> env = rng.normal(size=(20, 2))
    >>> com = env + rng.normal(scale=0.5, size=(20, 2))
    >>> labels = [f"s{i}" for i in range(20)]
    >>> res = mantel(DistanceMatrix(pdist(com), labels), DistanceMatrix(pdist(env), labels),
    ...              n_resamples=999, rng=1)
    >>> bool(res.statistic > 0.5), res.pvalue
    (True, 0.001)
    """
    method = check_choice("method", method, METHODS)
    alternative, n_resamples, n_jobs, n_surrogates = check_common(
        alternative, n_resamples, n_jobs, n_surrogates)
    precision = check_precision(dtype)
    if precision == np.float32 and method == "kendall":
        raise InputError("`dtype=float32` applies to method='pearson' or 'spearman'; Kendall's "
                         "tau works on integer ranks and has no float storage to halve.")
    gen = check_rng(rng)
    mats, labels = align_matrices({"x": x, "y": y})
    n = len(labels)
    if precision == np.float64:
        xv = mats["x"].condensed.astype(np.float64)
        yv = mats["y"].condensed.astype(np.float64)
    else:  # as stored: no float64 copy of the condensed vectors
        xv, yv = mats["x"].condensed, mats["y"].condensed
    plan = build_plan(n, scheme=scheme, strata=strata,
                      n_resamples=n_resamples, rng=gen, labels=labels)
    if method == "kendall":
        observed, res = mantel_kendall(xv, yv, n, plan, alternative=alternative,
                                       early_stop=early_stop, n_jobs=n_jobs)
    else:
        observed, res = mantel_pearson(xv, yv, plan, method=method, alternative=alternative,
                                       early_stop=early_stop, n_jobs=n_jobs, dtype=precision)
    notes = exact_note(plan, n) + early_stop_note(res, early_stop)
    if precision == np.float32:
        ranked = method == "spearman"
        eps = float32_bound(xv, yv, n, ranked=ranked)
        notes.append(float32_note(eps, observed, res.null_distribution, int(res.n_resamples),
                                  ranked_float32=ranked and np.float32 in (xv.dtype, yv.dtype)))
    extra: dict[str, object] = {}
    if spatial_null is None:
        notes.append(NOT_CHECKED)
    else:
        xv, yv = xv.astype(np.float64, copy=False), yv.astype(np.float64, copy=False)
        form = (PearsonForm(pearson_side(yv, method, "y")[None, :])
                if method == "pearson" else None)
        extra = spatial_check(xv, yv, _surrogate_statistic(yv, method), spatial_null, labels,
                              n, n_resamples, n_surrogates, alternative, gen, n_jobs, notes,
                              form=form)
    return MantelResult(
        statistic=observed,
        pvalue=float(res.pvalue),
        null_distribution=res.null_distribution,
        n_resamples=int(res.n_resamples),
        exact=res.exact,
        method=method,
        alternative=alternative,
        n_sites=n,
        n_pairs=xv.size,
        scheme=plan.scheme,
        stopped_early=bool(res.stopped_early),
        notes=tuple(notes),
        **extra,  # type: ignore[arg-type]
    )


def _surrogate_statistic(y: np.ndarray, method: str) -> Callable[[np.ndarray], float]:
    """Statistic of a surrogate condensed ``x`` against the fixed ``y``."""
    if method == "kendall":
        return lambda v: float(stats.kendalltau(v, y).statistic)
    ys = pearson_side(y, method, "y")
    if method == "spearman":
        return lambda v: float(standardise(rank_condensed(v), "x") @ ys)
    return lambda v: float(standardise(v, "x") @ ys)

