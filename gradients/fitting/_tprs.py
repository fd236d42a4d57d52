"""Thin plate regression splines over two ordination axes, and penalised (IRLS) fitting.

The basis follows Wood (2003): the thin plate spline of order m = 2 in d = 2 dimensions has
radial basis ``eta(r) = r^2 log(r) / (8 pi)`` at every site and a plane ``[1, u1, u2]`` that
the penalty leaves alone. The ``n x n`` matrix ``E = eta(|u_i - u_j|)`` is replaced by its
``k`` eigenvectors of largest absolute eigenvalue (``E ~ U_k D_k U_k'``), the side condition
``T' delta = 0`` is absorbed by a QR step, and the penalty is ``delta_k' D_k delta_k``. With
``k >= n`` (all eigenvectors) this is the full thin plate spline with a knot at every site
(Green & Silverman 1994, ch. 7).

Fitting uses the Demmler-Reinsch form: for the (weighted) Gram matrix ``X'WX = P^-T P^-1``
and the eigen-decomposition ``P' S P = V diag(Lambda) V'``, the penalised least-squares fit
for smoothing parameter ``lambda`` shrinks the coordinates ``b = V' P' X'W z`` by
``1 / (1 + lambda Lambda_j)``. Residual sums of squares, effective degrees of freedom and the
GCV, UBRE and REML criteria for a whole grid of ``lambda`` then cost a few array operations,
for one data set or for a whole batch of permuted data sets at once.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg
from scipy.spatial.distance import cdist

from .._errors import InputError
from ._kernels import demmler_reinsch_stack

__all__ = [
    "CRITERIA",
    "FAMILIES",
    "ThinPlateBasis",
    "criterion_grid",
    "demmler_reinsch",
    "demmler_reinsch_svd",
    "lambda_grid",
    "null_deviance",
    "pirls",
    "thin_plate_basis",
    "tps_eta",
]

FAMILIES = ("gaussian", "poisson", "binomial")
CRITERIA = ("gcv", "ubre", "reml")
NULL_DIM = 3  # dimension of the unpenalised space: the plane 1, u1, u2
_EPS_MU = 1e-10


def tps_eta(r: np.ndarray) -> np.ndarray:
    """Thin plate radial basis for m = 2, d = 2: ``r^2 log(r) / (8 pi)``, 0 at r = 0."""
    r = np.asarray(r, dtype=np.float64)
    out = np.zeros_like(r)
    pos = r > 0
    out[pos] = r[pos] ** 2 * np.log(r[pos]) / (8.0 * np.pi)
    return out


@dataclass(frozen=True, eq=False)
class ThinPlateBasis:
    """A (truncated) thin plate spline basis on a set of sites.

    Attributes
    ----------
    knots : ndarray (n, 2)
        Site coordinates after centring and division by ``scale``.
    center : ndarray (2,)
    scale : float
        Root mean squared distance of the sites from their centroid.
    delta_map : ndarray (n, k - 3)
        Maps the penalised coefficients to radial-basis weights, ``U_k Z``.
    model_matrix : ndarray (n, k)
        ``[U_k D_k Z, 1, u1, u2]``: the design at the sites.
    penalty : ndarray (k, k)
        ``blockdiag(Z' D_k Z, 0_3)``: the bending-energy penalty.
    rank : int
        Basis dimension ``k``; ``full`` is True when every eigenvector was kept.
    """

    knots: np.ndarray
    center: np.ndarray
    scale: float
    delta_map: np.ndarray
    model_matrix: np.ndarray
    penalty: np.ndarray
    rank: int
    full: bool

    def scaled(self, points: np.ndarray) -> np.ndarray:
        return (np.asarray(points, dtype=np.float64) - self.center) / self.scale

    def design(self, points: np.ndarray) -> np.ndarray:
        """Model matrix at new points (original units), ``(m, k)``."""
        u = self.scaled(points)
        out = np.empty((len(u), self.rank))
        for start in range(0, len(u), 2048):  # bound the (m x n) radial block
            part = u[start : start + 2048]
            out[start : start + len(part), : self.rank - NULL_DIM] = (
                tps_eta(cdist(part, self.knots)) @ self.delta_map)
            out[start : start + len(part), self.rank - NULL_DIM :] = np.column_stack(
                [np.ones(len(part)), part])
        return out


def thin_plate_basis(points: np.ndarray, basis_size: int) -> ThinPlateBasis:
    """Thin plate regression spline basis of rank ``basis_size`` on ``points`` (n, 2)."""
    points = np.asarray(points, dtype=np.float64)
    n = len(points)
    center = points.mean(axis=0)
    scale = float(np.sqrt(((points - center) ** 2).sum(axis=1).mean()))
    u = (points - center) / scale
    t = np.column_stack([np.ones(n), u])
    if np.linalg.matrix_rank(t, tol=1e-8 * np.sqrt(n)) < NULL_DIM:
        raise InputError("The sites lie on a straight line in the two chosen axes: a surface "
                         "over them is not defined. Fit a vector instead (fit_vectors).")
    n_unique = len(np.unique(np.round(u, 12), axis=0))
    k = int(min(basis_size, n_unique))
    e = tps_eta(cdist(u, u))
    full = k >= n
    if n <= 1500 or full:
        vals, vecs = np.linalg.eigh(e)
        pick = np.argsort(-np.abs(vals), kind="stable")[:k]
    else:  # Lanczos for the k extreme eigenpairs (Wood 2003, section 3)
        from scipy.sparse.linalg import eigsh

        vals, vecs = eigsh(e, k=k, which="LM")
        pick = np.argsort(-np.abs(vals), kind="stable")
    d_k = vals[pick]
    u_k = vecs[:, pick]
    c = u_k.T @ t  # (k, 3): the side condition T' delta = 0 in the truncated coordinates
    q, _ = np.linalg.qr(c, mode="complete")
    z = q[:, NULL_DIM:]
    delta_map = u_k @ z
    radial = (u_k * d_k[None, :]) @ z
    model = np.column_stack([radial, t])
    pen_small = z.T @ (d_k[:, None] * z)
    pen_small = 0.5 * (pen_small + pen_small.T)
    penalty = np.zeros((k, k))
    penalty[: k - NULL_DIM, : k - NULL_DIM] = pen_small
    return ThinPlateBasis(knots=u, center=center, scale=scale, delta_map=delta_map,
                          model_matrix=model, penalty=penalty, rank=k, full=full)


def demmler_reinsch(gram: np.ndarray, penalty: np.ndarray,
                    rtol: float = 1e-10) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Demmler-Reinsch coordinates for a stack of Gram matrices ``X'WX`` (k, p, p).

    Returns ``coef_map`` (k, p, p), ``lam`` (k, p) and ``valid`` (k, p): the penalised fit is
    ``beta = coef_map @ (b / (1 + lambda lam))`` with ``b = coef_map' X'W z``. Positive definite
    Gram matrices go through the compiled Cholesky route; a rank-deficient one (repeated or
    collinear sites with a full basis) falls back to an eigen-decomposition that drops the null
    directions (``valid`` False, zero column).
    """
    try:
        coef_map, lam = demmler_reinsch_stack(gram, penalty)
        valid = np.ones(lam.shape, dtype=bool)
        ok = np.isfinite(coef_map).all() and np.isfinite(lam).all()
    except np.linalg.LinAlgError:
        ok = False
    if not ok:
        sig, vg = np.linalg.eigh(gram)
        top = sig.max(axis=-1, keepdims=True)
        good = sig > rtol * top
        inv_sqrt = np.where(good, 1.0 / np.sqrt(np.where(good, sig, 1.0)), 0.0)
        p_mat = vg * inv_sqrt[:, None, :]
        m = np.swapaxes(p_mat, 1, 2) @ penalty @ p_mat
        m = 0.5 * (m + np.swapaxes(m, 1, 2))
        lam, v = np.linalg.eigh(m)
        coef_map = p_mat @ v
        valid = np.linalg.norm(coef_map, axis=1) > 0
    lam = np.where(valid, np.maximum(lam, 0.0), 0.0)
    scale = np.maximum(lam.max(axis=-1, keepdims=True), 1e-300)
    lam = np.where(lam < 1e-12 * scale, 0.0, lam)
    return coef_map, lam, valid


def demmler_reinsch_svd(xw: np.ndarray, penalty: np.ndarray,
                        rtol: float = 1e-12) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Demmler-Reinsch coordinates of one weighted design ``sqrt(W) X`` via its SVD.

    Same output as :func:`demmler_reinsch` for a stack of one, without forming ``X'WX`` (whose
    condition number is the square of the design's), so single fits keep full precision.
    """
    _, sv, vt = np.linalg.svd(xw, full_matrices=False)
    good = sv > rtol * sv[0]
    p_mat = vt.T * np.where(good, 1.0 / np.where(good, sv, 1.0), 0.0)[None, :]
    m = p_mat.T @ penalty @ p_mat
    lam, v = np.linalg.eigh(0.5 * (m + m.T))
    coef_map = p_mat @ v
    valid = np.linalg.norm(coef_map, axis=0) > 0
    lam = np.where(valid, np.maximum(lam, 0.0), 0.0)
    lam = np.where(lam < 1e-12 * max(lam.max(), 1e-300), 0.0, lam)
    return coef_map[None], lam[None], valid[None]


def lambda_grid(lam: np.ndarray, size: int = 120, *, weight_max: float = 1.0) -> np.ndarray:
    """Log-spaced smoothing parameters spanning edf from near the basis size to near 3.

    ``lam`` are the Demmler-Reinsch eigenvalues of the unweighted design. Penalised IRLS
    weights ``w`` divide them by about ``w`` (``X'WX`` grows with ``w``), so for working
    weights up to ``weight_max`` > 1 (Poisson counts: ``w = mu``) the upper end is raised by
    that factor, and points are added so that the spacing in ``log(lambda)`` stays that of
    ``size`` points over the unweighted range.
    """
    pos = lam[lam > 0]
    if pos.size == 0:
        return np.array([1.0])
    lo = 1e-3 / pos.max()
    hi = 1e4 / pos.min()
    factor = max(float(weight_max), 1.0)
    if factor > 1.0:
        size = int(np.ceil(size * np.log(hi * factor / lo) / np.log(hi / lo)))
        hi *= factor
    return np.geomspace(lo, hi, size)


def criterion_grid(b2: np.ndarray, lam: np.ndarray, valid: np.ndarray, zz: np.ndarray, n: int,
                   grid: np.ndarray, method: str, *, known_scale: bool,
                   penalty_rank: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Criterion, working RSS and edf for every data set and smoothing parameter, (k, G).

    ``b2`` (k, p) are squared Demmler-Reinsch coordinates, ``zz`` (k,) the weighted working
    sums of squares. GCV: ``n RSS / (n - edf)^2`` (Craven & Wahba 1979). UBRE (scale 1):
    ``RSS / n - 1 + 2 edf / n``. REML: ``(n - 3) log(PRSS) + sum log(1 + lambda Lambda) -
    r log(lambda)`` with the scale profiled out, or ``PRSS + sum log(1 + lambda Lambda) -
    r log(lambda)`` for a known scale of 1, where ``PRSS = ||z||^2 - sum b^2 / (1 + lambda
    Lambda)`` is the penalised residual sum of squares and ``r`` the rank of the penalty.
    """
    shrink = 1.0 / (1.0 + grid[None, None, :] * lam[:, :, None])  # (k, p, G)
    shrink = np.where(valid[:, :, None], shrink, 0.0)
    fitted_ss = (b2[:, :, None] * shrink * (2.0 - shrink)).sum(axis=1)
    rss = np.maximum(zz[:, None] - fitted_ss, 0.0)
    edf = shrink.sum(axis=1)
    if method == "gcv":
        crit = n * rss / np.maximum(n - edf, 1e-8) ** 2
    elif method == "ubre":
        crit = rss / n - 1.0 + 2.0 * edf / n
    else:
        prss = np.maximum(zz[:, None] - (b2[:, :, None] * shrink).sum(axis=1), 1e-300)
        logdet = np.where(valid[:, :, None],
                          np.log1p(grid[None, None, :] * lam[:, :, None]), 0.0).sum(axis=1)
        pen = penalty_rank * np.log(grid)[None, :]
        crit = (prss if known_scale else (n - NULL_DIM) * np.log(prss)) + logdet - pen
    return crit, rss, edf


# ----------------------------------------------------------------------------- families
def _mu_eta(family: str, eta: np.ndarray) -> np.ndarray:
    if family == "poisson":
        return np.exp(np.clip(eta, -700, 700))
    if family == "binomial":
        return np.clip(1.0 / (1.0 + np.exp(-np.clip(eta, -700, 700))), _EPS_MU, 1 - _EPS_MU)
    return eta


def _link(family: str, mu: np.ndarray) -> np.ndarray:
    if family == "poisson":
        return np.log(mu)
    if family == "binomial":
        return np.log(mu / (1.0 - mu))
    return mu


def deviance(family: str, y: np.ndarray, mu: np.ndarray) -> np.ndarray:
    """Deviance per data set (rows of ``y``), (k,)."""
    if family == "gaussian":
        return ((y - mu) ** 2).sum(axis=-1)
    mu = np.maximum(mu, _EPS_MU)
    with np.errstate(divide="ignore", invalid="ignore"):
        ylog = np.where(y > 0, y * np.log(np.where(y > 0, y, 1.0) / mu), 0.0)
        if family == "poisson":
            return 2.0 * (ylog - (y - mu)).sum(axis=-1)
        one = 1.0 - y
        olog = np.where(one > 0, one * np.log(np.where(one > 0, one, 1.0) / (1.0 - mu)), 0.0)
    return 2.0 * (ylog + olog).sum(axis=-1)


def null_deviance(family: str, y: np.ndarray) -> float:
    """Deviance of the intercept-only model (unchanged by any permutation of ``y``)."""
    y = np.asarray(y, dtype=np.float64)
    mu = np.full_like(y, y.mean())
    return float(deviance(family, y[None, :], mu[None, :])[0])


@dataclass(frozen=True)
class PirlsFit:
    """Converged penalised fits for a stack of data sets."""

    beta: np.ndarray  # (k, p)
    mu: np.ndarray  # (k, n)
    smoothing: np.ndarray  # (k,)
    edf: np.ndarray  # (k,) trace of the influence matrix (intercept included)
    deviance: np.ndarray  # (k,)
    converged: np.ndarray  # (k,) bool
    iterations: int


def pirls(
    x: np.ndarray,
    penalty: np.ndarray,
    y: np.ndarray,
    family: str,
    *,
    method: str,
    grid: np.ndarray | None = None,
    smoothing: float | None = None,
    refine: bool = False,
    max_iter: int = 60,
    tol: float = 1e-8,
    known_scale: bool | None = None,
    _centred: bool = False,
) -> PirlsFit:
    """Penalised iteratively re-weighted least squares, batched over data sets ``y`` (k, n).

    The smoothing parameter is chosen anew at every iteration by minimising the criterion of
    the working linear model over ``grid`` ("performance iteration", Gu 1992; Wood 2017,
    section 6.1), refined by a bounded scalar search when ``refine`` is True, or held at
    ``smoothing``. For the Gaussian family with identity link one iteration is exact.
    ``known_scale`` (default: True for Poisson and binomial) decides whether REML takes the
    scale as 1 or profiles it out (quasi-likelihood; robust to over-dispersion).
    """
    y = np.atleast_2d(np.asarray(y, dtype=np.float64))
    k, n = y.shape
    p = x.shape[1]
    ones = np.flatnonzero(np.all(x == 1.0, axis=0))
    if family == "gaussian" and ones.size and not _centred:
        # The Gaussian fit is shift-equivariant (the unpenalised constant absorbs a shift):
        # fit the centred data, so sums of squares do not cancel, and shift back.
        shift = y.mean(axis=1)
        out = pirls(x, penalty, y - shift[:, None], family, method=method, grid=grid,
                    smoothing=smoothing, refine=refine, max_iter=max_iter, tol=tol,
                    known_scale=known_scale, _centred=True)
        beta = out.beta.copy()
        beta[:, ones[0]] += shift
        return PirlsFit(beta=beta, mu=out.mu + shift[:, None], smoothing=out.smoothing,
                        edf=out.edf, deviance=out.deviance, converged=out.converged,
                        iterations=out.iterations)
    penalty_rank = int(np.linalg.matrix_rank(penalty)) if penalty.any() else 0
    if known_scale is None:
        known_scale = family != "gaussian"
    if family == "poisson":
        mu = np.maximum(y, 0.1) * 0.5 + 0.5 * np.maximum(y.mean(axis=1, keepdims=True), 0.1)
    elif family == "binomial":
        mu = (y + 0.5) / 2.0
    else:
        mu = y.copy()
    eta = _link(family, mu)
    beta = np.zeros((k, p))
    lam_sel = np.full(k, np.nan)
    edf = np.zeros(k)
    dev = np.full(k, np.inf)
    active = np.ones(k, dtype=bool)
    converged = np.zeros(k, dtype=bool)
    it = 0
    for it in range(1, max_iter + 1):  # noqa: B007 - reported
        idx = np.flatnonzero(active)
        ya, mua, etaa = y[idx], mu[idx], eta[idx]
        if family == "gaussian":
            w = np.ones_like(ya)
            z = ya
        elif family == "poisson":
            w = mua
            z = etaa + (ya - mua) / mua
        else:
            w = mua * (1.0 - mua)
            z = etaa + (ya - mua) / w
        if len(idx) == 1:
            coef_map, lam, valid = demmler_reinsch_svd(np.sqrt(w[0])[:, None] * x, penalty)
        else:
            gram = np.swapaxes(x[None, :, :] * w[:, :, None], 1, 2) @ x  # (a, p, p)
            coef_map, lam, valid = demmler_reinsch(gram, penalty)
        xtwz = (w * z) @ x
        b = np.einsum("kpq,kp->kq", coef_map, xtwz)
        zz = (w * z * z).sum(axis=1)
        if smoothing is not None:
            chosen = np.full(len(idx), float(smoothing))
        else:
            crit, _, _ = criterion_grid(b * b, lam, valid, zz, n, grid, method,
                                        known_scale=known_scale, penalty_rank=penalty_rank)
            chosen = grid[np.argmin(crit, axis=1)]
            if refine:
                chosen = np.array([_refine(b[i] ** 2, lam[i], valid[i], zz[i], n, grid,
                                           chosen[i], method, known_scale, penalty_rank)
                                   for i in range(len(idx))])
        shrink = np.where(valid, 1.0 / (1.0 + chosen[:, None] * lam), 0.0)
        beta_a = np.einsum("kpq,kq->kp", coef_map, shrink * b)
        eta_new = beta_a @ x.T
        mu_new = _mu_eta(family, eta_new)
        dev_new = deviance(family, ya, mu_new)
        done = (np.abs(dev_new - dev[idx]) <= tol * (np.abs(dev_new) + 0.1)) & np.isclose(
            chosen, lam_sel[idx], rtol=1e-3, atol=0.0)
        if family == "gaussian":
            done[:] = True
        beta[idx], eta[idx], mu[idx], dev[idx] = beta_a, eta_new, mu_new, dev_new
        lam_sel[idx] = chosen
        edf[idx] = shrink.sum(axis=1)
        converged[idx[done]] = True
        active[idx[done]] = False
        if not active.any():
            break
    return PirlsFit(beta=beta, mu=mu, smoothing=lam_sel, edf=edf, deviance=dev,
                    converged=converged, iterations=it)


def _refine(b2: np.ndarray, lam: np.ndarray, valid: np.ndarray, zz: float, n: int,
            grid: np.ndarray, start: float, method: str, known_scale: bool,
            penalty_rank: int) -> float:
    """Bounded search of the criterion in log(lambda) around the best grid value."""
    from scipy.optimize import minimize_scalar

    i = int(np.searchsorted(grid, start))
    lo = np.log(grid[max(i - 1, 0)])
    hi = np.log(grid[min(i + 1, len(grid) - 1)])
    if hi <= lo:
        return start

    def f(t: float) -> float:
        crit, _, _ = criterion_grid(b2[None], lam[None], valid[None], np.array([zz]), n,
                                    np.array([np.exp(t)]), method, known_scale=known_scale,
                                    penalty_rank=penalty_rank)
        return float(crit[0, 0])

    res = minimize_scalar(f, bounds=(lo, hi), method="bounded", options={"xatol": 1e-6})
    best = float(np.exp(res.x))
    return best if f(res.x) <= f(np.log(start)) else start


def solve_penalised(x: np.ndarray, penalty: np.ndarray, y: np.ndarray, smoothing: float,
                    w: np.ndarray | None = None) -> np.ndarray:
    """Direct penalised least squares ``(X'WX + lambda S) beta = X'W y`` (for reference)."""
    w = np.ones(len(y)) if w is None else w
    a = x.T @ (w[:, None] * x) + smoothing * penalty
    return scipy.linalg.solve(a, x.T @ (w * y), assume_a="sym")
