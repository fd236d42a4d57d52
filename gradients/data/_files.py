"""Reading input files into raw tables of cells, before any rule about their content is applied.

What is checked here is the file itself: that it exists, is not empty, holds what its extension
says, decodes as text (UTF-8, UTF-8 with a byte-order mark, UTF-16 with a byte-order mark, then
Latin-1 with a record in the log), has a delimiter that can be found and a header that names every
column once. Everything about the cells (numbers, censored values, site IDs) is checked by the
survey builder, the same way for files and DataFrames.
"""

from __future__ import annotations

import csv
import io
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._cells import decimal_marks
from ._log import Decision

__all__ = ["RawTable", "read_file", "table_from_frame"]

TEXT_EXTENSIONS = {".csv", ".tsv", ".tab", ".txt", ".dat", ".psv"}
EXCEL_EXTENSIONS = {".xlsx", ".xlsm"}
GEO_EXTENSIONS = {".gpkg", ".geojson", ".json", ".shp"}

_CONTROL = re.compile(r"[\x00-\x08\x0b\x0e-\x1f]")
_KIND_WORDS = {
    "zip": "a ZIP archive (an .xlsx workbook is one)",
    "ole": "an old-style Excel .xls workbook (or an encrypted workbook)",
    "sqlite": "an SQLite database (a GeoPackage is one)",
    "shapefile": "an ESRI Shapefile (.shp)",
    "text": "plain text",
    "json": "JSON text",
    "binary": "binary data that is not a table",
}
_EXPECTED = {
    **{ext: ("text", "json") for ext in TEXT_EXTENSIONS},
    **{ext: ("zip",) for ext in EXCEL_EXTENSIONS},
    ".gpkg": ("sqlite",),
    ".geojson": ("json",),
    ".json": ("json",),
    ".shp": ("shapefile",),
}
_RENAME_HINT = {
    "text": "rename it to .csv (or save it from the spreadsheet in the format its name says)",
    "json": "rename it to .geojson",
    "zip": "rename it to .xlsx if it is an Excel workbook",
    "ole": "open it in a spreadsheet and save it as .xlsx or CSV",
    "sqlite": "rename it to .gpkg if it is a GeoPackage",
    "shapefile": "rename it to .shp and keep its .shx and .dbf files beside it",
    "binary": "check that the right file was given; export the table again as CSV or .xlsx",
}


@dataclass
class RawTable:
    """A table as read, before its cells are interpreted.

    ``frame`` holds the cells (text from text files, Python objects from spreadsheets and
    DataFrames); ``rows`` the line or row number of each row in the file (None for DataFrames,
    whose index labels are quoted instead); ``geo`` the GeoDataFrame when the input was a GIS
    layer or a GeoDataFrame.
    """

    frame: pd.DataFrame
    source: str
    role: str
    path: str | None = None
    rows: list[int] | None = None
    row_word: str = "row"
    decimal_comma: bool = False
    log: list[Decision] = field(default_factory=list)
    geo: object | None = None
    from_file: bool = False
    #: Units of columns: column -> one unit text (a units row), or one per row of ``frame``
    #: (a long-form laboratory file); see :mod:`._units`.
    units: dict[str, object] = field(default_factory=dict)

    def where(self, i: int) -> str:
        """Where row ``i`` (0-based position in ``frame``) is, for a message."""
        if self.rows is None:
            return f"row {i + 1}"
        return f"{self.row_word} {self.rows[i]}"


def table_from_frame(frame: pd.DataFrame, role: str) -> RawTable:
    """Wrap a DataFrame given in memory (its index is kept; the builder decides what it means)."""
    return RawTable(frame=frame, source=f"the {role} DataFrame", role=role)


def _content_kind(head: bytes) -> str:
    if head.startswith(b"PK\x03\x04") or head.startswith(b"PK\x05\x06"):
        return "zip"
    if head.startswith(b"\xd0\xcf\x11\xe0"):
        return "ole"
    if head.startswith(b"SQLite format 3\x00"):
        return "sqlite"
    if head[:4] == b"\x00\x00\x27\x0a":
        return "shapefile"
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "text"
    if head.startswith(b"\xef\xbb\xbf"):
        head = head[3:]
    if b"\x00" in head:
        return "binary"
    control = sum(1 for b in head if b < 9 or 13 < b < 32)
    if head and control / len(head) > 0.01:
        return "binary"
    if head.lstrip().startswith((b"{", b"[")):
        return "json"
    return "text"


