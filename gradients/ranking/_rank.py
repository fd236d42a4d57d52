"""One table that lines the variables up against community turnover, measure by measure.

:func:`rank_variables` runs five analyses of the same dissimilarities and variables and puts
what each says about each variable side by side: best-subset membership (:func:`subset_search`),
turnover importance (:func:`turnover_model`), forward-selection order and adjusted R2 gain
(:func:`gradients.partition.forward_select`), the vector-fit r2 on a PCoA
(:func:`gradients.fit_vectors`) and the single-variable Mantel statistic
(:func:`gradients.mantel`). Variables that carry the same information are flagged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._result import ResultMixin
from .._validation import RNGLike, check_n_jobs, check_n_resamples, seed_sequence
from ..distance import DistanceMatrix, environmental_distance
from ..fitting import GradientArrowsResult, fit_vectors
from ..matrix import mantel
from ..ordination import pcoa
from ..partition import ForwardSelectionResult, forward_select
from ..partition._design import COLLINEAR_RTOL
from ._inputs import read_candidates, read_dissimilarities, strata_for
from ._subsets import SubsetSearchResult, subset_search
from ._turnover import turnover_model
from ._turnover_result import TurnoverModelResult

__all__ = ["COLLINEAR_R", "COLLINEAR_VIF", "SORT_RULE", "VariableRankingResult",
           "collinearity", "rank_variables"]

#: Pairs of variables correlated beyond this (absolute Pearson r) are flagged as collinear.
COLLINEAR_R = 0.8
#: Variables whose variance inflation factor exceeds this are flagged as collinear.
COLLINEAR_VIF = 10.0
#: The measures the sort rule averages ranks over: column, and whether larger is better.
MEASURES = {"importance": True, "mantel": True, "vector_r2": True, "first_best_size": False,
            "selection_order": False}
#: The sort rule of the table, in the one sentence its notes state.
SORT_RULE = (
    "Rows are sorted by the mean of each variable's ranks on five measures (turnover "
    "importance, Mantel statistic, vector-fit r2, the size of the smallest best subset that "
    "holds it, and forward-selection order; a variable in no best subset, or not selected, "
    "shares the last place), best first, ties broken by turnover importance.")


@dataclass(frozen=True, repr=False)
class VariableRankingResult(ResultMixin):
    """Outcome of :func:`rank_variables`.

    Attributes
    ----------
    table : DataFrame
        Indexed by variable, best first (see ``sort_rule``): ``rank``; ``in_best_subset``
        and ``first_best_size`` (the smallest subset size whose best subset holds it; <NA>
        if none); ``importance`` and ``importance_pvalue`` (turnover model);
        ``selection_order`` (<NA> if not selected) and ``r2_adjusted_gain``; ``vector_r2``
        and ``vector_pvalue`` (fit onto the first two PCoA axes); ``mantel`` and
        ``mantel_pvalue`` (Spearman Mantel test against that variable's distances);
        ``mean_rank`` (the sort key); ``collinear``, ``collinear_with`` and ``vif``.
    sort_rule : str
        The sort rule in one sentence.
    subsets : SubsetSearchResult
    turnover : TurnoverModelResult
    selection : ForwardSelectionResult or None
        None when the sites are too few to fit every candidate together (the notes say so).
    vectors : GradientArrowsResult
    n_sites : int
    notes : tuple of str
    """

    table: pd.DataFrame
    sort_rule: str
    subsets: SubsetSearchResult
    turnover: TurnoverModelResult
    selection: ForwardSelectionResult | None
    vectors: GradientArrowsResult
    n_sites: int
    notes: tuple[str, ...] = ()

    @property
    def order(self) -> tuple[str, ...]:
        """The variables, best first."""
        return tuple(self.table.index)


def collinearity(frame: pd.DataFrame) -> pd.DataFrame:
    """Per variable: ``collinear`` (|r| > 0.8 with another, or VIF > 10), ``collinear_with``
    (the others with |r| > 0.8, strongest first, or "VIF" alone) and ``vif``.

    The variance inflation factor of variable ``j`` is ``1 / (1 - R_j^2)`` with ``R_j^2``
    from regressing it on all the others (least squares with an intercept); infinite when it
    is an exact combination of them.
    """
    x = frame.to_numpy(dtype=np.float64)
    names = list(frame.columns)
    p = x.shape[1]
    r = np.corrcoef(x, rowvar=False) if p > 1 else np.ones((1, 1))
    vif = np.ones(p)
    for j in range(p):
        if p == 1:
            break
        others = np.column_stack([np.ones(x.shape[0]), np.delete(x, j, axis=1)])
        coef, *_ = np.linalg.lstsq(others, x[:, j], rcond=None)
        resid = x[:, j] - others @ coef
        tss = float(np.sum((x[:, j] - x[:, j].mean()) ** 2))
        r2 = 1.0 - float(resid @ resid) / tss
        vif[j] = np.inf if r2 >= 1.0 - 1e-12 else 1.0 / (1.0 - r2)
    rows = []
    for j, name in enumerate(names):
        close = [(abs(r[j, k]), names[k]) for k in range(p)
                 if k != j and abs(r[j, k]) > COLLINEAR_R]
        close.sort(key=lambda t: -t[0])
        with_text = ", ".join(f"{k} (r = {r[j, names.index(k)]:.2f})" for _, k in close)
        flagged = bool(close) or vif[j] > COLLINEAR_VIF
        if flagged and not close:
            with_text = "VIF above 10 (a combination of several others)"
        rows.append({"variable": name, "collinear": flagged, "collinear_with": with_text,
                     "vif": float(vif[j])})
    return pd.DataFrame(rows).set_index("variable")


def _independent(frame: pd.DataFrame) -> list[str]:
    """The columns, in order, that are not exact linear combinations of those before them (and
    of the intercept), with the partition stage's tolerance."""
    x = frame.to_numpy(dtype=np.float64)
    xc = x - x.mean(axis=0)
    xc = xc / np.sqrt(np.sum(xc * xc, axis=0))
    kept: list[int] = []
    for j in range(xc.shape[1]):
        sv = np.linalg.svd(xc[:, [*kept, j]], compute_uv=False)
        if sv[-1] > COLLINEAR_RTOL * sv[0]:
            kept.append(j)
    return [frame.columns[j] for j in kept]


def _select(dm: DistanceMatrix, env: pd.DataFrame, n_resamples: int, seed, strata,
            n_jobs: int) -> tuple[ForwardSelectionResult | None, list[str]]:
    """Forward selection over the candidates a linear model can hold, and what it left out."""
    kept = _independent(env)
    left = [c for c in env.columns if c not in kept]
    if len(kept) + 2 > dm.n:
        return None, [f"Forward selection was not run: {dm.n} sites cannot fit the "
                      f"{len(kept)} candidates together, and its first step tests them all "
                      "(Blanchet et al. 2008); its columns are empty and do not affect the "
                      "sort."]
    notes = []
    if left:
        notes.append(f"Forward selection left out {', '.join(map(str, left))}: exact linear "
                     "combination(s) of the other candidates (the parts of a composition that "
                     "sums to a constant do this; take its log-ratios).")
    selection = forward_select(dm, env[kept], n_resamples=n_resamples, rng=seed,
                               strata=strata, n_jobs=n_jobs)
    return selection, notes


def _ranks(values: pd.Series, larger_better: bool) -> pd.Series:
    """Ranks (1 best), missing values sharing the last places, ties averaged."""
    key = values.astype(float)
    key = (-key if larger_better else key).fillna(np.inf)
    return key.rank(method="average")


def rank_variables(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    environment: pd.DataFrame,
    *,
    geo: DistanceMatrix | np.ndarray | pd.DataFrame | None = None,
    n_resamples: int = 199,
    turnover_resamples: int = 99,
    rng: RNGLike = None,
    strata: object = None,
    n_jobs: int | None = -1,
) -> VariableRankingResult:
    """Rank environmental variables by how well they line up with community turnover.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Community dissimilarities (between 0 and 1, for the turnover model).
    environment : DataFrame indexed by site label
        Numeric candidate variables in analysis units (logs, log-ratios), named as they
        should appear in the table.
    geo : DistanceMatrix, optional
        Geographic or in-stream distances, a predictor of the turnover model only (its
        importance is in ``turnover.table``, not in the ranking of variables).
    n_resamples : int, default 199
        Permutations of the subset search, forward selection, vector fits and Mantel tests.
    turnover_resamples : int, default 99
        Permutations of each turnover predictor's test (each refits the model).
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system. Each analysis draws from its own child of one seed sequence.
    strata : Series or sequence, optional
        Group label per site: every permutation stays within groups.
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.

    Returns
    -------
    VariableRankingResult

    Notes
    -----
    The measures answer different questions: a variable may matter alone (Mantel, vector fit)
    and add nothing once another is in (turnover importance, forward selection, best subsets),
    which is what two collinear variables do. The sort rule (:data:`SORT_RULE`) therefore
    averages ranks over the five measures; the flags of collinearity (|r| > 0.8 or a variance
    inflation factor above 10) mark variables whose order among themselves should not be read
    as meaningful. The Mantel statistic of a variable equals the size-1 statistic of the
    subset search.

    References
    ----------
    .. [1] Clarke, K. R. & Ainsworth, M. (1993). Marine Ecology Progress Series 92: 205-219.
    .. [2] Ferrier, S., Manion, G., Elith, J. & Richardson, K. (2007). Diversity and
       Distributions 13: 252-264.
    .. [3] Blanchet, F. G., Legendre, P. & Borcard, D. (2008). Ecology 89: 2623-2632.
    .. [4] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed., section
       10.3 (Mantel test) and 10.2 (variance inflation).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, rank_variables
    >>> rng = np.random.default_rng(0)
    >>> env = pd.DataFrame(rng.uniform(0, 10, (25, 3)), columns=["a", "b", "c"])
    >>> d = DistanceMatrix(1 - np.exp(-0.3 * pdist(env[["a"]])), env.index)
    >>> rank_variables(d, env, n_resamples=19, turnover_resamples=9, rng=1).order[0]
    'a'
    """
    n_resamples = check_n_resamples(n_resamples)
    turnover_resamples = check_n_resamples(turnover_resamples, allow_zero=True)
    n_jobs = check_n_jobs(n_jobs)
    seeds = seed_sequence(rng).spawn(5)
    dm = read_dissimilarities(d, bounded=True)
    cand = read_candidates(environment, dm.labels)
    strata_v = strata_for(strata, dm.labels)
    env = cand.frame
    subsets = subset_search(dm, env, n_resamples=n_resamples, rng=seeds[0], strata=strata_v,
                            n_jobs=n_jobs)
    turnover = turnover_model(dm, env, geo=geo, n_resamples=turnover_resamples, rng=seeds[1],
                              strata=strata_v, n_jobs=n_jobs)
    selection, selection_notes = _select(dm, env, n_resamples, seeds[2], strata_v, n_jobs)
    vectors = fit_vectors(pcoa(dm, dimensions=2), env, n_resamples=n_resamples, rng=seeds[3],
                          strata=strata_v, n_jobs=n_jobs)
    mantels = {}
    for v, child in zip(cand.names, seeds[4].spawn(cand.width), strict=True):
        res = mantel(environmental_distance(env[[v]]), dm, method="spearman",
                     n_resamples=n_resamples, rng=child, strata=strata_v, n_jobs=n_jobs)
        mantels[v] = (res.statistic, res.pvalue)
    table = _table(cand.names, subsets, turnover, selection, vectors, mantels, env)
    notes = [SORT_RULE]
    flagged = table.index[table["collinear"]].tolist()
    if flagged:
        notes.append(
            f"{', '.join(map(str, flagged))} are collinear (|r| > {COLLINEAR_R:g} with another "
            f"variable, or a variance inflation factor above {COLLINEAR_VIF:g}): they carry "
            "much the same information, so the order among them, and which of them enters a "
            "subset or a model first, should not be read as meaningful.")
    notes.extend(selection_notes)
    notes.append(
        f"Permutations: {subsets.n_resamples} for the subset search, forward selection, vector "
        f"fits and Mantel tests; {turnover.n_resamples} per turnover predictor.")
    return VariableRankingResult(table=table, sort_rule=SORT_RULE, subsets=subsets,
                                 turnover=turnover, selection=selection, vectors=vectors,
                                 n_sites=dm.n, notes=tuple(notes))


def _table(names: tuple[str, ...], subsets: SubsetSearchResult, turnover: TurnoverModelResult,
           selection: ForwardSelectionResult | None, vectors: GradientArrowsResult,
           mantels: dict[str, tuple[float, float]], env: pd.DataFrame) -> pd.DataFrame:
    table = pd.DataFrame(index=pd.Index(list(names), name="variable"))
    first = {}
    for size, members in zip(subsets.table["size"], subsets.subsets, strict=True):
        for v in members:
            first.setdefault(v, int(size))
    table["in_best_subset"] = [v in subsets.best for v in names]
    table["first_best_size"] = pd.array([first.get(v) for v in names], dtype="Int64")
    table["importance"] = turnover.table["importance"].reindex(names).to_numpy()
    table["importance_pvalue"] = turnover.table["pvalue"].reindex(names).to_numpy()
    entered = (selection.table[selection.table["entered"]].set_index("variable")
               if selection is not None else pd.DataFrame(columns=["order", "gain"]))
    table["selection_order"] = pd.array(
        [int(entered.loc[v, "order"]) if v in entered.index else None for v in names],
        dtype="Int64")
    table["r2_adjusted_gain"] = [float(entered.loc[v, "gain"]) if v in entered.index
                                 else np.nan for v in names]
    table["vector_r2"] = vectors.table["r2"].reindex(names).to_numpy()
    table["vector_pvalue"] = vectors.table["pvalue"].reindex(names).to_numpy()
    table["mantel"] = [mantels[v][0] for v in names]
    table["mantel_pvalue"] = [mantels[v][1] for v in names]
    ranks = pd.concat([_ranks(table[c], better) for c, better in MEASURES.items()], axis=1)
    table["mean_rank"] = ranks.mean(axis=1)
    table = table.join(collinearity(env[list(names)]))
    key = pd.DataFrame({"mean": table["mean_rank"], "imp": -table["importance"]})
    order = key.sort_values(["mean", "imp"], kind="stable").index
    table = table.loc[order]
    table.insert(0, "rank", np.arange(1, len(table) + 1, dtype=np.int64))
    return table
