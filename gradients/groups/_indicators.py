"""Indicator taxa of site classes: specificity times fidelity (Dufrêne & Legendre 1997).

For taxon ``j`` and class (group) ``g`` with ``n_g`` sites, the *specificity* is the share of
the taxon's class-mean abundance that falls in ``g``, ``A_gj = mean_g(x_j) / sum_h mean_h(x_j)``,
and the *fidelity* is the share of the class's sites where the taxon occurs,
``B_gj = #{i in g: x_ij > 0} / n_g``. The indicator value is ``IndVal_gj = A_gj B_gj`` (0 to 1;
the original paper multiplies by 100). Each taxon is credited to the class where its value is
largest, and that largest value is tested by permuting the class labels among sites.

Combinations of classes (De Cáceres, Legendre & Moretti 2010) are candidate "classes" too
when asked for: the union of the classes in the combination, its specificity the sum of their
class means over the sum of all class means, its fidelity the share of its sites where the
taxon occurs.
"""

from __future__ import annotations

import itertools
import numbers
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import (
    RNGLike,
    align_strata,
    check_n_jobs,
    check_n_resamples,
    seed_sequence,
)
from ..permutation import ADJUST_METHODS, adjust_pvalues, permutation_plan, permutation_test
from ..permutation._threads import numba_threads
from ._classes import read_classes
from ._indicator_kernels import largest_indval

__all__ = ["IndicatorTaxaResult", "indicator_taxa"]

@dataclass(frozen=True, repr=False)
class IndicatorTaxaResult(ResultMixin):
    """Indicator values of every taxon for every site class, and the best class of each taxon.

    Attributes
    ----------
    table : DataFrame
        Tidy, one row per taxon (in the order of the community table): ``taxon``, ``group``
        (the class, or ``a+b`` combination, where the taxon's indicator value is largest),
        ``indval``, ``specificity``, ``fidelity`` (of that class), ``pvalue`` (permutation test
        of the largest value), ``pvalue_adjusted`` (across taxa) and ``n_sites`` (sites of
        that class).
    indval, specificity, fidelity : DataFrame
        Taxa x candidate classes (each class, then any combinations), 0 to 1.
    statistic, pvalue : Series
        Largest indicator value and its p-value, per taxon.
    null_distribution : ndarray, shape (P, taxa)
        Largest indicator value of every taxon under each rearrangement of the class labels.
    groups : tuple of str
        The candidate classes, in the column order of ``indval``.
    class_sizes : Series
        Sites per class.
    n_resamples : int
    exact : bool
    scheme : str
    adjust : str or None
    notes : tuple of str
    """

    table: pd.DataFrame
    indval: pd.DataFrame
    specificity: pd.DataFrame
    fidelity: pd.DataFrame
    statistic: pd.Series
    pvalue: pd.Series
    null_distribution: np.ndarray
    groups: tuple[str, ...]
    class_sizes: pd.Series
    n_resamples: int
    exact: bool
    scheme: str
    adjust: str | None
    notes: tuple[str, ...] = ()

    def top(self, n: int = 5, *, alpha: float | None = None) -> pd.DataFrame:
        """The ``n`` taxa with the largest indicator values of each class, best first.

        Parameters
        ----------
        n : int, default 5
            Taxa kept per class.
        alpha : float, optional
            Keep only taxa whose adjusted p-value is at most ``alpha``.

        Returns
        -------
        DataFrame
            Rows of :attr:`table`, classes in the order of :attr:`groups`.
        """
        if not isinstance(n, numbers.Integral) or isinstance(n, bool) or n < 1:
            raise InputError(f"`n` must be a positive integer; got {n!r}.")
        rows = self.table
        if alpha is not None:
            rows = rows[rows["pvalue_adjusted"] <= alpha]
        order = {g: i for i, g in enumerate(self.groups)}
        rows = rows.assign(_rank=rows["group"].map(order))
        rows = rows.sort_values(["_rank", "indval", "taxon"], ascending=[True, False, True],
                                kind="stable")
        return (rows.groupby("_rank", sort=True).head(int(n)).drop(columns="_rank")
                .reset_index(drop=True))


