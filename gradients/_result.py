"""A small base for result objects.

Results are frozen dataclasses. This mixin gives them a readable ``__repr__`` (scalars shown,
arrays summarised by shape, the head of ``.table`` printed) and ``notes`` rendered as a numbered
list, so a result explains itself at the prompt; and ``_repr_html_``, the same account as HTML
for notebooks (scalars in a small header, ``.table`` as a table, arrays only named).
"""

from __future__ import annotations

import dataclasses
import html
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


def _is_scalar(value: object) -> bool:
    if value is None or isinstance(value, str | bool | np.bool_ | numbers.Number):
        return True
    return isinstance(value, tuple) and len(value) <= 6 and all(
        v is None or isinstance(v, str | numbers.Number) for v in value)


def _html_value(value: object) -> str:
    """Escaped text of one scalar field (strings without the quotes of ``repr``)."""
    if isinstance(value, str):
        return html.escape(value)
    if isinstance(value, tuple):
        return html.escape(", ".join(v if isinstance(v, str) else format_value(v)
                                     for v in value) or "(none)")
    return html.escape(format_value(value))


def _shape_text(value: object) -> str:
    if isinstance(value, pd.DataFrame):
        return f"{value.shape[0]} rows x {value.shape[1]} columns"
    if isinstance(value, pd.Series | tuple | list) or (isinstance(value, np.ndarray)
                                                      and value.ndim == 1):
        return f"{len(value)} values"
    if isinstance(value, np.ndarray):
        return "array " + " x ".join(str(n) for n in value.shape)
    return type(value).__name__


class ResultMixin:
    """Readable ``__repr__``, ``_repr_html_`` and ``notes`` for frozen result dataclasses."""

    _repr_skip: tuple[str, ...] = ("notes", "table")
    #: rows of ``.table`` shown by ``_repr_html_`` (the rest are counted, not shown)
    _html_rows: int = 20

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

    def _repr_html_(self) -> str:
        """HTML for notebooks: the class name, the scalar fields, ``.table`` and the notes.

        Every label and value is escaped. Fields left at None (not computed) are left out;
        arrays and other tables are named with their size, never printed (a null distribution
        holds thousands of values); ``.table`` shows its first ``_html_rows`` rows.
        """
        esc = html.escape
        scalars, others = [], []
        for field in dataclasses.fields(self):  # type: ignore[arg-type]
            if not field.repr or field.name in self._repr_skip:
                continue
            value = getattr(self, field.name)
            if value is None:  # not computed (the notes say why)
                continue
            if _is_scalar(value):
                scalars.append(f"<tr><th>{esc(field.name)}</th><td>{_html_value(value)}</td></tr>")
            else:
                others.append(f"{esc(field.name)} ({esc(_shape_text(value))})")
        parts = [f'<div class="gradients-result"><p><strong>{esc(type(self).__name__)}</strong>'
                 "</p>"]
        if scalars:
            parts.append("<table>" + "".join(scalars) + "</table>")
        table = getattr(self, "table", None)
        if isinstance(table, pd.DataFrame):
            shown = table.head(self._html_rows)
            parts.append(shown.to_html(escape=True, float_format=lambda v: f"{v:.4g}",
                                       border=0))
            if len(table) > len(shown):
                parts.append(f"<p>{len(table) - len(shown)} more rows in <code>.table</code>"
                             "</p>")
        if others:
            parts.append("<p>Also: " + ", ".join(others) + "</p>")
        notes = getattr(self, "notes", ())
        if notes:
            parts.append("<p>Notes:</p><ol>" + "".join(f"<li>{esc(str(n))}</li>" for n in notes)
                         + "</ol>")
        parts.append("</div>")
        return "".join(parts)