def _decode(data: bytes, name: str, role: str) -> tuple[str, list[Decision]]:
    log: list[Decision] = []
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            text = data.decode("utf-16")
        except UnicodeDecodeError as exc:
            raise InputError(
                f"The {role} file {name!r} starts with a UTF-16 byte-order mark but does not "
                f"decode as UTF-16 ({exc.reason} at byte {exc.start}). Save it again as CSV "
                "UTF-8 from the spreadsheet.",
                file=name,
            ) from None
        log.append(Decision("encoding", f"The {role} file {name!r} was read as UTF-16.", 0))
        return text, log
    if data.startswith(b"\xef\xbb\xbf"):
        try:
            return data.decode("utf-8-sig"), log
        except UnicodeDecodeError:
            pass
    try:
        return data.decode("utf-8"), log
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        text = data.decode("latin-1")
        log.append(
            Decision(
                "encoding",
                f"The {role} file {name!r} is not valid UTF-8 (first bad byte on line {line}); "
                "it was read as Latin-1 (ISO-8859-1). Check accented site and taxon names; save "
                "the file as UTF-8 to avoid this.",
                1,
            )
        )
        return text, log


def _sniff_delimiter(text: str, name: str, role: str) -> str:
    sample = text[:65536]
    lines = [ln for ln in sample.splitlines() if ln.strip()]
    header = lines[0] if lines else ""
    try:
        delimiter = csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        delimiter = ""
    if not delimiter or delimiter not in header:
        counts = {d: header.count(d) for d in ("\t", ";", ",", "|")}
        best = max(counts, key=lambda d: counts[d])
        if counts[best] == 0:
            raise InputError(
                f"Could not find the column delimiter in the {role} file {name!r}: its first "
                f"line {header[:60]!r} holds no comma, semicolon, tab or '|'. A table needs a "
                "site column and at least one more column; save it as CSV.",
                file=name,
            )
        delimiter = best
    return delimiter


def _rows_to_frame(
    rows: list[list[object]], numbers: list[int], name: str, role: str, row_word: str
) -> tuple[pd.DataFrame, list[int]]:
    """Header from the first non-blank row; checks widths, blank and duplicate column names."""

    def blank(cell: object) -> bool:
        return cell is None or (isinstance(cell, float) and cell != cell) or str(cell).strip() == ""

    kept = [(r, n) for r, n in zip(rows, numbers, strict=True) if not all(blank(c) for c in r)]
    if not kept:
        raise InputError(f"The {role} file {name!r} is empty: it holds no rows.", file=name)
    (header, header_line), body = kept[0], kept[1:]
    header = [("" if blank(c) else str(c).strip()) for c in header]
    width = len(header)
    # trailing columns with no name and no content (spreadsheets often write them) are dropped
    while width and header[width - 1] == "" and all(
        len(r) < width or blank(r[width - 1]) for r, _ in body
    ):
        width -= 1
    header = header[:width]
    if not body:
        raise InputError(
            f"The {role} file {name!r} has a header ({row_word} {header_line}) but no data rows.",
            file=name,
        )
    too_long = [n for r, n in body if len(r) > width and not all(blank(c) for c in r[width:])]
    if too_long:
        raise InputError(
            f"In the {role} file {name!r}, {len(too_long)} {row_word}(s) have more fields than "
            f"the header's {width} ({row_word}s {format_items(too_long, quote=False)}). Check for "
            "a delimiter inside an unquoted value (a decimal comma in a comma-separated file?) "
            "or a missing column name in the header.",
            file=name,
        )
    empty_names = [i + 1 for i, h in enumerate(header) if h == ""]
    if empty_names:
        raise InputError(
            f"In the {role} file {name!r}, header column(s) "
            f"{format_items(empty_names, quote=False)} have no name ({row_word} {header_line}). "
            "Give every column a name.",
            file=name,
            columns=[str(i) for i in empty_names],
        )
    seen: dict[str, list[int]] = {}
    for i, h in enumerate(header):
        seen.setdefault(h, []).append(i + 1)
    dupes = {h: pos for h, pos in seen.items() if len(pos) > 1}
    if dupes:
        listed = "; ".join(f"{h!r} (columns {', '.join(map(str, p))})" for h, p in dupes.items())
        raise InputError(
            f"In the {role} file {name!r}, the header repeats column name(s): {listed}. Each "
            "column needs its own name; merge or rename the repeated columns.",
            file=name,
            columns=list(dupes),
        )
    if all(len(r) == width for r, _ in body):
        # every row as wide as the header (the usual case): one object array, no row copies,
        # held column by column (as the frame holds it, so that columns are taken without a copy)
        by_column = np.empty((width, len(body)), dtype=object)
        for i, (r, _) in enumerate(body):
            by_column[:, i] = r
        cells: object = by_column.T
    else:
        cells = [list(r[:width]) + [""] * (width - len(r)) for r, _ in body]
    frame = pd.DataFrame(cells, columns=header, dtype=object, copy=False)
    return frame, [n for _, n in body]


