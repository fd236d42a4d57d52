"""The one place in the suite that turns counts of extreme statistics into p-values."""

from __future__ import annotations

import numpy as np

__all__ = ["TIE_RTOL", "count_extreme", "extreme_mask", "pvalue_from_counts"]

#: Permuted statistics within this relative distance of the observed one count as ties, and
#: ties count as "at least as extreme". Batched (BLAS) and direct evaluations of the same
#: statistic differ by rounding, so exact equality would make p-values depend on the kernel.
TIE_RTOL = 1e-10


def extreme_mask(
    null: np.ndarray,
    observed: np.ndarray | float,
    alternative: str,
    *,
    center: np.ndarray | float | None = None,
) -> np.ndarray:
    """Boolean mask of permuted statistics at least as extreme as the observed one.

    Parameters
    ----------
    null : ndarray, shape (P,) or (P, m)
        Permuted statistics.
    observed : float or ndarray, shape (m,)
        Observed statistic(s).
    alternative : {'greater', 'less', 'two-sided'}
        'greater' marks ``t >= observed``, 'less' marks ``t <= observed`` and 'two-sided'
        marks ``|t - c| >= |observed - c|`` with ``c`` the centre of the permutation
        distribution (``center``, or the mean of ``null`` when not given).
    center : float or ndarray, optional
        Known null mean for the two-sided test.

    Notes
    -----
    Ties within a relative tolerance of :data:`TIE_RTOL` count as extreme.
    """
    null = np.asarray(null, dtype=np.float64)
    obs = np.asarray(observed, dtype=np.float64)
    if alternative == "two-sided":
        c = np.mean(null, axis=0) if center is None else np.asarray(center, dtype=np.float64)
        null = np.abs(null - c)
        obs = np.abs(obs - c)
        alternative = "greater"
    scale = np.max(np.abs(null), axis=0) if null.size else np.zeros_like(obs)
    gamma = TIE_RTOL * np.maximum(np.abs(obs), 1e-6 * scale)
    if alternative == "greater":
        return null >= obs - gamma
    if alternative == "less":
        return null <= obs + gamma
    raise ValueError(alternative)  # pragma: no cover - validated by callers


def count_extreme(
    null: np.ndarray,
    observed: np.ndarray | float,
    alternative: str,
    *,
    center: np.ndarray | float | None = None,
) -> np.ndarray:
    """Count permuted statistics at least as extreme as the observed one, per statistic.

    See :func:`extreme_mask` for the rule.
    """
    return np.sum(extreme_mask(null, observed, alternative, center=center), axis=0)


def pvalue_from_counts(
    count: np.ndarray | int,
    total: np.ndarray | int,
    *,
    exact: bool,
) -> np.ndarray:
    """Turn counts of extreme statistics into p-values.

    Parameters
    ----------
    count : int or ndarray
        Number of permuted statistics at least as extreme as the observed one.
    total : int or ndarray
        Number of permuted statistics evaluated.
    exact : bool
        True when every distinct permutation was enumerated (the identity among them).

    Returns
    -------
    ndarray
        ``count / total`` for an exact test; otherwise ``(count + 1) / (total + 1)``, which
        counts the observed arrangement as one of the permutations and is never 0 [1]_.

    References
    ----------
    .. [1] Phipson, B. & Smyth, G. K. (2010). Permutation p-values should never be zero.
       Statistical Applications in Genetics and Molecular Biology 9(1): 39.
    """
    count = np.asarray(count, dtype=np.float64)
    total = np.asarray(total, dtype=np.float64)
    if exact:
        return np.minimum(count / total, 1.0)
    return np.minimum((count + 1.0) / (total + 1.0), 1.0)
