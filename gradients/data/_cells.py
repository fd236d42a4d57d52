"""Reading the cells of a table: numbers, missing values, values below a detection limit, text.

Every cell of an input table is put in one of four kinds before any rule is applied, so the rules
(abundances must be numbers, environmental columns are numeric or categorical, censored values
follow an explicit policy) are written once and give the same messages for files and for
DataFrames already in memory.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = [
    "CENSORED",
    "MISSING",
    "MISSING_TOKENS",
    "NUMBER",
    "TEXT",
    "ParsedColumn",
    "decimal_marks",
    "non_detect_hint",
    "parse_column",
]

MISSING, NUMBER, CENSORED, TEXT = 0, 1, 2, 3

#: Cell text read as a missing value (compared after stripping spaces, case-insensitive).
MISSING_TOKENS = frozenset({"", "na", "n/a", "nan", "null", "none", "#n/a", "-"})

_NUMBER = r"[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?"
_CENSORED_RE = re.compile(rf"^<\s*({_NUMBER})$")
_DECIMAL_COMMA_RE = re.compile(r"^[+-]?\d*,\d+$")
_DECIMAL_POINT_RE = re.compile(r"^[+-]?\d*\.\d+$")
_NON_DETECT_WORDS = re.compile(
    r"^(<\s*)?(nd|n\.d\.|bdl|lod|<lod|dl|<dl|loq|<loq|bd|trace|tr|below detection.*)$", re.I
)


@dataclass(frozen=True)
class ParsedColumn:
    """One column read cell by cell.

    ``values`` holds the number for NUMBER cells and the detection limit for CENSORED cells
    (NaN elsewhere); ``kinds`` holds MISSING, NUMBER, CENSORED or TEXT per cell; ``text`` the
    stripped cell text (for messages and categorical columns).
    """

    values: np.ndarray
    kinds: np.ndarray
    text: np.ndarray

    def count(self, kind: int) -> int:
        return int(np.count_nonzero(self.kinds == kind))


def decimal_marks(cells: pd.DataFrame) -> tuple[list[tuple[int, object]], list[tuple[int, object]]]:
    """Cells written with a decimal comma (``0,5``) and with a decimal point (``0.5``).

    Returns two lists of (row position, column) pairs; censored cells (``<0,5``) count too.
    """
    marks = _marks_by_distinct_text(cells)
    if marks is not None:
        return marks
    comma: list[tuple[int, object]] = []
    point: list[tuple[int, object]] = []
    for column in cells.columns:
        is_point, is_comma = _marks(cells[column])
        point.extend((int(i), column) for i in np.flatnonzero(is_point))
        comma.extend((int(i), column) for i in np.flatnonzero(is_comma))
    return comma, point


def _marks(column: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Which cells of one column are written with a decimal point, and with a decimal comma."""
    text = column.astype("string").str.strip().str.lstrip("<").str.strip()
    is_point = text.str.match(_DECIMAL_POINT_RE.pattern).fillna(False).to_numpy(dtype=bool)
    is_comma = text.str.match(_DECIMAL_COMMA_RE.pattern).fillna(False).to_numpy(dtype=bool)
    return is_point, is_comma


def _marks_by_distinct_text(
    cells: pd.DataFrame,
) -> tuple[list[tuple[int, object]], list[tuple[int, object]]] | None:
    """:func:`decimal_marks` for a table whose cells are all text, each distinct text looked at
    once (a large table holds few distinct texts); None for any other table."""
    block = cells.to_numpy(dtype=object)
    order = "F" if block.flags.f_contiguous else "C"  # the order the cells are held in
    flat = block.ravel(order=order)
    if flat.size == 0:
        return None
    codes, distinct = pd.factorize(flat)  # a missing cell has code -1
    if codes.min() < 0 or pd.api.types.infer_dtype(distinct, skipna=False) != "string":
        return None
    is_point, is_comma = _marks(pd.Series(distinct, dtype=object))
    out = []
    for found in (is_comma, is_point):
        # column by column, rows in order within a column, as the loop over columns gives
        cols, rows = np.nonzero(found[codes].reshape(block.shape, order=order).T)
        out.append([(int(i), cells.columns[j]) for j, i in zip(cols, rows, strict=True)])
    return out[0], out[1]