def _split_unquoted(text: str, delimiter: str) -> tuple[list[list[str]], list[int]] | None:
    """The rows and line numbers the ``csv`` reader gives, for text it reads line by line.

    Text with no quote character, no carriage return other than in "\\r\\n" and no line
    longer than the ``csv`` module's field limit is read by that reader as one row per line,
    split at the delimiter (an empty line is an empty row), so splitting the lines gives the
    same rows at a fraction of the cost. Other text returns None (read with ``csv``).
    """
    if '"' in text:
        return None
    if "\r" in text:
        if text.count("\r") != text.count("\r\n"):
            return None
        text = text.replace("\r\n", "\n")
    lines = text.split("\n")
    if lines[-1] == "":
        lines.pop()
    if max(map(len, lines), default=0) > csv.field_size_limit():
        return None
    rows = [line.split(delimiter) if line else [] for line in lines]
    return rows, list(range(1, len(rows) + 1))


def _read_text(path: Path, name: str, role: str, data: bytes) -> RawTable:
    text, log = _decode(data, name, role)
    bad = _CONTROL.search(text)
    if bad is not None:
        line = text[: bad.start()].count("\n") + 1
        raise InputError(
            f"The {role} file {name!r} holds control characters (line {line}); it does not look "
            "like a text table. Export the table again as CSV (UTF-8).",
            file=name,
        )
    if not text.strip():
        raise InputError(f"The {role} file {name!r} is empty.", file=name)
    delimiter = _sniff_delimiter(text, name, role)
    split = _split_unquoted(text, delimiter)
    if split is not None:
        rows, numbers = split
    else:
        reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, quotechar='"')
        rows, numbers = [], []
        try:
            for row in reader:
                rows.append(row)
                numbers.append(reader.line_num)
        except csv.Error as exc:
            raise InputError(
                f"The {role} file {name!r} could not be parsed near line {reader.line_num}: "
                f"{exc}. Check for an unclosed quote.",
                file=name,
            ) from None
    frame, lines = _rows_to_frame(rows, numbers, name, role, "line")
    decimal_comma = False
    if delimiter != ",":
        comma, point = decimal_marks(frame)
        if comma and point:
            # one convention per file: which one a stray cell follows cannot be guessed, and
            # reading either way would turn the other cells into text without a word
            few, many = (point, "comma") if len(comma) >= len(point) else (comma, "point")
            other = "point" if many == "comma" else "comma"
            where = [f"line {lines[i]}, column {c!r} ({frame.iloc[i][c]!r})" for i, c in few[:5]]
            raise InputError(
                f"The {role} file {name!r} mixes decimal separators: {max(len(comma), len(point))} "
                f"cell(s) use a decimal {many} but {len(few)} use a decimal {other}: "
                f"{'; '.join(where)}{' ...' if len(few) > 5 else ''}. Write every number with "
                f"the same separator (a decimal {many}, like the rest of the file).",
                file=name, columns=sorted({str(c) for _, c in few}))
        decimal_comma = bool(comma)
    if decimal_comma:
        log.append(
            Decision(
                "decimal-comma",
                f"The {role} file {name!r} uses a decimal comma ('0,5'); numbers were read with "
                "the comma as the decimal separator.",
                0,
            )
        )
    return RawTable(
        frame=frame, source=f"the {role} file {name!r}", role=role, path=str(path),
        rows=lines, row_word="line", decimal_comma=decimal_comma, log=log, from_file=True,
    )


def _read_excel(path: Path, name: str, role: str, sheet: str | int | None) -> RawTable:
    try:
        book = pd.ExcelFile(path, engine="openpyxl")
    except Exception as exc:  # openpyxl raises many types for damaged workbooks
        raise InputError(
            f"The {role} file {name!r} could not be opened as an Excel workbook ({exc}). Open it "
            "in a spreadsheet and save it again as .xlsx or CSV.",
            file=name,
        ) from None
    with book:
        names = list(book.sheet_names)
        log: list[Decision] = []
        if sheet is None:
            chosen = names[0]
            if len(names) > 1:
                log.append(Decision(
                    "sheet",
                    f"The {role} workbook {name!r} has {len(names)} sheets; the first, "
                    f"{chosen!r}, was read (pass sheet= to choose another).",
                    0,
                ))
        elif isinstance(sheet, int) and not isinstance(sheet, bool):
            if not -len(names) <= sheet < len(names):
                raise InputError(
                    f"The {role} workbook {name!r} has {len(names)} sheet(s) "
                    f"({format_items(names)}); sheet={sheet} does not exist.",
                    file=name,
                )
            chosen = names[sheet]
        elif isinstance(sheet, str) and sheet in names:
            chosen = sheet
        else:
            raise InputError(
                f"The {role} workbook {name!r} has no sheet {sheet!r}; its sheets are "
                f"{format_items(names)}. Pass sheet= with one of these names or a 0-based index.",
                file=name,
            )
        raw = pd.read_excel(book, sheet_name=chosen, header=None, dtype=object)
    rows = raw.astype(object).where(raw.notna(), None).to_numpy().tolist()
    numbers = [int(i) + 1 for i in raw.index]
    frame, row_numbers = _rows_to_frame(rows, numbers, name, role, "row")
    return RawTable(
        frame=frame, source=f"sheet {chosen!r} of the {role} workbook {name!r}", role=role,
        path=str(path), rows=row_numbers, row_word="row", log=log, from_file=True,
    )


