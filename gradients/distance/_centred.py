"""Gower's centred matrix of a distance matrix, and batched traces of its permutations.

Every method that analyses dissimilarities by their sums of squares (distance-based redundancy
analysis, PERMANOVA) works on ``G = -1/2 J D^2 J``, with ``J = I - 11'/n`` the centring matrix
(Gower 1966). Its trace is the total sum of squares ``sum_{i<j} d_ij^2 / n``, and for a design
with orthonormal basis ``Q`` the explained sum of squares is ``tr(Q' G Q)`` (McArdle & Anderson
2001). A permutation test rearranges the rows and columns of ``G`` together; this module gives
those statistics for a whole batch of site orders without building any permuted matrix.
"""

from __future__ import annotations

import dataclasses
import functools
from collections.abc import Sequence

import numpy as np
import pandas as pd
import scipy.linalg
import scipy.sparse.linalg
from numba import njit, prange

from .._errors import InputError
from .._result import ResultMixin
from .._validation import check_choice
from ._matrix import DistanceMatrix, as_distance_matrix
from ._recent import Recent, digest

__all__ = [
    "CENTRED_CORRECTIONS",
    "GowerMatrix",
    "PermutedTraces",
    "cailliez_constant",
    "gower_centre",
    "gower_centred",
    "lingoes_constant",
    "permuted_products",
    "permuted_traces",
]

CENTRED_CORRECTIONS = ("lingoes", "cailliez")

#: Eigenvalues within this fraction of the largest one are rounding noise (as in PCoA).
EIGEN_RTOL = 1e-9
#: Up to this many sites the traces come from the compiled gather over the hat matrices (n x n
#: each, kept in memory); beyond it, from batched matrix products, which need no n x n copies.
GATHER_MAX_SITES = 2500
#: Bound on the cells (batch x sites x columns) of one block of permuted bases.
_BLOCK_CELLS = 2_000_000


# =========================================================================== the matrix
@dataclasses.dataclass(frozen=True, repr=False)
class GowerMatrix(ResultMixin):
    """Gower's centred matrix ``G = -1/2 J D^2 J`` of a distance matrix.

    Attributes
    ----------
    matrix : ndarray, shape (n, n)
        ``G`` (read-only, float64). Rows and columns sum to zero.
    labels : pandas.Index
        Site labels, in the order of the rows.
    total : float
        ``tr(G) = sum_{i<j} d_ij^2 / n``: the total sum of squares of the dissimilarities.
    correction : str or None
        ``"lingoes"``, ``"cailliez"`` or None.
    constant : float
        The correction constant applied (0.0 when none was asked for or needed).
    distances : DistanceMatrix
        The matrix that was centred (the corrected one when a correction was applied).
    notes : tuple of str
        What was done (corrections). :meth:`spectrum_notes` adds the negative-eigenvalue report.
    """

    matrix: np.ndarray
    labels: pd.Index
    total: float
    correction: str | None
    constant: float
    distances: DistanceMatrix
    notes: tuple[str, ...] = ()

    @property
    def n(self) -> int:
        """Number of sites."""
        return int(self.matrix.shape[0])

    @functools.cached_property
    def eigenvalues(self) -> np.ndarray:
        """All ``n`` eigenvalues of ``G``, decreasing; rounding noise (``1e-9`` of the largest,
        relative) set to 0. Negative ones mean the dissimilarities are not Euclidean."""
        values = np.linalg.eigvalsh(self.matrix)[::-1].copy()
        tol = EIGEN_RTOL * max(abs(float(values[0])), abs(float(values[-1])))
        values[np.abs(values) <= tol] = 0.0
        values.flags.writeable = False
        return values

    @property
    def negative_share(self) -> float:
        """Sum of the magnitudes of the negative eigenvalues over the sum of the positive ones."""
        values = self.eigenvalues
        positive = float(values[values > 0].sum())
        return float(-values[values < 0].sum() / positive) if positive > 0 else 0.0

    def spectrum_notes(self) -> tuple[str, ...]:
        """Words on the negative eigenvalues, if any (empty for a Euclidean matrix)."""
        values = self.eigenvalues
        negative = values < 0
        if not negative.any():
            return ()
        return (
            f"{int(negative.sum())} of {self.n} eigenvalues of the centred matrix are negative "
            f"(largest magnitude {-float(values.min()):.4g}): the dissimilarities are not "
            "Euclidean. The negative part sums to "
            f"{100 * self.negative_share:.3g}% of the positive part; sums of squares, R2 and "
            "pseudo-F include it. With a large share, consider correction='lingoes' or "
            "'cailliez', or the square root of the dissimilarities.",
        )


