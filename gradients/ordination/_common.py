"""Small pieces shared by the ordination methods: axis names, sign convention, table check."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import InputError, format_items

__all__ = ["axis_names", "check_numeric_table", "orient_columns"]


def axis_names(k: int, start: int = 1) -> list[str]:
    """``['axis1', 'axis2', ...]``, ``k`` names from ``axis{start}``."""
    return [f"axis{i}" for i in range(start, start + k)]


def orient_columns(reference: np.ndarray) -> np.ndarray:
    """Signs (+1 / -1) making each column's largest-magnitude entry positive.

    The sign of an eigenvector or of an ordination axis is arbitrary; this fixes it so that the
    same input always gives the same picture. Where several entries share the largest magnitude
    (to 1e-12 relative), the first of them in row order decides.
    """
    reference = np.asarray(reference, dtype=np.float64)
    if reference.size == 0:
        return np.ones(reference.shape[1] if reference.ndim == 2 else 0)
    mag = np.abs(reference)
    top = mag.max(axis=0)
    # first row whose magnitude reaches the column maximum (to rounding)
    first = np.argmax(mag >= top * (1 - 1e-12), axis=0)
    values = reference[first, np.arange(reference.shape[1])]
    return np.where(values < 0, -1.0, 1.0)


def check_numeric_table(table: object, *, name: str = "table") -> pd.DataFrame:
    """A DataFrame of finite numbers labelled by site, or an InputError naming the problem."""
    if isinstance(table, pd.Series):
        table = table.to_frame()
    if not isinstance(table, pd.DataFrame):
        try:
            array = np.asarray(table, dtype=np.float64)
        except (TypeError, ValueError):
            raise InputError(f"`{name}` must be a DataFrame of numbers (sites x variables); got "
                             f"{type(table).__name__}.") from None
        if array.ndim != 2:
            raise InputError(f"`{name}` must be two-dimensional (sites x variables); got shape "
                             f"{array.shape}.")
        table = pd.DataFrame(array, columns=[f"var{i + 1}" for i in range(array.shape[1])])
    if table.columns.has_duplicates:
        dup = table.columns[table.columns.duplicated()].unique()
        raise InputError(f"`{name}` has repeated column names: {format_items(dup)}. "
                         "Give each variable its own name.", columns=list(dup))
    if table.index.has_duplicates:
        dup = table.index[table.index.duplicated()].unique()
        raise InputError(f"`{name}` has repeated site labels: {format_items(dup)}. "
                         "Give each site its own label.", sites=list(dup))
    bad = [c for c in table.columns if not (pd.api.types.is_numeric_dtype(table[c])
                                            and not pd.api.types.is_complex_dtype(table[c]))]
    if bad:
        raise InputError(
            f"`{name}` has non-numeric column(s) {format_items(bad)}; only numbers can be "
            "analysed. Drop them, or convert them to numbers (factors need their own method).",
            columns=bad,
        )
    values = table.to_numpy(dtype=np.float64, na_value=np.nan)
    missing = ~np.isfinite(values)
    if missing.any():
        rows, cols = np.nonzero(missing)
        cells = [f"({table.index[r]!r}, {table.columns[c]!r})" for r, c in zip(rows, cols,
                                                                                 strict=True)]
        raise InputError(
            f"`{name}` has {len(cells)} missing or infinite value(s) at (site, column) "
            f"{format_items(cells, quote=False)}. Fill them or drop those sites or columns.",
            sites=list(dict.fromkeys(table.index[rows])),
            columns=list(dict.fromkeys(table.columns[cols])),
        )
    return pd.DataFrame(values, index=table.index.copy(), columns=table.columns.copy())
