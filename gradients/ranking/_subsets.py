"""Best-subset rank matching: which combination of variables best mirrors community turnover.

For community dissimilarities ``d`` and z-scored variables, every subset of variables gives
Euclidean distances between sites; the subset whose distances rank-correlate best with ``d``
is the combination that lines up best with turnover (Clarke & Ainsworth 1993). Up to
:data:`EXHAUSTIVE_LIMIT` variables every subset is visited (:mod:`._kernels`); beyond it the
search is stepwise (:mod:`._stepwise`). The p-value of the best subset repeats the whole search
under each rearrangement of the community's sites, through the permutation engine.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.stats import rankdata

from .._errors import InputError
from .._result import ResultMixin
from .._validation import RNGLike, check_choice, check_n_jobs, check_n_resamples, seed_sequence
from ..distance import DistanceMatrix
from ..permutation import permutation_plan, permutation_test
from ..permutation._threads import numba_threads
from ._inputs import read_candidates, read_dissimilarities, strata_for
from ._kernels import PIECE, gray_rows, mask_rows, permuted_rows
from ._stepwise import RowCache, stepwise_search

__all__ = ["EXHAUSTIVE_LIMIT", "SUBSET_METHODS", "SubsetSearchResult", "subset_search"]

#: Most variables searched exhaustively (2^16 - 1 = 65,535 subsets); beyond, the search is
#: stepwise.
EXHAUSTIVE_LIMIT = 16
#: Correlation between community dissimilarities and subset distances: ranks (Spearman) or
#: the distances themselves (Pearson). Each is one flag of the kernels.
SUBSET_METHODS = {"spearman": True, "pearson": False}
SEARCHES = ("auto", "exhaustive", "stepwise")
#: Bytes of subset rows (or of permuted community rows) held at once.
ROW_BUDGET = 32 * 2**20
#: Statistic of a size no search visited: below any correlation, and finite, so that the
#: engine's tie tolerance (relative to the largest statistic) stays meaningful.
NOT_VISITED = -2.0


@dataclass(frozen=True, repr=False)
class SubsetSearchResult(ResultMixin):
    """Outcome of :func:`subset_search`.

    Attributes
    ----------
    table : DataFrame
        One row per subset size: ``size``, ``variables`` (the best subset of that size, names
        joined by " + "), ``statistic`` (its correlation with the community dissimilarities),
        ``pvalue`` (that correlation against the best of the same size under each
        permutation, so the choice among subsets of that size is accounted for) and
        ``n_subsets`` (subsets of that size evaluated).
    subsets : tuple of tuple of str
        The best subset of each row of ``table``, as names.
    best : tuple of str
        The best subset of any size.
    statistic : float
        Its correlation with the community dissimilarities.
    pvalue : float
        Selection-aware p-value of ``statistic``: the whole search is repeated under each
        permutation and ``statistic`` is compared with the best correlation found each time.
    pvalue_naive : float
        The p-value of the chosen subset as if it had been named in advance (its own
        correlation under each permutation). Too small: it ignores the search.
    null_distribution : ndarray, shape (P,)
        The best correlation of the whole search under each permutation.
    n_resamples : int
    method : {'spearman', 'pearson'}
    search : {'exhaustive', 'stepwise'}
    variables : tuple of str
        The candidate variables, in the order given.
    n_sites, n_subsets : int
        Sites, and subsets evaluated by the observed search.
    notes : tuple of str
    """

    table: pd.DataFrame
    subsets: tuple[tuple[str, ...], ...]
    best: tuple[str, ...]
    statistic: float
    pvalue: float
    pvalue_naive: float
    null_distribution: np.ndarray
    n_resamples: int
    method: str
    search: str
    variables: tuple[str, ...]
    n_sites: int
    n_subsets: int
    notes: tuple[str, ...] = ()


class SubsetProblem:
    """The fixed arrays of one search: per-variable squared differences and community rows."""

    def __init__(self, dm: DistanceMatrix, x: np.ndarray, ranks: bool) -> None:
        n, p = x.shape
        self.n, self.p, self.ranks = n, p, ranks
        iu, ju = np.triu_indices(n, 1)
        self.m = iu.size
        # (z_iv - z_jv)^2 as (x_iv - x_jv)^2 / var_v: equal differences give equal terms (the
        # differences of z-scores would differ by rounding), so tied distances stay tied
        var = x.var(axis=0, ddof=1)
        terms = ((x[iu, :] - x[ju, :]) ** 2 / var).T  # (p, m)
        # fixed point: every subset's sum stays below 2^61 (see the kernels' notes)
        scale = 2.0**61 / (p * max(float(terms.max()), 1e-300))
        self.terms = np.ascontiguousarray(np.rint(terms * scale).astype(np.int64))
        values = rankdata(dm.condensed) if ranks else dm.condensed.astype(np.float64)
        centred = values - values.mean()
        self.community = centred / np.linalg.norm(centred)
        square = np.zeros((n, n))
        square[iu, ju] = self.community
        square[ju, iu] = self.community
        self.square = square

    # ----------------------------------------------------------------- rows of subsets
    def chunk(self) -> int:
        """Gray indices per block of rows: a multiple of the kernel's piece, within budget."""
        per = max(1, ROW_BUDGET // (8 * self.m))
        return max(PIECE, (per // PIECE) * PIECE)

    def gray_blocks(self):
        """(start, stop) blocks of Gray indices 1 .. 2^p - 1, cut at multiples of the piece."""
        top = 1 << self.p
        step = self.chunk()
        start = 1
        while start < top:
            stop = min(top, (start // step + 1) * step)
            yield start, stop
            start = stop

    def gray(self, start: int, stop: int, max_size: int, *, write: bool
             ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(rows, statistics, scales, sizes) of Gray indices ``start .. stop - 1``; rows are
        unscaled (multiply products by ``scales``) and only filled when ``write``."""
        k = stop - start
        rows = np.empty((k, self.m) if write else (1, self.m))
        stats, scales = np.empty(k), np.empty(k)
        sizes = np.empty(k, dtype=np.int64)
        gray_rows(self.terms, start, stop, max_size, self.ranks, self.community, rows, write,
                  stats, scales, sizes)
        return rows, stats, scales, sizes

    def masks(self, masks: list[int]) -> tuple[np.ndarray, np.ndarray]:
        """Unit-length rows and statistics of the subsets given as bit masks."""
        members = np.array([[(mask >> v) & 1 for v in range(self.p)] for mask in masks],
                           dtype=np.uint8).reshape(len(masks), self.p)
        rows = np.empty((len(masks), self.m))
        stats, scales = np.empty(len(masks)), np.empty(len(masks))
        mask_rows(self.terms, members, self.ranks, self.community, rows, stats, scales)
        rows *= scales[:, None]
        return rows, stats

    # ----------------------------------------------------------------- permuted community
    def permuted(self, orders: np.ndarray) -> np.ndarray:
        out = np.empty((orders.shape[0], self.m))
        permuted_rows(self.square, np.ascontiguousarray(orders, dtype=np.int64), out)
        return out

    def order_blocks(self, k: int) -> list[slice]:
        per = max(1, ROW_BUDGET // (8 * self.m))
        return [slice(a, min(a + per, k)) for a in range(0, k, per)]


def _names(mask: int, names: tuple[str, ...]) -> tuple[str, ...]:
    return tuple(v for i, v in enumerate(names) if (mask >> i) & 1)


# --------------------------------------------------------------------------- exhaustive
def _exhaustive(problem: SubsetProblem, max_size: int) -> dict[int, tuple[float, int, int]]:
    """Best (statistic, mask, count) of every size from 1 to ``max_size``, over all subsets."""
    best: dict[int, tuple[float, int, int]] = {}
    for start, stop in problem.gray_blocks():
        _, stats, _, sizes = problem.gray(start, stop, max_size, write=False)
        idx = np.arange(start, stop)
        masks = idx ^ (idx >> 1)
        for s in np.unique(sizes[sizes > 0]):
            sel = np.flatnonzero(sizes == s)
            top = stats[sel].max()
            # ties: the subset of the earliest variables (smallest mask) wins
            mask = int(masks[sel][stats[sel] == top].min())
            old = best.get(int(s))
            count = (old[2] if old else 0) + sel.size
            if old is None or top > old[0] or (top == old[0] and mask < old[1]):
                best[int(s)] = (float(top), mask, count)
            else:
                best[int(s)] = (old[0], old[1], count)
    return best


def _exhaustive_null(problem: SubsetProblem, max_size: int, best_row: np.ndarray):
    """Batched statistic: [best of all, chosen subset, best of each size] per order."""

    def statistic(orders: np.ndarray) -> np.ndarray:
        k = orders.shape[0]
        out = np.full((k, 2 + max_size), NOT_VISITED)
        blocks = problem.order_blocks(k)
        whole = problem.permuted(orders) if len(blocks) == 1 else None
        for start, stop in problem.gray_blocks():
            rows, _, scales, sizes = problem.gray(start, stop, max_size, write=True)
            present = [int(s) for s in np.unique(sizes[sizes > 0])]
            for sl in blocks:
                perm = whole if whole is not None else problem.permuted(orders[sl])
                corr = (perm @ rows.T) * scales[None, :]
                for s in present:
                    col = corr[:, sizes == s].max(axis=1)
                    np.maximum(out[sl, 1 + s], col, out=out[sl, 1 + s])
        for sl in blocks:
            perm = whole if whole is not None else problem.permuted(orders[sl])
            out[sl, 1] = perm @ best_row
        out[:, 0] = out[:, 2:].max(axis=1)
        return out

    return statistic


# --------------------------------------------------------------------------- stepwise
def _stepwise_null(problem: SubsetProblem, max_size: int, best_row: np.ndarray,
                   cache: RowCache):
    def statistic(orders: np.ndarray) -> np.ndarray:
        k = orders.shape[0]
        out = np.full((k, 2 + max_size), NOT_VISITED)
        for sl in problem.order_blocks(k):
            perm = problem.permuted(orders[sl])
            out[sl, 1] = perm @ best_row
            for b in range(perm.shape[0]):
                found, _ = stepwise_search(cache, perm[b], problem.p, max_size)
                for s, (stat, _mask) in found.items():
                    out[sl.start + b, 1 + s] = stat
        out[:, 0] = out[:, 2:].max(axis=1)
        return out

    return statistic


# --------------------------------------------------------------------------- the function
def _check_max_size(max_size: object, p: int) -> int:
    if max_size is None:
        return p
    if not isinstance(max_size, numbers.Integral) or isinstance(max_size, bool) or max_size < 1:
        raise InputError(f"`max_size` must be a positive integer (or None for all sizes); got "
                         f"{max_size!r}.")
    return int(min(int(max_size), p))


def subset_search(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    environment: pd.DataFrame,
    *,
    method: str = "spearman",
    max_size: int | None = None,
    search: str = "auto",
    n_resamples: int = 199,
    rng: RNGLike = None,
    strata: object = None,
    n_jobs: int | None = -1,
) -> SubsetSearchResult:
    """The subsets of environmental variables whose distances best match community turnover.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Community dissimilarities.
    environment : DataFrame indexed by site label
        Numeric candidate variables (in analysis units: take logs or log-ratios first). Each
        is z-scored (mean 0, sample standard deviation 1) before distances are computed.
    method : {'spearman', 'pearson'}, default 'spearman'
        Correlation between the community dissimilarities and the Euclidean distances of a
        subset: Spearman's rank correlation (ranks of the dissimilarities computed once) or
        Pearson's.
    max_size : int, optional
        Largest subset size considered (default: all).
    search : {'auto', 'exhaustive', 'stepwise'}, default 'auto'
        'auto' visits every subset up to :data:`EXHAUSTIVE_LIMIT` (16) variables and searches
        stepwise beyond; 'exhaustive' above the limit is refused (2^p subsets).
    n_resamples : int, default 199
        Permutations of the community's sites for the selection-aware p-value; each repeats
        the whole search.
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    strata : Series or sequence, optional
        Group label per site: permutations stay within groups.
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.

    Returns
    -------
    SubsetSearchResult

    Notes
    -----
    With ``z`` the z-scored variables, the squared distances of a subset ``S`` are
    ``sum_{v in S} (z_iv - z_jv)^2``, one term per variable, so visiting the subsets in
    Gray-code order changes one term at a time; the square root is not needed for ranks.
    The statistic of a subset equals ``scipy.stats.spearmanr(d, pdist(z[:, S]))`` (average
    ranks for ties) [1]_; pairs whose distances are equal in exact arithmetic (variables
    measured on a coarse scale) are kept tied, as ``pdist(x[:, S], "seuclidean")`` keeps them,
    where the rounding of z-scores would split some of them.

    The best of many subsets correlates well with ``d`` even when no variable matters, so the
    correlation of the chosen subset tested alone (``pvalue_naive``) is too small. ``pvalue``
    repeats the whole search under each permutation of the community's sites and compares the
    best correlation with the best found each time; as the distances of every subset stay
    fixed while the community is permuted, each subset's ranks are computed once per batch of
    permutations and correlated with all permuted community vectors in one matrix product.
    Each row of ``table`` is tested the same way against the best of its size. Beyond the
    exhaustive limit the search is stepwise (forward steps, each followed by backward steps
    while they improve the correlation, from the empty set; see :mod:`._stepwise`), the
    best subsets are the best visited, and the permuted searches are stepwise too.

    References
    ----------
    .. [1] Clarke, K. R. & Ainsworth, M. (1993). A method of linking multivariate community
       structure to environmental variables. Marine Ecology Progress Series 92: 205-219.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, subset_search
    >>> rng = np.random.default_rng(0)
    >>> env = pd.DataFrame(rng.normal(size=(20, 3)), columns=["a", "b", "c"])
    >>> d = DistanceMatrix(pdist(env[["a"]]) + rng.uniform(0, 0.2, 190), env.index)
    >>> subset_search(d, env, n_resamples=19, rng=1).best
    ('a',)
    """
    check_choice("method", method, tuple(SUBSET_METHODS))
    check_choice("search", search, SEARCHES)
    n_resamples = check_n_resamples(n_resamples)
    n_jobs = check_n_jobs(n_jobs)
    seed = seed_sequence(rng)
    dm = read_dissimilarities(d)
    cand = read_candidates(environment, dm.labels)
    p = cand.width
    max_size = _check_max_size(max_size, p)
    strata_v = strata_for(strata, dm.labels)
    if search == "exhaustive" and p > EXHAUSTIVE_LIMIT:
        raise InputError(f"An exhaustive search of {p} variables would visit 2^{p} - 1 = "
                         f"{2**p - 1:,} subsets; at most {EXHAUSTIVE_LIMIT} variables are "
                         "searched exhaustively. Use search='auto' (stepwise beyond the limit), "
                         "or pre-select the candidates.")
    kind = "stepwise" if search == "stepwise" or (search == "auto" and p > EXHAUSTIVE_LIMIT) \
        else "exhaustive"
    problem = SubsetProblem(dm, cand.values, SUBSET_METHODS[method])
    plan = permutation_plan(dm.n, n_resamples=n_resamples, rng=seed, strata=strata_v,
                            site_labels=dm.labels)
    with numba_threads(n_jobs):
        if kind == "exhaustive":
            found = _exhaustive(problem, max_size)
            counts = {s: c for s, (_, _, c) in found.items()}
            best_by_size = {s: (stat, mask) for s, (stat, mask, _) in found.items()}
            cache = None
        else:
            cache = RowCache(problem)
            best_by_size, counts = stepwise_search(cache, problem.community, p, max_size)
        sizes = sorted(best_by_size)
        top_size = max(sizes, key=lambda s: (best_by_size[s][0], -s))
        best_stat, best_mask = best_by_size[top_size]
        best_row = problem.masks([best_mask])[0][0]
        stat_fn = (_exhaustive_null(problem, max_size, best_row) if kind == "exhaustive"
                   else _stepwise_null(problem, max_size, best_row, cache))  # type: ignore[arg-type]
        observed = np.full(2 + max_size, NOT_VISITED)
        observed[0] = observed[1] = best_stat
        for s in sizes:
            observed[1 + s] = best_by_size[s][0]
        tested = observed > NOT_VISITED
        result = permutation_test(lambda o: stat_fn(o)[:, tested], plan,
                                  observed=observed[tested], alternative="greater",
                                  task="subset search")
    pvalues = np.full(observed.size, np.nan)
    pvalues[tested] = np.asarray(result.pvalue)
    null = np.asarray(result.null_distribution)[:, 0]
    subsets = tuple(_names(best_by_size[s][1], cand.names) for s in sizes)
    table = pd.DataFrame({
        "size": np.array(sizes, dtype=np.int64),
        "variables": [" + ".join(v) for v in subsets],
        "statistic": [best_by_size[s][0] for s in sizes],
        "pvalue": [pvalues[1 + s] for s in sizes],
        "n_subsets": np.array([counts.get(s, 0) for s in sizes], dtype=np.int64),
    })
    used = int(np.max(result.n_resamples))
    best = _names(best_mask, cand.names)
    n_subsets = int(sum(counts.values()))
    notes = _notes(method, kind, p, max_size, n_subsets, used, plan.description, best,
                   float(pvalues[0]), float(pvalues[1]), result.exact)
    return SubsetSearchResult(
        table=table, subsets=subsets, best=best, statistic=float(best_stat),
        pvalue=float(pvalues[0]), pvalue_naive=float(pvalues[1]), null_distribution=null,
        n_resamples=used, method=method, search=kind, variables=cand.names, n_sites=dm.n,
        n_subsets=n_subsets, notes=tuple(notes))


def _notes(method: str, kind: str, p: int, max_size: int, n_subsets: int, used: int,
           description: str, best: tuple[str, ...], p_sel: float, p_naive: float,
           exact: bool) -> list[str]:
    corr = "Spearman rank" if method == "spearman" else "Pearson"
    sizes = f" of up to {max_size} variables" if max_size < p else ""
    if kind == "exhaustive":
        total = sum(math.comb(p, s) for s in range(1, max_size + 1))
        first = (f"Exhaustive search: all {total:,} subsets{sizes} of the {p} z-scored "
                 f"variables were compared by the {corr} correlation of their Euclidean "
                 "distances with the community dissimilarities (Clarke & Ainsworth 1993).")
    else:
        first = (f"Stepwise search: {p} variables exceed the exhaustive limit of "
                 f"{EXHAUSTIVE_LIMIT}" if p > EXHAUSTIVE_LIMIT else "Stepwise search (asked for)")
        first += (f"; {n_subsets:,} subsets{sizes} were visited by forward steps, each "
                  "followed by backward steps while they improved the "
                  f"{corr} correlation. The best subset of each size is the best visited, "
                  "not necessarily the best there is; every permuted search was stepwise too.")
    kind_p = "exact (every rearrangement enumerated)" if exact else f"{used} permutations"
    second = (f"The p-value of the best subset ({' + '.join(best)}) repeats the whole search "
              f"under each of {kind_p} ({description}) of the community's sites, so it "
              f"accounts for choosing the best subset: p = {p_sel:.3g}. Tested alone, as if "
              f"named in advance, the same subset would get p = {p_naive:.3g}, which ignores "
              "the selection and is too small.")
    return [first, second]
