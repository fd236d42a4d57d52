"""Permutational multivariate analysis of variance on a distance matrix (Anderson 2001).

Sums of squares come from Gower's centred matrix ``G`` of the dissimilarities: for a term with
orthonormal basis ``Q`` (its design columns with the intercept and the terms it is adjusted for
removed) the sum of squares is ``tr(Q' G Q)`` (McArdle & Anderson 2001), and the residual is
``tr(G)`` less the full model's share. Permuted sums of squares are the same traces of the
rearranged matrix, evaluated for whole batches of orders by the distance stage's kernel.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import RNGLike, check_choice, check_n_jobs, check_n_resamples
from ..distance import DistanceMatrix, GowerMatrix, gower_centred
from ..distance._centred import PermutedTraces
from ..distance._class_sums import PermutedClassSums
from ..permutation import (
    ADJUST_METHODS,
    PermutationPlan,
    permutation_plan,
    permutation_test,
    site_ranks,
)
from ._classes import BATCH_SIZE, check_distances, numba_threads, read_strata, streams
from ._design import Design, Term, model_bases, read_design
from ._dispersion import DispersionResult, confounding_note, dispersion_from_gower
from ._pairwise import PAIRWISE_COLUMNS, pairwise_tests

__all__ = ["SUMS_OF_SQUARES", "TABLE_COLUMNS", "PermanovaResult", "permanova"]

SUMS_OF_SQUARES = ("sequential", "marginal")
#: Columns of :attr:`PermanovaResult.table`, in order.
TABLE_COLUMNS = ("term", "df", "sum_of_squares", "mean_square", "pseudo_f", "r2", "pvalue",
                 "tested_against", "sums_of_squares", "permutations")


@dataclass(frozen=True, repr=False)
class PermanovaResult(ResultMixin):
    """Outcome of :func:`permanova`.

    Attributes
    ----------
    table : DataFrame
        One row per term, then ``residual`` and ``total``: ``term``, ``df``,
        ``sum_of_squares``, ``mean_square``, ``pseudo_f``, ``r2`` (sum of squares over the
        total), ``pvalue``, ``tested_against`` (``residual`` or the nested term whose mean
        square is the denominator), ``sums_of_squares`` (``sequential`` or ``marginal``) and
        ``permutations`` (what was rearranged, how many times).
    statistic, pvalue : Series
        Pseudo-F and permutation p-value of every term, indexed by term.
    null_distribution : dict
        Term -> pseudo-F under its rearrangements (the identity first when exact).
    sums_of_squares : str
    n_sites, n_resamples : int
    exact : bool
        True when every term's test enumerated all its distinct rearrangements.
    pairwise : DataFrame
        Pairs of classes of each factor with three or more classes: ``term``, ``level_1``,
        ``level_2``, ``n_sites``, ``pseudo_f``, ``r2``, ``pvalue``, ``pvalue_adjusted`` (within
        each term), ``exact``. Empty when not asked for or when no factor qualifies.
    dispersion : dict
        Factor term -> :class:`DispersionResult`: the test of equal spreads beside the test of
        location (Anderson 2006).
    notes : tuple of str
    """

    table: pd.DataFrame
    statistic: pd.Series
    pvalue: pd.Series
    null_distribution: dict[str, np.ndarray]
    sums_of_squares: str
    n_sites: int
    n_resamples: int
    exact: bool
    pairwise: pd.DataFrame
    dispersion: dict[str, DispersionResult] = field(default_factory=dict)
    notes: tuple[str, ...] = ()

    @property
    def dispersion_table(self) -> pd.DataFrame:
        """One row per factor: ``term``, ``n_groups``, ``statistic`` (F), ``df``,
        ``df_residual``, ``pvalue``, ``exact``."""
        rows = [{"term": t, "n_groups": r.n_groups, "statistic": r.statistic, "df": r.df,
                 "df_residual": r.df_residual, "pvalue": r.pvalue, "exact": r.exact}
                for t, r in self.dispersion.items()]
        return pd.DataFrame(rows, columns=["term", "n_groups", "statistic", "df",
                                           "df_residual", "pvalue", "exact"])


# --------------------------------------------------------------------------- one term's test
@dataclass
class _TermTest:
    """The pseudo-F of one term, observed and for batches of site orders.

    ``kind='residuals'``: ``g`` is the residual matrix of the term's reduced model, permuted
    (Freedman & Lane 1983); the denominator is the full model's residual, ``total`` less the
    trace of the full model's basis (``second``; None when the term is the whole model).
    ``kind='units'``: ``g`` is the centred matrix itself, rearranged by whole units of the
    nested term ``second`` is the basis of; the denominator is that term's mean square.
    """

    term: Term
    kind: str
    df: int
    ss: float
    denominator: str
    den_df: int
    den_ss: float
    restrict: np.ndarray | None = field(repr=False)  # strata of the plan, or the units
    g: np.ndarray = field(repr=False)
    tested: np.ndarray = field(repr=False)
    second: np.ndarray | None = field(repr=False)
    total: float = 0.0
    adjusted: bool = False  # the reduced model is not empty (residuals, not sites, permuted)
    classes: np.ndarray | None = field(default=None, repr=False)  # one-way: class codes
    kernel: PermutedTraces | PermutedClassSums | None = field(default=None, repr=False)

    @property
    def statistic(self) -> float:
        return (self.ss / self.df) / (self.den_ss / self.den_df)

    def plan_key(self) -> tuple:
        codes = None if self.restrict is None else tuple(
            pd.factorize(pd.Series(self.restrict, dtype=object))[0].tolist())
        return (self.kind, codes)

    def prepare(self) -> None:
        if self.kernel is None and self.classes is not None:
            # One factor alone: tr(Q' G_o Q) = sum_c S_c / n_c, S_c the sum of G_o over the
            # block of class c (G's rows sum to zero), read over the blocks only.
            sizes = np.bincount(self.classes).astype(np.float64)
            if sizes.size == 2:  # S_0 = S_1: the smaller block alone, weighted 1/n_0 + 1/n_1
                small = int(np.argmin(sizes))
                self.kernel = PermutedClassSums(self.g, (self.classes != small).astype(np.intp),
                                                first=1)
                self._sizes = np.array([1.0 / (1.0 / sizes[0] + 1.0 / sizes[1])])
            else:
                self.kernel = PermutedClassSums(self.g, self.classes)
                self._sizes = sizes
        if self.kernel is None:
            bases = [self.tested] if self.second is None else [self.tested, self.second]
            self.kernel = PermutedTraces(self.g, bases)

    def release(self) -> None:
        self.kernel = None

    def batch(self, orders: np.ndarray) -> np.ndarray:
        self.prepare()
        if self.classes is not None:
            ss = (self.kernel(orders) / self._sizes).sum(axis=1)  # type: ignore[misc]
            with np.errstate(divide="ignore", invalid="ignore"):
                return (ss / self.df) / ((self.total - ss) / self.den_df)
        traces = self.kernel(orders)  # type: ignore[misc]
        ss = traces[:, 0]
        if self.kind == "residuals":
            den = self.total - (ss if self.second is None else traces[:, 1])
        else:
            den = traces[:, 1]
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ss / self.df) / (den / self.den_df)


def _residual_matrix(g: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """``M G M`` with ``M = I - Q Q'`` (``G`` itself for an empty basis)."""
    if basis.shape[1] == 0:
        return g
    gq = g @ basis
    out = g - gq @ basis.T - basis @ gq.T + basis @ (basis.T @ gq) @ basis.T
    return (out + out.T) / 2.0


