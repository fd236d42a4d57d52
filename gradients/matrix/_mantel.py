"""Simple and partial Mantel tests, with an optional spatially constrained null."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from .._errors import InputError
from .._result import ResultMixin
from .._validation import (
    RNGLike,
    check_alternative,
    check_choice,
    check_n_resamples,
    check_rng,
)
from ..permutation import PermutationPlan, PermutationResult, custom_plan, permutation_test
from ._inputs import (
    MatrixLike,
    align_matrices,
    align_strata,
    build_plan,
    check_jobs,
    control_matrices,
    rank_condensed,
    square_of,
    standardise,
)
from ._kernels import cross_products, kendall_batch, kendall_prepare, numba_threads
from ._spatial import MoranSurrogates, location_distances, principal_coordinates, spatial_weights

__all__ = [
    "KENDALL_MAX_WORK",
    "MantelResult",
    "PartialMantelResult",
    "mantel",
    "partial_mantel",
]

METHODS = ("pearson", "spearman", "kendall")
PARTIAL_METHODS = ("pearson", "spearman")
PERMUTE = ("raw", "residuals")

#: Kendall's tau costs O(m log m) per permutation (m pairs of sites). Runs with more than this
#: many pair-permutations (m x n_resamples) are refused; about a minute on two cores.
KENDALL_MAX_WORK = 2.5e8

#: Significance level of the check for spatial structure of each matrix.
SPATIAL_ALPHA = 0.05
#: Permutations of the spatial-structure check (fewer if `n_resamples` is smaller).
SPATIAL_CHECK_RESAMPLES = 999

_REFS_SPATIAL = "(Guillot & Rousset 2013)"


# =========================================================================== results
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


@dataclass(frozen=True, repr=False)
class PartialMantelResult(ResultMixin):
    """Outcome of :func:`partial_mantel`.

    Attributes
    ----------
    statistic : float
        Partial Mantel statistic ``r_xy.z``: the correlation between ``x`` and ``y`` once the
        control matrices are regressed out of both.
    pvalue : float
        Permutation p-value under the chosen ``permute`` method.
    null_distribution : ndarray
    n_resamples : int
    exact : bool
    method, permute, alternative, scheme : str
    controls : tuple of str
        Names of the control matrices.
    r_xy : float
        The simple (unpartialled) correlation between ``x`` and ``y``.
    n_sites, n_pairs : int
    stopped_early : bool
    pvalue_spatial, statistic_spatial, null_distribution_spatial, spatial_structure
        As in :class:`MantelResult`.
    notes : tuple of str
    """

    statistic: float
    pvalue: float
    null_distribution: np.ndarray
    n_resamples: int
    exact: bool
    method: str
    permute: str
    alternative: str
    controls: tuple[str, ...]
    r_xy: float
    n_sites: int
    n_pairs: int
    scheme: str
    stopped_early: bool = False
    pvalue_spatial: float | None = None
    statistic_spatial: float | None = None
    null_distribution_spatial: np.ndarray | None = None
    spatial_structure: pd.DataFrame | None = None
    notes: tuple[str, ...] = ()


# =========================================================================== shared pieces
def _check_common(alternative: str, n_resamples: int, n_jobs: int,
                  n_surrogates: int) -> tuple[str, int, int, int]:
    return (check_alternative(alternative), check_n_resamples(n_resamples), check_jobs(n_jobs),
            check_n_resamples(n_surrogates))


def _run(statistic: Callable[[np.ndarray], np.ndarray], plan: PermutationPlan, *,
         observed: float | np.ndarray, alternative: str, center: float | None,
         early_stop: int | None, n_jobs: int, task: str) -> PermutationResult:
    """One engine run with the numba kernels on ``n_jobs`` threads."""
    if early_stop is not None and alternative == "two-sided" and center is None \
            and not plan.exact:
        raise InputError(
            "`early_stop` with alternative='two-sided' needs a known null mean. It is known "
            "only for mantel() with method='pearson' or 'spearman' under free permutation "
            f"(this is {task!r}); use a one-sided alternative or leave `early_stop` unset."
        )
    with numba_threads(n_jobs):
        return permutation_test(statistic, plan, observed=observed, alternative=alternative,
                                center=center, early_stop=early_stop, task=task)


def _exact_note(plan: PermutationPlan, n: int) -> list[str]:
    if plan.exact:
        return [f"All {plan.size} permutations of the {n} sites were enumerated, so the "
                "p-value is exact (identity included)."]
    return []


def _pearson_side(v: np.ndarray, method: str, name: str) -> np.ndarray:
    """Condensed vector made ready for a Pearson kernel: ranked for Spearman, standardised."""
    return standardise(rank_condensed(v) if method == "spearman" else v, name)


def _mantel_pearson(x: np.ndarray, y: np.ndarray, plan: PermutationPlan, *, method: str,
                    alternative: str, early_stop: int | None, n_jobs: int,
                    names: tuple[str, str] = ("x", "y")) -> tuple[float, PermutationResult]:
    """Pearson or Spearman Mantel test of condensed x and y, permuting y."""
    xs = _pearson_side(x, method, names[0])
    ys = _pearson_side(y, method, names[1])
    big = square_of(ys)
    observed = float(np.clip(xs @ ys, -1.0, 1.0))
    # Over all n! orders each pair of sites is mapped to every other pair equally often, so
    # the permutation mean of sum x_c y_perm is 0 exactly (Mantel 1967): the known centre.
    center = 0.0 if plan.scheme == "free" else None
    result = _run(lambda orders: cross_products(xs, big, orders), plan, observed=observed,
                  alternative=alternative, center=center, early_stop=early_stop,
                  n_jobs=n_jobs, task="Mantel test")
    return observed, result


def _mantel_kendall(x: np.ndarray, y: np.ndarray, n: int, plan: PermutationPlan, *,
                    alternative: str, early_stop: int | None,
                    n_jobs: int) -> tuple[float, PermutationResult]:
    m = x.size
    work = float(m) * plan.size
    if work > KENDALL_MAX_WORK:
        raise InputError(
            f"A Kendall Mantel test with {plan.size} permutations of {n} sites "
            f"({m} pairs) needs {work:.3g} pair-permutations at O(log m) each, more than the "
            f"limit of {KENDALL_MAX_WORK:.3g} (about a minute on two cores). Use "
            "method='spearman' (rank correlation at the cost of a Pearson test), or lower "
            f"`n_resamples` to at most {int(KENDALL_MAX_WORK // m)}."
        )
    for v, name in ((x, "x"), (y, "y")):
        if np.all(v == v[0]):
            raise InputError(f"`{name}` has the same value for every pair of sites, so no "
                             "correlation with it is defined.")
    prep = kendall_prepare(x, y, n)
    with numba_threads(n_jobs):
        observed = float(kendall_batch(prep, np.arange(n)[None, :])[0])
    result = _run(lambda orders: kendall_batch(prep, orders), plan, observed=observed,
                  alternative=alternative, center=None, early_stop=early_stop, n_jobs=n_jobs,
                  task="Mantel test (Kendall)")
    return observed, result


def _structure_check(named: Mapping[str, np.ndarray], geo: np.ndarray, n: int,
                     n_resamples: int, gen: np.random.Generator,
                     n_jobs: int, labels: pd.Index | None = None) -> pd.DataFrame:
    """Mantel test (Pearson, one-sided 'greater') of each matrix against distance in space."""
    rows = []
    for name, v in named.items():
        plan = build_plan(n, scheme=None, strata=None,
                          n_resamples=min(n_resamples, SPATIAL_CHECK_RESAMPLES), rng=gen,
                          labels=labels)
        r, res = _mantel_pearson(v, geo, plan, method="pearson", alternative="greater",
                                 early_stop=None, n_jobs=n_jobs, names=(name, "spatial_null"))
        rows.append({"matrix": name, "statistic": r, "pvalue": float(res.pvalue),
                     "structured": bool(res.pvalue <= SPATIAL_ALPHA)})
    return pd.DataFrame(rows).set_index("matrix")


def _structure_notes(check: pd.DataFrame) -> list[str]:
    structured = list(check.index[check["structured"].to_numpy(dtype=bool)])
    def say(name: str) -> str:
        row = check.loc[name]
        return f"{name}: r = {row['statistic']:.3f}, p = {row['pvalue']:.3g}"
    if len(structured) == len(check):
        return [
            "Both matrices are spatially structured (Mantel correlation with distance between "
            f"sites, {'; '.join(say(s) for s in structured)}). Simple and partial Mantel tests "
            "then reject a true null too often " + _REFS_SPATIAL + ": rely on pvalue_spatial, "
            "from the spatially constrained null, rather than pvalue."
        ]
    if structured:
        return [f"Only {', '.join(structured)} is spatially structured ("
                f"{'; '.join(say(s) for s in structured)}); the plain permutation p-value is "
                "less exposed to spatial autocorrelation, pvalue_spatial is given as a check."]
    return ["Neither matrix shows spatial structure (Mantel correlation with distance between "
            f"sites, p > {SPATIAL_ALPHA}); pvalue_spatial is given as a check."]


_NOT_CHECKED = (
    "Spatial autocorrelation was not checked. When both matrices are spatially structured, "
    "Mantel p-values are too small " + _REFS_SPATIAL + "; pass spatial_null=site coordinates "
    "(or distances) for a check and a spatially constrained p-value."
)


def _spatial_check(x: np.ndarray, y: np.ndarray, stat_of: Callable[[np.ndarray], float],
                   spatial_null: object, labels: pd.Index, n: int, n_resamples: int,
                   n_surrogates: int, alternative: str, gen: object, n_jobs: int,
                   notes: list[str]) -> dict[str, object]:
    """Spatial-structure check of both matrices and the spatially constrained p-value.

    Appends the notes in words to ``notes`` and returns the result's spatial fields.
    """
    geo = location_distances(spatial_null, labels)
    check = _structure_check({"x": x, "y": y}, geo, n, n_resamples, gen, n_jobs, labels)
    notes.extend(_structure_notes(check))
    obs_sp, res_sp, sp_notes = _spatial_null(x, stat_of, geo, n, n_surrogates=n_surrogates,
                                             alternative=alternative, gen=gen)
    notes.extend(sp_notes)
    return {"pvalue_spatial": float(res_sp.pvalue), "statistic_spatial": obs_sp,
            "null_distribution_spatial": res_sp.null_distribution, "spatial_structure": check}


def _spatial_null(
    x: np.ndarray,
    statistic_of: Callable[[np.ndarray], float],
    geo: np.ndarray,
    n: int,
    *,
    n_surrogates: int,
    alternative: str,
    gen: np.random.Generator,
) -> tuple[float, PermutationResult, list[str]]:
    """Moran spectral randomisation of ``x`` (via its principal coordinates)."""
    coords, share = principal_coordinates(x)
    if coords.shape[1] == 0:
        raise InputError("`x` has no Euclidean structure (all principal coordinates vanish); "
                         "no spatial surrogates can be built.")
    w = spatial_weights(geo)
    msr = MoranSurrogates.from_coordinates(coords, w)
    euclid = msr.distances(np.ones(msr.n_mem))
    observed = float(statistic_of(euclid))
    plan = custom_plan(msr.draw, n, n_resamples=n_surrogates, rng=gen, scheme="custom",
                       description="Moran spectral randomisation of x")

    def statistic(signs: np.ndarray) -> np.ndarray:
        return np.array([statistic_of(msr.distances(s)) for s in signs])

    result = permutation_test(statistic, plan, observed=observed, alternative=alternative,
                              task="spatial null (Moran spectral randomisation)")
    notes = [
        f"pvalue_spatial: {n_surrogates} surrogates of x by Moran spectral randomisation "
        "(Wagner & Dray 2015; for Mantel tests Crabot et al. 2019): random signs on x's "
        f"projections on {msr.n_mem} Moran eigenvector maps (Gaussian weights of scale twice "
        "the longest minimum-spanning-tree edge), which keeps the Moran's I of every "
        "principal coordinate of x."
    ]
    if share > 1e-8:
        notes.append(
            f"x is not Euclidean (negative eigenvalues {100 * share:.2g}% of the positive ones): "
            "the spatial null uses its Euclidean part, the principal coordinates on positive "
            f"axes, and compares against the statistic computed there ({observed:.4f}). With "
            "large negative eigenvalues consider testing sqrt(x), Euclidean for many "
            "ecological dissimilarities."
        )
    return observed, result, notes


# =========================================================================== mantel
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
    n_jobs: int = 1,
    early_stop: int | None = None,
    spatial_null: object = None,
    n_surrogates: int = 999,
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
    n_jobs : int, default 1
        Threads for the compiled kernel (-1 for all cores). The result does not depend on it.
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
    alternative, n_resamples, n_jobs, n_surrogates = _check_common(
        alternative, n_resamples, n_jobs, n_surrogates)
    gen = check_rng(rng)
    mats, labels = align_matrices({"x": x, "y": y})
    n = len(labels)
    xv = mats["x"].condensed.astype(np.float64)
    yv = mats["y"].condensed.astype(np.float64)
    plan = build_plan(n, scheme=scheme, strata=align_strata(strata, labels),
                      n_resamples=n_resamples, rng=gen, labels=labels)
    if method == "kendall":
        observed, res = _mantel_kendall(xv, yv, n, plan, alternative=alternative,
                                        early_stop=early_stop, n_jobs=n_jobs)
    else:
        observed, res = _mantel_pearson(xv, yv, plan, method=method, alternative=alternative,
                                        early_stop=early_stop, n_jobs=n_jobs)
    notes = _exact_note(plan, n)
    if res.stopped_early:
        notes.append(f"Stopped early after {res.n_resamples} permutations "
                     f"({early_stop} at least as extreme): p = {early_stop}/{res.n_resamples} "
                     "(Besag & Clifford 1991).")
    extra: dict[str, object] = {}
    if spatial_null is None:
        notes.append(_NOT_CHECKED)
    else:
        extra = _spatial_check(xv, yv, _surrogate_statistic(yv, method), spatial_null, labels,
                               n, n_resamples, n_surrogates, alternative, gen, n_jobs, notes)
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
    ys = _pearson_side(y, method, "y")
    if method == "spearman":
        return lambda v: float(standardise(rank_condensed(v), "x") @ ys)
    return lambda v: float(standardise(v, "x") @ ys)


# =========================================================================== partial
class _Residualiser:
    """Residuals of condensed vectors on the control matrices (OLS with an intercept)."""

    def __init__(self, controls: np.ndarray, names: Sequence[str]) -> None:
        zc = controls - controls.mean(axis=0)
        q, r = np.linalg.qr(zc)
        diag = np.abs(np.diag(r))
        scale = np.sqrt(np.sum(zc * zc, axis=0))
        # A constant column centres to rounding noise (the mean of m copies of 0.1 is not
        # 0.1), whose QR pivot is not small relative to itself: compare with its magnitude.
        size = np.sqrt(controls.shape[0]) * np.max(np.abs(controls), axis=0)
        flat = scale <= 1e-12 * size
        collinear = flat | (diag <= 1e-10 * np.maximum(scale, 1e-300))
        if np.any(collinear):
            bad = [names[i] for i in np.flatnonzero(collinear)]
            raise InputError(
                f"The control matrices are collinear (or constant): {', '.join(bad)} adds "
                "nothing to the others. Drop it from `z`.", columns=bad)
        self.q = q

    def __call__(self, v: np.ndarray) -> np.ndarray:
        vc = v - v.mean()
        return vc - self.q @ (self.q.T @ vc)


def partial_mantel(
    x: MatrixLike,
    y: MatrixLike,
    z: MatrixLike | Sequence[MatrixLike] | Mapping[str, MatrixLike],
    *,
    method: str = "pearson",
    permute: str = "raw",
    alternative: str = "greater",
    n_resamples: int = 9999,
    rng: RNGLike = None,
    strata: Sequence[object] | pd.Series | None = None,
    scheme: str | PermutationPlan | None = None,
    n_jobs: int = 1,
    early_stop: int | None = None,
    spatial_null: object = None,
    n_surrogates: int = 999,
) -> PartialMantelResult:
    r"""Partial Mantel test: association of ``x`` and ``y`` controlling for ``z``.

    Parameters
    ----------
    x, y : DistanceMatrix, square array or square DataFrame
        The matrices whose partial association is tested (``x`` is the one permuted).
    z : matrix, sequence of matrices or mapping name -> matrix
        One or several control matrices (e.g. geographic distance); with several, both ``x``
        and ``y`` are regressed on all of them together.
    method : {'pearson', 'spearman'}, default 'pearson'
        Spearman ranks each matrix's entries first.
    permute : {'raw', 'residuals'}, default 'raw'
        What is permuted (see Notes): 'raw' permutes ``x`` itself (Mantel's approach, as in
        Smouse, Long & Sokal 1986); 'residuals' permutes the residuals of ``x`` on ``z``, the
        null model (Freedman & Lane 1983; method 2 of Legendre 2000).
    alternative, n_resamples, rng, strata, scheme, n_jobs, early_stop, spatial_null, \
