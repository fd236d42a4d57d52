"""Distances between sites in environmental space."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import check_choice
from . import _kernels as K
from ._dissimilarity import _check_dtype, _weights, gower_distance
from ._matrix import DistanceMatrix
from ._tables import cells_text, frame_from, numeric_array

__all__ = ["environmental_distance"]

ENVIRONMENT_METHODS = ("euclidean", "gower")


def environmental_distance(
    table: object,
    *,
    variables: Sequence[object] | None = None,
    weights: Mapping[object, float] | Sequence[float] | None = None,
    method: str | None = None,
    dtype: type | np.dtype | None = None,
) -> DistanceMatrix:
    """Distances between sites from their environmental variables.

    Parameters
    ----------
    table : pandas.DataFrame or Survey-like
        Sites x variables; an object with an ``.environment`` DataFrame is accepted too.
        Transform skewed or compositional variables first with :func:`transform_environment`.
    variables : sequence of column names, optional
        The variables to use (default all columns).
    weights : mapping column -> weight, or sequence, optional
        Non-negative weight per variable (default 1 each).
    method : {'euclidean', 'gower'}, optional
        ``'euclidean'``: Euclidean distance of z-scored variables (mean 0, sample sd 1,
        ddof = 1), ``sqrt(sum_k w_k (z_ik - z_jk)^2)``. ``'gower'``: Gower's (1971) coefficient
        ``1 - S`` with the weights (see :func:`gower_distance`). Default: Euclidean when every
        variable is numeric, Gower when any is categorical, text or boolean.
    dtype : {numpy.float64, numpy.float32}, optional

    Returns
    -------
    DistanceMatrix
        ``metric`` is ``'euclidean'`` (``transform='zscore'``) or ``'gower'``.

    Notes
    -----
    z-scoring puts variables measured in different units on one scale, so that each counts
    according to its weight rather than its unit (Legendre & Legendre 2012, ch. 7 [1]_).
    Missing values are an error for Euclidean distance (its message names the cells); Gower's
    coefficient leaves missing comparisons out pair by pair.

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.
    .. [2] Gower, J. C. (1971). Biometrics 27, 857-871.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import environmental_distance
    >>> env = pd.DataFrame({"ph": [6.5, 7.0, 8.0], "cu": [10.0, 30.0, 20.0]},
    ...                    index=["a", "b", "c"])
    >>> environmental_distance(env).metric
    'euclidean'
    """
    frame = frame_from(table, attribute="environment", name="environmental table")
    if variables is not None:
        if isinstance(variables, str):
            variables = [variables]
        missing = [v for v in variables if v not in frame.columns]
        if missing:
            raise InputError(
                f"Variable(s) {format_items(missing)} are not in the environmental table (it "
                f"has {format_items(frame.columns)}).",
                columns=missing,
            )
        if not len(variables):
            raise InputError("`variables` is empty; name at least one column.")
        frame = frame.loc[:, list(variables)]
    out_dtype = _check_dtype(dtype)
    cols = list(frame.columns)
    non_numeric = [
        c for c in cols
        if pd.api.types.is_bool_dtype(frame[c]) or not pd.api.types.is_numeric_dtype(frame[c])
    ]
    if method is None:
        method = "gower" if non_numeric else "euclidean"
    check_choice("method", method, ENVIRONMENT_METHODS)
    if method == "gower":
        return gower_distance(frame, weights=weights, dtype=out_dtype)
    if non_numeric:
        raise InputError(
            f"Euclidean distance needs numeric variables; {format_items(non_numeric)} are "
            "categorical, text or boolean. Use method='gower', or leave them out with "
            "`variables=`.",
            columns=non_numeric,
        )
    w = _weights(weights, cols)
    x = numeric_array(frame, name="environmental table", allow_missing=True)
    miss = np.isnan(x)
    if miss.any():
        raise InputError(
            f"Euclidean distance cannot use missing values; missing at {cells_text(miss, frame)}. "
            "Fill or drop them, or use method='gower', which leaves missing comparisons out.",
            sites=list(frame.index[np.nonzero(miss)[0]].unique()),
        )
    sd = x.std(axis=0, ddof=1) if x.shape[0] > 1 else np.zeros(x.shape[1])
    flat = [c for c, s in zip(cols, sd, strict=True) if not s > 0]
    if flat:
        raise InputError(
            f"Variable(s) {format_items(flat)} take the same value at every site and cannot be "
            "z-scored; leave them out with `variables=`.",
            columns=flat,
        )
    z = (x - x.mean(axis=0)) / sd * np.sqrt(w)[None, :]
    n = z.shape[0]
    out = np.empty(n * (n - 1) // 2, dtype=out_dtype)
    K.squared_euclidean(np.ascontiguousarray(z), out, True)
    return DistanceMatrix(out, frame.index, metric="euclidean", transform="zscore",
                          dtype=out_dtype)
