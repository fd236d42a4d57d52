"""Parsing the community and environment tables: abundances, numeric and categorical variables.

Abundances must be non-negative numbers (not text, censored or empty); an environmental column
is numeric (with values below a detection limit marked for :mod:`._policies`) or categorical.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._cells import CENSORED, MISSING, MISSING_TOKENS, NUMBER, TEXT, non_detect_hint, parse_column
from ._log import Decision
from ._options import Options
from ._sites import SiteTable, cap, cell_label, cell_listing

__all__ = ["parse_community", "parse_environment"]


def parse_community(table: SiteTable) -> pd.DataFrame:
    """Sites x taxa abundances (int64 when all are whole numbers), refusing any bad cell."""
    data = table.data
    raw = table.raw
    if data.shape[1] == 0:
        raise InputError(
            f"{cap(raw.source)} holds only the site column; a community table needs one column "
            "per taxon.", file=raw.path,
        )
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
    community = pd.DataFrame(values, index=data.index.copy(), columns=pd.Index(data.columns))
    if np.all(values == np.round(values)) and np.all(values < 2.0**53):
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