n_surrogates
        As in :func:`mantel`. The spatial null randomises ``x``, keeping ``y`` and ``z``.

    Returns
    -------
    PartialMantelResult

    Notes
    -----
    The statistic [1]_ is the correlation between the residuals of ``x`` and of ``y`` from
    ordinary least squares on the control matrices (with an intercept); with one control it
    equals

    .. math:: r_{xy.z} = \frac{r_{xy} - r_{xz} r_{yz}}{\sqrt{(1 - r_{xz}^2)(1 - r_{yz}^2)}}.

    Permutation methods, compared by Legendre (2000) [2]_ by simulation:

    - ``'raw'``: permute the rows and columns of ``x`` and recompute ``r_xy.z``. The
      permutations are exact when ``x`` is exchangeable, but they also break the relation
      between ``x`` and the controls, so the test is of a null in which ``x`` is unrelated
      to ``z`` as well. In Legendre's simulations of partial correlation, permuting the raw
      data was to be avoided only when highly skewed data were combined with outliers in the
      covariable [2]_.
    - ``'residuals'``: fit the null model ``x = z b + e``, permute the residual matrix ``e``,
      add it back to the fitted values and recompute ``r_xy.z`` (Freedman & Lane [3]_). This
      keeps the ``x``-``z`` relation under the null, the hypothesis of interest. Residual
      permutation is only asymptotically exact: Legendre advises against it when highly
      skewed data are combined with a small number of sites, and otherwise recommends it for
      partial Mantel tests as the method that can always be used [2]_.

    Legendre's third method (correlating residualised matrices and permuting one of them,
    without refitting) is not offered; the fourth (residuals of the full model) is not either.

    Both are evaluated by one compiled pass: with ``e_y`` the residuals of ``y`` and ``Q`` an
    orthonormal basis of the centred controls, the statistic of a permuted vector ``v`` is
    ``v.e_y / (|e_y| sqrt(|v|^2 - |Q'v|^2))``.

    Spatially structured data make partial Mantel tests too liberal [4]_ (see
    :func:`mantel`); with ``spatial_null`` the surrogates are Moran spectral randomisations of
    ``x``. For testing the role of space itself, analyses on the raw data (constrained
    ordination with spatial eigenvectors) have more power [5]_.

    References
    ----------
    .. [1] Smouse, P. E., Long, J. C. & Sokal, R. R. (1986). Multiple regression and
       correlation extensions of the Mantel test of matrix correspondence. Systematic Zoology
       35: 627-632.
    .. [2] Legendre, P. (2000). Comparison of permutation methods for the partial correlation
       and partial Mantel tests. Journal of Statistical Computation and Simulation 67: 37-73.
    .. [3] Freedman, D. & Lane, D. (1983). A nonstochastic interpretation of reported
       significance levels. Journal of Business and Economic Statistics 1: 292-298.
    .. [4] Guillot, G. & Rousset, F. (2013). Dismantling the Mantel tests. Methods in Ecology
       and Evolution 4: 336-344.
    .. [5] Legendre, P., Fortin, M.-J. & Borcard, D. (2015). Should the Mantel test be used in
       spatial analysis? Methods in Ecology and Evolution 6: 1239-1247.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, partial_mantel
    >>> rng = np.random.default_rng(0)
    >>> xy = rng.uniform(size=(25, 2)); env = xy[:, :1] + rng.normal(scale=0.3, size=(25, 1))
    >>> com = env + rng.normal(scale=0.3, size=(25, 1))
    >>> lab = [f"s{i}" for i in range(25)]
    >>> dm = lambda a: DistanceMatrix(pdist(a), lab)
    >>> res = partial_mantel(dm(com), dm(env), dm(xy), permute="residuals", n_resamples=999,
    ...                      rng=1)
    >>> bool(res.statistic > 0), bool(res.pvalue < 0.05)
    (True, True)
    """
    method = check_choice("method", method, PARTIAL_METHODS)
    permute = check_choice("permute", permute, PERMUTE)
    alternative, n_resamples, n_jobs, n_surrogates = _check_common(
        alternative, n_resamples, n_jobs, n_surrogates)
    gen = check_rng(rng)
    controls = control_matrices(z)
    clash = {"x", "y"} & set(controls)
    if clash:
        raise InputError(f"Control matrices cannot be named {sorted(clash)}; rename them.")
    mats, labels = align_matrices({"x": x, "y": y, **controls})
    n = len(labels)
    prep = (lambda v: rank_condensed(v)) if method == "spearman" else (lambda v: v)
    xv_raw = mats["x"].condensed.astype(np.float64)
    yv_raw = mats["y"].condensed.astype(np.float64)
    xv, yv = prep(xv_raw), prep(yv_raw)
    names = list(controls)
    zmat = np.column_stack([prep(mats[k].condensed.astype(np.float64)) for k in names])
    free = zmat.shape[0] - zmat.shape[1] - 1
    if free < 2:
        raise InputError(
            f"{n} sites give {zmat.shape[0]} pairs; after fitting an intercept and "
            f"{len(names)} control matrix(es) {max(free, 0)} degree(s) of freedom are left, so "
            "the partial correlation is fixed at +1 or -1 whatever the data. Use more sites "
            "or fewer control matrices.")
    resid = _Residualiser(zmat, names)
    standardise(xv, "x")
    standardise(yv, "y")  # constant matrices are refused with a clear message
    e_y = resid(yv)
    ey_norm = float(np.sqrt(e_y @ e_y))
    if ey_norm <= 1e-12 * float(np.sqrt(np.sum((yv - yv.mean()) ** 2))):
        raise InputError("`y` is fully explained by the control matrices, so no partial "
                         "correlation is defined.")
    e_x = resid(xv)
    ex_norm = float(np.sqrt(e_x @ e_x))
    if ex_norm <= 1e-12 * float(np.sqrt(np.sum((xv - xv.mean()) ** 2))):
        raise InputError("`x` is fully explained by the control matrices, so no partial "
                         "correlation is defined.")
    observed = float(np.clip((e_x @ e_y) / (ex_norm * ey_norm), -1.0, 1.0))
    r_xy = float(standardise(xv, "x") @ standardise(yv, "y"))

    v = (xv - xv.mean()) if permute == "raw" else e_x
    vv = float(v @ v)
    fixed = np.column_stack([e_y, resid.q])
    big = square_of(v)

    def statistic(orders: np.ndarray) -> np.ndarray:
        c = cross_products(fixed, big, orders)
        res2 = np.maximum(vv - np.sum(c[:, 1:] ** 2, axis=1), 1e-300)
        return c[:, 0] / (ey_norm * np.sqrt(res2))

    plan = build_plan(n, scheme=scheme, strata=align_strata(strata, labels),
                      n_resamples=n_resamples, rng=gen, labels=labels)
    res = _run(statistic, plan, observed=observed, alternative=alternative, center=None,
               early_stop=early_stop, n_jobs=n_jobs, task="partial Mantel test")
    notes = _exact_note(plan, n)
    if res.stopped_early:
        notes.append(f"Stopped early after {res.n_resamples} permutations "
                     f"({early_stop} at least as extreme): p = {early_stop}/{res.n_resamples} "
                     "(Besag & Clifford 1991).")
    notes.append(
        "Permutation of the raw x (Mantel's approach): the null also breaks the relation of x "
        "with the controls; permute='residuals' keeps it (Legendre 2000)." if permute == "raw"
        else
        "Permutation of the residuals of x on the controls (null model; Freedman & Lane 1983, "
        "Legendre 2000 method 2).")
    extra: dict[str, object] = {}
    if spatial_null is None:
        notes.append(_NOT_CHECKED)
    else:

        def stat_of(surrogate: np.ndarray) -> float:
            e = resid(prep(surrogate))
            return float((e @ e_y) / (np.sqrt(e @ e) * ey_norm))

        extra = _spatial_check(xv_raw, yv_raw, stat_of, spatial_null, labels, n, n_resamples,
                               n_surrogates, alternative, gen, n_jobs, notes)
    return PartialMantelResult(
        statistic=observed,
        pvalue=float(res.pvalue),
        null_distribution=res.null_distribution,
        n_resamples=int(res.n_resamples),
        exact=res.exact,
        method=method,
        permute=permute,
        alternative=alternative,
        controls=tuple(names),
        r_xy=r_xy,
        n_sites=n,
        n_pairs=xv.size,
        scheme=plan.scheme,
        stopped_early=bool(res.stopped_early),
        notes=tuple(notes),
        **extra,  # type: ignore[arg-type]
    )
