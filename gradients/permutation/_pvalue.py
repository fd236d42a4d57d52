"""The one place in the suite that turns counts of extreme statistics into p-values."""

from __future__ import annotations

import numpy as np

__all__ = [
    "ADJUST_METHODS",
    "TIE_RTOL",
    "adjust_pvalues",
    "count_extreme",
    "extreme_mask",
    "pvalue_from_counts",
]

#: Permuted statistics within this relative distance of the observed one count as ties, and
#: ties count as "at least as extreme". Batched (BLAS) and direct evaluations of the same
#: statistic differ by rounding, so exact equality would make p-values depend on the kernel.
TIE_RTOL = 1e-10

#: Multiplicity adjustments offered by :func:`adjust_pvalues`.
ADJUST_METHODS = ("holm", "fdr_bh")


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


def adjust_pvalues(pvalues: np.ndarray, method: str | None) -> np.ndarray:
    """Adjust a family of p-values for multiplicity.

    Parameters
    ----------
    pvalues : array_like, 1-D
        Raw p-values; NaN entries (tests that could not be run) are left out of the family and
        stay NaN.
    method : {'holm', 'fdr_bh'} or None
        'holm': Holm's step-down procedure, which controls the family-wise error rate [1]_;
        'fdr_bh': Benjamini & Hochberg's step-up procedure, which controls the false discovery
        rate for independent or positively dependent tests [2]_; None returns a copy.

    Returns
    -------
    ndarray
        Adjusted p-values in the input order, capped at 1.

    Notes
    -----
    With the ``m`` finite p-values sorted, ``p_(1) <= ... <= p_(m)``, Holm's adjusted value is
    ``max_{j <= i} (m - j + 1) p_(j)`` and Benjamini-Hochberg's is
    ``min_{j >= i} m p_(j) / j``. Both are computed here in a few vector operations; the tests
    check them against ``statsmodels.stats.multitest.multipletests``, which gives the same
    numbers but runs a full garbage collection on every Holm call (about 0.1 s in a process
    that has loaded pandas, more than the rest of a 99,999-permutation vector fit).

    References
    ----------
    .. [1] Holm, S. (1979). A simple sequentially rejective multiple test procedure.
       Scandinavian Journal of Statistics 6: 65-70.
    .. [2] Benjamini, Y. & Hochberg, Y. (1995). Controlling the false discovery rate: a
       practical and powerful approach to multiple testing. Journal of the Royal Statistical
       Society B 57: 289-300.

    Examples
    --------
    >>> from gradients.permutation import adjust_pvalues
    >>> adjust_pvalues([0.01, 0.04, 0.03], "holm").round(3).tolist()
    [0.03, 0.06, 0.06]
    >>> adjust_pvalues([0.01, 0.04, 0.03], "fdr_bh").round(3).tolist()
    [0.03, 0.04, 0.04]
    """
    p = np.array(pvalues, dtype=np.float64, ndmin=1)
    if p.ndim != 1:
        raise ValueError(f"`pvalues` must be one-dimensional; got shape {p.shape}.")
    if method is None:
        return p
    if method not in ADJUST_METHODS:
        raise ValueError(f"`method` must be one of {ADJUST_METHODS} or None; got {method!r}.")
    out = np.full(p.shape, np.nan)
    ok = np.flatnonzero(np.isfinite(p))
    m = ok.size
    if m == 0:
        return out
    order = ok[np.argsort(p[ok], kind="stable")]
    ranked = p[order]
    if method == "holm":
        adjusted = np.maximum.accumulate(ranked * np.arange(m, 0, -1))
    else:
        adjusted = np.minimum.accumulate((ranked * m / np.arange(1, m + 1))[::-1])[::-1]
    out[order] = np.minimum(adjusted, 1.0)
    return out
