"""Parsing the community and environment tables: abundances, numeric and categorical variables.

Abundances must be non-negative numbers (not text, censored or empty); an environmental column
is numeric (with values below a detection limit marked for :mod:`._policies`) or categorical.
A units row under the header is taken out before the sites are read (:func:`split_units_row`),
and numeric columns with units are converted to the one unit of their quantity
(:func:`apply_units`, with :mod:`._units`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._cells import CENSORED, MISSING, MISSING_TOKENS, NUMBER, TEXT, non_detect_hint, parse_column
from ._files import RawTable
from ._log import Decision
from ._options import Options
from ._sites import SiteTable, cap, cell_label, cell_listing
from ._units import convert_column, is_unit, parse_unit

__all__ = ["apply_units", "parse_community", "parse_environment", "split_units_row"]


def parse_community(table: SiteTable) -> pd.DataFrame:
    """Sites x taxa abundances (int64 when all are whole numbers), refusing any bad cell."""
    data = table.data
    raw = table.raw
    if data.shape[1] == 0:
        raise InputError(
            f"{cap(raw.source)} holds only the site column; a community table needs one column "
            "per taxon.", file=raw.path,
        )
    plain = _plain_counts(data, raw.decimal_comma)
    if plain is not None:
        return plain
    values = np.empty(data.shape)
    text_cells: list[tuple[int, str, str]] = []
    censored: list[tuple[int, str, str]] = []
    missing: list[tuple[int, str, str]] = []
    negative: list[tuple[int, str, str]] = []
    for j, col in enumerate(data.columns):
        pc = parse_column(data[col], decimal_comma=raw.decimal_comma)
        values[:, j] = pc.values
        for kind, bucket in ((TEXT, text_cells), (CENSORED, censored), (MISSING, missing)):
            bucket.extend((int(i), col, str(pc.text[i])) for i in np.flatnonzero(pc.kinds == kind))
        neg = np.flatnonzero((pc.kinds == NUMBER) & (pc.values < 0))
        negative.extend((int(i), col, str(pc.text[i])) for i in neg)
    columns = lambda cells: sorted({c for _, c, _ in cells})  # noqa: E731
    sites = lambda cells: [data.index[i] for i, _, _ in cells]  # noqa: E731
    if text_cells:
        raise InputError(
            f"{cap(raw.source)}: {len(text_cells)} abundance cell(s) are not numbers: "
            f"{cell_listing(table, text_cells, 'taxon')}. Abundances must be non-negative numbers "
            "(counts, cover, biomass); write 0 where a taxon was not found."
            + non_detect_hint([t for _, _, t in text_cells]),
            file=raw.path, sites=sites(text_cells), columns=columns(text_cells),
        )
    if censored:
        raise InputError(
            f"{cap(raw.source)}: {len(censored)} abundance cell(s) are written as below a "
            f"detection limit: {cell_listing(table, censored, 'taxon')}. Abundances cannot be "
            "censored; write the count (0 if the taxon was not found).",
            file=raw.path, sites=sites(censored), columns=columns(censored),
        )
    if missing:
        raise InputError(
            f"{cap(raw.source)}: {len(missing)} abundance cell(s) are empty: "
            f"{cell_listing(table, missing, 'taxon')}. Write 0 where a taxon was looked for and "
            "not found; remove sites that were not sampled.",
            file=raw.path, sites=sites(missing), columns=columns(missing),
        )
    if negative:
        raise InputError(
            f"{cap(raw.source)}: {len(negative)} abundance(s) are negative: "
            f"{cell_listing(table, negative, 'taxon')}. Abundances must be 0 or more; check for a "
            "sign error or a code for 'not recorded' such as -9 or -999 (write 0, or remove the "
            "site).",
            file=raw.path, sites=sites(negative), columns=columns(negative),
        )
    return _community_frame(values, data)


def _plain_counts(data: pd.DataFrame, decimal_comma: bool) -> pd.DataFrame | None:
    """The community when every cell is text of a non-negative number, else None.

    Each distinct text is read once (with :func:`parse_column`, so exactly as cell by cell) and
    the values are spread back to the cells: a count table holds few distinct texts. Any other
    table (numbers held as numbers, or a cell that is not a non-negative number) returns None
    and is read column by column, which finds and reports the bad cells.
    """
    if data.size == 0 or not all(pd.api.types.is_object_dtype(d) or isinstance(d, pd.StringDtype)
                                 for d in data.dtypes):
        return None  # numbers already held as numbers are read column by column, without copies
    block = data.to_numpy(dtype=object)
    order = "F" if block.flags.f_contiguous else "C"  # the order the cells are held in
    cells = block.ravel(order=order)
    # a missing cell (None, NaN) has code -1; any other cell that is not text (a number) is
    # not equal to any text, so it is one of the distinct values
    codes, distinct = pd.factorize(cells)
    if codes.min() < 0 or pd.api.types.infer_dtype(distinct, skipna=False) != "string":
        return None
    pc = parse_column(pd.Series(distinct, dtype=object), decimal_comma=decimal_comma)
    if not np.all(pc.kinds == NUMBER) or np.any(pc.values < 0):
        return None
    distinct_values = pc.values
    if _whole(distinct_values):  # the cells are whole exactly when the distinct values are
        distinct_values = distinct_values.astype(np.int64)
    values = distinct_values[codes].reshape(block.shape, order=order)
    community = pd.DataFrame(values, index=data.index.copy(), columns=pd.Index(data.columns),
                             copy=False)
    community.columns.name = "taxon"
    return community


def _whole(values: np.ndarray) -> bool:
    """True when every value is a whole number held exactly as int64 (below 2**53)."""
    return bool(np.all(values == np.round(values)) and np.all(values < 2.0**53))


def _community_frame(values: np.ndarray, data: pd.DataFrame) -> pd.DataFrame:
    community = pd.DataFrame(values, index=data.index.copy(), columns=pd.Index(data.columns))
    if _whole(values):
        community = community.astype(np.int64)
    community.columns.name = "taxon"
    return community



def _as_factor(series: pd.Series) -> pd.Series:
    if isinstance(series.dtype, pd.CategoricalDtype):
        labels = [cell_label(v) for v in series.astype(object)]
    else:
        labels = []
        for v in series.astype(object):
            label = cell_label(v)
            labels.append(None if label is not None and label.lower() in MISSING_TOKENS else label)
    return pd.Series(pd.Categorical(labels), index=series.index, name=series.name)


def parse_environment(table: SiteTable, opts: Options
                      ) -> tuple[pd.DataFrame, pd.DataFrame, list[Decision]]:
    """(variables, censored mask, decisions): numeric columns as float64, the rest categorical."""
    data = table.data
    raw = table.raw
    log: list[Decision] = []
    unknown = [f for f in opts.factors if f not in data.columns]
    if unknown:
        raise InputError(
            f"`factors` names column(s) {format_items(unknown)} that are not in "
            f"{raw.source}; its columns are {format_items(list(data.columns))}.",
            file=raw.path, columns=unknown,
        )
    columns: dict[str, pd.Series] = {}
    censored: dict[str, np.ndarray] = {}
    for col in data.columns:
        s = data[col]
        if (col in opts.factors or isinstance(s.dtype, pd.CategoricalDtype)
                or pd.api.types.is_bool_dtype(s.dtype)):
            columns[col] = _as_factor(s)
            censored[col] = np.zeros(len(s), dtype=bool)
            continue
        pc = parse_column(s, decimal_comma=raw.decimal_comma)
        n_num = pc.count(NUMBER) + pc.count(CENSORED)
        n_text = pc.count(TEXT)
        if n_text == 0 or (n_num > 0 and n_num >= n_text):
            if n_text:
                cells = [(int(i), col, str(pc.text[i])) for i in np.flatnonzero(pc.kinds == TEXT)]
                raise InputError(
                    f"{cap(raw.source)}: column {col!r} holds numbers but {n_text} cell(s) are "
                    f"not numbers: {cell_listing(table, cells, 'column')}. Correct these cells, "
                    "leave them empty and choose a `missing=` policy, or list the column in "
                    "`factors=` if it is categorical." + non_detect_hint([t for _, _, t in cells]),
                    file=raw.path, sites=[data.index[i] for i, _, _ in cells], columns=[col],
                )
            columns[col] = pd.Series(pc.values, index=data.index, name=col, dtype=float)
            censored[col] = pc.kinds == CENSORED
        else:
            columns[col] = _as_factor(s)
            censored[col] = np.zeros(len(s), dtype=bool)
            if n_num:
                log.append(Decision(
                    "factor",
                    f"Column {col!r} of {raw.source} was read as categorical: {n_text} of its "
                    f"cells are text and {n_num} are numbers.",
                    n_num, columns=(col,),
                ))
    env = pd.DataFrame(columns, index=data.index.copy())
    env.columns = pd.Index(list(data.columns), dtype=object)
    mask = pd.DataFrame(censored, index=data.index.copy())
    mask.columns = env.columns.copy()
    return env, mask, log



_UNIT_ROW_WORDS = {"", "unit", "units", "unit:", "units:"}


def split_units_row(raw: RawTable, site_column: str) -> None:
    """Take a units row out of an environment table (in place), keeping its units.

    The first row under the header is a units row when its site cell is empty or says "unit"
    (or "units") and every other cell is empty, "-" or reads as a unit (``mg/kg``, ``%``,
    ``pH``), at least one of them a unit. The units are kept in ``raw.units`` and the row is
    recorded in the log.
    """
    frame = raw.frame
    if frame.shape[0] < 2:
        return
    names = [str(c).strip() for c in frame.columns]
    site = next((c for c in names if c == site_column), None) or next(
        (c for c in names if c.casefold() == site_column.strip().casefold()), None)
    if site is None:
        return
    first = frame.iloc[0]
    cells = {str(c).strip(): first[c] for c in frame.columns}
    label = cells.pop(site)
    label_text = "" if label is None or (isinstance(label, float) and np.isnan(label)) else str(
        label).strip().lower()
    if label_text not in _UNIT_ROW_WORDS:
        return
    found: dict[str, str] = {}
    for col, cell in cells.items():
        if cell is None or (isinstance(cell, float) and np.isnan(cell)):
            continue
        if not isinstance(cell, str):
            return
        text = cell.strip()
        if text in ("", "-"):
            continue
        if not is_unit(text):
            return
        found[col] = text
    if not found:
        return
    where = raw.where(0)
    raw.frame = frame.iloc[1:].reset_index(drop=True)
    if raw.rows is not None:
        raw.rows = raw.rows[1:]
    raw.units = {**found, **{k: v for k, v in raw.units.items() if k not in found}}
    raw.log.append(Decision(
        "units-row",
        f"In {raw.source}, {where} was read as a units row (not a site): "
        f"{', '.join(f'{c} in {u}' for c, u in found.items())}.",
        len(found), columns=tuple(found)))


def apply_units(env: pd.DataFrame, table: SiteTable, opts: Options
                ) -> tuple[pd.DataFrame, dict[str, str], dict[str, str], list[Decision]]:
    """Numeric columns converted to the one unit of their quantity.

    Units come from the table (a units row, or one per row of a long-form file) or from
    ``units=``; quantities from ``quantities=`` or the units. Returns the environment, the unit
    and the quantity of each column that has one, and the conversions made.
    """
    raw = table.raw
    log: list[Decision] = []
    unknown = [c for c in [*opts.units, *opts.quantities] if c not in env.columns]
    if unknown:
        raise InputError(
            f"`units` or `quantities` name column(s) {format_items(sorted(set(unknown)))} that "
            f"are not in {raw.source}; its columns are {format_items(list(env.columns))}.",
            file=raw.path, columns=sorted(set(unknown)))
    units: dict[str, str] = {}
    quantities: dict[str, str] = {}
    out = env.copy()
    sites = list(env.index)

    def locate(i: int) -> str:
        where = table.where(sites[i]).lstrip(", ")
        return f"site {sites[i]!r}" + (f" ({where})" if where else "")

    for col in env.columns:
        in_table = raw.units.get(col)
        given = opts.units.get(col)
        declared = opts.quantities.get(col)
        if in_table is None and given is None and declared is None:
            continue
        if isinstance(env[col].dtype, pd.CategoricalDtype):
            raise InputError(
                f"{cap(raw.source)}: column {col!r} is categorical (text), so it cannot have "
                "a unit or a quantity. Remove its unit, or correct the text cells so that the "
                "column reads as numbers.", file=raw.path, columns=[col])
        if isinstance(in_table, str) and given is not None:
            a, b = parse_unit(in_table), parse_unit(given)
            if a is None or b is None or a.text != b.text:
                raise InputError(
                    f"{cap(raw.source)}: column {col!r} is in {in_table!r} by the table's units "
                    f"row but in {given!r} by `units`. Give the unit once, or make the two "
                    "agree.", file=raw.path, columns=[col])
        if isinstance(in_table, list):
            per_row = [in_table[table.positions[s]] for s in sites]
        else:
            text = in_table if isinstance(in_table, str) else given
            per_row = [text] * len(sites)
        values, unit, quantity, decision = convert_column(
            env[col].to_numpy(dtype=float), per_row, column=col, source=cap(raw.source),
            declared=declared, locate=locate, file=raw.path)
        out[col] = values
        if unit is not None:
            units[col] = unit
        if quantity is not None:
            quantities[col] = quantity
        if decision is not None:
            log.append(decision)
    return out, units, quantities, log
