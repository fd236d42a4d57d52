"""Factor (class) centroids fitted onto ordination space."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import RNGLike, check_alternative, check_n_jobs, check_n_resamples, seed_sequence
from ._common import (
    ADJUST_METHODS,
    AxesLike,
    Design,
    adjust_pvalues,
    align_table,
    check_weights,
    fit_scores,
    missing_masks,
    run_by_pattern,
)
from ._kernels import class_sums_between

__all__ = ["ClassCentroidsResult", "fit_factors"]


@dataclass(frozen=True, repr=False)
class ClassCentroidsResult(ResultMixin):
    """Factors (site classes) fitted as class centroids onto ordination axes.

    Attributes
    ----------
    table : DataFrame
        One row per factor: ``r2`` (between-class share of the scores' sum of squares),
        ``pvalue``, ``pvalue_adjusted``, ``n`` (sites used) and ``n_levels``.
    centroids : DataFrame
        Tidy: ``factor``, ``level``, one column per axis (class centroid), ``n`` (class size).
    statistic, pvalue : Series
        ``r2`` and permutation p-value per factor.
    null_distribution : ndarray (P, factors)
    n_resamples : int
    exact : bool
    alternative, scheme, adjust : str
    axes : tuple of str
    notes : tuple of str
    """

    table: pd.DataFrame
    centroids: pd.DataFrame
    statistic: pd.Series
    pvalue: pd.Series
    null_distribution: np.ndarray
    n_resamples: int
    exact: bool
    alternative: str
    scheme: str
    adjust: str | None
    axes: tuple[str, ...]
    notes: tuple[str, ...] = ()


def _categorical(frame: pd.DataFrame) -> pd.DataFrame:
    numeric = [c for c in frame.columns
               if pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(
                   frame[c])]
    if numeric:
        raise InputError(
            f"Column(s) {format_items(numeric)} are numeric: fit them as vectors with "
            "fit_vectors(), or, if the numbers are class codes, convert them first with "
            "`.astype('category')`.", columns=numeric)
    return frame


def _codes(column: pd.Series, keep: np.ndarray) -> tuple[np.ndarray, list[object], list[str]]:
    """Integer codes (0..L-1) of the kept sites, the levels in order, and notes."""
    notes = []
    values = column[keep]
    if isinstance(column.dtype, pd.CategoricalDtype):
        used = [c for c in column.cat.categories if (values == c).any()]
        unused = [c for c in column.cat.categories if c not in used]
        if unused:
            notes.append(f"Factor {column.name!r}: level(s) {format_items(unused)} have no "
                         "sites and were left out.")
        levels = used
        lookup = {lev: i for i, lev in enumerate(levels)}
        codes = np.array([lookup[v] for v in values], dtype=np.int64)
    else:
        codes, uniques = pd.factorize(values, sort=True)
        levels = list(uniques)
    return codes.astype(np.int64), levels, notes


def fit_factors(
    scores: object,
    factors: pd.DataFrame | pd.Series,
    *,
    axes: AxesLike = None,
    n_resamples: int = 999,
    alternative: str = "greater",
    rng: RNGLike = None,
    strata: object = None,
    scheme: str | None = None,
    blocks: object = None,
    shape: tuple[int, int] | None = None,
    weights: pd.Series | np.ndarray | None = None,
    adjust: str | None = "holm",
    missing: str = "error",
    n_jobs: int | None = -1,
) -> ClassCentroidsResult:
    """Fit site classes (factors) as centroids in ordination space, with permutation tests.

    For each factor the class centroids of the site scores are computed, and the strength of
    the factor is ``r2``, the between-class share of the scores' total sum of squares over the
    chosen axes (as in a one-way MANOVA on the scores). Significance comes from permuting the
    class labels among sites through the suite's permutation engine.

    Parameters
    ----------
    scores : ordination result or DataFrame
        Site scores indexed by site label.
    factors : DataFrame or Series
        Categorical columns (category, text including pandas' string dtype, object or
        true/false) indexed by site label.
    axes : int or sequence of str, optional
        Axes to use: the first ``k`` columns, or column names. Default the first two.
    n_resamples : int, default 999
    alternative : {'greater', 'less', 'two-sided'}, default 'greater'
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    strata, scheme, blocks, shape
        Restricted permutation design (see :func:`gradients.fitting.fit_vectors`).
    weights : Series or array, optional
        Positive site weights: weighted centroids and weighted sums of squares; weights stay
        with the sites while labels are permuted.
    adjust : {'holm', 'fdr_bh'} or None, default 'holm'
        Multiplicity adjustment across factors.
    missing : {'error', 'complete'}, default 'error'
        'complete' uses, for each factor, the sites where it is known.
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.

    Returns
    -------
    ClassCentroidsResult

    Notes
    -----
    With weighted mean ``xbar`` and class sums ``s_g = sum_{i in g} w_i (x_i - xbar)``,
    ``r2 = sum_g ||s_g||^2 / W_g / sum_i w_i ||x_i - xbar||^2``; the denominator does not change
    under permutation, the numerator is a compiled scatter-add per rearrangement. Unused
    categories of a categorical column are dropped (and said so in ``notes``).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from gradients import fit_factors
    >>> rng = np.random.default_rng(0)
    >>> habitat = pd.Series(np.repeat(["bog", "fen", "heath"], 10), name="habitat")
    >>> sc = pd.DataFrame(rng.normal(size=(30, 2)), columns=["axis1", "axis2"])
    >>> sc.loc[habitat == "bog", "axis1"] += 3
    >>> fit = fit_factors(sc, habitat, rng=1)
    >>> bool(fit.table.loc["habitat", "pvalue"] < 0.01)
    True
    """
    n_resamples = check_n_resamples(n_resamples)
    alternative = check_alternative(alternative)
    n_jobs = check_n_jobs(n_jobs)
    root = seed_sequence(rng)
    if adjust is not None and adjust not in ADJUST_METHODS:
        raise InputError(f"`adjust` must be one of 'holm', 'fdr_bh' or None; got {adjust!r}.")
    sc = fit_scores(scores, axes)
    fac = _categorical(align_table(factors, sc.index, name="factors"))
    masks = missing_masks(fac, missing, what="Factor")
    w_in = check_weights(weights, sc.index)
    w_all = np.ones(len(sc)) if w_in is None else w_in
    design = Design.build(sc.index, scheme=scheme, strata=strata, blocks=blocks, shape=shape)
    x = sc.to_numpy()
    notes: list[str] = design.gap_notes(masks)
    codes_full = np.zeros((fac.shape[1], len(sc)), dtype=np.int64)  # codes on kept sites
    n_levels = np.zeros(fac.shape[1], dtype=np.int64)
    centroid_rows = []
    totals = np.zeros(fac.shape[1])
    between = np.zeros(fac.shape[1])
    for j, name in enumerate(fac.columns):
        keep = masks[:, j]
        codes, levels, extra = _codes(fac[name], keep)
        notes.extend(extra)
        if len(levels) < 2:
            raise InputError(f"Factor {name!r} has a single level ({format_items(levels)}) "
                             "over the sites used: there is nothing to compare. Drop it.",
                             columns=[name])
        codes_full[j, : keep.sum()] = codes
        n_levels[j] = len(levels)
        xs, ws = x[keep], w_all[keep]
        xbar = ws @ xs / ws.sum()
        xc = xs - xbar
        totals[j] = float((ws[:, None] * xc**2).sum())
        for g, level in enumerate(levels):
            members = codes == g
            wg = ws[members]
            centre = wg @ xs[members] / wg.sum()
            between[j] += wg.sum() * float(((centre - xbar) ** 2).sum())
            centroid_rows.append({"factor": name, "level": level,
                                  **dict(zip(sc.columns, centre, strict=True)),
                                  "n_sites": int(members.sum())})
        sizes = np.bincount(codes, minlength=len(levels))
        if sizes.min() < 2:
            single = [lev for lev, s in zip(levels, sizes, strict=True) if s < 2]
            notes.append(f"Factor {name!r}: level(s) {format_items(single)} have a single site; "
                         "their centroids are that site's scores.")
    if (totals <= 0).any():
        raise InputError("The site scores do not vary over the chosen axes: r2 is undefined.")

    def factory(keep: np.ndarray, cols: np.ndarray):
        xs, ws = x[keep], w_all[keep]
        xw = ws[:, None] * (xs - ws @ xs / ws.sum())
        total = float((xw * (xs - ws @ xs / ws.sum())).sum())
        codes = codes_full[cols][:, : keep.sum()]
        levels = n_levels[cols]

        def statistic(orders: np.ndarray) -> np.ndarray:
            return class_sums_between(orders, codes, levels, xw, ws) / total

        return statistic

    outcome = run_by_pattern(factory, masks, design, n_resamples=n_resamples, rng=root,
                             alternative=alternative, n_jobs=n_jobs)
    adjusted = adjust_pvalues(outcome.pvalue, adjust)
    n_used = masks.sum(axis=0)
    table = pd.DataFrame({"r2": outcome.statistic, "pvalue": outcome.pvalue,
                          "pvalue_adjusted": adjusted, "n_sites": n_used.astype(np.int64),
                          "n_levels": n_levels}, index=fac.columns)
    table.index.name = "factor"
    centroids = pd.DataFrame(centroid_rows, columns=["factor", "level", *sc.columns, "n_sites"])
    if adjust is None and fac.shape[1] > 1:
        notes.append(f"No multiplicity adjustment across the {fac.shape[1]} factors "
                     "(pvalue_adjusted repeats pvalue).")
    if outcome.exact:
        notes.append("Exact test: every distinct permutation was enumerated.")
    if (n_used < len(sc)).any():
        notes.append("Complete cases per factor: some factors use fewer sites (see column n).")
    return ClassCentroidsResult(
        table=table,
        centroids=centroids,
        statistic=table["r2"].copy(),
        pvalue=table["pvalue"].copy(),
        null_distribution=outcome.null,
        n_resamples=int(outcome.n_resamples.max()),
        exact=outcome.exact,
        alternative=alternative,
        scheme=outcome.scheme,
        adjust=adjust,
        axes=tuple(sc.columns),
        notes=tuple(notes),
    )
