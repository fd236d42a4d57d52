"""Batched kernels for the fitting stage.

Every permutation statistic of the stage is evaluated for a whole batch of site orders at once.
For vectors and surfaces it is a projection of the permuted data onto a fixed basis of the
ordination space, ``rows @ values[order]`` for every order of the batch. Instead of gathering
the permuted data, the (few) basis rows are scattered to the inverse order, so that the whole
batch becomes one matrix product handed to BLAS::

    rows @ values[o] == rows[:, inverse(o)] @ values

For factors the statistic is a scatter-add of the scores into class sums (a compiled loop).
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["class_sums_between", "demmler_reinsch_stack", "project_batch"]

#: Orders handled per matrix product: keeps the scattered block within the L2 cache.
_CHUNK = 64


@numba.njit(cache=True, nogil=True)
def _scatter_rows(orders: np.ndarray, rows: np.ndarray, start: int, out: np.ndarray) -> None:
    # out[b * r + a, orders[start + b, i]] = rows[a, i]: row a of the basis in inverse order.
    r, n = rows.shape
    m = out.shape[0] // r
    for b in range(m):
        order = orders[start + b]
        for a in range(r):
            target = out[b * r + a]
            source = rows[a]
            for i in range(n):
                target[order[i]] = source[i]


def project_batch(orders: np.ndarray, rows: np.ndarray, values: np.ndarray) -> np.ndarray:
    """``rows @ values[o]`` for every order ``o`` of a batch, as one BLAS product per chunk.

    Parameters
    ----------
    orders : int array (k, n)
        Site orders (each row a permutation of ``0..n-1``).
    rows : float array (r, n)
        Basis rows (for example the transposed orthonormal score basis).
    values : float array (n, q)
        Data in site order (one column per variable).

    Returns
    -------
    ndarray (k, r, q)
    """
    orders = np.ascontiguousarray(orders, dtype=np.int64)
    rows = np.ascontiguousarray(rows, dtype=np.float64)
    values = np.ascontiguousarray(values, dtype=np.float64)
    k, n = orders.shape
    r = rows.shape[0]
    q = values.shape[1]
    out = np.empty((k, r, q))
    block = np.empty((_CHUNK * r, n))
    for start in range(0, k, _CHUNK):
        m = min(_CHUNK, k - start)
        part = block[: m * r]
        _scatter_rows(orders, rows, start, part)
        np.matmul(part, values, out=out[start : start + m].reshape(m * r, q))
    return out


@numba.njit(cache=True, nogil=True)
def _between(orders: np.ndarray, codes: np.ndarray, n_levels: np.ndarray, xw: np.ndarray,
             w: np.ndarray, out: np.ndarray) -> None:
    k, n = orders.shape
    m = codes.shape[0]
    d = xw.shape[1]
    gmax = 0
    for f in range(m):
        gmax = max(gmax, n_levels[f])
    sums = np.empty((gmax, d))
    wsum = np.empty(gmax)
    for b in range(k):
        for f in range(m):
            g_n = n_levels[f]
            sums[:g_n] = 0.0
            wsum[:g_n] = 0.0
            for i in range(n):
                g = codes[f, orders[b, i]]
                wsum[g] += w[i]
                for a in range(d):
                    sums[g, a] += xw[i, a]
            total = 0.0
            for g in range(g_n):
                if wsum[g] > 0.0:
                    s = 0.0
                    for a in range(d):
                        s += sums[g, a] * sums[g, a]
                    total += s / wsum[g]
            out[b, f] = total


def class_sums_between(orders: np.ndarray, codes: np.ndarray, n_levels: np.ndarray,
                       xw: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Between-class sums of squares of the scores when site ``i`` takes label ``orders[b, i]``.

    Parameters
    ----------
    orders : int array (k, n)
    codes : int array (m, n)
        Class code of every site for each of ``m`` factors, ``0..n_levels[f]-1``.
    n_levels : int array (m,)
    xw : float array (n, d)
        Weighted centred scores, ``w_i (x_i - xbar_w)``.
    w : float array (n,)
        Site weights (ones for an unweighted fit).

    Returns
    -------
    ndarray (k, m)
        ``sum_g ||sum_{i in g} w_i (x_i - xbar_w)||^2 / sum_{i in g} w_i`` per order and factor.
    """
    orders = np.ascontiguousarray(orders, dtype=np.int64)
    out = np.empty((orders.shape[0], codes.shape[0]))
    _between(orders, np.ascontiguousarray(codes, dtype=np.int64),
             np.ascontiguousarray(n_levels, dtype=np.int64),
             np.ascontiguousarray(xw, dtype=np.float64),
             np.ascontiguousarray(w, dtype=np.float64), out)
    return out


@numba.njit(cache=True, nogil=True)
def _dr_stack(gram: np.ndarray, penalty: np.ndarray, coef: np.ndarray, lam: np.ndarray) -> None:
    k, p, _ = gram.shape
    eye = np.eye(p)
    for b in range(k):
        g = gram[b].copy()
        ridge = 1e-12 * np.trace(g) / p
        for i in range(p):
            g[i, i] += ridge
        low = np.linalg.cholesky(g)
        low_inv = np.linalg.solve(low, eye)
        m = low_inv @ penalty @ low_inv.T
        m = 0.5 * (m + m.T)
        vals, vecs = np.linalg.eigh(m)
        lam[b] = vals
        coef[b] = low_inv.T @ vecs


def demmler_reinsch_stack(gram: np.ndarray, penalty: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Demmler-Reinsch coordinates for a stack of positive definite Gram matrices ``X'WX``.

    With ``X'WX = L L'`` (Cholesky) and ``L^-1 S L^-T = V diag(lam) V'``, returns
    ``coef_map = L^-T V`` (k, p, p) and ``lam`` (k, p), so that ``coef_map' X'WX coef_map = I``
    and ``coef_map' S coef_map = diag(lam)``. Raises ``numpy.linalg.LinAlgError`` when a Gram
    matrix is not positive definite. A compiled loop (one small Cholesky and one small
    symmetric eigenproblem per matrix), free of the thread start-up cost of batched LAPACK
    calls on tiny matrices.
    """
    gram = np.ascontiguousarray(gram, dtype=np.float64)
    k, p, _ = gram.shape
    coef = np.empty((k, p, p))
    lam = np.empty((k, p))
    _dr_stack(gram, np.ascontiguousarray(penalty, dtype=np.float64), coef, lam)
    return coef, lam
