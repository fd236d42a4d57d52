"""Generalized dissimilarity modelling (Ferrier et al. 2007): how much turnover, and where.

Where along each gradient the community turns over, and how much.

:func:`turnover_model` builds the I-spline differences of every predictor for every pair of
sites (:mod:`._splines`), fits the non-negative model by maximum likelihood (:mod:`._gdm`),
tests each predictor by permuting its site values and refitting, through the permutation
engine, and returns a :class:`~._turnover_result.TurnoverModelResult`.
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

from .._errors import InputError, format_items
from .._validation import RNGLike, check_n_jobs, check_n_resamples, seed_sequence
from ..distance import DistanceMatrix, as_distance_matrix
from ..permutation import permutation_plan, permutation_test
from ._gdm import ModelFit, fit_nonnegative, kkt_violation, null_deviance
from ._inputs import read_candidates, read_dissimilarities, strata_for
from ._splines import ISplineBasis, quantile_knots
from ._turnover_result import CURVE_POINTS, GEOGRAPHY, TurnoverModelResult, steepest_half

__all__ = ["turnover_model"]

#: Rearrangements per batch of the plan: small enough that two workers share 99 permutations,
#: part of the plan so that p-values do not depend on ``n_jobs``.
BATCH_SIZE = 10


@dataclass
class _Design:
    """Per-predictor I-spline bases and the design matrix of pair differences."""

    names: list[str]
    bases: list[ISplineBasis]
    site_values: list[np.ndarray | None]  # (n, s) bases at the sites; None for geography
    geo_features: np.ndarray | None  # (m, s) bases of the pairs' distances
    columns: list[slice]
    x: np.ndarray  # (m, 1 + sum s)
    n: int

    @property
    def pairs(self) -> tuple[np.ndarray, np.ndarray]:
        return np.triu_indices(self.n, 1)

    def take(self, keep: Sequence[int]) -> _Design:
        cols = [np.arange(self.columns[j].start, self.columns[j].stop) for j in keep]
        order = np.concatenate([[0], *cols]).astype(np.intp)
        slices, start = [], 1
        for c in cols:
            slices.append(slice(start, start + c.size))
            start += c.size
        return _Design([self.names[j] for j in keep], [self.bases[j] for j in keep],
                       [self.site_values[j] for j in keep], self.geo_features
                       if any(self.names[j] == GEOGRAPHY for j in keep) else None, slices,
                       np.ascontiguousarray(self.x[:, order]), self.n)

    def permuted(self, j: int, order: np.ndarray) -> np.ndarray:
        """The columns of predictor ``j`` with its site values rearranged by ``order``."""
        iu, ju = self.pairs
        values = self.site_values[j]
        if values is not None:
            v = values[order]
            return np.abs(v[iu] - v[ju])
        n = self.n
        position = np.zeros((n, n), dtype=np.intp)
        position[iu, ju] = np.arange(iu.size)
        position[ju, iu] = position[iu, ju]
        return self.geo_features[position[order[iu], order[ju]]]  # type: ignore[index]


def _knots_for(name: str, values: np.ndarray, n_splines: int,
               knots: Mapping[str, Sequence[float]] | None) -> np.ndarray:
    if knots is not None and name in knots:
        k = np.asarray(knots[name], dtype=np.float64)
        lo, hi = float(values.min()), float(values.max())
        if k.ndim != 1 or k.size < 2 or np.any(np.diff(k) <= 0) or k[0] > lo or k[-1] < hi:
            raise InputError(
                f"`knots` for {name!r} must be at least two increasing values from at most the "
                f"smallest ({lo:.4g}) to at least the largest ({hi:.4g}) value seen; got "
                f"{list(k)}.")
        return k
    k = quantile_knots(values, n_splines)
    if k.size < 2:  # pragma: no cover - constant predictors are refused before
        raise InputError(f"Predictor {name!r} takes a single value.")
    return k


def _design(names: list[str], values: np.ndarray, geo: np.ndarray | None, n_splines: int,
            knots: Mapping[str, Sequence[float]] | None) -> _Design:
    n = values.shape[0]
    iu, ju = np.triu_indices(n, 1)
    bases, site_values, blocks, columns = [], [], [np.ones((iu.size, 1))], []
    start = 1
    for j, name in enumerate(names):
        basis = ISplineBasis(_knots_for(name, values[:, j], n_splines, knots))
        b = basis(values[:, j])
        bases.append(basis)
        site_values.append(b)
        blocks.append(np.abs(b[iu] - b[ju]))
        columns.append(slice(start, start + basis.size))
        start += basis.size
    geo_features = None
    all_names = list(names)
    if geo is not None:
        basis = ISplineBasis(_knots_for(GEOGRAPHY, geo, n_splines, knots))
        geo_features = basis(geo)
        bases.append(basis)
        site_values.append(None)
        blocks.append(geo_features)
        columns.append(slice(start, start + basis.size))
        all_names.append(GEOGRAPHY)
    return _Design(all_names, bases, site_values, geo_features, columns,
                   np.ascontiguousarray(np.hstack(blocks)), n)


def _explained(fit: ModelFit, null: float) -> float:
    return 1.0 - fit.deviance / null if null > 0 else 0.0


def _test(design: _Design, y: np.ndarray, fit: ModelFit, null: float, plan, n_jobs: int):
    """Permutation p-values of every predictor: its site values permuted, the model refitted
    (warm-started from ``fit``); the statistic is the deviance explained."""
    observed = np.full(len(design.names), _explained(fit, null))

    def statistic(orders: np.ndarray) -> np.ndarray:
        out = np.empty((orders.shape[0], len(design.names)))
        x = design.x.copy()
        for b, order in enumerate(orders):
            for j, cols in enumerate(design.columns):
                saved = x[:, cols].copy()
                x[:, cols] = design.permuted(j, order)
                out[b, j] = _explained(fit_nonnegative(x, y, fit.coef), null)
                x[:, cols] = saved
        return out

    return permutation_test(statistic, plan, observed=observed, alternative="greater",
                            n_jobs=n_jobs, backend="threading", task="turnover model")


def _check_n_splines(n_splines: object) -> int:
    if not isinstance(n_splines, numbers.Integral) or isinstance(n_splines, bool) \
            or n_splines < 2:
        raise InputError(f"`n_splines` must be an integer of at least 2; got {n_splines!r}.")
    return int(n_splines)


def _check_alpha(alpha: object) -> float:
    if not isinstance(alpha, numbers.Real) or isinstance(alpha, bool) or not 0 < alpha < 1:
        raise InputError(f"`alpha` must be a number between 0 and 1; got {alpha!r}.")
    return float(alpha)


def turnover_model(
    d: DistanceMatrix | np.ndarray | pd.DataFrame,
    environment: pd.DataFrame,
    *,
    geo: DistanceMatrix | np.ndarray | pd.DataFrame | None = None,
    n_splines: int = 3,
    knots: Mapping[str, Sequence[float]] | None = None,
    n_resamples: int = 99,
    rng: RNGLike = None,
    strata: object = None,
    backward: bool = False,
    alpha: float = 0.05,
    n_jobs: int | None = -1,
) -> TurnoverModelResult:
    """Generalized dissimilarity model of community turnover along environmental gradients.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Community dissimilarities between 0 and 1 (Bray-Curtis, Jaccard, Sørensen, ...).
    environment : DataFrame indexed by site label
        Numeric predictors, in analysis units.
    geo : DistanceMatrix, optional
        Geographic or in-stream distances between the sites, entered as one more predictor
        (named "geography") whose function is of the distance itself.
    n_splines : int, default 3
        I-spline bases per predictor, with knots at evenly spaced quantiles (3: the minimum,
        median and maximum). Repeated quantiles are merged (fewer bases).
    knots : mapping of predictor name -> knots, optional
        Knots of chosen predictors (including the lowest and highest), covering the values
        seen; the others get ``n_splines`` quantile knots.
    n_resamples : int, default 99
        Permutations for each predictor's p-value; each refits the model. 0 skips the tests.
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    strata : Series or sequence, optional
        Group label per site: permutations stay within groups.
    backward : bool, default False
        Backward elimination: drop predictors whose function is flat (height 0), then, one at
        a time, the predictor with the largest p-value above ``alpha``, refitting and
        retesting after each drop; the steps are in ``elimination``.
    alpha : float, default 0.05
        Level of the backward elimination.
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.

    Returns
    -------
    TurnoverModelResult

    Notes
    -----
    The dissimilarity of sites ``i`` and ``j`` is modelled as ``1 - exp(-eta_ij)`` with
    ``eta_ij = a_0 + sum_p sum_k a_pk |I_pk(x_ip) - I_pk(x_jp)|`` and every ``a >= 0``, so each
    fitted turnover function ``f_p = sum_k a_pk I_pk`` is monotone [1]_; the I-splines of
    order 2 are Ramsay's [2]_ (see :mod:`._splines`). The fit maximises the binomial likelihood
    of the observed dissimilarities by iteratively reweighted non-negative least squares
    (:mod:`._gdm`) until the deviance changes by less than a relative ``1e-11``; the
    Karush-Kuhn-Tucker conditions are checked at the end (``kkt_violation``). Deviance explained
    is ``1 - D / D_0``, with ``D_0`` the deviance of the intercept-only model.

    The importance of a predictor is the height of its function, ``sum_k a_pk``: the turnover
    it accounts for from one end of its range to the other. Its p-value permutes that
    predictor's values among sites (the other predictors and the community stay in place),
    refits the model from the observed coefficients, and compares the deviance explained with
    the observed one (Ferrier et al. 2007 assess predictors the same way). Pairs of sites are
    not independent, so the permutation p-values are the only ones given.

    References
    ----------
    .. [1] Ferrier, S., Manion, G., Elith, J. & Richardson, K. (2007). Using generalized
       dissimilarity modelling to analyse and predict patterns of beta diversity in regional
       biodiversity assessment. Diversity and Distributions 13: 252-264.
    .. [2] Ramsay, J. O. (1988). Monotone regression splines in action. Statistical Science
       3: 425-461.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from scipy.spatial.distance import pdist
    >>> from gradients import DistanceMatrix, turnover_model
    >>> rng = np.random.default_rng(0)
    >>> env = pd.DataFrame({"a": rng.uniform(0, 10, 30), "b": rng.uniform(0, 10, 30)})
    >>> d = DistanceMatrix(1 - np.exp(-0.2 * pdist(env[["a"]])), env.index)
    >>> model = turnover_model(d, env, n_resamples=0)
    >>> model.table.index[0], round(model.deviance_explained, 2)
    ('a', 1.0)
    """
    n_splines = _check_n_splines(n_splines)
    n_resamples = check_n_resamples(n_resamples, allow_zero=True)
    n_jobs = check_n_jobs(n_jobs)
    alpha = _check_alpha(alpha)
    seed = seed_sequence(rng)
    dm = read_dissimilarities(d, bounded=True)
    cand = read_candidates(environment, dm.labels)
    if GEOGRAPHY in cand.names and geo is not None:
        raise InputError(f"`environment` has a column named {GEOGRAPHY!r}, the name of the "
                         "geographic predictor; rename it.", columns=[GEOGRAPHY])
    if knots is not None and not isinstance(knots, Mapping):
        raise InputError("`knots` must be a mapping of predictor name -> list of knots.")
    unknown = [k for k in (knots or {}) if k not in cand.names
               and not (k == GEOGRAPHY and geo is not None)]
    if unknown:
        raise InputError(f"`knots` names {format_items(unknown)}, which are not predictors.")
    geo_values = None
    if geo is not None:
        gm = as_distance_matrix(geo, name="geo")  # type: ignore[arg-type]
        if isinstance(geo, DistanceMatrix | pd.DataFrame):
            gm = gm.align(dm.labels)
        elif gm.n != dm.n:
            raise InputError(f"`geo` holds {gm.n} sites and `d` {dm.n}.")
        geo_values = np.asarray(gm.condensed, dtype=np.float64)
        if np.ptp(geo_values) == 0:
            raise InputError("Every pair of sites is the same distance apart in `geo`: it "
                             "cannot predict turnover. Leave it out.")
    strata_v = strata_for(strata, dm.labels)
    y = np.asarray(dm.condensed, dtype=np.float64)
    design = _design(list(cand.names), cand.values, geo_values, n_splines, knots)
    null = null_deviance(y)
    plan = (permutation_plan(dm.n, n_resamples=n_resamples, rng=seed, strata=strata_v,
                             site_labels=dm.labels, batch_size=BATCH_SIZE)
            if n_resamples > 0 else None)
    # the fits are many mid-sized products: a multi-threaded BLAS gains nothing on them and
    # its idle threads spin (measured: several times slower on a loaded two-core machine)
    with threadpool_limits(limits=1, user_api="blas"):
        return _fit_and_test(design, y, null, dm, plan, backward, alpha, n_jobs, n_splines)


def _fit_and_test(design: _Design, y: np.ndarray, null: float, dm: DistanceMatrix, plan,
                  backward: bool, alpha: float, n_jobs: int,
                  n_splines: int) -> TurnoverModelResult:
    keep = list(range(len(design.names)))
    steps: list[dict[str, object]] = []
    while True:
        current = design.take(keep)
        fit = fit_nonnegative(current.x, y)
        heights = [float(fit.coef[c].sum()) for c in current.columns]
        if backward and len(keep) > 1:
            flat = [i for i, h in enumerate(heights) if h <= 0]
            if flat and len(flat) < len(keep):
                for i in flat:
                    steps.append({"step": len(steps) + 1, "dropped": current.names[i],
                                  "importance": 0.0, "pvalue": np.nan,
                                  "reason": "its turnover function is flat (height 0)"})
                keep = [k for i, k in enumerate(keep) if i not in flat]
                continue
        tested = _test(current, y, fit, null, plan, n_jobs) if plan is not None else None
        pvalues = (np.atleast_1d(np.asarray(tested.pvalue)) if tested is not None
                   else np.full(len(keep), np.nan))
        if backward and tested is not None and len(keep) > 1:
            worst = int(np.argmax(pvalues))
            if pvalues[worst] > alpha:
                steps.append({"step": len(steps) + 1, "dropped": current.names[worst],
                              "importance": heights[worst], "pvalue": float(pvalues[worst]),
                              "reason": f"largest p-value, above alpha = {alpha:g}"})
                del keep[worst]
                continue
        break
    return _result(current, fit, y, null, dm, pvalues, tested, steps if backward else None,
                   n_splines)


def _result(design: _Design, fit: ModelFit, y: np.ndarray, null: float, dm: DistanceMatrix,
            pvalues: np.ndarray, tested, steps: list[dict[str, object]] | None,
            n_splines: int) -> TurnoverModelResult:
    rows, curves, coefs = [], [], []
    bases, coef_of = {}, {}
    for name, basis, cols, p in zip(design.names, design.bases, design.columns, pvalues,
                                    strict=True):
        a = fit.coef[cols]
        bases[name], coef_of[name] = basis, a
        low, high = steepest_half(basis, a)
        rows.append({"predictor": name, "importance": float(a.sum()), "pvalue": float(p),
                     "n_bases": basis.size, "low": low, "high": high, "minimum": basis.low,
                     "maximum": basis.high})
        grid = np.linspace(basis.low, basis.high, CURVE_POINTS)
        curves.append(pd.DataFrame({"variable": name, "value": grid,
                                    "turnover": basis(grid) @ a}))
        coefs.extend({"predictor": name, "basis": k, "knot": float(basis.knots[k]),
                      "coefficient": float(a[k])} for k in range(basis.size))
    table = pd.DataFrame(rows).set_index("predictor")
    table = table.sort_values("importance", ascending=False, kind="stable")
    curve_table = pd.concat(curves, ignore_index=True)
    used = int(np.max(tested.n_resamples)) if tested is not None else 0
    explained = _explained(fit, null)
    kkt = kkt_violation(design.x, y, fit.coef, fit.eta)
    notes = [
        f"Generalized dissimilarity model (Ferrier et al. 2007) of {y.size} pairs of "
        f"{dm.n} sites: {len(design.names)} predictor(s) with I-spline bases (Ramsay 1988; "
        f"{n_splines} knots at evenly spaced quantiles unless given), non-negative "
        f"coefficients, negative-exponential link; deviance explained "
        f"{100 * explained:.1f} %, intercept {fit.coef[0]:.3g}.",
    ]
    if tested is not None:
        notes.append(
            f"Each predictor was tested by permuting its values among sites {used} times and "
            "refitting the model (from the observed coefficients); the p-value compares the "
            "deviance explained with the observed one. Pairs of sites are not independent, so "
            "no other p-value is given.")
    if not fit.converged:
        notes.append(f"The fit did not converge in {fit.n_iter} iterations: treat the "
                     "coefficients with caution.")
    if steps:
        notes.append("Backward elimination dropped " + ", ".join(
            str(s["dropped"]) for s in steps) + ".")
    flat = table.index[table["importance"] <= 0].tolist()
    if flat:
        notes.append(f"{format_items(flat)} got a flat turnover function (importance 0): no "
                     "turnover along them beyond what the other predictors account for.")
    return TurnoverModelResult(
        table=table, curves=curve_table, coefficients=pd.DataFrame(coefs),
        intercept=float(fit.coef[0]), deviance=fit.deviance, null_deviance=null,
        deviance_explained=explained,
        fitted=DistanceMatrix(fit.mu, dm.labels, metric="turnover model", validate=False),
        n_sites=dm.n, n_pairs=int(y.size), n_resamples=used, n_iterations=fit.n_iter,
        converged=fit.converged, kkt_violation=kkt,
        elimination=pd.DataFrame(steps, columns=["step", "dropped", "importance", "pvalue",
                                                 "reason"]) if steps is not None else None,
        notes=tuple(notes), _bases=bases, _coef=coef_of)
