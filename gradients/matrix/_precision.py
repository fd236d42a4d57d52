"""How far a Mantel statistic stored in float32 can lie from the float64 one, and what that
means for the p-value.

With ``u = 2**-24`` (the unit roundoff of float32):

* **Storing the standardised vectors.** The Pearson kernel sums ``a_k b_k`` over the
  ``m`` pairs, ``a`` and ``b`` the centred condensed vectors scaled to unit length. Rounding
  each stored entry to float32 multiplies it by ``1 + d``, ``|d| <= u``; the products of two
  float32 values are exact in float64, so the sum moves by at most
  ``sum |a_k b_k| (2u + u^2) <= (2u + u^2) |a| |b| = 2u + u^2`` (Cauchy-Schwarz; ``|a| = |b|
  = 1``).
* **Distances built in float32.** When the distances themselves were stored in float32
  (``dtype=np.float32`` in the distance builders, which compute in float64 and round once),
  each entry ``d_k`` carries an error ``e_k``, ``|e_k| <= u |d_k|``, so ``|e| <= u |d|``.
  Centring is an orthogonal projection, so the centred vector moves by at most ``u |d|`` and
  its unit-length version by at most ``2 u |d| / |d - mean(d)| = 2 u kappa``, where
  ``kappa = sqrt(1 + mean^2 / sd^2)`` (population standard deviation of the entries). The
  statistic moves by at most ``2 u (kappa_x + kappa_y)``.
* **Summation.** The kernel adds in float64 row by row (at most ``n`` terms per partial sum,
  ``n`` partial sums), so each run's rounding is below ``2 n 2**-53`` and two runs differ by at
  most ``4 n 2**-53``.

A permutation of the sites keeps the mean, length and ``kappa`` of each vector, so the same
bound ``eps`` holds for every permuted statistic. The p-value counts permuted statistics at
least as extreme as the observed one; with the same orders (same ``rng``) a count can change
only for a permutation whose float64 statistic lies within ``2 eps`` of the observed one.
"""

from __future__ import annotations

import numpy as np

__all__ = ["FLOAT32_UNIT", "float32_bound", "float32_note"]

#: Unit roundoff of float32 (half its machine epsilon).
FLOAT32_UNIT = 2.0 ** -24


def _kappa(v: np.ndarray) -> float:
    """``|v| / |v - mean(v)|``: how much rounding of ``v`` is magnified by centring it."""
    mean = float(np.mean(v, dtype=np.float64))
    var = float(np.var(v, dtype=np.float64))
    return float(np.sqrt(1.0 + mean * mean / var)) if var > 0 else float("inf")


def float32_bound(x: np.ndarray, y: np.ndarray, n: int, *, ranked: bool = False) -> float:
    """Largest difference between a float32 and a float64 Mantel statistic (Pearson kernel).

    Parameters
    ----------
    x, y : ndarray
        The condensed vectors given to the test, as stored (float32 entries count as rounded
        once from float64).
    n : int
        Number of sites.
    ranked : bool, default False
        Spearman: the ranks of float32 entries may tie where the float64 ones do not, which
        no rounding bound covers; the bound is then given only for float64 inputs (the
        float32 inputs' term is left out and the caller says so).

    Returns
    -------
    float
        ``eps``: ``|r32 - r64| <= eps`` for the observed and every permuted statistic.
    """
    u = FLOAT32_UNIT
    eps = 2.0 * u + u * u + 4.0 * n * 2.0 ** -53
    if not ranked:
        for v in (x, y):
            if v.dtype == np.float32:
                eps += 2.0 * u * _kappa(v)
    return eps


def float32_note(eps: float, observed: float, null: np.ndarray, n_resamples: int, *,
                 ranked_float32: bool = False) -> str:
    """The note of a float32 run: the bound on r and what it leaves open in the p-value.

    A count can flip only for a permutation whose float64 statistic lies within ``2 eps`` of
    the observed one; its float32 statistic then lies within ``4 eps`` of the float32 observed
    one, so the permuted float32 values within ``4 eps`` bound the number of flips.
    """
    near = int(np.count_nonzero(np.abs(np.asarray(null, dtype=np.float64) - observed)
                                <= 4.0 * eps))
    text = (f"Stored in float32 (half the memory): this r and every permuted r lie within "
            f"{eps:.2g} of their float64 values, so the p-value can differ from the float64 one "
            f"only through permuted values within {2 * eps:.2g} of the observed r; ")
    text += ("none is near enough here, so the p-value is the float64 one." if near == 0 else
             f"{near} permuted value(s) are near enough, so the p-value is within "
             f"{near}/{n_resamples} of the float64 one.")
    if ranked_float32:
        text += (" The inputs were stored in float32 before ranking: pairs that round to the "
                 "same value share a rank, which the bound does not cover.")
    return text