def _trace(g: np.ndarray, q: np.ndarray) -> float:
    return float(np.sum((g @ q) * q)) if q.shape[1] else 0.0


def _denominators(design: Design) -> dict[str, Term]:
    """Term -> the nested term whose mean square it is tested against (Anderson 2001).

    A term made only of classes that a nested term is nested in varies only between that
    term's units, so its units, not the sites, are its replicates. Of several, the nested term
    with the fewest enclosing columns (the nearest) is taken.
    """
    nested = [t for t in design.terms if t.nested]
    out: dict[str, Term] = {}
    for t in design.terms:
        if any(c in design.covariates for c in t.columns):
            continue
        above = [n for n in nested if n is not t and set(t.columns) <= set(n.within)]
        if above:
            out[t.name] = min(above, key=lambda n: len(n.within))
    return out


def _combine(a: np.ndarray | None, b: np.ndarray) -> np.ndarray:
    if a is None:
        return b
    return np.array([f"{x}\x1f{y}" for x, y in zip(a, b, strict=True)], dtype=object)


def _build_tests(design: Design, gm: GowerMatrix, kind: str, strata: np.ndarray | None
                 ) -> tuple[list[_TermTest], float, int, list[str]]:
    g = np.asarray(gm.matrix)
    tested, reduced, full, notes = model_bases(design, kind)
    total = gm.total
    rss = total - _trace(g, full)
    df_res = design.n - 1 - full.shape[1]
    if not rss > 1e-12 * max(abs(total), 1e-300):
        raise InputError("The terms reproduce the dissimilarities exactly (no residual "
                         "variation), so no pseudo-F can be formed; drop terms or add sites.")
    index = {t.name: i for i, t in enumerate(design.terms)}
    above = _denominators(design)
    tests = []
    for i, term in enumerate(design.terms):
        q = tested[i]
        ss = _trace(g, q)
        if term.name in above:
            nested = above[term.name]
            if strata is not None:
                raise InputError(
                    f"{term.name!r} is tested against {nested.name!r} by exchanging whole "
                    f"units of {nested.name!r}, which cannot also be kept within `strata`. "
                    "Drop `strata`, or drop the nested term to test every term against the "
                    "residual within strata.", columns=list(nested.columns))
            j = index[nested.name]
            tests.append(_TermTest(term, "units", q.shape[1], ss, nested.name,
                                   tested[j].shape[1], _trace(g, tested[j]),
                                   design.combination(list(nested.columns)), g, q, tested[j]))
            continue
        restrict = strata
        if term.nested:
            restrict = _combine(strata, design.combination(list(term.within)))
        gr = _residual_matrix(g, reduced[i])
        whole_model = reduced[i].shape[1] == 0 and full.shape[1] == q.shape[1]
        one_way = (len(design.terms) == 1 and not term.nested and not design.covariates
                   and len(term.factors) == 1)
        tests.append(_TermTest(term, "residuals", q.shape[1], ss, "residual", df_res, rss,
                               restrict, gr, q, None if whole_model else full,
                               total=float(np.trace(gr)), adjusted=bool(reduced[i].shape[1]),
                               classes=design.factors[term.factors[0]].codes if one_way
                               else None))
    return tests, rss, df_res, notes


