"""The fitted surface: its result type, predictions at new points, contours and the grid."""

from __future__ import annotations

import numbers
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import check_choice
from ._tprs import ThinPlateBasis

__all__ = ["SurfaceFitResult", "inverse_link", "predict_surface", "prediction_grid",
           "surface_contours"]


@dataclass(frozen=True, repr=False)
class SurfaceFitResult(ResultMixin):
    """A smooth surface of one variable over two ordination axes.

    Attributes
    ----------
    variable : str
    family, method : str
        Response family and the smoothing-parameter criterion used.
    edf : float
        Effective degrees of freedom of the surface, intercept excluded: 2 for a plane (a
        straight vector), more for a curved surface.
    deviance_explained : float
        ``1 - D / D0``, D0 the deviance of the constant (intercept-only) model.
    smoothing : float
        The selected smoothing parameter lambda (coordinates scaled as described in the docs).
    pvalue_approx : float
        Approximate p-value against the constant model (F for Gaussian, chi-square otherwise;
        Hastie & Tibshirani 1990), ignoring that lambda was estimated.
    pvalue : float
        Permutation p-value of ``statistic`` with lambda re-selected by REML on every
        permutation (NaN when ``n_resamples=0``).
    statistic : float
        The observed test statistic, a pseudo-F of the surface against the constant model,
        ``((D0 - D) / edf) / (D / (n - edf - 1))``, with lambda chosen by REML (scale
        estimated) on the grid used for every permutation (see Notes).
    null_distribution : ndarray (P,)
    n_resamples : int
    exact : bool
    scheme : str
    pvalue_curvature : float
        Gaussian family: permutation p-value of the curvature, the share of the plane's
        residual sum of squares that the smooth removes, with the plane's residuals permuted
        (Freedman & Lane 1983) and lambda re-selected every time. NaN for the other families
        and when ``n_resamples=0``.
    basis_size : int
        Rank of the thin plate basis (``n_sites`` for the full thin plate spline).
    n_sites : int
        Sites the surface was fitted on (those with a value). Called ``n`` before; that name
        still reads, with a DeprecationWarning, for one release.
    verdict : str
        In words: no clear response, a straight vector would do, or a curved response.
    fitted : Series
        Fitted values (response scale) at the sites used.
    grid : DataFrame
        Prediction grid: ``x``, ``y`` (the two axes), ``fitted`` and ``inside`` (within the
        sites' convex hull; ``fitted`` is NaN outside).
    axes : tuple of str
    notes : tuple of str
    """

    variable: str
    family: str
    method: str
    edf: float
    deviance_explained: float
    smoothing: float
    pvalue_approx: float
    pvalue: float
    statistic: float
    null_distribution: np.ndarray
    n_resamples: int
    exact: bool
    scheme: str
    pvalue_curvature: float
    basis_size: int
    n_sites: int
    verdict: str
    fitted: pd.Series
    grid: pd.DataFrame
    axes: tuple[str, str]
    notes: tuple[str, ...] = ()
    _basis: ThinPlateBasis | None = field(default=None, repr=False)
    _beta: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)
    _grid_shape: tuple[int, int] = field(default=(0, 0), repr=False)
    _repr_skip = ("notes", "table", "grid", "fitted")

    @property
    def n(self) -> int:
        """Deprecated name of :attr:`n_sites`."""
        warnings.warn("SurfaceFitResult.n is deprecated and will be removed in the next release; "
                      "use .n_sites (same value).", DeprecationWarning, stacklevel=2)
        return self.n_sites

    def predict(self, points: pd.DataFrame | np.ndarray, *, scale: str = "response"):
        """Fitted surface at new points.

        Parameters
        ----------
        points : DataFrame with the two axis columns, or array (m, 2)
        scale : {'response', 'link'}
            Response scale (counts, probabilities) or the linear predictor.

        Returns
        -------
        Series (indexed like ``points``) for a DataFrame, else ndarray (m,). Points outside
        the sites' convex hull are extrapolations (the spline continues as a plane there).
        """
        return predict_surface(self, points, scale=scale)

    def contours(self, levels: int | Sequence[float] = 7) -> pd.DataFrame:
        """Contour lines of the fitted surface within the hull, computed without drawing.

        Parameters
        ----------
        levels : int or sequence of float
            Number of rounded levels within the fitted range, or the levels themselves.

        Returns
        -------
        DataFrame with ``level``, ``line`` (piece number within the level), ``x``, ``y``.
        """
        return surface_contours(self, levels)


