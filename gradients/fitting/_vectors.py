"""Environmental vectors fitted onto ordination space (Kantvilas & Minchin 1989)."""

from __future__ import annotations

import numbers
from dataclasses import dataclass, field

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
from ._kernels import project_batch

__all__ = ["GradientArrowsResult", "fit_vectors"]

#: With scale='auto', arrow tips reach at most this fraction of the site cloud on every axis.
ARROW_FILL = 0.9


@dataclass(frozen=True, repr=False)
class GradientArrowsResult(ResultMixin):
    """Environmental variables fitted as vectors onto ordination axes.

    Attributes
    ----------
    table : DataFrame
        One row per variable: one direction-cosine column per axis (named after the axes),
        ``r2``, ``pvalue``, ``pvalue_adjusted`` and ``n`` (sites used).
    statistic : Series
        ``r2`` per variable.
    pvalue : Series
        Permutation p-value per variable.
    null_distribution : ndarray (P, variables)
        ``r2`` under each rearrangement, columns in the order of ``table``.
    n_resamples : int
        Rearrangements per variable (the largest, if missing='complete' gave different counts).
    exact : bool
    alternative, scheme, adjust : str
    axes : tuple of str
    notes : tuple of str
    """

    table: pd.DataFrame
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
    _bounds: np.ndarray = field(default_factory=lambda: np.zeros((2, 0)), repr=False)

    def arrows(self, scale: str | float = "auto") -> pd.DataFrame:
        """Arrow tips for a biplot: cosines x sqrt(r2) x one common multiplier.

        Parameters
        ----------
        scale : 'auto' or float
            'auto' takes the largest multiplier with which every arrow tip stays within
            ``ARROW_FILL`` (90 %) of the sites' extent from the origin on each axis, in the
            arrow's own direction along that axis; a float is used as the multiplier itself.
            'auto' needs the sites to surround the origin on every axis (centred scores) and
            raises an error otherwise.

        Returns
        -------
        DataFrame
            Indexed by variable, one column per axis (tip coordinates, arrows start at the
            origin), plus ``length`` (tip distance from the origin); the multiplier is in
            ``.attrs['multiplier']``.
        """
        return vector_arrows(self, scale)


def vector_arrows(fit: GradientArrowsResult, scale: str | float) -> pd.DataFrame:
    """Arrow tips for :meth:`GradientArrowsResult.arrows`."""
    axes = list(fit.axes)
    raw = fit.table[axes].to_numpy() * np.sqrt(fit.table["r2"].to_numpy())[:, None]
    raw = np.nan_to_num(raw)
    if isinstance(scale, str):
        if scale != "auto":
            raise InputError(f"`scale` must be 'auto' or a positive number; got {scale!r}.")
        lo, hi = fit._bounds  # most negative and most positive site score per axis
        outside = [a for a, low, high in zip(axes, lo, hi, strict=True) if not low < 0 < high]
        if outside:
            word = "axis" if len(outside) == 1 else "axes"
            raise InputError(
                f"The sites do not surround the origin on {word} {format_items(outside)}, so "
                "arrows drawn from the origin cannot be fitted inside the site cloud: the "
                "scores are not centred (ordinations from gradients are). Centre the scores "
                "before fitting, or pass a number as `scale`.")
        room = np.where(raw > 0, hi[None, :], -lo[None, :])
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(np.abs(raw) > 0, room / np.abs(raw), np.inf)
        finite = ratio[np.isfinite(ratio) & (ratio > 0)]
        multiplier = ARROW_FILL * float(finite.min()) if finite.size else 1.0
    elif isinstance(scale, numbers.Real) and not isinstance(scale, bool) and scale > 0:
        multiplier = float(scale)
    else:
        raise InputError(f"`scale` must be 'auto' or a positive number; got {scale!r}.")
    tips = pd.DataFrame(raw * multiplier, index=fit.table.index, columns=axes)
    tips["length"] = np.sqrt((tips[axes].to_numpy() ** 2).sum(axis=1))
    tips.attrs["multiplier"] = multiplier
    return tips


def _numeric_environment(env: pd.DataFrame) -> pd.DataFrame:
    dates = [c for c in env.columns
             if pd.api.types.is_datetime64_any_dtype(env[c])
             or pd.api.types.is_timedelta64_dtype(env[c])]
    if dates:
        raise InputError(
            f"Column(s) {format_items(dates)} hold dates or durations, not measurements: convert "
            "them to numbers first (for example days since the first sampling date) or leave "
            "them out.", columns=dates)
    bad = [c for c in env.columns
           if not pd.api.types.is_numeric_dtype(env[c]) or pd.api.types.is_bool_dtype(env[c])]
    if bad:
        raise InputError(
            f"Column(s) {format_items(bad)} are categorical (text, category or true/false), not "
            "numeric: fit them as class centroids with fit_factors(), or pass only the numeric "
            "columns to fit_vectors().", columns=bad)
    values = env.astype(np.float64)
    inf = ~np.isfinite(values.to_numpy()) & ~values.isna().to_numpy()
    if inf.any():
        cols = values.columns[inf.any(axis=0)]
        raise InputError(f"Column(s) {format_items(cols)} hold infinite values.",
                         columns=list(cols))
    return values


