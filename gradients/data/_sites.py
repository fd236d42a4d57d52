"""Site matching: site IDs read as labels, one table per role indexed by them, aligned on one index.

Each table's site column is found (or its absence explained: a transposed table, the IDs in
another column), its IDs are read as text labels and checked (present, unique), and the tables
are aligned on the community's order of sites (``shared_sites_only=``), with the decisions in the
log. :class:`SiteTable` keeps the row of each site so that messages can point at the file's line.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._files import RawTable
from ._log import Decision
from ._options import Options

__all__ = ["MIN_SITES", "SiteTable", "align_sites", "cap", "cell_label", "cell_listing",
           "site_tables"]

#: Fewest sites a survey may hold (two sites are needed to compare communities).
MIN_SITES = 2


def cell_label(value: object) -> str | None:
    """A site ID or factor level as text: stripped, whole floats without '.0', blanks as None."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, float | np.floating):
        if np.isnan(value):
            return None
        if float(value).is_integer():
            value = int(value)
    text = str(value).strip()
    if _WHOLE_DECIMAL.fullmatch(text):  # "12.0" as written by a spreadsheet's CSV export
        text = text.split(".")[0]
    return text or None


_WHOLE_DECIMAL = re.compile(r"[+-]?\d+\.0+")


@dataclass
class SiteTable:
    """One input table indexed by site ID, with the row each site came from (for messages)."""

    raw: RawTable
    data: pd.DataFrame  # cells without the site column, indexed by site ID
    positions: dict[str, int] = field(default_factory=dict)  # site -> row position in raw

    def where(self, site: str) -> str:
        if self.raw.rows is None:
            return ""
        return f", {self.raw.where(self.positions[site])}"


def _default_index(index: pd.Index) -> bool:
    return isinstance(index, pd.RangeIndex) and index.name is None


def _locate_site_column(raw: RawTable, site_column: str) -> str | None:
    columns = [str(c).strip() for c in raw.frame.columns]
    if site_column in columns:
        return site_column
    folded = [c for c in columns if c.strip().casefold() == site_column.strip().casefold()]
    if len(folded) == 1:
        raw.log.append(Decision(
            "site-column",
            f"In {raw.source}, the column {folded[0]!r} was taken as the site column "
            f"{site_column!r} (names differ only in case or spaces).",
            0, columns=(folded[0],),
        ))
        return folded[0]
    return None


def _column_names(raw: RawTable) -> pd.DataFrame:
    """The raw frame with str column names, refusing repeated or blank names."""
    frame = raw.frame
    names = [str(c).strip() for c in frame.columns]
    if len(set(names)) < len(names):
        dupes = sorted({n for n in names if names.count(n) > 1})
        raise InputError(
            f"{cap(raw.source)} repeats column name(s) {format_items(dupes)}. Each column needs "
            "its own name; merge or rename the repeated columns.",
            file=raw.path, columns=dupes,
        )
    if "" in names:
        raise InputError(f"{cap(raw.source)} has a column with no name; name every column.",
                         file=raw.path)
    frame = frame.set_axis(names, axis=1)  # a new frame; its cells are copied when written
    return frame


def cap(text: str) -> str:
    """`text` with its first letter in upper case (a table's name opening a message)."""
    return text[:1].upper() + text[1:]


