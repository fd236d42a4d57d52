"""Site scores for the fitting stage: one labelled, numeric, finite DataFrame of chosen axes.

The ordination stage's ``gradients.ordination.as_scores`` turns an ordination result (or any
DataFrame of site scores) into a labelled float DataFrame; this module adds the fitting stage's
default choice of axes (the first two) and its checks.
"""

from __future__ import annotations

import numbers
from collections.abc import Sequence

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ..ordination import as_scores

__all__ = ["AxesLike", "site_scores"]

AxesLike = int | Sequence[str] | None


def _as_frame(obj: object) -> pd.DataFrame:
    if not isinstance(obj, pd.DataFrame | pd.Series):
        inner = getattr(obj, "scores", None)
        if isinstance(inner, pd.DataFrame):  # any result carrying a `.scores` table
            obj = inner
    return as_scores(obj)


def site_scores(obj: object, axes: AxesLike = None, *, n_default: int = 2) -> pd.DataFrame:
    """Return the chosen axes of the site scores as a float DataFrame indexed by site.

    ``axes`` is None (the first ``n_default`` columns), an int ``k`` (the first ``k`` columns)
    or a sequence of column names.
    """
    frame = _as_frame(obj)
    if frame.index.has_duplicates:
        dup = frame.index[frame.index.duplicated()].unique()
        raise InputError(f"Site labels in `scores` are repeated: {format_items(dup)}. Give "
                         "every site one row.", sites=list(dup))
    columns = list(frame.columns)
    if axes is None:
        chosen = columns[: min(n_default, len(columns))]
    elif isinstance(axes, numbers.Integral) and not isinstance(axes, bool):
        if not 1 <= int(axes) <= len(columns):
            raise InputError(f"`axes` asks for the first {axes} axes but `scores` has "
                             f"{len(columns)} column(s): {format_items(columns)}.")
        chosen = columns[: int(axes)]
    elif isinstance(axes, str):
        chosen = [axes]
    else:
        chosen = list(axes)
        missing = [a for a in chosen if a not in frame.columns]
        if missing:
            raise InputError(f"`axes` names column(s) {format_items(missing)} that `scores` does "
                             f"not have; it has {format_items(columns)}.", columns=missing)
        if len(set(chosen)) != len(chosen):
            raise InputError(f"`axes` repeats a column: {format_items(chosen)}.")
    if not chosen:
        raise InputError("`scores` has no columns: pass site scores with axes axis1, axis2, ...")
    out = frame[chosen]
    bad = [c for c in chosen if not pd.api.types.is_numeric_dtype(out[c])
           or pd.api.types.is_bool_dtype(out[c])]
    if bad:
        raise InputError(f"Score column(s) {format_items(bad)} are not numeric.", columns=bad)
    out = out.astype(np.float64)
    values = out.to_numpy()
    if not np.isfinite(values).all():
        rows = out.index[~np.isfinite(values).all(axis=1)]
        raise InputError(f"Site scores are missing or not finite for site(s) "
                         f"{format_items(rows)}; drop those sites or re-run the ordination.",
                         sites=list(rows))
    return out