def _community(community: object) -> pd.DataFrame:
    inner = getattr(community, "community", None)
    if not isinstance(community, pd.DataFrame) and isinstance(inner, pd.DataFrame):
        community = inner
    if not isinstance(community, pd.DataFrame):
        raise InputError("`community` must be a sites x taxa DataFrame (or a Survey); got "
                         f"{type(community).__name__}.")
    if community.index.has_duplicates:
        dup = community.index[community.index.duplicated()].unique()
        raise InputError(f"Site labels in `community` are repeated: {format_items(dup)}.",
                         sites=list(dup))
    try:
        x = community.to_numpy(dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError("`community` must hold numbers only (abundances or presences).") \
            from None
    bad = ~np.isfinite(x) | (x < 0)
    if bad.any():
        cols = community.columns[bad.any(axis=0)]
        raise InputError(f"Abundances must be finite and non-negative; taxa "
                         f"{format_items(cols)} have missing, infinite or negative values.",
                         columns=list(cols))
    never = community.columns[(x > 0).sum(axis=0) == 0]
    if len(never):
        raise InputError(f"Taxa {format_items(never)} occur at no site: their specificity is "
                         "undefined. Drop them first.", columns=list(never))
    return community


def _classes(groups: object, sites: pd.Index) -> tuple[np.ndarray, list[str], list[str]]:
    """Class codes (0..G-1) in site order and the class names, read as every group test reads
    them (:func:`read_classes`); a class of one site is allowed here, with a note."""
    classes = read_classes(groups, sites, min_size=1)
    names = [str(c) for c in classes.levels]
    if len(set(names)) != len(names):
        raise InputError("Two class labels of `groups` read the same as text "
                         f"({format_items(names)}); give them distinct names.")
    return classes.codes.astype(np.intp), names, []


def _combinations(n_groups: int, largest: object) -> np.ndarray:
    """0/1 matrix (candidates x classes): each class, then unions of 2..``largest`` classes."""
    if not isinstance(largest, numbers.Integral) or isinstance(largest, bool) or largest < 1:
        raise InputError(f"`combinations` must be a positive integer (1: single classes only); "
                         f"got {largest!r}.")
    largest = min(int(largest), n_groups - 1)  # the union of all classes indicates nothing
    rows = []
    for size in range(1, max(largest, 1) + 1):
        for combo in itertools.combinations(range(n_groups), size):
            row = np.zeros(n_groups)
            row[list(combo)] = 1.0
            rows.append(row)
    return np.array(rows)


def _indval_parts(sums: np.ndarray, present: np.ndarray, sizes: np.ndarray,
                  combos: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Specificity and fidelity of every candidate, from class sums (``(..., G, T)``)."""
    means = sums / sizes[:, None]
    total = means.sum(axis=-2, keepdims=True)
    spec = np.matmul(combos, means) / total
    fid = np.matmul(combos, present) / (combos @ sizes)[:, None]
    return spec, fid


def _class_sums(codes: np.ndarray, orders: np.ndarray, y: np.ndarray,
                n_groups: int) -> np.ndarray:
    """Class sums of the columns of ``y`` under each order: ``(k, G, columns)``.

    Site ``i`` keeps its class and takes the data of site ``orders[b, i]``; a one-hot array
    (order, class, site) times ``y`` gives every sum in one matrix product.
    """
    k, n = orders.shape
    onehot = np.zeros((k, n_groups, n))
    onehot[np.arange(k)[:, None], codes[None, :], orders] = 1.0
    return np.matmul(onehot, y)


def indicator_taxa(
    community: pd.DataFrame,
    groups: pd.Series,
    *,
    combinations: int = 1,
    n_resamples: int = 999,
    rng: RNGLike = None,
    strata: object = None,
    adjust: str | None = "fdr_bh",
    n_jobs: int | None = -1,
) -> IndicatorTaxaResult:
    """Indicator value of every taxon for every site class, with permutation p-values.

    Parameters
    ----------
    community : DataFrame or Survey
        Sites x taxa abundances (or presences, 0/1), indexed by site label.
    groups : Series
        Class label of every site, indexed by site label (text, categorical or numbers; a
        sequence is taken in the order of the community table). Every class needs a site (a
        class of one site is allowed, and noted); at least two classes.
    combinations : int, default 1
        Largest number of classes joined into one candidate: 1 tests single classes only; 2
        also each pair of classes (for a taxon shared by two habitats), and so on
        (De Cáceres et al. 2010 [2]_). The union of all classes is never a candidate.
    n_resamples : int, default 999
        Rearrangements of the class labels; when there are no more distinct reassignments of
        the sites to the classes than this, all are enumerated and the test is exact.
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    strata : Series or sequence, optional
        Labels are permuted only within these strata (sampling campaigns, catchments).
    adjust : {'fdr_bh', 'holm'} or None, default 'fdr_bh'
        Multiplicity adjustment across taxa. Benjamini-Hochberg by default: a list of
        indicator taxa is a screening of many taxa, for which the false discovery rate is the
        usual guard; 'holm' controls the family-wise error rate instead.
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.

    Returns
    -------
    IndicatorTaxaResult

    Notes
    -----
    With ``x_ij`` the abundance of taxon ``j`` at site ``i`` and classes ``g`` of ``n_g``
    sites, Dufrêne & Legendre (1997) [1]_ define

    - specificity ``A_gj = m_gj / sum_h m_hj``, ``m_gj`` the mean abundance in class ``g``
      (means, not sums, so that classes of unequal size weigh alike);
    - fidelity ``B_gj = (number of sites of g where taxon j occurs) / n_g``;
    - ``IndVal_gj = A_gj B_gj``, between 0 and 1 (1: the taxon occurs at every site of ``g``
      and nowhere else; the paper reports 100 times this value).

    The statistic of taxon ``j`` is ``max_g IndVal_gj``; the class labels are permuted among
    sites (within strata if given) and the statistic recomputed for all taxa at once: a
    compiled kernel makes one pass over the sites per rearrangement for the class sums and
    occurrence counts, then takes each taxon's largest value, the rearrangements of a batch
    shared among threads. The observed values come from the definition in plain numpy.
    Ties between classes go to the first class in the order of :attr:`groups`.

    References
    ----------
    .. [1] Dufrêne, M. & Legendre, P. (1997). Species assemblages and indicator species: the
       need for a flexible asymmetrical approach. Ecological Monographs 67: 345-366.
    .. [2] De Cáceres, M., Legendre, P. & Moretti, M. (2010). Improving indicator species
       analysis by combining groups of sites. Oikos 119: 1674-1684.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import indicator_taxa
    >>> x = pd.DataFrame({"a": [5, 3, 4, 0, 0, 0], "b": [1, 1, 0, 1, 1, 1]},
    ...                  index=list("pqrstu"))
    >>> g = pd.Series(["pool"] * 3 + ["riffle"] * 3, index=x.index)
    >>> res = indicator_taxa(x, g, n_resamples=999, rng=1)
    >>> res.table.loc[0, ["taxon", "group", "indval"]].tolist()
    ['a', 'pool', 1.0]
    """
    n_resamples = check_n_resamples(n_resamples)
    n_jobs = check_n_jobs(n_jobs)
    if adjust is not None and adjust not in ADJUST_METHODS:
        raise InputError(f"`adjust` must be one of 'fdr_bh', 'holm' or None; got {adjust!r}.")
    root = seed_sequence(rng)
    table = _community(community)
    sites = pd.Index(table.index)
    codes, names, notes = _classes(groups, sites)
    n_groups = len(names)
    combos = _combinations(n_groups, combinations)
    candidates = [
        "+".join(names[g] for g in np.flatnonzero(row)) for row in combos
    ]
    sizes = np.bincount(codes, minlength=n_groups).astype(np.float64)
    x = table.to_numpy(dtype=np.float64)
    t = x.shape[1]
    y = np.ascontiguousarray(np.hstack([x, (x > 0).astype(np.float64)]))
    strata_arr = align_strata(strata, sites, name="strata", sites_name="`community`")

    def parts(orders: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        sums = _class_sums(codes, orders, y, n_groups)
        return _indval_parts(sums[:, :, :t], sums[:, :, t:], sizes, combos)

    def statistic(orders: np.ndarray) -> np.ndarray:
        return largest_indval(x, codes, sizes, combos, orders)

    # the largest value of each taxon depends only on which sites share a class, not on the
    # classes' names: the exact null is over the distinct reassignments of the sites
    plan = permutation_plan(len(sites), "relabel", groups=codes, strata=strata_arr,
                            n_resamples=n_resamples, rng=root, site_labels=sites,
                            interchangeable=True)
    spec, fid = parts(plan.identity())
    spec, fid = spec[0], fid[0]
    iv = spec * fid
    best = np.argmax(iv, axis=0)
    cols = np.arange(t)
    stat = iv[best, cols]
    with numba_threads(n_jobs):
        outcome = permutation_test(statistic, plan, observed=stat, alternative="greater",
                                   task="indicator taxa")
    pvalues = np.asarray(outcome.pvalue, dtype=np.float64)
    adjusted = adjust_pvalues(pvalues, adjust)
    taxa = pd.Index(table.columns, name="taxon")
    cand_sizes = combos @ sizes
    out = pd.DataFrame({
        "taxon": list(taxa),
        "group": [candidates[b] for b in best],
        "indval": stat,
        "specificity": spec[best, cols],
        "fidelity": fid[best, cols],
        "pvalue": pvalues,
        "pvalue_adjusted": adjusted,
        "n_sites": cand_sizes[best].astype(np.int64),
    })
    tied = (np.abs(iv - stat[None, :]) <= 1e-12 * np.abs(stat)[None, :]).sum(axis=0) > 1
    ties = list(taxa[tied])
    if ties:
        notes.append(f"Taxa {format_items(ties)} reach their largest indicator value in more "
                     "than one class; the first class is listed.")
    if sizes.min() < 2:
        single = [names[g] for g in np.flatnonzero(sizes < 2)]
        notes.append(f"Class(es) {format_items(single)} have a single site: a taxon found "
                     "there and nowhere else reaches the largest possible value by chance "
                     "alone more easily.")
    if outcome.exact:
        notes.append(f"Exact test: every one of the {outcome.null_distribution.shape[0]} distinct "
                     "reassignments of the sites to the classes was enumerated.")
    if adjust is None and t > 1:
        notes.append(f"No multiplicity adjustment across the {t} taxa (pvalue_adjusted repeats "
                     "pvalue).")
    frame = {"index": taxa, "columns": pd.Index(candidates, name="group")}
    return IndicatorTaxaResult(
        table=out,
        indval=pd.DataFrame(iv.T, **frame),
        specificity=pd.DataFrame(spec.T, **frame),
        fidelity=pd.DataFrame(fid.T, **frame),
        statistic=pd.Series(stat, index=taxa, name="indval"),
        pvalue=pd.Series(pvalues, index=taxa, name="pvalue"),
        null_distribution=outcome.null_distribution,
        groups=tuple(candidates),
        class_sizes=pd.Series(sizes.astype(np.int64), index=pd.Index(names, name="group"),
                              name="n_sites"),
        n_resamples=int(np.max(outcome.n_resamples)),
        exact=outcome.exact,
        scheme=outcome.scheme,
        adjust=adjust,
        notes=tuple(notes),
    )
