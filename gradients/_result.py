"""A small base for result objects.

Results are frozen dataclasses. This mixin gives them a readable ``__repr__`` (scalars shown,
arrays summarised by shape, the head of ``.table`` printed) and ``notes`` rendered as a numbered
list, so a result explains itself at the prompt.
"""

from __future__ import annotations

import dataclasses
import numbers

import numpy as np
import pandas as pd

__all__ = ["ResultMixin", "format_value"]


def format_value(value: object) -> str:
    """Short text for one field of a result."""
    if isinstance(value, bool | np.bool_):
        return str(bool(value))
    if isinstance(value, numbers.Integral):
        return str(int(value))
    if isinstance(value, numbers.Real):
        v = float(value)
        if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e6):
            return f"{v:.4g}"
        return f"{v:.4f}".rstrip("0").rstrip(".") if np.isfinite(v) else str(v)
    if isinstance(value, np.ndarray):
        return f"<array shape={value.shape} dtype={value.dtype}>"
    if isinstance(value, pd.DataFrame):
        return f"<DataFrame {value.shape[0]} rows x {value.shape[1]} columns>"
    if isinstance(value, pd.Series):
        return f"<Series {len(value)} values>"
    if isinstance(value, str):
        return repr(value)
    if isinstance(value, tuple | list) and len(value) > 6:
        return f"<{type(value).__name__} of {len(value)}>"
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


class ResultMixin:
    """Readable ``__repr__`` and ``notes`` for frozen result dataclasses."""

    _repr_skip: tuple[str, ...] = ("notes", "table")

    def __repr__(self) -> str:
        lines = [f"{type(self).__name__}("]
        for field in dataclasses.fields(self):  # type: ignore[arg-type]
            if not field.repr or field.name in self._repr_skip:
                continue
            lines.append(f"    {field.name}={format_value(getattr(self, field.name))},")
        lines.append(")")
        table = getattr(self, "table", None)
        if isinstance(table, pd.DataFrame):
            with pd.option_context("display.width", 100, "display.max_columns", 12):
                lines.append(table.head(12).to_string(float_format=lambda v: f"{v:.4g}"))
            if len(table) > 12:
                lines.append(f"... {len(table) - 12} more rows")
        notes = getattr(self, "notes", ())
        if notes:
            lines.append("Notes:")
            lines.extend(f"  [{i}] {note}" for i, note in enumerate(notes, start=1))
        return "\n".join(lines)
