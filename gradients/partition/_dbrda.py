"""Distance-based redundancy analysis: a linear model of community dissimilarities."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._result import ResultMixin
from .._validation import RNGLike, check_n_resamples
from ..distance import DistanceMatrix
from ..distance._centred import GowerMatrix, gower_centred
from ..distance._matrix import as_distance_matrix
from ..ordination._common import axis_names, orient_columns
from ..permutation import seed_sequence
from ._design import (
    Block,
    align_strata,
    check_n_jobs,
    check_rank,
    check_size,
    combine,
    orthonormal,
    read_block,
    residualise,
)
from ._ftest import (
    PseudoF,
    adjusted_r2,
    axis_test,
    make_plan,
    residual_matrix,
    run_tests,
    term_test,
)

__all__ = ["DbRDAResult", "dbrda"]


@dataclass(frozen=True, repr=False)
class DbRDAResult(ResultMixin):
    """Outcome of :func:`dbrda`.

    Attributes
    ----------
    statistic : float
        Pseudo-F of the whole model (all predictors, given the covariables).
    pvalue : float
        Its permutation p-value (NaN when ``n_resamples=0``).
    null_distribution : ndarray, shape (n_resamples,)
        The model's pseudo-F under the rearrangements.
    n_sites, n_resamples : int
    table : pandas.DataFrame
        One row per test: ``test`` (``'model'``, ``'axis'``, ``'term'``, ``'residual'``),
        ``effect`` (``'all predictors'``, ``'axis1'`` ..., the predictor's column name,
        ``'residual'``), ``df``, ``inertia`` (sum of squares, or the axis's eigenvalue),
        ``r2`` (inertia over the total), ``statistic`` (pseudo-F) and ``pvalue``.
    r2, r2_adjusted : float
        Share of the total inertia explained by the predictors (beyond the covariables), and
        Ezekiel's adjustment of it (with covariables, ``adj(predictors + covariables) -
        adj(covariables)``).
    df, df_residual : int
        Predictor columns (a factor counts its levels but one) and residual degrees of freedom.
    inertia : pandas.Series
        ``total``, ``covariables``, ``constrained``, ``unconstrained`` sums of squares.
    constrained, unconstrained : pandas.Series
        Eigenvalues of the fitted (``axis1`` ...) and residual (``residual1`` ...) matrices,
        decreasing, negative ones included; on the scale of ``pcoa``'s eigenvalues, so
        covariables + constrained + unconstrained = total.
    site_scores, fitted_scores : pandas.DataFrame
        Site scores on the constrained axes with positive eigenvalues: in the space of the
        community (``G V / sqrt(lambda)``) and fitted by the predictors (``V sqrt(lambda)``).
        Rows labelled by site.
    biplot_scores : pandas.DataFrame
        Correlation of each predictor column (covariables partialled out) with the fitted site
        scores of each axis.
    exact : bool
    scheme : str
    correction : str or None
    constant : float
    notes : tuple of str
    """

    statistic: float
    pvalue: float
    null_distribution: np.ndarray
    n_sites: int
    n_resamples: int
    table: pd.DataFrame
    r2: float
    r2_adjusted: float
    df: int
    df_residual: int
    inertia: pd.Series
    constrained: pd.Series
    unconstrained: pd.Series
    site_scores: pd.DataFrame
    fitted_scores: pd.DataFrame
    biplot_scores: pd.DataFrame
    exact: bool
    scheme: str
    correction: str | None
    constant: float
    notes: tuple[str, ...] = ()


def _eigen_tolerance(gm: GowerMatrix) -> float:
    return 1e-9 * max(abs(gm.total), float(np.max(np.abs(gm.matrix))), 1e-300)


def dbrda(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    predictors: pd.DataFrame | pd.Series,
    *,
    covariables: pd.DataFrame | pd.Series | None = None,
    n_resamples: int = 999,
    rng: RNGLike = None,
    strata: object = None,
    n_jobs: int | None = -1,
    correction: str | None = None,
) -> DbRDAResult:
    r"""Distance-based redundancy analysis (dbRDA) of community dissimilarities.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Community dissimilarities, any coefficient (Bray-Curtis, ...).
    predictors : DataFrame or Series indexed by site label
        Explanatory variables. Numeric columns are used as they are; text, categorical and
        boolean columns are factors, coded as indicators of every level but the first.
    covariables : DataFrame or Series, optional
        Variables whose effect is removed first (partial dbRDA), coded the same way.
    n_resamples : int, default 999
        Permutations for the tests (0: fit only, p-values NaN). When no more distinct
        permutations exist, all are enumerated and the tests are exact.
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    strata : sequence or Series, optional
        Permute only within these groups (a Series is matched by site label).
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.
    correction : {None, "lingoes", "cailliez"}, optional
        Make non-Euclidean dissimilarities Euclidean first (see
        :func:`gradients.distance.gower_centred`). Default: analyse as given, report the
        negative eigenvalues.

    Returns
    -------
    DbRDAResult

    Notes
    -----
    With ``G = -1/2 J D^2 J`` Gower's centred matrix [1]_, ``Qz`` an orthonormal basis of the
    centred covariables, ``Gr = (I - Qz Qz') G (I - Qz Qz')`` and ``Q`` an orthonormal basis of
    the centred predictors with the covariables removed, the model's sum of squares is
    ``tr(Q' Gr Q)`` and

    .. math:: F = \frac{\mathrm{tr}(Q' G_r Q) / p}{(\mathrm{tr}(G_r) - \mathrm{tr}(Q' G_r Q)) /
              (n - p - q - 1)}

    (Legendre & Anderson 1999 [2]_; McArdle & Anderson 2001 [3]_). With Euclidean distances
    among the rows of a table this is redundancy analysis of that table, and with one column it
    is the ordinary least-squares R^2 and F. The constrained axes are the eigenvectors of
    ``Q' Gr Q`` carried back to the sites.

    Tests, all on the same rearrangements: the whole model; each constrained axis in turn,
    given the covariables and the axes before it (Legendre, Oksanen & ter Braak 2011 [4]_);
    each term given all the others (marginal). Each permutes the residuals of its reduced
    model (Freedman & Lane 1983; [2]_): the residual matrix is rearranged and the full model
    refitted, evaluated for whole batches by the distance stage's trace kernel. Adjusted R^2
    is Ezekiel's, as recommended for canonical analysis by Peres-Neto et al. (2006) [5]_.

    References
    ----------
    .. [1] Gower, J. C. (1966). Biometrika 53: 325-338.
    .. [2] Legendre, P. & Anderson, M. J. (1999). Distance-based redundancy analysis: testing
       multispecies responses in multifactorial ecological experiments. Ecological Monographs
       69: 1-24.
    .. [3] McArdle, B. H. & Anderson, M. J. (2001). Fitting multivariate models to community
       data: a comment on distance-based redundancy analysis. Ecology 82: 290-297.
    .. [4] Legendre, P., Oksanen, J. & ter Braak, C. J. F. (2011). Testing the significance of
       canonical axes in redundancy analysis. Methods in Ecology and Evolution 2: 269-277.
    .. [5] Peres-Neto, P. R., Legendre, P., Dray, S. & Borcard, D. (2006). Variation
       partitioning of species data matrices: estimation and comparison of fractions. Ecology
       87: 2614-2625.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from scipy.spatial.distance import pdist
    >>> from gradients.distance import DistanceMatrix
    >>> from gradients.partition import dbrda
    >>> rng = np.random.default_rng(0)
    >>> env = pd.DataFrame({"depth": rng.normal(size=25)}, index=[f"s{i}" for i in range(25)])
    >>> com = np.outer(env["depth"], [1.0, -0.5, 0.2]) + rng.normal(scale=0.5, size=(25, 3))
    >>> res = dbrda(DistanceMatrix(pdist(com), env.index), env, n_resamples=199, rng=1)
    >>> bool(res.pvalue < 0.05)
    True
    """
    dm = as_distance_matrix(d, name="d")
    n_resamples = check_n_resamples(n_resamples, allow_zero=True)
    n_jobs = check_n_jobs(n_jobs)
    seed = seed_sequence(rng)
    labels, n = dm.labels, dm.n
    x = read_block(predictors, labels, name="predictors")
    z = read_block(covariables, labels, name="covariables") if covariables is not None else None
    check_size(n, {"predictor": x.width, "covariable": z.width if z is not None else 0})
    check_rank([z, x] if z is not None else [x])
    strata_v = align_strata(strata, labels)
    gm = gower_centred(dm, correction=correction)
    g, total = gm.matrix, gm.total
    qz = orthonormal(z.values) if z is not None else np.empty((n, 0))
    q = residualise(x.values, qz)
    gr = residual_matrix(g, qz)
    p, nz = q.shape[1], qz.shape[1]
    ss_z = total - float(np.trace(gr))
    fitted = q.T @ gr @ q
    lam, w = np.linalg.eigh((fitted + fitted.T) / 2.0)
    lam, w = lam[::-1], w[:, ::-1]
    tol = _eigen_tolerance(gm)
    lam = np.where(np.abs(lam) <= tol, 0.0, lam)
    vecs = q @ w
    ss_x = float(np.trace(fitted))
    rss = float(np.trace(gr)) - ss_x
    df_res = n - p - nz - 1
    r2 = ss_x / total
    if z is not None:
        r2_adj = adjusted_r2((ss_x + ss_z) / total, n, p + nz) - adjusted_r2(ss_z / total, n, nz)
    else:
        r2_adj = adjusted_r2(r2, n, p)
    residual = np.linalg.eigvalsh(residual_matrix(gr, q))[::-1]
    residual = residual[np.abs(residual) > tol]

    positive = np.flatnonzero(lam > 0)
    signs = orient_columns(vecs[:, positive] * np.sqrt(lam[positive]))
    vecs[:, positive] *= signs
    names = axis_names(len(positive))
    root = np.sqrt(lam[positive])
    fitted_scores = pd.DataFrame(vecs[:, positive] * root, index=labels.copy(), columns=names)
    site_scores = pd.DataFrame((gr @ vecs[:, positive]) / root, index=labels.copy(),
                               columns=names)
    xr = x.values - x.values.mean(axis=0)
    if nz:
        xr = xr - qz @ (qz.T @ xr)
    biplot = (xr / np.sqrt(np.sum(xr * xr, axis=0))).T @ vecs[:, positive]
    biplot_scores = pd.DataFrame(biplot, index=pd.Index(x.columns, name="predictor"),
                                 columns=names)

    tests = _tests(g, x, z, qz, q, vecs, lam, positive)
    table = _table(tests, total, df_res, rss)
    notes = _notes(x, z, gm, lam, len(positive), n_resamples)
    pvalues = np.full(len(tests), np.nan)
    null = np.empty(0)
    exact, scheme, used = False, "none", 0
    if n_resamples:
        plan = make_plan(labels, strata=strata_v, n_resamples=n_resamples, rng=seed)
        unique = list({id(t[3]): t[3] for t in tests}.values())
        res = run_tests(unique, plan, n_jobs=n_jobs, task="dbRDA")
        where = {id(t): i for i, t in enumerate(unique)}
        pvalues = np.asarray(res.pvalue, dtype=np.float64)[[where[id(t[3])] for t in tests]]
        null = np.asarray(res.null_distribution)[:, 0]
        exact, scheme, used = res.exact, res.scheme, int(np.max(res.n_resamples))
        notes.insert(0, _test_note(z is not None, used, plan.description, exact))
        table.loc[table["test"] != "residual", "pvalue"] = pvalues
    model = tests[0][3]
    return DbRDAResult(
        statistic=model.statistic, pvalue=float(pvalues[0]), null_distribution=null,
        n_sites=n, n_resamples=used, table=table, r2=float(r2), r2_adjusted=float(r2_adj),
        df=p, df_residual=df_res,
        inertia=pd.Series({"total": total, "covariables": ss_z, "constrained": ss_x,
                           "unconstrained": rss}, name="inertia"),
        constrained=pd.Series(lam, index=pd.Index(axis_names(p), name="axis"),
                              name="eigenvalue"),
        unconstrained=pd.Series(residual, index=pd.Index(
            [f"residual{i}" for i in range(1, residual.size + 1)], name="axis"),
            name="eigenvalue"),
        site_scores=site_scores, fitted_scores=fitted_scores, biplot_scores=biplot_scores,
        exact=exact, scheme=scheme, correction=gm.correction, constant=gm.constant,
        notes=tuple(notes))


def _tests(g: np.ndarray, x: Block, z: Block | None, qz: np.ndarray, q: np.ndarray,
           vecs: np.ndarray, lam: np.ndarray,
           positive: np.ndarray) -> list[tuple[str, str, float, PseudoF]]:
    """The model test, one test per positive axis, and one per term (marginal): rows of
    ``(test, effect, inertia, PseudoF)``."""
    model = term_test("the model", g, qz, q)
    out = [("model", "all predictors", model.ss, model)]
    for j in positive:
        reduced = np.hstack([qz, vecs[:, :j]])
        out.append(("axis", f"axis{j + 1}", float(lam[j]),
                    axis_test(f"axis {j + 1}", g, reduced, vecs[:, j:], float(lam[j]))))
    if len(x.terms) == 1:  # the only term's marginal test is the model test
        out.append(("term", x.terms[0], model.ss, model))
        return out
    for t, name in enumerate(x.terms):
        others = x.take_terms([s for s in range(len(x.terms)) if s != t])
        reduced = orthonormal(combine([z, others]).values)
        tested = residualise(x.take_terms([t]).values, reduced)
        test = term_test(f"term {name!r}", g, reduced, tested)
        out.append(("term", name, test.ss, test))
    return out


def _table(tests: list[tuple[str, str, float, PseudoF]], total: float, df_res: int,
           rss: float) -> pd.DataFrame:
    rows = [{"test": kind, "effect": effect, "df": t.df, "inertia": inertia,
             "statistic": t.statistic} for kind, effect, inertia, t in tests]
    rows.append({"test": "residual", "effect": "residual", "df": df_res, "inertia": rss,
                 "statistic": np.nan})
    table = pd.DataFrame(rows)
    table.insert(4, "r2", table["inertia"] / total)
    table["pvalue"] = np.nan
    return table


def _test_note(partial: bool, used: int, description: str, exact: bool) -> str:
    what = ("residuals of the covariables-only model (Freedman & Lane 1983) permuted" if partial
            else "rows and columns of the centred matrix permuted together")
    how = "all" if exact else f"{used} random"
    return (f"Pseudo-F tests by {how} permutations ({description}), {what}; axes and terms "
            "permute the residuals of their own reduced models. All tests use the same "
            "rearrangements.")


def _notes(x: Block, z: Block | None, gm: GowerMatrix, lam: np.ndarray, n_positive: int,
           n_resamples: int) -> list[str]:
    notes = [
        "Constrained axes are tested in order, each given the covariables and the axes before "
        "it (Legendre, Oksanen & ter Braak 2011): read them in order and stop at the first "
        "that is not significant.",
    ]
    if len(x.terms) > 1:
        notes.append("Each term is tested given all the other terms (marginal tests), so "
                     "correlated terms can each look weak although together they are strong; "
                     "the model test answers for them jointly.")
    if z is not None:
        notes.append(f"Covariables ({', '.join(z.terms)}) were partialled out: R2 is the share "
                     "of the total inertia explained by the predictors beyond them, and the "
                     "adjusted R2 is adj(predictors + covariables) - adj(covariables) "
                     "(Peres-Neto et al. 2006).")
    notes.extend(gm.notes)
    notes.extend(gm.spectrum_notes())
    if n_positive < lam.size:
        notes.append(f"{lam.size - n_positive} of {lam.size} constrained eigenvalues are not "
                     "positive: zero when the dissimilarities have fewer dimensions than there "
                     "are predictor columns, negative only with non-Euclidean dissimilarities. "
                     "Those axes have no scores and are not tested.")
    if not n_resamples:
        notes.append("No permutation test was run (n_resamples=0): p-values are missing.")
    return notes