def _to_float(text: str, decimal_comma: bool) -> float:
    if decimal_comma:
        text = text.replace(",", ".")
    elif "," in text:
        raise ValueError(text)
    return float(text)


def parse_column(column: pd.Series, *, decimal_comma: bool = False) -> ParsedColumn:
    """Sort the cells of one column into missing, number, censored (``<0.5``) and text.

    Numbers already held as numbers (from a DataFrame or a spreadsheet) are kept; booleans are
    text (they are labels, not measurements); non-finite numbers (``inf``) are text so that they
    are reported rather than analysed.
    """
    n = len(column)
    values = np.full(n, np.nan)
    kinds = np.full(n, TEXT, dtype=np.int8)
    text = np.empty(n, dtype=object)

    if pd.api.types.is_bool_dtype(column.dtype):
        raw = column.astype(object).to_numpy()
    elif pd.api.types.is_numeric_dtype(column.dtype):
        numbers = column.to_numpy(dtype=float, na_value=np.nan)
        finite = np.isfinite(numbers)
        missing = np.isnan(numbers)
        values[finite] = numbers[finite]
        kinds[finite] = NUMBER
        kinds[missing] = MISSING
        text = column.to_numpy(dtype=object)  # turned into str only for messages
        text[missing] = ""
        return ParsedColumn(values, kinds, text)
    else:
        raw = column.astype(object).to_numpy()

    if n and pd.api.types.infer_dtype(raw, skipna=False) == "string":
        # fast path: a text column of plain numbers is converted in one vectorised call; any
        # other column (empty cells, censored values, text) goes through the loop below
        strings = np.asarray(raw, dtype=str)
        if decimal_comma:
            strings = np.char.replace(strings, ",", ".")
        try:
            numbers = strings.astype(float)
        except ValueError:
            numbers = None
        if numbers is not None and np.isfinite(numbers).all():
            text[:] = raw
            return ParsedColumn(numbers, np.full(n, NUMBER, dtype=np.int8), text)
    for i, cell in enumerate(raw):
        if cell is None or (isinstance(cell, float) and np.isnan(cell)) or cell is pd.NA:
            kinds[i] = MISSING
            text[i] = ""
            continue
        if isinstance(cell, bool | np.bool_):
            text[i] = str(cell)
            continue
        if isinstance(cell, int | float | np.integer | np.floating):
            v = float(cell)
            text[i] = str(cell)
            if np.isfinite(v):
                values[i] = v
                kinds[i] = NUMBER
            continue
        s = str(cell).strip()
        text[i] = s
        if s.lower() in MISSING_TOKENS:
            kinds[i] = MISSING
            continue
        match = _CENSORED_RE.match(s)
        try:
            if match:
                v = _to_float(match.group(1), decimal_comma)
                kind = CENSORED
            else:
                v = _to_float(s, decimal_comma)
                kind = NUMBER
        except ValueError:
            continue
        if np.isfinite(v):
            values[i] = v
            kinds[i] = kind
    return ParsedColumn(values, kinds, text)


def non_detect_hint(texts: list[str]) -> str:
    """A hint for text cells that look like a non-detect written without its limit."""
    if any(_NON_DETECT_WORDS.match(t) for t in texts):
        return (
            " Values below a detection limit must carry the limit, written like '<0.5', so that "
            "a censored-value policy can be applied (see `censored=`)."
        )
    if any(t.startswith(">") for t in texts):
        return (
            " Values above an upper reporting limit ('>1000') are not supported; write the "
            "reported value or leave the cell empty and choose a `missing=` policy."
        )
    return ""