def _extract_sites(raw: RawTable, column: str | None) -> SiteTable:
    frame = _column_names(raw)
    if raw.geo is not None and getattr(raw.geo, "geometry", None) is not None:
        geometry_name = raw.geo.geometry.name
        if geometry_name in frame.columns:
            frame = frame.drop(columns=geometry_name)
    if column is not None:
        values = list(frame[column])
        data = frame.drop(columns=column)
    else:
        values = list(frame.index)
        data = frame
    if len(values) == 0:
        raise InputError(f"{cap(raw.source)} is empty: it holds no rows.", file=raw.path)
    labels = [cell_label(v) for v in values]
    blank = [i for i, s in enumerate(labels) if s is None]
    if blank:
        where = ", ".join(raw.where(i) for i in blank[:10])
        more = f" and {len(blank) - 10} more" if len(blank) > 10 else ""
        raise InputError(
            f"{cap(raw.source)} has {len(blank)} row(s) with no site ID ({where}{more}). "
            "Give every row a site ID, or delete the rows.",
            file=raw.path,
        )
    positions: dict[str, list[int]] = {}
    for i, s in enumerate(labels):
        positions.setdefault(s, []).append(i)  # type: ignore[arg-type]
    dupes = {s: p for s, p in positions.items() if len(p) > 1}
    if dupes:
        shown = "; ".join(
            f"{s!r} ({', '.join(raw.where(i) for i in p)})" for s, p in list(dupes.items())[:10]
        )
        more = f" and {len(dupes) - 10} more" if len(dupes) > 10 else ""
        raise InputError(
            f"{cap(raw.source)} repeats site ID(s): {shown}{more}. Each site must appear once; "
            "merge the repeated rows (e.g. sum or average replicates) or give them distinct IDs.",
            file=raw.path, sites=list(dupes),
        )
    data = data.set_axis(pd.Index(labels, name="site", dtype=object), axis=0)
    return SiteTable(raw=raw, data=data, positions={s: p[0] for s, p in positions.items()})