def gower_centred(
    d: DistanceMatrix | np.ndarray | pd.DataFrame, *, correction: str | None = None
) -> GowerMatrix:
    """Gower's centred matrix of a distance matrix, with an optional Euclidean correction.

    Parameters
    ----------
    d : DistanceMatrix, square array or square DataFrame
        Dissimilarities among sites (any coefficient; non-Euclidean ones give negative
        eigenvalues, which are kept and reported).
    correction : {None, "lingoes", "cailliez"}, optional
        Make a non-Euclidean matrix Euclidean first: Lingoes (1971) replaces every distance
        between distinct sites by ``sqrt(d**2 + 2 c)`` with ``c`` minus the smallest eigenvalue
        of ``G``; Cailliez (1983) by ``d + c`` with ``c`` the largest eigenvalue of the block
        matrix ``[[0, 2 G], [-I, -4 G2]]`` (``G2`` the centred ``-d / 2``). Nothing is done to a
        matrix without negative eigenvalues.

    Returns
    -------
    GowerMatrix

    Notes
    -----
    ``A = -d**2 / 2`` and ``G = J A J`` (Gower 1966 [1]_). For Euclidean distances among the
    rows of a centred table ``Y``, ``G = Y Y'``, so the traces of its projections are the sums of
    squares of a linear model fitted to ``Y`` (McArdle & Anderson 2001 [2]_). The Lingoes
    correction adds ``c`` to every eigenvalue but the trivial zero, which is ``G + c J``; the
    Cailliez constant is the smallest one that makes ``d + c`` Euclidean (Cailliez 1983 [3]_;
    Legendre & Legendre 2012, sect. 9.3.4 [4]_).

    References
    ----------
    .. [1] Gower, J. C. (1966). Some distance properties of latent root and vector methods used
       in multivariate analysis. Biometrika 53: 325-338.
    .. [2] McArdle, B. H. & Anderson, M. J. (2001). Fitting multivariate models to community
       data: a comment on distance-based redundancy analysis. Ecology 82: 290-297.
    .. [3] Cailliez, F. (1983). The analytical solution of the additive constant problem.
       Psychometrika 48: 305-308.
    .. [4] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.spatial.distance import pdist
    >>> from gradients.distance import DistanceMatrix, gower_centred
    >>> y = np.random.default_rng(0).normal(size=(5, 2))
    >>> g = gower_centred(DistanceMatrix(pdist(y), list("abcde")))
    >>> bool(np.allclose(g.matrix, (y - y.mean(0)) @ (y - y.mean(0)).T))
    True
    """
    dm = as_distance_matrix(d, name="d")
    if correction is not None:
        check_choice("correction", correction, CENTRED_CORRECTIONS)
    # centred once per matrix for a whole run, eigenvalues included (see ._recent)
    key = ("gower", correction, digest(dm.condensed), str(dm.labels.dtype),
           tuple(dm.labels.tolist()), dm.metric, dm.transform)
    return _RECENT_CENTRED.get(key, lambda: _gower_centred(dm, correction))


_RECENT_CENTRED = Recent(2)  # the last two matrices centred (the community's, mostly)


