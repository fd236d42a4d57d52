"""Turning user tables into checked numeric arrays, once, with messages that name cells."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import InputError, format_items

__all__ = [
    "cells_text",
    "community_frame",
    "condensed_positions_for",
    "frame_from",
    "numeric_array",
    "pair_of_position",
]


def frame_from(table: object, *, attribute: str, name: str) -> pd.DataFrame:
    """Return a DataFrame from ``table`` or from ``table.<attribute>`` (a Survey-like object).

    Checks that the site labels (the index) are unique and that the table is not empty.
    """
    if not isinstance(table, pd.DataFrame) and hasattr(table, attribute):
        owner = type(table).__name__
        table = getattr(table, attribute)
        if table is None:
            raise InputError(
                f"This {owner} has no `.{attribute}` table; the {name} is needed here."
            )
    if not isinstance(table, pd.DataFrame):
        raise InputError(
            f"The {name} must be a pandas DataFrame with sites as rows (or an object with a "
            f"`.{attribute}` DataFrame); got {type(table).__name__}."
        )
    if table.shape[0] == 0 or table.shape[1] == 0:
        raise InputError(
            f"The {name} is empty ({table.shape[0]} sites x {table.shape[1]} columns)."
        )
    if table.index.has_duplicates:
        dup = table.index[table.index.duplicated()].unique()
        raise InputError(
            f"Site labels in the {name} must be unique; repeated: {format_items(dup)}. "
            "Give each site its own label or aggregate the repeated rows.",
            sites=list(dup),
        )
    return table


def cells_text(mask: np.ndarray, frame: pd.DataFrame, limit: int = 5) -> str:
    """``site 'a', column 'x'; ...`` for the True cells of ``mask``."""
    rows, cols = np.nonzero(mask)
    shown = [
        f"site {frame.index[r]!r}, column {frame.columns[c]!r}"
        for r, c in zip(rows[:limit], cols[:limit], strict=True)
    ]
    extra = f" and {len(rows) - limit} more" if len(rows) > limit else ""
    return "; ".join(shown) + extra


def numeric_array(
    frame: pd.DataFrame, *, name: str, allow_missing: bool = False, hint: str = ""
) -> np.ndarray:
    """The table as a C-contiguous float64 array; names non-numeric columns and bad cells."""
    bad_cols = [
        c for c in frame.columns
        if not (pd.api.types.is_numeric_dtype(frame[c]) or pd.api.types.is_bool_dtype(frame[c]))
    ]
    if bad_cols:
        raise InputError(
            f"The {name} must hold numbers only; column(s) {format_items(bad_cols)} hold text "
            f"or other values. Convert them, or leave them out.{hint}",
            columns=bad_cols,
        )
    try:
        x = frame.to_numpy(dtype=np.float64, na_value=np.nan)
    except (TypeError, ValueError) as exc:  # pragma: no cover - guarded by the dtype check
        raise InputError(f"The {name} must hold numbers only ({exc}).") from None
    x = np.ascontiguousarray(x)
    inf = np.isinf(x)
    if inf.any():
        raise InputError(
            f"The {name} holds infinite values at {cells_text(inf, frame)}. Replace them.",
            sites=list(frame.index[np.nonzero(inf)[0]].unique()),
        )
    if not allow_missing:
        miss = np.isnan(x)
        if miss.any():
            raise InputError(
                f"The {name} has missing values at {cells_text(miss, frame)}. Fill them (for "
                "a taxon not found, 0) or drop those sites.",
                sites=list(frame.index[np.nonzero(miss)[0]].unique()),
            )
    return x


def community_frame(table: object, *, nonnegative: bool = True) -> tuple[pd.DataFrame, np.ndarray]:
    """Checked community table (sites x taxa) and its float64 values."""
    frame = frame_from(table, attribute="community", name="community table")
    x = numeric_array(frame, name="community table")
    if nonnegative:
        neg = x < 0
        if neg.any():
            raise InputError(
                "Abundances must be non-negative; negative at "
                f"{cells_text(neg, frame)}. Check the table, or use a metric for signed data "
                "(euclidean, manhattan, canberra).",
                sites=list(frame.index[np.nonzero(neg)[0]].unique()),
            )
    return frame, x


def condensed_positions_for(i: int, n: int) -> np.ndarray:
    """Positions in a condensed vector of every pair that involves site ``i``."""
    before = np.arange(i, dtype=np.int64)
    pos_before = n * before - before * (before + 1) // 2 + (i - before - 1)
    start = n * i - i * (i + 1) // 2
    pos_after = np.arange(start, start + n - i - 1, dtype=np.int64)
    return np.concatenate([pos_before, pos_after])


def pair_of_position(positions: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Row and column ``(i, j)``, ``i < j``, of condensed positions (inverse of the layout)."""
    positions = np.asarray(positions, dtype=np.int64)
    # row i starts at s(i) = i*n - i*(i+1)/2; solve s(i) <= pos for the largest i
    b = 2 * n - 1
    i = np.floor((b - np.sqrt(b * b - 8.0 * positions)) / 2).astype(np.int64)
    start = n * i - i * (i + 1) // 2
    # guard against rounding at row boundaries
    over = start > positions
    i[over] -= 1
    start = n * i - i * (i + 1) // 2
    nxt = n * (i + 1) - (i + 1) * (i + 2) // 2
    under = nxt <= positions
    i[under] += 1
    start = n * i - i * (i + 1) // 2
    j = positions - start + i + 1
    return i, j
