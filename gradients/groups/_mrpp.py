"""Multi-response permutation procedure: weighted mean distance within classes (Mielke et al.)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._result import ResultMixin
from .._validation import RNGLike, check_n_jobs, check_n_resamples
from ..distance import DistanceMatrix
from ..distance._class_sums import PermutedClassSums
from ..permutation import permutation_test
from ._classes import check_distances, group_plan, numba_threads, read_classes, read_strata

__all__ = ["MrppResult", "mrpp"]


@dataclass(frozen=True, repr=False)
class MrppResult(ResultMixin):
    """Outcome of :func:`mrpp`.

    Attributes
    ----------
    statistic : float
        delta: the mean dissimilarity within classes, each class weighted by its share of the
        sites, ``sum_g (n_g / n) mean_{i<j in g} d_ij``.
    expected_delta : float
        Its mean over all reassignments of the sites to the classes: the mean of all
        dissimilarities.
    agreement : float
        The chance-corrected within-class agreement ``A = 1 - delta / expected_delta``: 0 when
        classes are as heterogeneous inside as chance gives, 1 when every class is made of
        identical sites.
    pvalue : float
        Permutation p-value of delta (one-sided: smaller than by chance).
    null_distribution : ndarray
        delta under the rearrangements.
    n_sites, n_groups, n_resamples : int
    exact : bool
    grouping : str
    table : DataFrame
        One row per class: ``group``, ``n_sites``, ``weight`` (``n_g / n``) and
        ``mean_distance`` (mean dissimilarity of the pairs inside it).
    permutations : str
    notes : tuple of str
    """

    statistic: float
    expected_delta: float
    agreement: float
    pvalue: float
    null_distribution: np.ndarray
    n_sites: int
    n_groups: int
    n_resamples: int
    exact: bool
    grouping: str
    table: pd.DataFrame
    permutations: str
    notes: tuple[str, ...] = ()


def mrpp(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    groups: pd.Series | np.ndarray | list[object],
    *,
    strata: pd.Series | np.ndarray | list[object] | None = None,
    n_resamples: int = 999,
    rng: RNGLike = None,
    n_jobs: int | None = -1,
) -> MrppResult:
    """Test whether sites of a class are closer to each other than chance gives (MRPP).

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Dissimilarities among the sites, used as they are (not squared).
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
    MrppResult

    Notes
    -----
    ``delta = sum_g C_g xi_g`` with ``xi_g`` the mean of the ``n_g (n_g - 1) / 2``
    dissimilarities within class ``g`` and weights ``C_g = n_g / n`` [1]_. Under reassignment of
    the sites every ``xi_g`` has the mean of all dissimilarities as its expectation, and the
    weights sum to one, so that mean is ``E(delta)``; ``A = 1 - delta / E(delta)`` is the
    chance-corrected agreement [2]_. ``delta`` is a trace, ``tr(Q' D_o Q)`` with column ``g``
    of ``Q`` equal to ``sqrt(C_g / (n_g (n_g - 1)))`` on the sites of class ``g``, so a batch
    of reassignments is evaluated by the distance stage's kernel over the classes' blocks.
    Small delta is evidence of classes, so the p-value counts reassignments with delta at most
    the observed.

    References
    ----------
    .. [1] Mielke, P. W., Berry, K. J. & Johnson, E. S. (1976). Multi-response permutation
       procedures for a priori classifications. Communications in Statistics - Theory and
       Methods 5: 1409-1424.
    .. [2] McCune, B. & Grace, J. B. (2002). Analysis of Ecological Communities. MjM Software
       Design, Gleneden Beach, Oregon (chapter 24).

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, mrpp
    >>> y = np.array([[0.0], [0.1], [0.2], [5.0], [5.1], [5.2]])
    >>> res = mrpp(DistanceMatrix(pdist(y), list("abcdef")), list("xxxyyy"), rng=1)
    >>> round(res.agreement, 3), res.exact, round(res.pvalue, 3)
    (0.956, True, 0.1)
    """
    dm = check_distances(d)
    n_resamples = check_n_resamples(n_resamples)
    n_jobs = check_n_jobs(n_jobs)
    classes = read_classes(groups, dm.labels)
    strata_values = read_strata(strata, dm.labels)
    n = dm.n
    square = dm.square().astype(np.float64, copy=False)
    sizes = classes.sizes.astype(np.float64)
    weights = sizes / n
    scale = weights / (sizes * (sizes - 1))
    kernel = PermutedClassSums(square, classes.codes)

    def statistic(orders: np.ndarray) -> np.ndarray:
        return kernel(orders) @ scale

    per_class = []
    for i, size in enumerate(classes.sizes):
        inside = np.flatnonzero(classes.codes == i)
        block = square[np.ix_(inside, inside)]
        per_class.append(float(block[np.triu_indices(int(size), 1)].mean()))
    delta = float(np.dot(weights, per_class))
    expected = float(np.mean(dm.condensed))
    plan = group_plan(dm.labels, classes.codes, strata=strata_values, n_resamples=n_resamples,
                      rng=rng, interchangeable=True)
    with numba_threads(n_jobs):
        res = permutation_test(statistic, plan, observed=delta, alternative="less",
                               n_jobs=n_jobs, backend="threading", task="MRPP")
    table = pd.DataFrame({"group": list(classes.levels), "n_sites": classes.sizes,
                          "weight": weights, "mean_distance": per_class})
    notes = ["Class weights C_g = n_g / n (Mielke, Berry & Johnson 1976). MRPP, like ANOSIM "
             "and PERMANOVA, responds to differences in spread among the classes as well as "
             "in location."]
    if strata_values is not None:
        notes.append("With strata, the mean of delta over the restricted reassignments can "
                     "differ from the mean of all dissimilarities used for A.")
    how = "all" if res.exact else f"{res.n_resamples} random"
    return MrppResult(
        statistic=delta, expected_delta=expected,
        agreement=float(1.0 - delta / expected) if expected > 0 else float("nan"),
        pvalue=float(res.pvalue), null_distribution=res.null_distribution, n_sites=n,
        n_groups=len(classes.levels), n_resamples=int(res.n_resamples), exact=bool(res.exact),
        grouping=classes.name, table=table,
        permutations=f"{plan.description}; {how} rearrangements", notes=tuple(notes))