def _plan(test: _TermTest, design: Design, n_resamples: int,
          seed: np.random.SeedSequence) -> PermutationPlan:
    n = design.n
    if test.kind == "units":
        sizes = np.bincount(pd.factorize(pd.Series(test.restrict, dtype=object))[0])
        if len(set(sizes.tolist())) != 1:
            raise InputError(
                f"{test.term.name!r} is tested by exchanging whole units of "
                f"{test.denominator!r}, which needs every unit to hold the same number of "
                f"sites; sizes found: {sorted(set(sizes.tolist()))}. Sample every unit "
                "equally, or average the sites of each unit and test the classes at the unit "
                "level.", columns=[test.denominator])
        return permutation_plan(n, "blocks", blocks=test.restrict, n_resamples=n_resamples,
                                rng=seed, batch_size=BATCH_SIZE)
    cells = design.cells()
    try:
        if cells is None:
            return permutation_plan(n, strata=test.restrict, n_resamples=n_resamples, rng=seed,
                                    batch_size=BATCH_SIZE, site_labels=design.labels)
        one_way = len(design.terms) == 1 and test.restrict is None
        return permutation_plan(n, "relabel", groups=cells, strata=test.restrict,
                                interchangeable=one_way, n_resamples=n_resamples, rng=seed,
                                batch_size=BATCH_SIZE, site_labels=design.labels)
    except InputError as err:
        raise InputError(f"The test of {test.term.name!r} has no rearrangement to compare "
                         f"with: {err}") from None


def _run(tests: list[_TermTest], design: Design, n_resamples: int,
         seed: np.random.SeedSequence, n_jobs: int) -> dict[str, tuple[float, np.ndarray, bool,
                                                                      int, str]]:
    """Every term's test; terms with the same rearrangements share one engine run."""
    groups: dict[tuple, list[_TermTest]] = {}
    for t in tests:
        groups.setdefault(t.plan_key(), []).append(t)
    out = {}
    for members in groups.values():
        plan = _plan(members[0], design, n_resamples, seed)
        for t in members:
            t.prepare()
        observed = np.array([t.statistic for t in members])

        def statistic(orders: np.ndarray, members: list[_TermTest] = members) -> np.ndarray:
            return np.column_stack([t.batch(orders) for t in members])

        try:
            with numba_threads(n_jobs):
                res = permutation_test(statistic, plan, observed=observed, alternative="greater",
                                       n_jobs=n_jobs, backend="threading", task="PERMANOVA")
        finally:
            for t in members:
                t.release()
        null = res.null_distribution.reshape(res.null_distribution.shape[0], -1)
        used = np.atleast_1d(res.n_resamples)
        how = "all" if res.exact else f"{int(used[0])} random"
        for j, t in enumerate(members):
            words = f"{_plan_words(t, plan)}; {how} rearrangements"
            out[t.term.name] = (float(np.atleast_1d(res.pvalue)[j]), null[:, j].copy(),
                                bool(res.exact), int(used[j]), words)
    return out


