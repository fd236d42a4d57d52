"""The fitted turnover model: its result type, its turnover functions and predictions.

Each predictor's fitted turnover function is ``f_p(x) = sum_k a_pk I_pk(x)``: monotone, 0 at
the lowest value seen and ``sum_k a_pk`` (its *importance*, the height of the function) at the
highest. The predicted dissimilarity of two sites is ``1 - exp(-(a_0 + sum_p |f_p(x_ip) -
f_p(x_jp)|))``: since every ``I_pk`` is monotone, ``|f_p(x) - f_p(x')| = sum_k a_pk
|I_pk(x) - I_pk(x')|``, which is how the model is fitted.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from ..distance import DistanceMatrix, as_distance_matrix
from ._splines import ISplineBasis

__all__ = ["CURVE_POINTS", "GEOGRAPHY", "TurnoverModelResult", "steepest_half"]

#: Name of the geographic (or in-stream) distance predictor in every table.
GEOGRAPHY = "geography"
#: Points of each tidy turnover curve (``curves``), evenly spaced over the range seen.
CURVE_POINTS = 101
#: Points of the grid on which the steepest half of each function is found.
STEEPEST_GRID = 2001


def steepest_half(basis: ISplineBasis, coef: np.ndarray) -> tuple[float, float]:
    """The shortest interval over which the function ``basis @ coef`` gains half its height.

    Found on a grid of :data:`STEEPEST_GRID` points over the knots' range, the upper end
    placed by linear interpolation; ``(nan, nan)`` for a function of height 0.
    """
    grid = np.linspace(basis.low, basis.high, STEEPEST_GRID)
    f = basis(grid) @ coef
    f = np.maximum.accumulate(f - f[0])
    height = float(f[-1])
    if not height > 0:
        return (float("nan"), float("nan"))
    target = f + height / 2.0
    ok = target <= f[-1] * (1 + 1e-12)
    j = np.minimum(np.searchsorted(f, target[ok], side="left"), grid.size - 1)
    i = np.flatnonzero(ok)
    lo_f, hi_f = f[np.maximum(j - 1, 0)], f[j]
    frac = np.where(hi_f > lo_f, (target[ok] - lo_f) / np.where(hi_f > lo_f, hi_f - lo_f, 1),
                    0.0)
    below = grid[np.maximum(j - 1, 0)]
    upper = below + np.clip(frac, 0, 1) * (grid[j] - below)
    width = upper - grid[i]
    best = int(np.argmin(width))
    return (float(grid[i][best]), float(upper[best]))


@dataclass(frozen=True, repr=False)
class TurnoverModelResult(ResultMixin):
    """A fitted generalized dissimilarity model (:func:`turnover_model`).

    Attributes
    ----------
    table : DataFrame
        One row per predictor (index ``predictor``), largest importance first:
        ``importance`` (height of its turnover function), ``pvalue`` (its site values
        permuted and the model refitted; NaN when ``n_resamples`` was 0), ``n_bases``,
        ``low`` and ``high`` (the shortest interval holding half its turnover, in the
        predictor's units), ``minimum`` and ``maximum`` (the range seen).
    curves : DataFrame
        Tidy turnover functions, ready to plot: ``variable``, ``value`` (in the predictor's
        units, over the range seen) and ``turnover`` (cumulative turnover from 0 at the
        lowest value).
    coefficients : DataFrame
        ``predictor``, ``basis`` (0, 1, ...), ``knot`` (where that I-spline rises fastest:
        its M-spline peaks there) and ``coefficient`` (>= 0).
    intercept : float
        ``a_0``: the linear predictor of two sites that differ in nothing; their expected
        dissimilarity is ``1 - exp(-intercept)``.
    deviance, null_deviance : float
        Binomial deviance of the fit and of the intercept-only model.
    deviance_explained : float
        ``1 - deviance / null_deviance``.
    fitted : DistanceMatrix
        Fitted dissimilarities of the sites.
    n_sites, n_pairs, n_resamples, n_iterations : int
    converged : bool
    kkt_violation : float
        Largest relative violation of the optimality conditions at the fit (about 1e-8 or
        less at convergence).
    elimination : DataFrame or None
        With ``backward=True``: ``step``, ``dropped``, ``importance``, ``pvalue``, ``reason``.
    notes : tuple of str
    """

    table: pd.DataFrame
    curves: pd.DataFrame
    coefficients: pd.DataFrame
    intercept: float
    deviance: float
    null_deviance: float
    deviance_explained: float
    fitted: DistanceMatrix
    n_sites: int
    n_pairs: int
    n_resamples: int
    n_iterations: int
    converged: bool
    kkt_violation: float
    elimination: pd.DataFrame | None = None
    notes: tuple[str, ...] = ()
    _bases: dict[str, ISplineBasis] = field(default_factory=dict, repr=False)
    _coef: dict[str, np.ndarray] = field(default_factory=dict, repr=False)

    @property
    def importance(self) -> pd.Series:
        """Height of each predictor's turnover function."""
        return self.table["importance"].copy()

    def turnover(self, predictor: str, values: np.ndarray) -> np.ndarray:
        """The fitted turnover function of ``predictor`` at ``values`` (its own units)."""
        if predictor not in self._bases:
            raise InputError(f"{predictor!r} is not a predictor of this model; its predictors "
                             f"are {format_items(self._bases)}.")
        return self._bases[predictor](np.asarray(values, dtype=np.float64)) @ self._coef[predictor]

    def predict(self, sites: pd.DataFrame, other: pd.DataFrame | None = None, *,
                geo: DistanceMatrix | np.ndarray | None = None) -> DistanceMatrix | pd.Series:
        """Predicted dissimilarities of new pairs of sites.

        Parameters
        ----------
        sites : DataFrame
            One row per site with a column for every environmental predictor.
        other : DataFrame, optional
            Without it, every pair of ``sites`` is predicted (a :class:`DistanceMatrix`).
            With it, row ``i`` of ``sites`` is paired with row ``i`` of ``other`` (same
            length; a Series indexed like ``sites``).
        geo : DistanceMatrix or array, optional
            For a model with geography: distances among ``sites`` (a DistanceMatrix in their
            order) or, with ``other``, the distance of each row pair (an array).

        Notes
        -----
        Values beyond the range seen in fitting are held at its ends (the I-splines are
        constant there): the model does not extrapolate turnover.
        """
        env = [p for p in self._bases if p != GEOGRAPHY]
        geo_used = GEOGRAPHY in self._bases
        frames = [sites] if other is None else [sites, other]
        for f, name in zip(frames, ("sites", "other"), strict=False):
            if not isinstance(f, pd.DataFrame):
                raise InputError(f"`{name}` must be a DataFrame with a column per predictor.")
            absent = [p for p in env if p not in f.columns]
            if absent:
                raise InputError(f"`{name}` lacks the predictor column(s) "
                                 f"{format_items(absent)}.", columns=absent)
        if other is not None and len(other) != len(sites):
            raise InputError(f"`sites` and `other` must have as many rows ({len(sites)} and "
                             f"{len(other)}): row i of one is paired with row i of the other.")
        if geo_used and geo is None:
            raise InputError("This model has a geographic predictor: pass `geo`, the distances "
                             "of the new pairs (in the units of the fitted distances).")
        if other is None:
            n = len(sites)
            iu, ju = np.triu_indices(n, 1)
            eta = np.full(iu.size, self.intercept)
            for p in env:
                f = self.turnover(p, sites[p].to_numpy(dtype=np.float64))
                eta += np.abs(f[iu] - f[ju])
            if geo_used:
                g = geo if isinstance(geo, DistanceMatrix) else as_distance_matrix(geo, name="geo")
                if g.n != n:
                    raise InputError(f"`geo` holds {g.n} sites; `sites` has {n}.")
                eta += self.turnover(GEOGRAPHY, g.condensed)
            return DistanceMatrix(-np.expm1(-eta), sites.index, metric="turnover model",
                                  validate=False)
        eta = np.full(len(sites), self.intercept)
        for p in env:
            eta += np.abs(self.turnover(p, sites[p].to_numpy(dtype=np.float64))
                          - self.turnover(p, other[p].to_numpy(dtype=np.float64)))
        if geo_used:
            g = np.asarray(geo, dtype=np.float64).ravel()
            if g.size != len(sites):
                raise InputError(f"`geo` must give one distance per row pair ({len(sites)}); "
                                 f"got {g.size}.")
            eta += self.turnover(GEOGRAPHY, g)
        return pd.Series(-np.expm1(-eta), index=sites.index, name="dissimilarity")