def predict_surface(fit: SurfaceFitResult, points: object, *, scale: str = "response"):
    check_choice("scale", scale, ("response", "link"))
    index = None
    if isinstance(points, pd.DataFrame):
        missing = [a for a in fit.axes if a not in points.columns]
        if missing:
            raise InputError(f"`points` needs the columns {format_items(fit.axes)}; missing "
                             f"{format_items(missing)}.", columns=missing)
        index = points.index
        arr = points[list(fit.axes)].to_numpy(dtype=np.float64)
    else:
        arr = np.asarray(points, dtype=np.float64)
        if arr.ndim == 1 and arr.size == 2:
            arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise InputError(f"`points` must have two columns (the axes {format_items(fit.axes)}); "
                         f"got shape {arr.shape}.")
    if not np.isfinite(arr).all():
        raise InputError("`points` holds missing or infinite coordinates.")
    eta = fit._basis.design(arr) @ fit._beta  # type: ignore[union-attr]
    out = inverse_link(fit.family, eta) if scale == "response" else eta
    return pd.Series(out, index=index, name=fit.variable) if index is not None else out


def surface_contours(fit: SurfaceFitResult, levels: int | Sequence[float]) -> pd.DataFrame:
    import contourpy

    ny, nx = fit._grid_shape
    gx = fit.grid["x"].to_numpy().reshape(ny, nx)
    gy = fit.grid["y"].to_numpy().reshape(ny, nx)
    z = np.ma.masked_invalid(fit.grid["fitted"].to_numpy().reshape(ny, nx))
    if z.count() == 0:
        return pd.DataFrame(columns=["level", "line", "x", "y"])
    lo, hi = float(z.min()), float(z.max())
    if isinstance(levels, numbers.Integral):
        from matplotlib.ticker import MaxNLocator

        ticks = MaxNLocator(int(levels)).tick_values(lo, hi)
        values = [float(t) for t in ticks if lo < t < hi]
    else:
        values = [float(v) for v in levels]
    gen = contourpy.contour_generator(gx, gy, z)
    rows = []
    for level in values:
        for piece, line in enumerate(gen.lines(level)):
            rows.append(pd.DataFrame({"level": level, "line": piece, "x": line[:, 0],
                                      "y": line[:, 1]}))
    if not rows:
        return pd.DataFrame(columns=["level", "line", "x", "y"])
    return pd.concat(rows, ignore_index=True)


def inverse_link(family: str, eta: np.ndarray) -> np.ndarray:
    if family == "poisson":
        return np.exp(eta)
    if family == "binomial":
        return 1.0 / (1.0 + np.exp(-eta))
    return eta



def prediction_grid(basis: ThinPlateBasis, beta: np.ndarray, pts: np.ndarray, family: str,
                    size: int, axes: list[str]) -> tuple[pd.DataFrame, tuple[int, int]]:
    """Regular grid over the sites' bounding box; NaN outside their convex hull (shapely)."""
    import shapely

    gx = np.linspace(pts[:, 0].min(), pts[:, 0].max(), size)
    gy = np.linspace(pts[:, 1].min(), pts[:, 1].max(), size)
    mx, my = np.meshgrid(gx, gy)
    hull = shapely.MultiPoint(pts).convex_hull
    inside = shapely.intersects_xy(hull, mx.ravel(), my.ravel())
    fitted = np.full(mx.size, np.nan)
    if inside.any():
        where = np.column_stack([mx.ravel()[inside], my.ravel()[inside]])
        fitted[inside] = inverse_link(family, basis.design(where) @ beta)
    frame = pd.DataFrame({"x": mx.ravel(), "y": my.ravel(), "fitted": fitted,
                          "inside": inside})
    frame.attrs["axes"] = tuple(axes)
    return frame, (size, size)