def _weighted_basis(x: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Orthonormal basis of sqrt(w) [1, X]: its first column and the rest (n, d)."""
    sw = np.sqrt(w)
    q0 = sw / np.linalg.norm(sw)
    xc = x - (w @ x / w.sum())[None, :]
    qc, r = np.linalg.qr(sw[:, None] * xc)
    if np.min(np.abs(np.diag(r))) <= 1e-10 * max(np.max(np.abs(np.diag(r))), 1e-300):
        raise InputError("The chosen score axes are collinear (or constant) over these sites; "
                         "choose other axes.")
    return q0, qc


def _statistic_factory(x: np.ndarray, y: np.ndarray, w: np.ndarray | None):
    """``factory(keep, cols)`` -> batched r2 statistic for those variables on those sites."""

    def factory(keep: np.ndarray, cols: np.ndarray):
        xs = x[keep]
        ys = y[np.ix_(keep, cols)]
        if w is None:
            _, qc = _weighted_basis(xs, np.ones(len(xs)))
            yc = ys - ys.mean(axis=0)
            tss = (yc**2).sum(axis=0)
            rows = np.ascontiguousarray(qc.T)

            def statistic(orders: np.ndarray) -> np.ndarray:
                proj = project_batch(orders, rows, yc)  # (k, d, m)
                fitted = np.square(proj[:, 0, :])
                for a in range(1, proj.shape[1]):
                    fitted += np.square(proj[:, a, :])
                fitted /= tss
                return fitted

            return statistic
        ws = w[keep]
        q0, qc = _weighted_basis(xs, ws)
        sw = np.sqrt(ws)
        # rows: d fitted directions and the weighted-mean direction, all premultiplied by sqrt(w)
        rows = np.ascontiguousarray(np.vstack([(sw[:, None] * qc).T, (sw * q0)[None, :]]))
        d = qc.shape[1]
        # r2 is unchanged by shifting and scaling a variable (the permuted copy shifts alike):
        # centre and scale first so that the weighted total sum of squares does not cancel.
        shifted = ys - ys.mean(axis=0)
        ysc = shifted / np.abs(shifted).max(axis=0)

        def statistic_w(orders: np.ndarray) -> np.ndarray:
            proj = project_batch(orders, rows, ysc)  # (k, d + 1, m)
            total = project_batch(orders, ws[None, :], ysc**2)[:, 0, :]
            fit = (proj[:, :d, :] ** 2).sum(axis=1)
            return fit / (total - proj[:, d, :] ** 2)

        return statistic_w

    return factory


def fit_vectors(
    scores: object,
    environment: pd.DataFrame | pd.Series,
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
) -> GradientArrowsResult:
    """Fit every numeric environmental variable as a vector onto ordination axes.

    Each variable is regressed on the site scores of the chosen axes (with an intercept); the
    arrow direction is the normalised coefficient vector (direction cosines) and its strength
    the coefficient of determination ``r2`` [1]_. Significance comes from permuting the
    variable among sites (through the suite's permutation engine), all variables at once.

    Parameters
    ----------
    scores : ordination result or DataFrame
        Site scores indexed by site label (columns ``axis1``, ``axis2``, ...).
    environment : DataFrame or Series
        Numeric variables indexed by site label (same sites as ``scores``; reordered to match).
    axes : int or sequence of str, optional
        Axes to fit on: the first ``k`` columns, or column names. Default the first two.
    n_resamples : int, default 999
        Permutations (all distinct ones are enumerated when there are no more than this).
    alternative : {'greater', 'less', 'two-sided'}, default 'greater'
        Direction of the test on ``r2``; 'greater' asks whether the variable lines up with the
        ordination more than chance would have it.
    rng : int, numpy.random.Generator or None
        When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
        operating system.
    strata, scheme, blocks, shape
        Restricted permutation design, passed to
        :func:`gradients.permutation.permutation_plan` (``strata`` / ``blocks``: one label per
        site, a Series aligned by site label or a sequence in the order of ``scores``; ``scheme``
        'free', 'strata', 'cyclic', 'toroidal' or 'blocks'; site order is that of ``scores``).
    weights : Series or array, optional
        Positive site weights: weighted least squares, weighted means and weighted sums of
        squares throughout. Weights belong to the sites (they stay in place while the variable
        is permuted).
    adjust : {'holm', 'fdr_bh'} or None, default 'holm'
        Multiplicity adjustment across variables (Holm's step-down family-wise control [2]_,
        or Benjamini-Hochberg false discovery rate [3]_) in ``pvalue_adjusted``; None copies
        the raw p-values.
    missing : {'error', 'complete'}, default 'error'
        'error' refuses missing values, naming the variable and sites; 'complete' uses, for each
        variable, the sites where it was measured (``n`` then varies by variable and the
        permutations run over those sites).
    n_jobs : int or None, default -1
        Workers: -1 up to all cores by the engine's size rule, 1 one, ``k`` that many, None
        the setting of an enclosing ``joblib.parallel_config`` (see
        :func:`gradients.permutation.permutation_test`). The result does not depend on it.

    Returns
    -------
    GradientArrowsResult

    Notes
    -----
    With ``Q`` an orthonormal basis of the centred (weighted) scores, ``r2 = ||Q' y_c||^2 /
    ||y_c||^2``; under a permutation only ``y`` moves, so ``r2`` for every permutation and
    variable is a matrix product (see :mod:`gradients.fitting._kernels`). With weights,
    ``r2 = 1 - RSS_w / TSS_w``, the weighted mean recomputed for every permutation.
    The arrow multiplier of :meth:`GradientArrowsResult.arrows` is explained there.

    References
    ----------
    .. [1] Kantvilas, G. & Minchin, P. R. (1989). An analysis of epiphytic lichen communities
       in Tasmania's cool temperate rainforest. Vegetatio 84: 99-112.
    .. [2] Holm, S. (1979). A simple sequentially rejective multiple test procedure.
       Scandinavian Journal of Statistics 6: 65-70.
    .. [3] Benjamini, Y. & Hochberg, Y. (1995). Controlling the false discovery rate. Journal
       of the Royal Statistical Society B 57: 289-300.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from gradients import fit_vectors
    >>> rng = np.random.default_rng(1)
    >>> sc = pd.DataFrame(rng.normal(size=(30, 2)), columns=["axis1", "axis2"])
    >>> env = pd.DataFrame({"pH": sc.axis1 + rng.normal(0, .3, 30), "noise": rng.normal(size=30)})
    >>> fit = fit_vectors(sc, env, rng=2)
    >>> bool(fit.table.loc["pH", "pvalue"] < 0.01)
    True
    """
    n_resamples = check_n_resamples(n_resamples)
    alternative = check_alternative(alternative)
    n_jobs = check_n_jobs(n_jobs)
    root = seed_sequence(rng)
    if adjust is not None and adjust not in ADJUST_METHODS:
        raise InputError(f"`adjust` must be one of 'holm', 'fdr_bh' or None; got {adjust!r}.")
    sc = fit_scores(scores, axes)
    env = _numeric_environment(align_table(environment, sc.index, name="environment"))
    masks = missing_masks(env, missing, what="Environmental")
    w = check_weights(weights, sc.index)
    design = Design.build(sc.index, scheme=scheme, strata=strata, blocks=blocks, shape=shape)
    x = sc.to_numpy()
    y = env.to_numpy()
    d = x.shape[1]
    notes: list[str] = design.gap_notes(masks)
    n_used = masks.sum(axis=0)
    too_few = env.columns[n_used < d + 2]
    if len(too_few):
        raise InputError(f"Variable(s) {format_items(too_few)} have fewer than {d + 2} sites with "
                         f"values: too few to fit on {d} axes.", columns=list(too_few))
    cosines = np.full((y.shape[1], d), np.nan)
    for j in range(y.shape[1]):
        keep = masks[:, j]
        yj = y[keep, j]
        wj = np.ones(keep.sum()) if w is None else w[keep]
        if np.ptp(yj) == 0:
            raise InputError(f"Variable {env.columns[j]!r} is constant over the sites used: it "
                             "has no direction to fit. Drop it.", columns=[env.columns[j]])
        sw = np.sqrt(wj)
        design_x = np.column_stack([np.ones(len(yj)), x[keep]]) * sw[:, None]
        beta = np.linalg.lstsq(design_x, yj * sw, rcond=None)[0][1:]
        norm = np.linalg.norm(beta)
        if norm > 0:
            cosines[j] = beta / norm
    outcome = run_by_pattern(_statistic_factory(x, y, w), masks, design,
                             n_resamples=n_resamples, rng=root, alternative=alternative,
                             n_jobs=n_jobs)
    adjusted = adjust_pvalues(outcome.pvalue, adjust)
    table = pd.DataFrame(cosines, index=env.columns, columns=list(sc.columns))
    table["r2"] = outcome.statistic
    table["pvalue"] = outcome.pvalue
    table["pvalue_adjusted"] = adjusted
    table["n_sites"] = n_used.astype(np.int64)
    table.index.name = "variable"
    if (n_used < len(sc)).any():
        notes.append(f"Complete cases per variable: {int((n_used < len(sc)).sum())} variable(s) "
                     f"use fewer than the {len(sc)} sites (see column n).")
    if adjust is None and y.shape[1] > 1:
        notes.append(f"No multiplicity adjustment across the {y.shape[1]} variables "
                     "(pvalue_adjusted repeats pvalue).")
    if outcome.exact:
        notes.append("Exact test: every distinct permutation was enumerated.")
    if int(n_used.min()) < 10:
        notes.append(f"Only {int(n_used.min())} sites for some variable(s) (see column n): r2 "
                     "and its p-value are unstable." if (n_used < len(sc)).any() else
                     f"Only {len(sc)} sites: r2 and its p-value are unstable.")
    bounds = np.vstack([x.min(axis=0), x.max(axis=0)])
    return GradientArrowsResult(
        table=table,
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
        _bounds=bounds,
    )
