"""Compiled kernel for the spatially constrained null: the moments of surrogate distances.

Each Moran spectral surrogate of ``x`` is a configuration of points ``Z`` (sites x
coordinates). The Pearson statistics the Mantel tests compare against it, simple and partial,
are functions of a few sums over the pairs of sites of the surrogate's distances
``d_ij = |z_i - z_j|``:

    s1 = sum (d - c),   s2 = sum (d - c)**2,   t_l = sum d f_l   (l = 0 .. L - 1)

for fixed centred condensed vectors ``f_l`` (the standardised ``y``, or the residuals of ``y``
and an orthonormal basis of the controls) and a shift ``c`` (the mean distance of the observed
configuration; subtracting it keeps ``s2 - s1**2 / m`` free of cancellation). The kernel computes
them for a batch of configurations in one pass over the pairs, without storing any distance
matrix: row by row, the distances from one site to the later ones go into a short buffer,
four configurations per pass so that each stretch of ``f`` is read once for four of them.
Each configuration's sums are accumulated by one thread in a fixed order, so the values do not
depend on the number of threads or on how batches are split.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

__all__ = ["surrogate_moments"]

_OPTIONS = {"cache": True, "nogil": True}


@njit(parallel=True, fastmath={"contract"}, **_OPTIONS)
def _moments(zt: np.ndarray, ft: np.ndarray, shift: float) -> np.ndarray:  # pragma: no cover
    # zt: (k, p, n) coordinates transposed, so that the distances from site i to the sites
    # after it are computed along contiguous memory (and in SIMD lanes: no sum runs across j);
    # ft: (L, m) the fixed vectors, one contiguous row each.
    k, p, n = zt.shape
    n_f = ft.shape[0]
    width = n_f + 2
    out = np.zeros((k, width))
    groups = (k + 3) // 4
    for g in prange(groups):
        # four configurations per pass share each read of ft; a last, partial group repeats
        # its final configuration (it writes the same values)
        bs = (4 * g, min(4 * g + 1, k - 1), min(4 * g + 2, k - 1), min(4 * g + 3, k - 1))
        dr = np.empty((4, n))
        acc = np.zeros((4, width))
        t = 0
        for i in range(n - 1):
            ln = n - i - 1
            for a in range(4):
                za = zt[bs[a]]
                d = dr[a]
                for j in range(ln):
                    d[j] = 0.0
                for c in range(p):
                    zc = za[c, i]
                    for j in range(ln):
                        e = za[c, i + 1 + j] - zc
                        d[j] += e * e
                for j in range(ln):
                    d[j] = np.sqrt(d[j])
            d0 = dr[0]
            d1 = dr[1]
            d2 = dr[2]
            d3 = dr[3]
            for ll in range(n_f):
                fl = ft[ll]
                s0 = 0.0
                s1 = 0.0
                s2 = 0.0
                s3 = 0.0
                for j in range(ln):
                    fv = fl[t + j]
                    s0 += d0[j] * fv
                    s1 += d1[j] * fv
                    s2 += d2[j] * fv
                    s3 += d3[j] * fv
                acc[0, ll] += s0
                acc[1, ll] += s1
                acc[2, ll] += s2
                acc[3, ll] += s3
            # the sums about the shift, four configurations side by side: eight independent
            # accumulators keep the adds from waiting on each other, in a fixed order
            s0 = 0.0
            s1 = 0.0
            s2 = 0.0
            s3 = 0.0
            q0 = 0.0
            q1 = 0.0
            q2 = 0.0
            q3 = 0.0
            for j in range(ln):
                e0 = d0[j] - shift
                e1 = d1[j] - shift
                e2 = d2[j] - shift
                e3 = d3[j] - shift
                s0 += e0
                s1 += e1
                s2 += e2
                s3 += e3
                q0 += e0 * e0
                q1 += e1 * e1
                q2 += e2 * e2
                q3 += e3 * e3
            acc[0, n_f] += s0
            acc[1, n_f] += s1
            acc[2, n_f] += s2
            acc[3, n_f] += s3
            acc[0, n_f + 1] += q0
            acc[1, n_f + 1] += q1
            acc[2, n_f + 1] += q2
            acc[3, n_f + 1] += q3
            t += ln
        for a in range(4):
            for ll in range(width):
                out[bs[a], ll] = acc[a, ll]
    return out


def surrogate_moments(z: np.ndarray, rows: np.ndarray, shift: float) -> np.ndarray:
    """Sums over the pairs of sites of each configuration's distances.

    Parameters
    ----------
    z : ndarray, shape (k, n, p)
        ``k`` configurations of the ``n`` sites in ``p`` coordinates.
    rows : ndarray, shape (L, m)
        Fixed condensed vectors, one per row (``m = n (n - 1) / 2``, scipy's condensed
        order); C-ordered float64 rows are used without a copy.
    shift : float
        Subtracted from every distance in the last two sums.

    Returns
    -------
    ndarray, shape (k, L + 2)
        Columns ``t_0 .. t_{L-1}`` (``sum d f_l``), then ``sum (d - shift)`` and
        ``sum (d - shift)**2``.
    """
    z = np.asarray(z, dtype=np.float64)
    rows = np.ascontiguousarray(rows, dtype=np.float64)
    if z.ndim != 3 or rows.ndim != 2 or rows.shape[1] != z.shape[1] * (z.shape[1] - 1) // 2:
        raise ValueError("surrogate_moments: z must be (k, n, p) and rows (L, n(n-1)/2)")
    if z.shape[0] == 0:
        return np.zeros((0, rows.shape[0] + 2))
    return _moments(np.ascontiguousarray(z.transpose(0, 2, 1)), rows, float(shift))