def _read_geo(path: Path, name: str, role: str, layer: str | int | None) -> RawTable:
    import geopandas as gpd
    import pyogrio

    log: list[Decision] = []
    try:
        layers = [str(x) for x in pyogrio.list_layers(path)[:, 0]]
    except Exception as exc:
        raise InputError(
            f"The {role} file {name!r} could not be opened as a GIS layer ({exc}). Check that "
            "it is a valid GeoPackage, GeoJSON or Shapefile (with its .shx and .dbf).",
            file=name,
        ) from None
    if layer is None:
        chosen: str | int | None = None
        if len(layers) > 1:
            chosen = layers[0]
            log.append(Decision(
                "layer",
                f"The {role} file {name!r} has {len(layers)} layers; the first, {chosen!r}, "
                "was read (pass layer= to choose another).",
                0,
            ))
    elif (isinstance(layer, str) and layer in layers) or (
        isinstance(layer, int) and 0 <= layer < len(layers)
    ):
        chosen = layer
    else:
        raise InputError(
            f"The {role} file {name!r} has no layer {layer!r}; its layers are "
            f"{format_items(layers)}.",
            file=name,
        )
    try:
        gdf = gpd.read_file(path, layer=chosen, engine="pyogrio")
    except Exception as exc:
        raise InputError(
            f"The {role} file {name!r} could not be read as a GIS layer ({exc}).", file=name
        ) from None
    if len(gdf) == 0:
        raise InputError(f"The {role} file {name!r} is empty: its layer holds no features.",
                         file=name)
    frame = pd.DataFrame(gdf.drop(columns=gdf.geometry.name))
    return RawTable(
        frame=frame, source=f"the {role} file {name!r}", role=role, path=str(path),
        rows=[i + 1 for i in range(len(gdf))], row_word="feature", log=log,
        geo=gdf if role == "locations" else None, from_file=True,
    )


def read_file(
    path: str | os.PathLike[str],
    role: str,
    *,
    sheet: str | int | None = None,
    layer: str | int | None = None,
) -> RawTable:
    """Read one input file as a :class:`RawTable`, checking the file itself."""
    p = Path(path).expanduser()
    name = str(path)
    if not p.exists():
        raise InputError(f"The {role} file {name!r} does not exist (working folder: "
                         f"{os.getcwd()!r}). Check the path.", file=name)
    if p.is_dir():
        raise InputError(f"The {role} path {name!r} is a folder, not a file.", file=name)
    with open(p, "rb") as handle:
        head = handle.read(4096)
    if not head.strip(b" \t\r\n\x00\xef\xbb\xbf"):
        raise InputError(f"The {role} file {name!r} is empty.", file=name)
    ext = p.suffix.lower()
    kind = _content_kind(head)
    if ext == ".xls":
        raise InputError(
            f"The {role} file {name!r} is an old-style .xls workbook, which is not read; open it "
            "in a spreadsheet and save it as .xlsx or CSV.",
            file=name,
        )
    expected = _EXPECTED.get(ext)
    if expected is not None and kind not in expected:
        raise InputError(
            f"The {role} file {name!r} has the extension {ext!r} but holds {_KIND_WORDS[kind]}, "
            f"not {_KIND_WORDS[expected[0]]}; {_RENAME_HINT[kind]}.",
            file=name,
        )
    if ext in {".geojson", ".json", ".gpkg", ".shp"} or kind in {"sqlite", "shapefile"}:
        return _read_geo(p, name, role, layer)
    if ext in EXCEL_EXTENSIONS or kind == "zip":
        return _read_excel(p, name, role, sheet)
    if kind == "binary" or kind == "ole":
        raise InputError(
            f"The {role} file {name!r} holds {_KIND_WORDS[kind]}; {_RENAME_HINT[kind]}.",
            file=name,
        )
    if kind == "json" and ext not in TEXT_EXTENSIONS:
        return _read_geo(p, name, role, layer)
    return _read_text(p, name, role, p.read_bytes())