def _gower_centred(dm: DistanceMatrix, correction: str | None) -> GowerMatrix:
    if dm.n < 2:
        raise InputError(f"A centred matrix needs at least 2 sites; the distance matrix has "
                         f"{dm.n}.")
    square = dm.square().astype(np.float64, copy=False)
    g = gower_centre(-0.5 * square * square)
    notes: list[str] = []
    constant = 0.0
    applied = dm
    if correction is not None:
        spectrum = np.linalg.eigvalsh(g)
        smallest = float(spectrum[0])
        scale = max(abs(smallest), abs(float(spectrum[-1])))
        if smallest < -EIGEN_RTOL * scale:
            if correction == "lingoes":
                constant = -smallest
                fixed = np.sqrt(square * square + 2.0 * constant)
                g = g + constant * (np.eye(dm.n) - 1.0 / dm.n)
                relation = f"d' = sqrt(d^2 + 2c), c = {constant:.6g} (Lingoes 1971)"
            else:
                constant = cailliez_constant(square, g1=g)
                fixed = square + constant
                np.fill_diagonal(fixed, 0.0)
                g = gower_centre(-0.5 * fixed * fixed)
                relation = f"d' = d + c, c = {constant:.6g} (Cailliez 1983)"
            np.fill_diagonal(fixed, 0.0)
            applied = DistanceMatrix.from_square(fixed, dm.labels, metric=dm.metric,
                                                 transform=dm.transform)
            notes.append(f"{correction.capitalize()} correction applied to every pair of "
                         f"distinct sites: {relation}. Before it the smallest eigenvalue of the "
                         f"centred matrix was {smallest:.6g}.")
        else:
            notes.append(f"correction={correction!r} asked, but the matrix has no negative "
                         "eigenvalues (it is Euclidean): no correction was applied.")
    g = (g + g.T) / 2.0
    g.flags.writeable = False
    return GowerMatrix(matrix=g, labels=dm.labels, total=float(np.trace(g)),
                       correction=correction, constant=float(constant), distances=applied,
                       notes=tuple(notes))


def gower_centre(a: np.ndarray) -> np.ndarray:
    """Double-centre a symmetric matrix: ``(I - 11'/n) A (I - 11'/n)`` (Gower 1966)."""
    a = np.asarray(a, dtype=np.float64)
    row = a.mean(axis=1, keepdims=True)
    col = a.mean(axis=0, keepdims=True)
    return a - row - col + a.mean()


def lingoes_constant(square: np.ndarray) -> float:
    """Lingoes (1971) constant: minus the smallest eigenvalue of the Gower matrix (0 if none).

    Replacing ``d`` by ``sqrt(d**2 + 2 c)`` for every pair of distinct sites adds ``c`` to every
    non-trivial eigenvalue, so the smallest becomes 0 (Legendre & Legendre 2012, sect. 9.3.4).
    """
    smallest = float(np.linalg.eigvalsh(gower_centre(-0.5 * square**2))[0])
    return max(-smallest, 0.0)


def cailliez_constant(square: np.ndarray, *, dense_max: int = 400,
                      g1: np.ndarray | None = None) -> float:
    """Cailliez (1983) constant: the largest eigenvalue of the 2n x 2n block matrix.

    ``[[0, 2 G1], [-I, -4 G2]]`` with ``G1`` the Gower-centred ``-d**2 / 2`` and ``G2`` the
    Gower-centred ``-d / 2``. Adding it to every distance between distinct sites gives the
    smallest constant that makes the matrix Euclidean (Cailliez 1983; Legendre & Legendre 2012,
    sect. 9.3.4); ``g1``, when the caller has it already, saves computing it again. Up to
    ``dense_max`` sites the block matrix is solved densely; beyond, its eigenvalue of largest
    real part is found by Arnoldi iteration on products with the blocks
    (:func:`scipy.sparse.linalg.eigs`), falling back to the dense solver if that fails.
    """
    n = square.shape[0]
    if g1 is None:
        g1 = gower_centre(-0.5 * square**2)
    g2 = gower_centre(-0.5 * square)
    if n > dense_max:
        def matvec(z: np.ndarray) -> np.ndarray:
            u, v = z[:n], z[n:]
            return np.concatenate((2.0 * (g1 @ v), -u - 4.0 * (g2 @ v)))

        op = scipy.sparse.linalg.LinearOperator((2 * n, 2 * n), matvec=matvec, dtype=np.float64)
        start = np.random.default_rng(0).normal(size=2 * n)
        try:
            value = scipy.sparse.linalg.eigs(op, k=1, which="LR", v0=start,
                                             return_eigenvectors=False)[0]
            if abs(value.imag) <= 1e-8 * max(abs(value.real), 1.0):
                return max(float(value.real), 0.0)
        except scipy.sparse.linalg.ArpackNoConvergence:
            pass
    block = np.zeros((2 * n, 2 * n))
    block[:n, n:] = 2.0 * g1
    block[n:, :n] = -np.eye(n)
    block[n:, n:] = -4.0 * g2
    values = scipy.linalg.eigvals(block, overwrite_a=True, check_finite=False)
    real = values[np.abs(values.imag) <= 1e-8 * np.maximum(np.abs(values.real), 1.0)].real
    if real.size == 0:  # not expected: the largest eigenvalue is real (Cailliez 1983)
        real = values.real
    return max(float(real.max()), 0.0)