def _plan_words(test: _TermTest, plan: PermutationPlan) -> str:
    if test.kind == "units":
        return f"whole units of {test.denominator} exchanged ({plan.n_sites} sites)"
    what = "residuals of the model without it permuted" if test.adjusted else "sites permuted"
    return f"{what}: {plan.description}"


# --------------------------------------------------------------------------- the function
def permanova(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    design: pd.DataFrame | pd.Series,
    *,
    terms: str | list[str] | None = None,
    strata: pd.Series | np.ndarray | list[object] | None = None,
    n_resamples: int = 999,
    rng: RNGLike = None,
    n_jobs: int | None = -1,
    sums_of_squares: str = "sequential",
    pairwise: bool = True,
    adjust: str | None = "holm",
    dispersion: bool = True,
) -> PermanovaResult:
    """Permutational multivariate analysis of variance of a distance matrix (PERMANOVA).

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Dissimilarities among the sites (any coefficient).
    design : DataFrame or Series
        Site classes (text, categorical or boolean columns) and continuous covariates
        (numeric columns), one row per site, indexed by site label.
    terms : list of str, optional
        The terms to test, in order, in the syntax of :mod:`gradients.groups._design`:
        ``"zone"``, ``"zone:period"`` (interaction), ``"zone*period"`` (both and their
        interaction), ``"site(zone)"`` (``site`` nested in ``zone``). Default: every column of
        ``design`` as a main effect.
    strata : Series or sequence, optional
        Keep every rearrangement within strata (sampling campaigns, catchments, sites visited
        before and after). A term that does not vary within strata cannot be tested this way
        (its p-value is 1 by construction; the notes say so).
    n_resamples : int, default 999
        Random rearrangements per term; when a design allows no more distinct ones than this,
        all are enumerated and the test is exact.
    rng : int, numpy.random.Generator or None
        Source of randomness. When `rng` is None, a new `numpy.random.Generator` is created
        using entropy from the operating system.
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.
    sums_of_squares : {'sequential', 'marginal'}, default 'sequential'
        'sequential' (Type I): each term adjusted for the terms before it. 'marginal' (Type
        III): each term adjusted for all the others, factors coded by sum-to-zero contrasts.
    pairwise : bool, default True
        Also compare every pair of classes of each factor with three or more classes.
    adjust : {'holm', 'fdr_bh'} or None, default 'holm'
        Multiplicity adjustment of the pairwise p-values, within each factor.
    dispersion : bool, default True
        Beside the test of location, test each factor for equal spreads
        (:func:`dispersion_test`).

    Returns
    -------
    PermanovaResult

    Notes
    -----
    With ``G`` Gower's centred matrix of ``d`` and ``Q`` an orthonormal basis of a term's
    columns after the intercept and the terms it is adjusted for are removed, the term's sum of
    squares is ``tr(Q' G Q)``, which for Euclidean distances is the multivariate ANOVA sum of
    squares and equals the sum of squared distances formulation of [1]_ [2]_. The pseudo-F is
    ``(SS / df) / (SS_residual / df_residual)``.

    Permutations follow [3]_. A term is tested by permuting the residuals of the model
    without it (for one term, the sites themselves) and refitting (Freedman & Lane 1983 [4]_):
    the residual matrix ``M G M`` of the reduced model is rearranged and both traces of the
    pseudo-F are evaluated for a batch of orders by the distance stage's kernel. A nested term
    ``b(a)`` is tested with rearrangements kept within the classes of ``a``; a term made of
    classes that a nested term is nested in (``a`` for ``b(a)``) is tested against that
    term's mean square by exchanging its units whole. With only factors in the design the
    statistic is the same for every order that keeps each cell's sites together, so the
    engine enumerates distinct reassignments of cells when there are few enough (35 for one
    factor with two classes of 4 sites) and the p-value is exact.

    Every factor is also tested for homogeneity of dispersions [5]_; when spreads differ the
    notes warn that the location test is confounded.

    References
    ----------
    .. [1] Anderson, M. J. (2001). A new method for non-parametric multivariate analysis of
       variance. Austral Ecology 26: 32-46.
    .. [2] McArdle, B. H. & Anderson, M. J. (2001). Fitting multivariate models to community
       data: a comment on distance-based redundancy analysis. Ecology 82: 290-297.
    .. [3] Anderson, M. J. & ter Braak, C. J. F. (2003). Permutation tests for multi-factorial
       analysis of variance. Journal of Statistical Computation and Simulation 73: 85-113.
    .. [4] Freedman, D. & Lane, D. (1983). A nonstochastic interpretation of reported
       significance levels. Journal of Business & Economic Statistics 1: 292-298.
    .. [5] Anderson, M. J. (2006). Distance-based tests for homogeneity of multivariate
       dispersions. Biometrics 62: 245-253.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, permanova
    >>> rng = np.random.default_rng(0)
    >>> zone = np.repeat(["near", "far"], 6)
    >>> y = rng.normal(size=(12, 3)) + (zone == "near")[:, None] * 2.0
    >>> sites = [f"s{i}" for i in range(12)]
    >>> res = permanova(DistanceMatrix(pdist(y), sites),
    ...                 pd.DataFrame({"zone": zone}, index=sites), rng=1)
    >>> res.table["term"].tolist()
    ['zone', 'residual', 'total']
    >>> bool(res.pvalue["zone"] < 0.01)
    True
    """
    dm = check_distances(d)
    n_resamples = check_n_resamples(n_resamples)
    n_jobs = check_n_jobs(n_jobs)
    kind = check_choice("sums_of_squares", sums_of_squares, SUMS_OF_SQUARES)
    if adjust is not None:
        check_choice("adjust", adjust, ADJUST_METHODS)
    given = dm.labels
    strata_values = read_strata(strata, given)
    # Work on the sites sorted by label, so that every plan (whole units included) and hence
    # every p-value is the same however the rows of the inputs were ordered.
    order = np.argsort(site_ranks(given))
    if not np.array_equal(order, np.arange(order.size)):
        dm = dm.subset(given[order])
    if strata_values is not None:
        strata_values = strata_values[order]
    des, notes = read_design(design, dm.labels, terms)
    gm = gower_centred(dm)
    tests, rss, df_res, more = _build_tests(des, gm, kind, strata_values)
    notes.extend(more)
    factor_terms = des.factor_terms()
    seeds = streams(rng, 1 + 2 * len(factor_terms))
    outcome = _run(tests, des, n_resamples, seeds[0], n_jobs)
    if strata_values is not None:
        for t in tests:  # no rearrangement within strata moves its classes: no test of it
            if t.kind == "residuals" and _constant_within(des, t.term, strata_values):
                _, *rest = outcome[t.term.name]
                outcome[t.term.name] = (float("nan"), *rest)

    table = _table(tests, outcome, rss, df_res, gm.total, des.n, kind)
    dispersions: dict[str, DispersionResult] = {}
    if dispersion:
        for j, t in enumerate(factor_terms):
            if strata_values is not None and _constant_within(des, t, strata_values):
                notes.append(f"The spreads of {t.name!r} are not tested: it does not vary "
                             "within the strata, so no rearrangement within strata can "
                             "reassign its classes.")
                continue
            res = dispersion_from_gower(
                gm, des.factors[t.factors[0]], strata=strata_values, n_resamples=n_resamples,
                rng=seeds[1 + j], n_jobs=n_jobs)
            dispersions[t.name] = dataclasses.replace(res, distances=res.distances.loc[given])
    pairs = pd.DataFrame(columns=list(PAIRWISE_COLUMNS))
    if pairwise:
        whole = {t.term.name: t.denominator for t in tests if t.kind == "units"}
        asked = [t for t in factor_terms if len(des.factors[t.factors[0]].levels) > 2
                 and t.name not in whole]
        for name, den in whole.items():
            if name in des.factors and len(des.factors[name].levels) > 2:
                notes.append(f"Pairs of classes of {name!r} are not compared: it is tested "
                             f"against {den!r}, and a comparison of sites would count the "
                             "sites of one unit as independent replicates.")
        pairs, pair_notes = pairwise_tests(
            dm, des, asked, strata_values, n_resamples=n_resamples,
            seeds={t.name: seeds[1 + len(factor_terms) + factor_terms.index(t)] for t in asked},
            n_jobs=n_jobs, adjust=adjust)
        notes.extend(pair_notes)
    notes = _notes(notes, des, tests, kind, strata_values, gm, dispersions)
    index = pd.Index([t.term.name for t in tests], name="term")
    return PermanovaResult(
        table=table,
        statistic=pd.Series([t.statistic for t in tests], index=index, name="pseudo_f"),
        pvalue=pd.Series([outcome[t.term.name][0] for t in tests], index=index.copy(),
                         name="pvalue"),
        null_distribution={name: v[1] for name, v in outcome.items()},
        sums_of_squares=kind, n_sites=des.n, n_resamples=n_resamples,
        exact=all(v[2] for v in outcome.values()), pairwise=pairs, dispersion=dispersions,
        notes=tuple(notes))


