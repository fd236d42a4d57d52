"""Analysis of similarities: ranked dissimilarities within and between classes (Clarke 1993)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.stats import rankdata

from .._result import ResultMixin
from .._validation import RNGLike, check_n_jobs, check_n_resamples
from ..distance import DistanceMatrix
from ..distance._class_sums import PermutedClassSums
from ..permutation import permutation_test
from ._classes import check_distances, group_plan, numba_threads, read_classes, read_strata

__all__ = ["AnosimResult", "anosim"]


@dataclass(frozen=True, repr=False)
class AnosimResult(ResultMixin):
    """Outcome of :func:`anosim`.

    Attributes
    ----------
    statistic : float
        Clarke's R: ``(mean rank between - mean rank within) / (M / 2)``, ``M = n (n - 1) / 2``;
        1 when every pair within a class is more alike than any pair between classes, about 0
        when classes are no more alike inside than across, negative when less.
    pvalue : float
        Permutation p-value of R (one-sided: R larger than by chance).
    null_distribution : ndarray
    mean_rank_within, mean_rank_between : float
        Mean rank of the dissimilarities within classes and between them (rank 1 the smallest,
        ties given their average rank).
    n_sites, n_groups, n_resamples : int
    exact : bool
    grouping : str
    table : DataFrame
        One row per class: ``group``, ``n_sites``, ``mean_rank_within`` (of the pairs inside it).
    permutations : str
    notes : tuple of str
    """

    statistic: float
    pvalue: float
    null_distribution: np.ndarray
    mean_rank_within: float
    mean_rank_between: float
    n_sites: int
    n_groups: int
    n_resamples: int
    exact: bool
    grouping: str
    table: pd.DataFrame
    permutations: str
    notes: tuple[str, ...] = ()


def anosim(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    groups: pd.Series | np.ndarray | list[object],
    *,
    strata: pd.Series | np.ndarray | list[object] | None = None,
    n_resamples: int = 999,
    rng: RNGLike = None,
    n_jobs: int | None = -1,
) -> AnosimResult:
    """Test whether sites of a class are more alike than sites of different classes (ANOSIM).

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Dissimilarities among the sites.
    groups : Series, one-column DataFrame or sequence
        The class of every site (a Series indexed by site label is matched by label). Every
        class needs at least two sites.
    strata : Series or sequence, optional
        Reassign sites to classes only within strata.
    n_resamples : int, default 999
        Random rearrangements; when there are no more distinct reassignments than this, all
        are enumerated (each once, classes of equal size interchangeable) and the test is exact.
    rng : int, numpy.random.Generator or None
        Source of randomness. When `rng` is None, a new `numpy.random.Generator` is created
        using entropy from the operating system.
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.

    Returns
    -------
    AnosimResult

    Notes
    -----
    The ``M = n (n - 1) / 2`` dissimilarities are ranked (rank 1 the smallest; tied values
    share their average rank). With ``r_W`` and ``r_B`` the mean ranks of the pairs within
    and between classes, ``R = (r_B - r_W) / (M / 2)`` [1]_. Only the ranks within classes
    change when sites are reassigned: their sum is ``tr(X' R_o X) / 2`` for the class
    indicator matrix ``X`` and the rank matrix ``R`` rearranged by the order ``o``, evaluated
    for a whole batch by the distance stage's kernel over the classes' blocks; the
    between-class sum is the total less it. ANOSIM is sensitive to differences in spread as
    well as in location, as PERMANOVA is [2]_.

    References
    ----------
    .. [1] Clarke, K. R. (1993). Non-parametric multivariate analyses of changes in community
       structure. Australian Journal of Ecology 18: 117-143.
    .. [2] Anderson, M. J. & Walsh, D. C. I. (2013). PERMANOVA, ANOSIM, and the Mantel test in
       the face of heterogeneous dispersions: what null hypothesis are you testing? Ecological
       Monographs 83: 557-574.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, anosim
    >>> y = np.array([[0.0], [0.1], [0.2], [5.0], [5.1], [5.2]])
    >>> res = anosim(DistanceMatrix(pdist(y), list("abcdef")), list("xxxyyy"), rng=1)
    >>> res.statistic, res.exact, round(res.pvalue, 3)
    (1.0, True, 0.1)
    """
    dm = check_distances(d)
    n_resamples = check_n_resamples(n_resamples)
    n_jobs = check_n_jobs(n_jobs)
    classes = read_classes(groups, dm.labels)
    strata_values = read_strata(strata, dm.labels)
    n = dm.n
    m = n * (n - 1) // 2
    ranks = rankdata(np.asarray(dm.condensed, dtype=np.float64), method="average")
    square = np.zeros((n, n))
    iu = np.triu_indices(n, 1)
    square[iu] = ranks
    square += square.T
    sizes = classes.sizes
    n_within = int(np.sum(sizes * (sizes - 1) // 2))
    n_between = m - n_within
    total = float(m * (m + 1) / 2)
    kernel = PermutedClassSums(square, classes.codes)

    def from_within(within: np.ndarray) -> np.ndarray:
        mean_w = within / n_within
        mean_b = (total - within) / n_between
        return (mean_b - mean_w) / (m / 2.0)

    def statistic(orders: np.ndarray) -> np.ndarray:
        return from_within(kernel(orders).sum(axis=1) / 2.0)  # zero diagonal: pairs

    same = classes.codes[:, None] == classes.codes[None, :]
    within_obs = float(square[iu][same[iu]].sum())
    observed = float(from_within(np.array([within_obs]))[0])
    plan = group_plan(dm.labels, classes.codes, strata=strata_values, n_resamples=n_resamples,
                      rng=rng, interchangeable=True)
    with numba_threads(n_jobs):
        res = permutation_test(statistic, plan, observed=observed, alternative="greater",
                               n_jobs=n_jobs, backend="threading", task="ANOSIM")
    per_class = []
    for i, size in enumerate(sizes):
        inside = np.flatnonzero(classes.codes == i)
        block = square[np.ix_(inside, inside)]
        per_class.append(float(block[np.triu_indices(size, 1)].mean()))
    table = pd.DataFrame({"group": list(classes.levels), "n_sites": sizes,
                          "mean_rank_within": per_class})
    notes = ["R is sensitive to differences in spread among the classes as well as in location "
             "(Anderson & Walsh 2013); read it beside a dispersion test."]
    if np.unique(dm.condensed).size < m:
        notes.append(f"{m - np.unique(dm.condensed).size} dissimilarities tie with another one; "
                     "tied values share their average rank.")
    how = "all" if res.exact else f"{res.n_resamples} random"
    return AnosimResult(
        statistic=observed, pvalue=float(res.pvalue), null_distribution=res.null_distribution,
        mean_rank_within=within_obs / n_within, mean_rank_between=(total - within_obs) / n_between,
        n_sites=n, n_groups=len(classes.levels), n_resamples=int(res.n_resamples),
        exact=bool(res.exact), grouping=classes.name, table=table,
        permutations=f"{plan.description}; {how} rearrangements", notes=tuple(notes))
