"""Fitting a generalized dissimilarity model: non-negative maximum likelihood with IRLS.

The observed dissimilarity ``y`` of a pair of sites is modelled as ``mu = 1 - exp(-eta)``
with ``eta = X a`` (a column of ones for the intercept, then the pairs' differences of I-spline
bases) and ``a >= 0``, by maximising the binomial likelihood of ``y`` (Ferrier et al. 2007),
whose deviance is ``D = 2 sum [y log(y / mu) + (1 - y) log((1 - y) / (1 - mu))]``.

The link ``eta = -log(1 - mu)`` has ``d mu / d eta = 1 - mu``, so Fisher scoring is iteratively
reweighted least squares with weights ``w = (1 - mu) / mu`` and working response
``z = eta + (y - mu) / (1 - mu)``. Each step solves the weighted least-squares problem under
``a >= 0`` exactly (Lawson-Hanson non-negative least squares, :func:`scipy.optimize.nnls`, on a
square root of the Gram matrix ``X' W X``), halving the step while the deviance would rise.
At a fixed point the gradient of ``D / 2``, ``g = X' (mu - y) / mu``, is zero for positive
coefficients and non-negative for those at zero: the Karush-Kuhn-Tucker conditions of the
constrained maximum likelihood, which :func:`kkt_violation` measures.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg.blas import dsyrk
from scipy.optimize import nnls
from scipy.special import xlogy

__all__ = ["ModelFit", "deviance", "fit_nonnegative", "gradient", "kkt_violation",
           "null_deviance"]

#: Linear predictors are kept at least this large, so that ``mu > 0`` wherever ``y > 0``.
ETA_MIN = 1e-10
#: Relative change of the deviance at which the iterations stop (as in R's ``glm``, tighter).
TOL = 1e-11
MAX_ITER = 200
#: Eigenvalues of the Gram matrix below this fraction of the largest count as zero.
RANK_RTOL = 1e-12


@dataclass(frozen=True)
class ModelFit:
    """Coefficients (intercept first), linear predictor, fitted values and deviance of a fit."""

    coef: np.ndarray
    eta: np.ndarray
    mu: np.ndarray
    deviance: float
    n_iter: int
    converged: bool


def _mu(eta: np.ndarray) -> np.ndarray:
    return -np.expm1(-np.maximum(eta, ETA_MIN))


def deviance(y: np.ndarray, eta: np.ndarray) -> float:
    """Binomial deviance of proportions ``y`` at ``mu = 1 - exp(-eta)`` (``0 log 0 = 0``)."""
    eta = np.maximum(eta, ETA_MIN)
    mu = -np.expm1(-eta)
    # log(1 - mu) = -eta exactly, without cancellation
    terms = xlogy(y, y) - xlogy(y, mu) + xlogy(1.0 - y, 1.0 - y) + (1.0 - y) * eta
    return float(2.0 * np.sum(terms))


def null_deviance(y: np.ndarray) -> float:
    """Deviance of the intercept-only model, whose maximum-likelihood fit is ``mu = mean(y)``."""
    ybar = float(np.clip(np.mean(y), 1e-12, 1.0 - 1e-12))
    return deviance(y, np.full(y.shape, -np.log1p(-ybar)))


def _nnls_gram(gram: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """``argmin_{a >= 0} a' G a - 2 h' a`` through a square root ``R' R = G`` of the Gram matrix."""
    vals, vecs = np.linalg.eigh((gram + gram.T) / 2.0)
    keep = vals > RANK_RTOL * max(float(vals.max()), 1e-300)
    root = np.sqrt(vals[keep])
    r = root[:, None] * vecs[:, keep].T
    target = (vecs[:, keep].T @ rhs) / root
    return nnls(r, target, maxiter=50 * gram.shape[0])[0]


def _gram(x: np.ndarray, w: np.ndarray) -> np.ndarray:
    """``X' W X`` with one symmetric rank-k update (half the work of a general product)."""
    xs = np.sqrt(w)[:, None] * x  # C order (m, c): its transpose is Fortran order (c, m)
    upper = dsyrk(1.0, xs.T, trans=0)
    return np.triu(upper) + np.triu(upper, 1).T


def gradient(x: np.ndarray, y: np.ndarray, eta: np.ndarray) -> np.ndarray:
    """Gradient of half the deviance with respect to the coefficients: ``X' (mu - y) / mu``."""
    mu = _mu(eta)
    return x.T @ ((mu - y) / mu)


def kkt_violation(x: np.ndarray, y: np.ndarray, coef: np.ndarray, eta: np.ndarray) -> float:
    """Largest violation of the KKT conditions, relative to the gradient's scale.

    Positive coefficients need a zero gradient, coefficients at zero a non-negative one; the
    violation is ``|g_k|`` or ``max(-g_k, 0)`` respectively, divided by ``sum_i |X_ik| (1 +
    y_i / mu_i)``, the size the gradient's terms could reach.
    """
    mu = _mu(eta)
    g = x.T @ ((mu - y) / mu)
    scale = np.abs(x).T @ (1.0 + y / mu)
    bad = np.where(coef > 0, np.abs(g), np.maximum(-g, 0.0))
    return float(np.max(bad / np.maximum(scale, 1e-300)))


def fit_nonnegative(x: np.ndarray, y: np.ndarray, start: np.ndarray | None = None, *,
                    tol: float = TOL, max_iter: int = MAX_ITER) -> ModelFit:
    """Maximum-likelihood coefficients ``a >= 0`` of ``mu = 1 - exp(-X a)`` for proportions ``y``.

    ``start`` warm-starts the iterations (a permuted refit starts from the observed fit);
    by default the intercept-only fit.
    """
    c = x.shape[1]
    if start is None:
        coef = np.zeros(c)
        coef[0] = -np.log1p(-float(np.clip(np.mean(y), 1e-6, 1.0 - 1e-6)))
    else:
        coef = np.maximum(np.asarray(start, dtype=np.float64), 0.0)
    eta = x @ coef
    dev = deviance(y, eta)
    converged = False
    n_iter = 0
    while n_iter < max_iter:
        n_iter += 1
        e = np.exp(-np.maximum(eta, ETA_MIN))
        mu = 1.0 - e
        w = e / mu
        wz = w * eta + (y - mu) / mu  # w * z without dividing by a vanishing 1 - mu
        gram = _gram(x, w)
        proposal = _nnls_gram(gram, x.T @ wz)
        step = 1.0
        while True:
            trial = coef + step * (proposal - coef)
            eta_t = x @ trial
            dev_t = deviance(y, eta_t)
            if dev_t <= dev + 1e-13 * abs(dev) or step < 1e-8:
                break
            step /= 2.0
        change = dev - dev_t
        coef, eta, dev = trial, eta_t, dev_t
        if abs(change) <= tol * (abs(dev) + 0.1):
            converged = True
            break
    return ModelFit(coef=coef, eta=eta, mu=_mu(eta), deviance=float(dev), n_iter=n_iter,
                    converged=converged)
