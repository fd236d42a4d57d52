"""Mantel correlograms: association within each class of distance, all classes in one pass."""

from __future__ import annotations

import numbers
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError
from .._result import ResultMixin
from .._validation import (
    RNGLike,
    check_alternative,
    check_choice,
    check_n_jobs,
    check_n_resamples,
    check_rng,
)
from ..permutation import PermutationPlan, permutation_test
from ._inputs import (
    MatrixLike,
    align_matrices,
    build_plan,
    rank_condensed,
    square_of,
    standardise,
)
from ._kernels import class_sums, numba_threads

__all__ = ["DEFAULT_MIN_PAIRS", "MantelCorrelogramResult", "mantel_correlogram",
           "progressive_holm"]

#: Classes with fewer pairs of sites than this are reported but not tested (common practice
#: is to distrust classes with few pairs; the threshold itself is a convention).
DEFAULT_MIN_PAIRS = 30


@dataclass(frozen=True, repr=False)
class MantelCorrelogramResult(ResultMixin):
    """Outcome of :func:`mantel_correlogram`.

    Attributes
    ----------
    table : DataFrame
        One row per distance class, in order of distance: ``lower``, ``upper``,
        ``midpoint``, ``n_pairs``, ``statistic`` (Mantel correlation, positive when sites in
        the class are more similar than average), ``pvalue``, ``pvalue_adjusted``
        (progressive Holm correction) and ``tested`` (False for classes with fewer than
        ``min_pairs`` pairs, which get no p-value).
    breaks : ndarray
        Class boundaries (``n_classes + 1`` values).
    null_distribution : ndarray, shape (n_resamples, n_classes)
        Statistics under the permutations, one column per class.
    n_resamples : int
    exact : bool
    method, alternative, scheme : str
    n_sites : int
    notes : tuple of str
    """

    table: pd.DataFrame
    breaks: np.ndarray
    null_distribution: np.ndarray
    n_resamples: int
    exact: bool
    method: str
    alternative: str
    scheme: str
    n_sites: int
    notes: tuple[str, ...] = ()


def progressive_holm(pvalues: np.ndarray) -> np.ndarray:
    """Progressive Holm correction: the ``k``-th p-value corrected for the first ``k`` tests.

    For ``k = 1, 2, ...`` apply Holm's step-down correction to ``p_1 ... p_k`` and keep the
    adjusted value of ``p_k`` (Legendre & Legendre 2012, section 13.1). Missing values are
    skipped (not counted as tests) and stay missing.
    """
    p = np.asarray(pvalues, dtype=np.float64)
    out = np.full(p.shape, np.nan)
    seen: list[float] = []
    for k, value in enumerate(p):
        if not np.isfinite(value):
            continue
        seen.append(float(value))
        arr = np.asarray(seen)
        order = np.argsort(arr, kind="stable")
        m = arr.size
        adjusted = np.maximum.accumulate(np.minimum(1.0, (m - np.arange(m)) * arr[order]))
        back = np.empty(m)
        back[order] = adjusted
        out[k] = back[-1]
    return out


def _breaks(classes: object, geo: np.ndarray) -> tuple[np.ndarray, str]:
    lo, hi = float(geo.min()), float(geo.max())
    if hi <= lo:
        raise InputError("`geo` has the same distance for every pair of sites; no distance "
                         "classes can be formed.")
    m = geo.size
    if isinstance(classes, str):
        check_choice("classes", classes, ("sturges",))
        k = int(np.ceil(1 + np.log2(m)))
        return np.linspace(lo, hi, k + 1), f"{k} equal-width classes (Sturges' rule on {m} pairs)"
    if isinstance(classes, numbers.Integral) and not isinstance(classes, bool):
        if classes < 2:
            raise InputError(f"`classes` must be at least 2; got {classes}.")
        return np.linspace(lo, hi, int(classes) + 1), f"{int(classes)} equal-width classes"
    try:
        b = np.asarray(classes, dtype=np.float64)
    except (TypeError, ValueError):
        b = np.empty(0)
    if b.ndim != 1 or b.size < 3 or not np.all(np.isfinite(b)) or np.any(np.diff(b) <= 0):
        raise InputError("`classes` must be 'sturges', a number of classes, or a strictly "
                         f"increasing sequence of at least 3 finite breaks; got {classes!r}.")
    return b, f"{b.size - 1} classes with the breaks given"