def _table(tests: list[_TermTest], outcome: dict, rss: float, df_res: int, total: float,
           n: int, kind: str) -> pd.DataFrame:
    rows = [{"term": t.term.name, "df": t.df, "sum_of_squares": t.ss,
             "mean_square": t.ss / t.df, "pseudo_f": t.statistic, "r2": t.ss / total,
             "pvalue": outcome[t.term.name][0], "tested_against": t.denominator,
             "sums_of_squares": kind, "permutations": outcome[t.term.name][4]} for t in tests]
    rows.append({"term": "residual", "df": df_res, "sum_of_squares": rss,
                 "mean_square": rss / df_res, "pseudo_f": np.nan, "r2": rss / total,
                 "pvalue": np.nan, "tested_against": "", "sums_of_squares": "",
                 "permutations": ""})
    rows.append({"term": "total", "df": n - 1, "sum_of_squares": total,
                 "mean_square": total / (n - 1), "pseudo_f": np.nan, "r2": 1.0,
                 "pvalue": np.nan, "tested_against": "", "sums_of_squares": "",
                 "permutations": ""})
    return pd.DataFrame(rows, columns=list(TABLE_COLUMNS))


def _constant_within(design: Design, term: Term, strata: np.ndarray) -> bool:
    if any(c in design.covariates for c in term.columns):
        return False
    codes = design.combination(list(term.columns))
    frame = pd.DataFrame({"s": pd.factorize(pd.Series(strata, dtype=object))[0], "c": codes})
    return bool((frame.groupby("s")["c"].nunique() == 1).all())