# =========================================================================== batched traces
_OPTIONS = {"cache": True, "nogil": True}
# Fused multiply-adds only, no reassociation: the summation order is fixed, so a statistic is
# the same on every run and whatever the number of threads.
_FAST = {"contract"}


@njit(parallel=True, fastmath=_FAST, **_OPTIONS)
def _gather_one(w: np.ndarray, g: np.ndarray, orders: np.ndarray) -> np.ndarray:  # pragma: no cover
    # sum_ij w[i, j] g[o_i, o_j] for symmetric w and g: the diagonal plus twice the upper
    # triangle. Four orders share each pass over w, keeping four independent gathers in flight.
    k, n = orders.shape
    out = np.empty(k)
    for grp in prange((k + 3) // 4):
        b0 = 4 * grp
        b1 = min(b0 + 1, k - 1)
        b2 = min(b0 + 2, k - 1)
        b3 = min(b0 + 3, k - 1)
        p0 = orders[b0]
        p1 = orders[b1]
        p2 = orders[b2]
        p3 = orders[b3]
        a0 = 0.0
        a1 = 0.0
        a2 = 0.0
        a3 = 0.0
        for i in range(n):
            r0 = g[p0[i]]
            r1 = g[p1[i]]
            r2 = g[p2[i]]
            r3 = g[p3[i]]
            wi = w[i]
            s0 = 0.0
            s1 = 0.0
            s2 = 0.0
            s3 = 0.0
            for j in range(i + 1, n):
                x = wi[j]
                s0 += x * r0[p0[j]]
                s1 += x * r1[p1[j]]
                s2 += x * r2[p2[j]]
                s3 += x * r3[p3[j]]
            h = 0.5 * wi[i]
            a0 += s0 + h * r0[p0[i]]
            a1 += s1 + h * r1[p1[i]]
            a2 += s2 + h * r2[p2[i]]
            a3 += s3 + h * r3[p3[i]]
        out[b0] = 2.0 * a0
        out[b1] = 2.0 * a1
        out[b2] = 2.0 * a2
        out[b3] = 2.0 * a3
    return out


@njit(parallel=True, fastmath=_FAST, **_OPTIONS)
def _gather_two(u: np.ndarray, v: np.ndarray, g: np.ndarray,
                orders: np.ndarray) -> np.ndarray:  # pragma: no cover
    # As _gather_one for two weight matrices read against the same gathered entries of g.
    k, n = orders.shape
    out = np.empty((k, 2))
    for grp in prange((k + 3) // 4):
        b0 = 4 * grp
        b1 = min(b0 + 1, k - 1)
        b2 = min(b0 + 2, k - 1)
        b3 = min(b0 + 3, k - 1)
        p0 = orders[b0]
        p1 = orders[b1]
        p2 = orders[b2]
        p3 = orders[b3]
        x0 = 0.0
        x1 = 0.0
        x2 = 0.0
        x3 = 0.0
        y0 = 0.0
        y1 = 0.0
        y2 = 0.0
        y3 = 0.0
        for i in range(n):
            r0 = g[p0[i]]
            r1 = g[p1[i]]
            r2 = g[p2[i]]
            r3 = g[p3[i]]
            ui = u[i]
            vi = v[i]
            s0 = 0.0
            s1 = 0.0
            s2 = 0.0
            s3 = 0.0
            t0 = 0.0
            t1 = 0.0
            t2 = 0.0
            t3 = 0.0
            for j in range(i + 1, n):
                e0 = r0[p0[j]]
                e1 = r1[p1[j]]
                e2 = r2[p2[j]]
                e3 = r3[p3[j]]
                a = ui[j]
                b = vi[j]
                s0 += a * e0
                s1 += a * e1
                s2 += a * e2
                s3 += a * e3
                t0 += b * e0
                t1 += b * e1
                t2 += b * e2
                t3 += b * e3
            a = 0.5 * ui[i]
            b = 0.5 * vi[i]
            d0 = r0[p0[i]]
            d1 = r1[p1[i]]
            d2 = r2[p2[i]]
            d3 = r3[p3[i]]
            x0 += s0 + a * d0
            x1 += s1 + a * d1
            x2 += s2 + a * d2
            x3 += s3 + a * d3
            y0 += t0 + b * d0
            y1 += t1 + b * d1
            y2 += t2 + b * d2
            y3 += t3 + b * d3
        out[b0, 0] = 2.0 * x0
        out[b1, 0] = 2.0 * x1
        out[b2, 0] = 2.0 * x2
        out[b3, 0] = 2.0 * x3
        out[b0, 1] = 2.0 * y0
        out[b1, 1] = 2.0 * y1
        out[b2, 1] = 2.0 * y2
        out[b3, 1] = 2.0 * y3
    return out


def _square_float(g: object, name: str = "g") -> np.ndarray:
    if isinstance(g, GowerMatrix):
        g = g.matrix
    a = np.ascontiguousarray(g, dtype=np.float64)
    if a.ndim != 2 or a.shape[0] != a.shape[1]:
        raise InputError(f"`{name}` must be a square matrix; got shape {a.shape}.")
    return a


def _basis(q: object, n: int, name: str = "basis") -> np.ndarray:
    b = np.asarray(q, dtype=np.float64)
    if b.ndim == 1:
        b = b[:, None]
    if b.ndim != 2 or b.shape[0] != n:
        raise InputError(f"`{name}` must have one row per site ({n}); got shape {b.shape}.")
    return np.ascontiguousarray(b)


def _orders(orders: object, n: int) -> np.ndarray:
    o = np.asarray(orders)
    if o.ndim == 1:
        o = o[None, :]
    if o.ndim != 2 or o.shape[1] != n:
        raise InputError(f"`orders` must have shape (k, {n}); got {o.shape}.")
    return o


def _inverse(orders: np.ndarray) -> np.ndarray:
    """``inv[b, orders[b, i]] = i``: where each site's row goes."""
    k, n = orders.shape
    inv = np.empty((k, n), dtype=np.intp)
    np.put_along_axis(inv, orders.astype(np.intp, copy=False),
                      np.broadcast_to(np.arange(n, dtype=np.intp), (k, n)), axis=1)
    return inv


class PermutedTraces:
    """``tr(Q_l' G[o][:, o] Q_l)`` for fixed ``G`` and bases ``Q_l``, over batches of orders.

    Build once, call with each batch of site orders from the permutation engine.

    Parameters
    ----------
    g : ndarray (n, n) or GowerMatrix
        A symmetric matrix, usually Gower's centred matrix (or a residual of it).
    bases : sequence of ndarray, each (n, m_l)
        Bases with orthonormal columns (a single array is one basis). An empty basis (``m_l =
        0``) has trace 0.
    method : {'auto', 'gather', 'products'}, default 'auto'
        'gather': a compiled pass over the upper triangle per order, reading ``G`` at the
        permuted positions against the hat matrices ``H_l = Q_l Q_l'`` (cost ``n^2 / 2`` per
        order and pair of bases, whatever their width; ``n x n`` memory per basis).
        'products': permute the rows of the bases instead and use matrix products (cost
        ``n^2 m`` per order, no ``n x n`` copies). 'auto' gathers up to
        ``GATHER_MAX_SITES`` sites. Both give the same values to rounding.

    Notes
    -----
    With ``P`` the permutation matrix of an order ``o`` (``G_o = P G P'``),
    ``tr(Q' P G P' Q) = tr((P'Q)' G (P'Q)) = <Q Q', G_o>``: permuting the rows of ``Q`` (by the
    inverse order) or reading ``G`` at permuted positions against ``Q Q'`` replaces building
    ``G_o``. The compiled kernel releases the GIL and runs its orders on numba's threads; a
    thread that has set numba to one thread runs it serially, so it is safe under the engine's
    thread workers.
    """

    def __init__(self, g: object, bases: Sequence[np.ndarray] | np.ndarray, *,
                 method: str = "auto") -> None:
        self.g = _square_float(g)
        n = self.g.shape[0]
        if isinstance(bases, np.ndarray):
            bases = [bases]
        self.bases = [_basis(b, n, "bases") for b in bases]
        if not self.bases:
            raise InputError("`bases` is empty: give at least one basis.")
        check_choice("method", method, ("auto", "gather", "products"))
        if method == "auto":
            method = "gather" if n <= GATHER_MAX_SITES else "products"
        self.method = method
        self._hats = ([b @ b.T if b.shape[1] else None for b in self.bases]
                      if method == "gather" else None)

    @property
    def n_sites(self) -> int:
        return int(self.g.shape[0])

    def __call__(self, orders: np.ndarray) -> np.ndarray:
        """Traces for a batch of orders: shape ``(k, len(bases))``."""
        o = _orders(orders, self.n_sites)
        k = o.shape[0]
        out = np.zeros((k, len(self.bases)))
        if self.method == "products":
            for j, b in enumerate(self.bases):
                if b.shape[1]:
                    out[:, j] = _traces_by_products(self.g, b, o)
            return out
        hats = self._hats
        live = [j for j, h in enumerate(hats) if h is not None]  # type: ignore[union-attr]
        o32 = np.ascontiguousarray(o, dtype=np.uint32)
        for s in range(0, len(live) - 1, 2):
            a, b = live[s], live[s + 1]
            out[:, [a, b]] = _gather_two(hats[a], hats[b], self.g, o32)  # type: ignore[index]
        if len(live) % 2:
            a = live[-1]
            out[:, a] = _gather_one(hats[a], self.g, o32)  # type: ignore[index]
        return out


def _traces_by_products(g: np.ndarray, basis: np.ndarray, orders: np.ndarray) -> np.ndarray:
    n, m = basis.shape
    inv = _inverse(orders)
    out = np.empty(orders.shape[0])
    step = max(1, _BLOCK_CELLS // max(n * m, 1))
    for s in range(0, orders.shape[0], step):
        iv = inv[s : s + step]
        r = basis[iv.T].reshape(n, -1)  # column block b holds the basis rows moved by order b
        out[s : s + iv.shape[0]] = np.einsum("ij,ij->j", r, g @ r).reshape(-1, m).sum(axis=1)
    return out


def permuted_traces(g: object, bases: Sequence[np.ndarray] | np.ndarray, orders: np.ndarray,
                    *, method: str = "auto") -> np.ndarray:
    """``tr(Q' G[o][:, o] Q)`` for every order ``o`` of a batch, without building ``G[o][:, o]``.

    Parameters
    ----------
    g : ndarray (n, n) or GowerMatrix
        Symmetric matrix.
    bases : ndarray (n, m) or sequence of them
        Orthonormal bases ``Q``.
    orders : ndarray, shape (k, n)
        Site orders (row ``b`` says site ``i`` takes the data of site ``orders[b, i]``), as the
        permutation engine hands them to a statistic.
    method : {'auto', 'gather', 'products'}
        See :class:`PermutedTraces` (build one to reuse across batches).

    Returns
    -------
    ndarray, shape (k,) for one basis, (k, L) for L bases.

    Examples
    --------
    >>> import numpy as np
    >>> from gradients.distance import permuted_traces
    >>> rng = np.random.default_rng(0)
    >>> a = rng.normal(size=(6, 6)); g = a + a.T
    >>> q, _ = np.linalg.qr(rng.normal(size=(6, 2)))
    >>> o = np.array([[5, 4, 3, 2, 1, 0]])
    >>> bool(np.isclose(permuted_traces(g, q, o)[0], np.trace(q.T @ g[o[0]][:, o[0]] @ q)))
    True
    """
    single = isinstance(bases, np.ndarray)
    out = PermutedTraces(g, bases, method=method)(orders)
    return out[:, 0] if single else out


def permuted_products(g: object, basis: np.ndarray, orders: np.ndarray) -> np.ndarray:
    """``Q' G[o][:, o] Q`` (an ``m x m`` matrix) for every order ``o`` of a batch.

    For statistics that need more than a trace, such as the largest eigenvalue of the permuted
    constrained matrix in a test of one canonical axis. The rows of ``Q`` are moved by the
    inverse of each order and multiplied with ``G`` in blocks (one BLAS product per block).

    Returns
    -------
    ndarray, shape (k, m, m)
    """
    g = _square_float(g)
    n = g.shape[0]
    b = _basis(basis, n)
    o = _orders(orders, n)
    k, m = o.shape[0], b.shape[1]
    out = np.empty((k, m, m))
    if m == 0:
        return out
    inv = _inverse(o)
    step = max(1, _BLOCK_CELLS // max(n * m, 1))
    for s in range(0, k, step):
        iv = inv[s : s + step]
        kb = iv.shape[0]
        moved = b[iv]  # (kb, n, m): the basis rows moved by each order
        gr = (g @ moved.transpose(1, 0, 2).reshape(n, kb * m)).reshape(n, kb, m)
        np.matmul(moved.transpose(0, 2, 1), gr.transpose(1, 0, 2), out=out[s : s + kb])
    return out
