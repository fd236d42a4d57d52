"""Keeping user text harmless in the files a report writes.

Three rules, applied everywhere the report writes user text (site IDs, taxon and variable names,
hypothesis names, titles):

* **File names** are built only from a safe alphabet (:func:`safe_name`) and every path is
  checked to stay inside the output folder (:func:`inside`), so a site called ``../../x`` can
  never write outside it.
* **Spreadsheet cells** that a spreadsheet program would run as a formula (text starting with
  ``=``, ``+``, ``-``, ``@``, a tab or a carriage return) get a single quote in front
  (:func:`neutralise_text`), in CSV files and in the workbook alike. Numbers stay numbers.
* **HTML**: all user text goes through :func:`html.escape` (:func:`esc`).
"""

from __future__ import annotations

import hashlib
import html
import re
import unicodedata
from pathlib import Path

import pandas as pd

__all__ = [
    "FORMULA_PREFIXES",
    "esc",
    "inside",
    "neutralise_frame",
    "neutralise_text",
    "safe_name",
    "sheet_name",
]

#: First characters that make a spreadsheet treat a text cell as a formula (common practice:
#: the OWASP guidance on CSV injection lists these).
FORMULA_PREFIXES = ("=", "+", "-", "@", "\t", "\r")

_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")
_RESERVED = {
    "con", "prn", "aux", "nul",
    *(f"com{i}" for i in range(1, 10)),
    *(f"lpt{i}" for i in range(1, 10)),
}


def neutralise_text(value: object) -> object:
    """Prefix a text value that a spreadsheet would run as a formula with a single quote.

    Non-text values (numbers, missing values) are returned unchanged.
    """
    if isinstance(value, str) and value.startswith(FORMULA_PREFIXES):
        return "'" + value
    return value


def neutralise_frame(frame: pd.DataFrame, *, index: bool = True) -> pd.DataFrame:
    """A copy of ``frame`` ready for CSV/xlsx: index made a column, text cells neutralised.

    An unnamed default index (row numbers 0, 1, 2, ...) is dropped rather than written as a
    column called ``index``.

    The column names and (when ``index``) the index labels are neutralised too; numeric columns
    are left as they are.
    """
    # an unnamed 0, 1, 2, ... index holds row numbers, not keys: it is not written
    numbers = (isinstance(frame.index, pd.RangeIndex) and frame.index.name is None
               and frame.index.start == 0 and frame.index.step == 1)
    out = frame.reset_index() if index and not numbers else frame.reset_index(drop=True)
    out.columns = [str(neutralise_text(str(c))) for c in out.columns]
    for col in out.columns:
        series = out[col]
        if pd.api.types.is_numeric_dtype(series.dtype) or pd.api.types.is_bool_dtype(series.dtype):
            continue
        out[col] = series.astype(object).map(neutralise_text)
    return out


def esc(value: object) -> str:
    """HTML-escaped text of ``value`` (quotes included)."""
    return html.escape(str(value), quote=True)


def safe_name(text: object, *, limit: int = 60) -> str:
    """A file-name fragment built from ``text`` using only ``A-Z a-z 0-9 . _ -``.

    Path separators, ``..`` and every other character become ``_``; leading dots are removed so
    the result can never be a hidden file or a parent-folder reference; names reserved on
    Windows get a suffix. When characters had to be replaced, a short hash of the original text
    is appended so that two different names cannot collide.
    """
    original = str(text)
    ascii_text = unicodedata.normalize("NFKD", original).encode("ascii", "ignore").decode()
    name = _UNSAFE.sub("_", ascii_text)
    name = re.sub(r"\.{2,}", "_", name).strip("._-")
    name = re.sub(r"_+", "_", name)[:limit].strip("._-")
    if not name:
        name = "item"
    if name.lower().split(".")[0] in _RESERVED:
        name = f"{name}_"
    if name != original:
        digest = hashlib.sha256(original.encode("utf-8")).hexdigest()[:6]
        name = f"{name}-{digest}"
    return name


def inside(root: Path, relative: str | Path) -> Path:
    """``root / relative``, refusing any path that would leave ``root``."""
    root = Path(root).resolve()
    target = (root / relative).resolve()
    if target != root and root not in target.parents:
        raise RuntimeError(f"refusing to write {relative!s}: it is outside the output folder")
    return target


def sheet_name(text: str, used: set[str]) -> str:
    """An Excel sheet name (at most 31 characters, none of ``[]:*?/\\``), unique in ``used``."""
    name = re.sub(r"[\[\]:*?/\\']", "_", text)[:31] or "sheet"
    base, k = name, 2
    while name.lower() in {u.lower() for u in used}:
        suffix = f"_{k}"
        name = base[: 31 - len(suffix)] + suffix
        k += 1
    used.add(name)
    return name