def _notes(notes: list[str], design: Design, tests: list[_TermTest], kind: str,
           strata: np.ndarray | None, gm: GowerMatrix,
           dispersions: dict[str, DispersionResult]) -> list[str]:
    out = []
    if kind == "sequential":
        out.append("Sums of squares are sequential (Type I): each term is adjusted for the "
                   "terms listed before it, so with unequal class sizes the order of the terms "
                   "changes the table.")
    else:
        out.append("Sums of squares are marginal (Type III): each term is adjusted for every "
                   "other term, factors coded by sum-to-zero contrasts; they need not add up "
                   "to the model's sum of squares.")
    if any(t.adjusted for t in tests):
        out.append("Each term is tested by permuting the residuals of the model without it "
                   "and refitting (Freedman & Lane 1983; Anderson & ter Braak 2003).")
    for t in tests:
        if t.kind == "units":
            out.append(f"{t.term.name!r} is tested against the mean square of "
                       f"{t.denominator!r}, whose units are its replicates (treated as random), "
                       "by exchanging those units whole (Anderson & ter Braak 2003).")
        elif t.term.nested:
            out.append(f"{t.term.name!r} is tested with rearrangements kept within the classes "
                       f"of {':'.join(t.term.within)}.")
    if strata is not None:
        flat = [t.term.name for t in tests if t.kind == "residuals"
                and _constant_within(design, t.term, strata)]
        if flat:
            out.append(f"{format_items(flat)} do(es) not vary within the strata: rearrangements "
                       "within strata never reassign its classes, so it is not tested (no "
                       "p-value). Test it without `strata`, or with the strata's units as a "
                       "nested term (e.g. 'site(treatment)').")
    out.extend(notes)
    out.extend(gm.spectrum_notes())
    for name, res in dispersions.items():
        if res.differs:
            out.append(confounding_note(repr(name), res.statistic, res.pvalue))
        else:
            out.append(f"Spreads do not differ detectably among the classes of {name!r} "
                       f"(dispersion F = {res.statistic:.3g}, p = {res.pvalue:.3g}).")
    return out
