"""Tests of a fitted surface: the approximate test and the batched permutation statistics.

The approximate F (or chi-square) test against the constant model, the pseudo-F of the
surface with lambda re-selected on every permuted data set, and the curvature share tested by
permuting the plane's residuals.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

from ._kernels import project_batch
from ._tprs import criterion_grid, demmler_reinsch_svd, deviance, pirls

__all__ = ["approx_pvalue", "curvature_statistic", "permutation_statistic", "pseudo_f"]


def approx_pvalue(family: str, x: np.ndarray, penalty: np.ndarray, y: np.ndarray, fit,
                  d0: float, n: int) -> float:
    """Hastie & Tibshirani (1990) approximate F (Gaussian) or chi-square test vs constant."""
    mu = fit.mu[0]
    if family == "gaussian":
        w = np.ones(n)
    elif family == "poisson":
        w = mu
    else:
        w = mu * (1.0 - mu)
    _, lam, valid = demmler_reinsch_svd(np.sqrt(w)[:, None] * x, penalty)
    s = np.where(valid[0], 1.0 / (1.0 + fit.smoothing[0] * lam[0]), 0.0)
    edf = float(s.sum()) - 1.0
    dev = float(fit.deviance[0])
    if edf <= 1e-8:
        return 1.0
    if family == "gaussian":
        df_resid = n - float((2.0 * s - s * s).sum())
        if df_resid <= 0 or dev <= 0:
            return float("nan")
        f_stat = ((d0 - dev) / edf) / (dev / df_resid)
        return float(stats.f.sf(f_stat, edf, df_resid))
    return float(stats.chi2.sf(d0 - dev, edf))


def pseudo_f(d0: float | np.ndarray, dev: np.ndarray, edf: np.ndarray, n: int) -> np.ndarray:
    """``((D0 - D) / edf) / (D / (n - edf - 1))``: the surface against the constant model.

    ``edf`` excludes the intercept. Dividing the deviance removed by the degrees of freedom
    spent on it keeps a wiggly surface fitted to noise from scoring like a real gradient.
    """
    edf = np.maximum(np.asarray(edf, dtype=np.float64), 1e-8)
    resid_df = np.maximum(n - edf - 1.0, 1e-8)
    return ((d0 - dev) / edf) / (np.maximum(dev, 1e-300) / resid_df)


def permutation_statistic(x, penalty, y, family, criterion, grid, smoothing, d0):
    """Batched pseudo-F of the surface with lambda re-selected for every permuted data set.

    The statistic is :func:`pseudo_f` rather than the deviance explained, and ``criterion``
    (REML) profiles the scale out for every family. With deviance explained, permuted noise
    fitted by near-interpolating surfaces (GCV on a few dozen sites) or permuted counts, whose
    spread a known scale of 1 reads as signal, filled the null distribution with high values
    and the test lost most of its power (see the Notes of :func:`fit_surface`).
    """
    n = len(y)
    if family == "gaussian":
        coef_map, lam, valid = demmler_reinsch_svd(x, penalty)
        rows = np.ascontiguousarray((x @ coef_map[0]).T)  # B', orthonormal rows (p, n)
        y = y - y.mean()  # the fit is shift-equivariant; centring avoids cancellation in RSS
        yy = float(y @ y)
        lam_grid = grid if smoothing is None else np.array([float(smoothing)])
        rank = int(np.linalg.matrix_rank(penalty))

        def statistic(orders: np.ndarray) -> np.ndarray:
            b = project_batch(orders, rows, y[:, None])[:, :, 0]  # (k, p)
            k = b.shape[0]
            crit, rss, edf = criterion_grid(b * b, np.broadcast_to(lam, (k, lam.shape[1])),
                                            np.broadcast_to(valid, (k, valid.shape[1])),
                                            np.full(k, yy), n, lam_grid, criterion,
                                            known_scale=False, penalty_rank=rank)
            best = np.argmin(crit, axis=1)
            pick = np.arange(k)
            return pseudo_f(d0, rss[pick, best], edf[pick, best] - 1.0, n)

        return statistic

    def statistic_glm(orders: np.ndarray) -> np.ndarray:
        fits = pirls(x, penalty, y[orders], family, method=criterion, grid=grid,
                     smoothing=smoothing, known_scale=False)
        return pseudo_f(d0, deviance(family, y[orders], fits.mu), fits.edf - 1.0, n)

    return statistic_glm


def curvature_statistic(x, penalty, y, t, criterion, grid, smoothing):
    """Batched curvature share ``1 - D_smooth / D_plane`` for permuted plane residuals.

    The plane (intercept and both axes) is the unpenalised part of the basis, so adding any
    plane to the data changes neither fit's residuals: the statistic of ``fitted plane +
    permuted residuals`` is that of the permuted residuals alone, whose Demmler-Reinsch
    coordinates are one batched projection. Lambda is re-selected on the grid every time.
    """
    n = len(y)
    coef_map, lam, valid = demmler_reinsch_svd(x, penalty)
    rows = np.ascontiguousarray((x @ coef_map[0]).T)  # (p, n), orthonormal
    q_plane, _ = np.linalg.qr(t)
    resid = y - q_plane @ (q_plane.T @ y)
    plane_rows = np.ascontiguousarray(q_plane.T)
    ee = float(resid @ resid)
    lam_grid = grid if smoothing is None else np.array([float(smoothing)])
    rank = int(np.linalg.matrix_rank(penalty))

    def statistic(orders: np.ndarray) -> np.ndarray:
        b = project_batch(orders, rows, resid[:, None])[:, :, 0]  # (k, p)
        k = b.shape[0]
        crit, rss, _ = criterion_grid(b * b, np.broadcast_to(lam, (k, lam.shape[1])),
                                      np.broadcast_to(valid, (k, valid.shape[1])),
                                      np.full(k, ee), n, lam_grid, criterion,
                                      known_scale=False, penalty_rank=rank)
        smooth = rss[np.arange(k), np.argmin(crit, axis=1)]
        on_plane = project_batch(orders, plane_rows, resid[:, None])[:, :, 0]
        flat = np.maximum(ee - (on_plane * on_plane).sum(axis=1), 1e-300)
        return 1.0 - smooth / flat

    return statistic
