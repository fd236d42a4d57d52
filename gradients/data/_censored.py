"""Values below a detection limit (left-censored values, written ``<0.5``).

Policies replace each censored cell by a number and say what they did. Substitution (half the
limit, the limit, zero) is common practice but biased; robust regression on order statistics
(ROS) is the better-founded choice when a column has enough detected values (Helsel 2012).

References
----------
1. Helsel, D. R. (2012). *Statistics for Censored Environmental Data Using Minitab and R*,
   2nd ed. Wiley. Chapter 6 (substitution and its bias), chapter 6.1 (robust ROS).
2. Hirsch, R. M. & Stedinger, J. R. (1987). Plotting positions for historical floods and their
   precision. *Water Resources Research* 23:715-727.
3. Helsel, D. R. & Cohn, T. A. (1988). Estimation of descriptive statistics for multiply
   censored water quality data. *Water Resources Research* 24:1997-2004.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

__all__ = ["CENSORED_POLICIES", "MIN_DETECTS_ROS", "ros_impute", "ros_plotting_positions"]

#: Policies accepted by ``censored=`` and what each one does, for messages and the log.
CENSORED_POLICIES: dict[str, str] = {
    "error": "stop with an error listing the censored cells",
    "half-limit": "replace each '<DL' value by DL/2 (common practice; biased, Helsel 2012)",
    "limit": "replace each '<DL' value by DL (an upper bound; biased upwards)",
    "zero": "replace each '<DL' value by 0 (a lower bound; biased downwards)",
    "ros": (
        "impute '<DL' values by robust regression on order statistics with a log-normal fit "
        "to the detected values (Helsel 2012, ch. 6)"
    ),
}

#: Fewest detected values in a column for ROS to fit its regression line.
MIN_DETECTS_ROS = 3


def ros_plotting_positions(
    values: np.ndarray, censored: np.ndarray
) -> np.ndarray:
    """Hirsch-Stedinger plotting positions for data with one or more detection limits.

    Parameters
    ----------
    values : ndarray of float
        Detected values, and the detection limit for censored ones.
    censored : ndarray of bool
        True where ``values`` holds a detection limit.

    Returns
    -------
    ndarray of float
        A plotting position in (0, 1) for every observation, in input order. Ties among detected
        values and among non-detects at the same limit are ranked in input order.

    Notes
    -----
    With detection limits DL_1 < ... < DL_m (and DL_{m+1} = infinity), A_j is the number of
    detected values in [DL_j, DL_{j+1}), B_j the number of observations known to be below DL_j
    (detected values below it and non-detects with a limit at or below it), and C_j the number of
    non-detects at DL_j. The probability of exceeding DL_j is built from the top down [2]_:
    PE_{m+1} = 0 and PE_j = PE_{j+1} + A_j / (A_j + B_j) (1 - PE_{j+1}). The r-th detected value
    in interval j gets (1 - PE_j) + (PE_j - PE_{j+1}) r / (A_j + 1), with PE_0 = 1 for detected
    values below the lowest limit; the r-th non-detect at DL_j gets (1 - PE_j) r / (C_j + 1)
    (Helsel 2012, ch. 6 [1]_; Helsel & Cohn 1988 [3]_).
    """
    values = np.asarray(values, dtype=float)
    censored = np.asarray(censored, dtype=bool)
    limits = np.unique(values[censored])
    m = len(limits)
    edges = np.concatenate([[-np.inf], limits, [np.inf]])  # interval j is [edges[j], edges[j+1])
    detected = values[~censored]
    pe = np.zeros(m + 2)  # pe[j] for j = 0..m+1; pe[0] = 1, pe[m+1] = 0
    pe[0] = 1.0
    for j in range(m, 0, -1):
        a = np.count_nonzero((detected >= edges[j]) & (detected < edges[j + 1]))
        b = np.count_nonzero(detected < edges[j]) + np.count_nonzero(
            censored & (values <= edges[j])
        )
        pe[j] = pe[j + 1] + (a / (a + b) if a + b else 0.0) * (1.0 - pe[j + 1])

    positions = np.full(len(values), np.nan)
    det_index = np.flatnonzero(~censored)
    for j in range(m + 1):
        inside = det_index[(detected >= edges[j]) & (detected < edges[j + 1])]
        if len(inside):
            order = inside[np.argsort(values[inside], kind="stable")]
            r = np.arange(1, len(order) + 1)
            positions[order] = (1.0 - pe[j]) + (pe[j] - pe[j + 1]) * r / (len(order) + 1)
    for j in range(1, m + 1):
        at = np.flatnonzero(censored & (values == edges[j]))
        r = np.arange(1, len(at) + 1)
        positions[at] = (1.0 - pe[j]) * r / (len(at) + 1)
    return positions


def ros_impute(values: np.ndarray, censored: np.ndarray) -> tuple[np.ndarray, int]:
    """Impute censored values by robust ROS with a log-normal fit.

    Parameters
    ----------
    values : ndarray of float
        Detected values (all > 0), and the detection limit for censored ones.
    censored : ndarray of bool
        True where ``values`` holds a detection limit.

    Returns
    -------
    imputed : ndarray of float
        ``values`` with each censored entry replaced by its imputed value; detected values are
        returned unchanged.
    n_capped : int
        How many imputed values came out above their own detection limit and were set to the
        limit (a value reported as "<DL" is known to be below DL).

    Notes
    -----
    The logarithms of the detected values are regressed (ordinary least squares) on the normal
    quantiles of their plotting positions (:func:`ros_plotting_positions`); each non-detect is
    given the value of that line at its own plotting position, back-transformed with ``exp``
    (Helsel 2012, ch. 6.1). "Robust" because only the imputed non-detects come from the fitted
    distribution: the detected values are used as measured. The caller checks that there are at
    least :data:`MIN_DETECTS_ROS` detected values and that they are positive.
    """
    values = np.asarray(values, dtype=float)
    censored = np.asarray(censored, dtype=bool)
    pp = ros_plotting_positions(values, censored)
    z = stats.norm.ppf(pp)
    slope, intercept = np.polyfit(z[~censored], np.log(values[~censored]), 1)
    out = values.copy()
    fitted = np.exp(intercept + slope * z[censored])
    limits = values[censored]
    n_capped = int(np.count_nonzero(fitted > limits))
    out[censored] = np.minimum(fitted, limits)
    return out, n_capped
