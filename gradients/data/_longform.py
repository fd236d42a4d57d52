"""Laboratory files in long form: one row per site and variable, pivoted to one row per site.

Laboratories export results as one row per measurement: the site (sample), the variable
(analyte), the value, its unit, a qualifier (``<`` or ``ND`` for a value below detection, ``J``
for an estimated value) and the reporting limit. :func:`pivot_long` recognises such a table by
its header and turns it into the wide table the survey builder reads, applying the rules of the
wide form: a non-detect becomes a censored cell ``<limit`` (handled by ``censored=``), and each
variable's units are checked and converted to the one unit of its quantity (:mod:`._units`),
with the lines of the file in every message.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._cells import CENSORED, MISSING, NUMBER, TEXT, parse_column
from ._files import RawTable
from ._log import Decision
from ._units import convert_column

__all__ = ["LONG_COLUMNS", "pivot_long"]

#: Header names of a long-form table (compared ignoring case, spaces and underscores).
LONG_COLUMNS: dict[str, tuple[str, ...]] = {
    "variable": ("variable", "parameter", "analyte", "determinand"),
    "value": ("value", "result"),
    "unit": ("unit", "units"),
    "qualifier": ("qualifier", "flag", "qualifierflag", "remark"),
    "limit": ("reportinglimit", "detectionlimit", "limit", "rl", "dl", "lod", "mdl", "loq"),
}

#: Qualifiers meaning "below the reporting limit" (compared ignoring case).
NON_DETECT = frozenset({"<", "nd", "n.d.", "u", "bdl", "<dl", "<lod", "<rl", "<loq", "lt",
                        "not detected"})
#: Qualifiers meaning "detected, value estimated" (kept as measured, counted in the log).
ESTIMATED = frozenset({"j", "e", "est", "estimated"})


def _key(name: object) -> str:
    return "".join(str(name).split()).replace("_", "").replace("-", "").casefold()


def _layout(raw: RawTable, site_column: str) -> dict[str, str] | None:
    """Role -> column name when ``raw`` is a long-form table, else None."""
    roles: dict[str, str] = {}
    for col in raw.frame.columns:
        key = _key(col)
        if key == _key(site_column):
            roles["site"] = str(col)
            continue
        role = next((r for r, names in LONG_COLUMNS.items() if key in names), None)
        if role is None or role in roles:
            return None
        roles[role] = str(col)
    if not {"site", "variable", "value"} <= set(roles):
        return None
    return roles


def _blank(cell: object) -> bool:
    return cell is None or (isinstance(cell, float) and np.isnan(cell)) or str(cell).strip() == ""


def pivot_long(raw: RawTable, site_column: str,
               quantities: dict[str, str] | None = None) -> RawTable | None:
    """The wide table of a long-form laboratory table, or None when ``raw`` is not one."""
    roles = _layout(raw, site_column)
    if roles is None:
        return None
    frame = raw.frame
    src = raw.source[:1].upper() + raw.source[1:]
    n = len(frame)

    def lines(idx: list[int] | np.ndarray) -> str:
        return format_items([raw.where(int(i)) for i in idx], quote=False, limit=8)

    sites = [None if _blank(c) else str(c).strip() for c in frame[roles["site"]]]
    variables = [None if _blank(c) else str(c).strip() for c in frame[roles["variable"]]]
    empty = [i for i in range(n) if sites[i] is None or variables[i] is None]
    if empty:
        raise InputError(f"{src} is a long-form table (one row per site and variable), but the "
                         f"site or the variable is empty in {lines(empty)}. Fill them in or "
                         "remove those rows.", file=raw.path)
    pairs: dict[tuple[str, str], list[int]] = {}
    for i in range(n):
        pairs.setdefault((sites[i], variables[i]), []).append(i)  # type: ignore[arg-type]
    dupes = {k: v for k, v in pairs.items() if len(v) > 1}
    if dupes:
        shown = "; ".join(f"site {s!r}, {v!r} ({lines(rows)})" for (s, v), rows in
                          list(dupes.items())[:5])
        raise InputError(f"{src} gives more than one value for the same site and variable: "
                         f"{shown}. Keep one result per site and variable (average laboratory "
                         "replicates first, if that is what they are).", file=raw.path)
    value = parse_column(frame[roles["value"]], decimal_comma=raw.decimal_comma)
    limit = (parse_column(frame[roles["limit"]], decimal_comma=raw.decimal_comma)
             if "limit" in roles else None)
    qualifiers = (["" if _blank(c) else str(c).strip() for c in frame[roles["qualifier"]]]
                  if "qualifier" in roles else [""] * n)
    numbers = np.full(n, np.nan)
    censored = np.zeros(n, dtype=bool)
    estimated = 0
    no_limit: list[int] = []
    unknown: list[int] = []
    bad_value: list[int] = []
    for i in range(n):
        q = qualifiers[i].casefold()
        kind, v = value.kinds[i], value.values[i]
        text = str(value.text[i]).strip()
        if not q and kind == TEXT and text.casefold() in NON_DETECT | {"nd"}:
            q, kind = text.casefold(), MISSING  # "ND" written in the value column
        has_limit = limit is not None and limit.kinds[i] == NUMBER
        if q in NON_DETECT:
            if has_limit:
                numbers[i], censored[i] = limit.values[i], True  # type: ignore[union-attr]
            elif q == "<" and kind in (NUMBER, CENSORED):
                numbers[i], censored[i] = v, True  # "<" with the limit as the value
            elif kind == CENSORED:
                numbers[i], censored[i] = v, True
            else:
                no_limit.append(i)
        elif q in ESTIMATED or not q:
            estimated += bool(q)
            if kind in (NUMBER, CENSORED):
                numbers[i], censored[i] = v, kind == CENSORED
            elif kind == TEXT:
                bad_value.append(i)
        else:
            unknown.append(i)
    if no_limit:
        raise InputError(
            f"{src}: {len(no_limit)} result(s) are marked as not detected but give no reporting "
            f"limit ({lines(no_limit)}). A value below detection needs its limit to be analysed: "
            f"give the laboratory's reporting limit in a column named 'reporting_limit' (or "
            f"write the value as '<limit').", file=raw.path,
            sites=sorted({sites[i] for i in no_limit}))  # type: ignore[type-var]
    if unknown:
        found = format_items(sorted({qualifiers[i] for i in unknown}))
        raise InputError(
            f"{src}: the qualifier(s) {found} ({lines(unknown)}) are not understood. Qualifiers "
            f"read: {format_items(sorted(NON_DETECT))} (below the reporting limit) and "
            f"{format_items(sorted(ESTIMATED))} (estimated, kept as measured); remove other "
            "flags or move them to a column of their own.", file=raw.path)
    if bad_value:
        raise InputError(
            f"{src}: the value is not a number in {lines(bad_value)} "
            f"({format_items(sorted({str(value.text[i]) for i in bad_value}))}). Write a number, "
            "'<limit' for a value below detection, or leave the cell empty.", file=raw.path)
    site_order = list(dict.fromkeys(sites))
    var_order = list(dict.fromkeys(variables))
    row_of = {s: k for k, s in enumerate(site_order)}
    first_line = [raw.rows[sites.index(s)] if raw.rows is not None else None
                  for s in site_order]
    log = list(raw.log)
    units_out: dict[str, object] = {}
    cells: dict[str, list[object]] = {}
    units_col = [None if _blank(c) else str(c).strip() for c in frame[roles["unit"]]] \
        if "unit" in roles else [None] * n
    for var in var_order:
        idx = np.array([i for i in range(n) if variables[i] == var])
        vals, unit, _quantity, decision = convert_column(
            numbers[idx], [units_col[i] for i in idx], column=var, source=src,
            declared=(quantities or {}).get(var), locate=lambda k, idx=idx: raw.where(int(idx[k])),
            file=raw.path)
        if decision is not None:
            log.append(decision)
        if unit is not None:
            units_out[var] = unit
        column: list[object] = [None] * len(site_order)
        for k, i in enumerate(idx):
            if np.isnan(vals[k]):
                continue
            column[row_of[sites[i]]] = f"<{float(vals[k])!r}" if censored[i] else float(vals[k])
        cells[var] = column
    wide = pd.DataFrame({site_column: site_order, **cells}, dtype=object)
    n_cens = int(censored.sum())
    log.append(Decision(
        "long-form",
        f"{src} was read in long form ({n} results, one row per site and variable) and pivoted "
        f"to {len(site_order)} sites x {len(var_order)} variables"
        + (f"; {n_cens} result(s) below the reporting limit became censored values"
           if n_cens else "")
        + (f"; {estimated} estimated result(s) (qualifier J or E) were kept as measured"
           if estimated else "") + ".",
        n, columns=tuple(var_order)))
    return RawTable(frame=wide, source=raw.source, role=raw.role, path=raw.path,
                    rows=first_line if raw.rows is not None else None, row_word=raw.row_word,
                    decimal_comma=False, log=log, geo=None, from_file=raw.from_file,
                    units=units_out)
