"""Small pieces shared by the ordination methods: axis names and the sign convention."""

from __future__ import annotations

import numpy as np

__all__ = ["axis_names", "orient_columns"]


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