def _missing_site_column(raw: RawTable, site_column: str, others: list[SiteTable],
                         other_raws: list[RawTable]) -> InputError:
    columns = [str(c) for c in raw.frame.columns]
    message = (f"{cap(raw.source)} has no site column {site_column!r}; columns found: "
               f"{format_items(columns)}.")
    other_sites: set[str] = set()
    for t in others:
        other_sites |= set(t.data.index)
    other_headers: set[str] = set()
    for r in other_raws:
        other_headers |= {str(c).strip() for c in r.frame.columns}
    header_rest = {c.strip() for c in columns[1:]}
    first = {cell_label(v) for v in raw.frame.iloc[:, 0]} - {None} if columns else set()
    hint = ""
    if other_sites and len(header_rest & other_sites) >= max(1, len(header_rest) // 2):
        example = format_items(sorted(header_rest & other_sites), limit=3)
        hint = (f" The table looks transposed: its column headers are site IDs found in "
                f"{others[0].raw.source} (e.g. {example}). Put one row per site and one column per "
                "taxon or variable (pandas: "
                "`df.set_index(df.columns[0]).T`; spreadsheet: copy, Paste Special, Transpose).")
    elif other_headers and len(first & other_headers) >= max(1, len(first) // 2):
        example = format_items(sorted(first & other_headers), limit=3)
        hint = (f" The table looks transposed: the values of its first column {columns[0]!r} "
                f"are column headers of another table (e.g. {example}). Put one row per site "
                "and one column per taxon or variable.")
    else:
        for c in columns:
            values = {cell_label(v) for v in raw.frame[c]} - {None}
            if other_sites and values and len(values & other_sites) >= max(1, len(values) // 2):
                hint = (f" Column {c!r} holds the site IDs of {others[0].raw.source}; pass "
                        f"site_column={c!r} or rename the column to {site_column!r}.")
                break
        else:
            example = f" (for example site_column={columns[0]!r})" if columns else ""
            hint = (" Pass site_column= with the name of the column that holds the site IDs"
                    f"{example}, or rename that column to {site_column!r}.")
    return InputError(message + hint, file=raw.path, columns=[site_column])


def site_tables(raws: dict[str, RawTable], opts: Options) -> dict[str, SiteTable]:
    """Each raw table indexed by its site IDs (found, read as labels and checked)."""
    tables: dict[str, SiteTable] = {}
    failed: list[str] = []
    for role, raw in raws.items():
        column = _locate_site_column(raw, opts.site_column)
        if column is None and (raw.from_file or _default_index(raw.frame.index)):
            failed.append(role)
            continue
        tables[role] = _extract_sites(raw, column)
    for role in failed:
        raise _missing_site_column(
            raws[role], opts.site_column, list(tables.values()),
            [r for k, r in raws.items() if k != role],
        )
    return tables


def cell_listing(table: SiteTable, cells: list[tuple[int, str, str]], what: str) -> str:
    """Up to ten (row, column, text) cells of `table` in words, with their place in the file."""
    sites = table.data.index
    shown = [f"site {sites[i]!r}, {what} {col!r}: {text!r}{table.where(sites[i])}"
             for i, col, text in cells[:10]]
    more = f"; and {len(cells) - 10} more" if len(cells) > 10 else ""
    return "; ".join(shown) + more


def _zero_pad_hint(a: Iterable[str], b: Iterable[str]) -> str:
    def norm(s: str) -> str:
        return re.sub(r"(?<!\d)0+(?=\d)", "", s.casefold().replace(" ", "").replace("_", "-"))

    a, b = set(a), set(b)
    if len({norm(s) for s in a} & {norm(s) for s in b}) > len(a & b):
        return (" Some IDs differ only in case, spaces or leading zeros (e.g. 'S01' and 's1'); "
                "make them identical in every table.")
    return ""


def align_sites(tables: dict[str, SiteTable], opts: Options, log: list[Decision]) -> pd.Index:
    """The sites of every table in the community's order (``shared_sites_only=``), logged."""
    reference = tables["community"]
    order = reference.data.index
    others = {r: t for r, t in tables.items() if r != "community"}
    problems = []
    sites_involved: list[str] = []
    for t in others.values():
        ref_set, other_set = set(order), set(t.data.index)
        if ref_set == other_set:
            continue
        only_ref = [s for s in order if s not in other_set]
        only_other = [s for s in t.data.index if s not in ref_set]
        parts = []
        if only_ref:
            parts.append(f"{len(only_ref)} site(s) in {reference.raw.source} but not in "
                         f"{t.raw.source}: {format_items(only_ref)}")
        if only_other:
            parts.append(f"{len(only_other)} site(s) in {t.raw.source} but not in "
                         f"{reference.raw.source}: {format_items(only_other)}")
        problems.append("; ".join(parts) + "." + _zero_pad_hint(ref_set, other_set))
        sites_involved += only_ref + only_other
    if problems and not opts.shared_sites_only:
        raise InputError(
            "The tables do not hold the same sites. " + " ".join(cap(p) for p in problems)
            + " Correct the site IDs, or pass shared_sites_only=True to keep only the sites "
            "found in every table (the dropped sites are recorded in Survey.log).",
            file=reference.raw.path, sites=sites_involved,
        )
    shared = [s for s in order if all(s in t.data.index for t in others.values())]
    if problems:
        if len(shared) < MIN_SITES:
            raise InputError(
                f"Only {len(shared)} site(s) are found in every table; at least {MIN_SITES} are "
                "needed. " + " ".join(cap(p) for p in problems),
                sites=sites_involved,
            )
        for t in tables.values():
            dropped = [s for s in t.data.index if s not in set(shared)]
            if dropped:
                log.append(Decision(
                    "drop-sites",
                    f"{len(dropped)} site(s) of {t.raw.source} not found in every table were "
                    f"dropped (shared_sites_only=True): {format_items(dropped, limit=20)}.",
                    len(dropped), sites=tuple(dropped),
                ))
    index = pd.Index(shared, name="site", dtype=object)
    for t in others.values():
        kept = [s for s in t.data.index if s in set(shared)]
        if kept != shared:
            log.append(Decision(
                "reorder",
                f"The rows of {t.raw.source} were put in the site order of "
                f"{reference.raw.source}.", 0,
            ))
    return index