def mantel_correlogram(
    d: MatrixLike,
    geo: MatrixLike,
    *,
    classes: str | int | Sequence[float] = "sturges",
    method: str = "pearson",
    alternative: str = "two-sided",
    n_resamples: int = 999,
    rng: RNGLike = None,
    min_pairs: int = DEFAULT_MIN_PAIRS,
    strata: Sequence[object] | pd.Series | None = None,
    scheme: str | PermutationPlan | None = None,
    n_jobs: int | None = -1,
) -> MantelCorrelogramResult:
    r"""Mantel correlogram: how community resemblance changes across classes of distance.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Dissimilarities (community, environment).
    geo : DistanceMatrix, square array or square DataFrame
        Distances between sites (geographic or in-stream) that define the classes.
    classes : 'sturges', int or sequence of float, default 'sturges'
        'sturges': ``ceil(1 + log2(m))`` equal-width classes over the range of ``geo``
        (``m`` pairs of sites); an int: that many equal-width classes; a sequence: the class
        breaks. Classes are closed on the left, ``lower <= g < upper``, the last one on both
        sides; pairs outside the breaks belong to no class.
    method : {'pearson', 'spearman'}, default 'pearson'
        Spearman ranks ``d`` once.
    alternative : {'two-sided', 'greater', 'less'}, default 'two-sided'
        Per class; 'greater' tests for positive autocorrelation (more similar than average).
    n_resamples : int, default 999
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    min_pairs : int, default 30
        Classes with fewer pairs are reported (statistic, bounds, count) but not tested, so
        they get no p-value and do not count in the correction.
    strata, scheme, n_jobs
        As in :func:`gradients.matrix.mantel`.

    Returns
    -------
    MantelCorrelogramResult

    Notes
    -----
    For each class ``k`` the Mantel statistic is the Pearson correlation between ``d`` and a
    binary matrix ``W_k`` that is 0 for pairs in class ``k`` and 1 otherwise, the coding of
    Legendre & Legendre [1]_ (section 13.1), so that **a positive value means sites in the
    class are more similar than average** (positive autocorrelation) and a negative value
    that they are more different. With ``d~`` the entries of ``d`` centred and scaled to unit
    length and ``S_k`` their sum over the ``n_k`` pairs in the class,

    .. math:: r_k = -S_k / \sqrt{n_k (m - n_k) / m}.

    All classes are tested together from one set of permutations of ``d`` (one compiled pass
    over the pairs per permutation gives every ``S_k``). The two-sided test is centred on 0,
    the exact permutation mean under free permutation (Mantel 1967). Progressive Holm
    correction: the p-value of the ``k``-th tested class is Holm-corrected for the first
    ``k`` tests [1]_, reflecting that distance classes are read from the shortest outward.
    Classes with few pairs (large distances, usually) give unstable statistics; those under
    ``min_pairs`` are flagged and left untested. Sturges' rule for the number of classes:
    Sturges (1926) [2]_, as recommended for correlograms in [1]_.

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed., ch. 13.
       Elsevier, Amsterdam.
    .. [2] Sturges, H. A. (1926). The choice of a class interval. Journal of the American
       Statistical Association 21: 65-66.
    .. [3] Oden, N. L. & Sokal, R. R. (1986). Directional autocorrelation: an extension of
       spatial correlograms to two dimensions. Systematic Zoology 35: 608-617.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, mantel_correlogram
    >>> rng = np.random.default_rng(0)
    >>> xy = rng.uniform(size=(40, 2))
    >>> com = np.c_[np.sin(3 * xy[:, 0]), np.cos(3 * xy[:, 1])] + rng.normal(0, .1, (40, 2))
    >>> lab = [f"s{i}" for i in range(40)]
    >>> res = mantel_correlogram(DistanceMatrix(pdist(com), lab), DistanceMatrix(pdist(xy), lab),
    ...                          classes=5, n_resamples=199, rng=1)
    >>> bool(res.table["statistic"].iloc[0] > 0)
    True
    """
    method = check_choice("method", method, ("pearson", "spearman"))
    alternative = check_alternative(alternative)
    n_resamples = check_n_resamples(n_resamples)
    n_jobs = check_n_jobs(n_jobs)
    if not isinstance(min_pairs, numbers.Integral) or isinstance(min_pairs, bool) \
            or min_pairs < 1:
        raise InputError(f"`min_pairs` must be a positive integer; got {min_pairs!r}.")
    gen = check_rng(rng)
    mats, labels = align_matrices({"d": d, "geo": geo})
    n = len(labels)
    dv = mats["d"].condensed.astype(np.float64)
    gv = mats["geo"].condensed.astype(np.float64)
    breaks, how = _breaks(classes, gv)
    k = breaks.size - 1
    codes = np.searchsorted(breaks, gv, side="right") - 1
    codes[gv == breaks[-1]] = k - 1
    codes[(gv < breaks[0]) | (gv > breaks[-1])] = -1
    codes = codes.astype(np.int32)
    counts = np.bincount(codes[codes >= 0], minlength=k).astype(np.int64)
    m = dv.size
    in_class = int(counts.sum())

    ds = standardise(rank_condensed(dv) if method == "spearman" else dv, "d")
    big = square_of(ds)
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.sqrt(counts * (m - counts) / m)
    defined = (counts > 0) & (counts < m)
    tested = defined & (counts >= min_pairs)

    def statistic(orders: np.ndarray) -> np.ndarray:
        sums = class_sums(codes, k, big, orders)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(defined, -sums / scale, 0.0)

    observed_sums = np.bincount(codes[codes >= 0], weights=ds[codes >= 0], minlength=k)
    with np.errstate(divide="ignore", invalid="ignore"):
        observed = np.where(defined, -observed_sums / scale, np.nan)

    plan = build_plan(n, scheme=scheme, strata=strata,
                      n_resamples=n_resamples, rng=gen, labels=labels)
    center = 0.0 if plan.scheme == "free" else None
    notes: list[str] = []
    pvalues = np.full(k, np.nan)
    null = np.empty((0, k))
    if tested.any():
        with numba_threads(n_jobs):
            res = permutation_test(statistic, plan, observed=np.where(defined, observed, 0.0),
                                   alternative=alternative, center=center,
                                   task="Mantel correlogram")
        pvalues = np.where(tested, np.asarray(res.pvalue, dtype=np.float64), np.nan)
        null = res.null_distribution
        null[:, ~defined] = np.nan
        n_used = int(np.max(res.n_resamples))
    else:
        n_used = 0
        notes.append(f"No class has at least {min_pairs} pairs of sites: nothing was tested. "
                     "Use fewer classes or lower `min_pairs`.")
    table = pd.DataFrame({
        "class": np.arange(1, k + 1),
        "lower": breaks[:-1],
        "upper": breaks[1:],
        "midpoint": (breaks[:-1] + breaks[1:]) / 2.0,
        "n_pairs": counts,
        "statistic": observed,
        "pvalue": pvalues,
        "pvalue_adjusted": progressive_holm(pvalues),
        "tested": tested,
    }).set_index("class")
    notes.insert(0, f"Distance classes: {how}. Positive statistic = sites in the class more "
                    "similar than average (positive autocorrelation).")
    if plan.exact:
        notes.append(f"All {plan.size} permutations of the {n} sites were enumerated: exact "
                     "p-values.")
    few = np.flatnonzero(defined & ~tested)
    if few.size:
        notes.append(
            f"Class(es) {', '.join(str(i + 1) for i in few)} have fewer than {min_pairs} pairs "
            "of sites: statistic shown, not tested, not counted in the correction.")
    empty = np.flatnonzero(counts == 0)
    if empty.size:
        notes.append(f"Class(es) {', '.join(str(i + 1) for i in empty)} hold no pair of sites.")
    if in_class < m:
        notes.append(f"{m - in_class} pair(s) of sites fall outside the class breaks and are in "
                     "no class (they still count in the correlation's mean).")
    return MantelCorrelogramResult(
        table=table,
        breaks=breaks,
        null_distribution=null,
        n_resamples=n_used,
        exact=plan.exact,
        method=method,
        alternative=alternative,
        scheme=plan.scheme,
        n_sites=n,
        notes=tuple(notes),
    )
