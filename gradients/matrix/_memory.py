"""How much memory a Mantel-family test takes at its peak, before it is run.

The counts follow the arrays each test allocates, in units of one condensed float64 vector
(``8 m`` bytes, ``m = n (n - 1) / 2``); the square matrix the kernel permutes holds ``n^2``
entries, about ``2 m``. The inputs themselves (the distance matrices given) are not counted:
they exist before the call.
"""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from ..permutation._plan import _MAX_BATCH_CELLS, DEFAULT_BATCH
from ._inputs import _BLOCK, check_precision

__all__ = ["batch_bytes", "mantel_memory", "partial_mantel_memory", "spatial_memory"]


def _pairs(n_sites: int) -> int:
    if not isinstance(n_sites, int | np.integer) or n_sites < 3:
        raise InputError(f"`n_sites` must be a whole number of at least 3; got {n_sites!r}.")
    return int(n_sites) * (int(n_sites) - 1) // 2


def batch_bytes(n_sites: int, n_resamples: int) -> int:
    """Site orders in flight: the batch being evaluated and the next one being drawn (int64),
    the kernel's uint32 copy, and the null distribution. (Orders drawn by the compiled
    shuffle are allocated by numba, which tracemalloc does not see.)"""
    batch = max(16, min(DEFAULT_BATCH, _MAX_BATCH_CELLS // int(n_sites), int(n_resamples)))
    return batch * int(n_sites) * (2 * 8 + 4) + 8 * int(n_resamples)


def mantel_memory(n_sites: int, *, n_resamples: int = 9999,
                  dtype: type | np.dtype | None = None, spatial: bool = False) -> int:
    """Peak bytes a Pearson or Spearman :func:`~gradients.matrix.mantel` call allocates.

    float64: a float64 copy of each input, the two standardised vectors and the square
    matrix (``2 + 2 + 2`` condensed vectors). float32: the inputs are read as stored, the two
    standardised vectors and the square matrix are float32 (``(1 + 1 + 2) / 2``); while the
    second vector is standardised, two float64 blocks of at most ``2**20`` entries are held
    beside the two float32 vectors, the peak for small ``n``. Spatial:
    see :func:`spatial_memory`, which comes after the permutation test (the larger counts).
    """
    m = _pairs(n_sites)
    item = check_precision(dtype).itemsize
    if item == 8:
        core = 6 * 8 * m
    else:  # two float64 blocks while the second vector is standardised, or the square
        core = max(4 * 4 * m, 2 * 4 * m + 2 * 8 * min(m, _BLOCK))
    total = core + batch_bytes(n_sites, n_resamples)
    if spatial:
        return max(total, spatial_memory(n_sites) + 16 * m)  # float64 x and y beside
    return total


def partial_mantel_memory(n_sites: int, n_controls: int, *, n_resamples: int = 9999,
                          dtype: type | np.dtype | None = None, spatial: bool = False) -> int:
    """Peak bytes a :func:`~gradients.matrix.partial_mantel` call allocates.

    float64 copies of ``x`` and ``y`` (2), the controls stacked and their orthonormal basis
    (``2 k``), the two residual vectors (2), the fixed block given to the kernel
    (``k + 1``) and the square matrix (2), both halved in float32 (where the block is
    stacked in float64 first); while the basis is computed, the centred controls and the
    factorisation's copy (``2 k``) are held too.
    """
    m = _pairs(n_sites)
    k = int(n_controls)
    base = 2 + 2 * k + 2
    if check_precision(dtype).itemsize == 8:
        steady = base + (k + 1) + 2
    else:  # the fixed block is stacked in float64, then copied to float32
        steady = max(base + 1.5 * (k + 1), base + 0.5 * (k + 1) + 1)
    fitting = 2 + 4 * k
    total = int(max(steady, fitting) * 8 * m) + batch_bytes(n_sites, n_resamples)
    if spatial:
        return max(total, spatial_memory(n_sites) + base * 8 * m)
    return total


def spatial_memory(n_sites: int) -> int:
    """Peak bytes of the spatial part of a Mantel test (check and Moran surrogates).

    The Moran eigenvector maps of ``n`` sites need about eight ``n x n`` float64 arrays at
    once (weights, centring basis, centred weights, the projected matrix and its symmetric
    copy, the eigenvectors, LAPACK's workspace and the maps); the principal coordinates of
    ``x`` and each surrogate's coordinates and distances are smaller.
    """
    n = int(n_sites)
    _pairs(n)
    return 8 * 8 * n * n
