"""Input policies: missing and censored values, empty sites and taxa, constant columns.

Each function applies one keyword of :class:`Survey` (``missing=``, ``censored=``,
``empty_sites=``, ``empty_taxa=``, ``constant=``): it stops with a message listing the cells,
sites or columns and the choices, or does what the policy says and records it in the log.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._censored import CENSORED_POLICIES, MIN_DETECTS_ROS, ros_impute
from ._log import Decision
from ._options import Options
from ._sites import SiteTable, cap

__all__ = ["apply_censored", "apply_constant", "apply_empty_sites", "apply_empty_taxa",
           "apply_missing"]


def _describe_cells(env: pd.DataFrame, mask: np.ndarray, where: dict[str, str]) -> str:
    rows, cols = np.nonzero(mask)
    shown = [f"site {env.index[i]!r}, column {env.columns[j]!r}{where.get(env.index[i], '')}"
             for i, j in zip(rows[:10], cols[:10], strict=True)]
    more = f"; and {len(rows) - 10} more" if len(rows) > 10 else ""
    return "; ".join(shown) + more


def apply_missing(env: pd.DataFrame, censored: pd.DataFrame, table: SiteTable, opts: Options,
                  log: list[Decision]) -> tuple[pd.DataFrame, list[str]]:
    """Returns the environment after the missing policy and the sites to drop everywhere."""
    miss = env.isna().to_numpy() & ~censored.to_numpy()
    if not miss.any():
        return env, []
    raw = table.raw
    per_column = {c: int(n) for c, n in zip(env.columns, miss.sum(axis=0), strict=True) if n}
    site_mask = miss.any(axis=1)
    bad_sites = [s for s, m in zip(env.index, site_mask, strict=True) if m]
    where = {s: table.where(s) for s in env.index}
    if opts.missing == "error":
        counts = ", ".join(f"{c!r} ({n})" for c, n in per_column.items())
        raise InputError(
            f"{cap(raw.source)} has {int(miss.sum())} empty environmental cell(s): "
            f"{_describe_cells(env, miss, where)}. Empty cells per column: {counts}. Fill them, "
            f"or choose a policy: missing='drop-sites' drops the {len(bad_sites)} site(s) "
            f"concerned from every table; missing='drop-variables' drops the {len(per_column)} "
            "column(s) concerned. Each choice is recorded in Survey.log.",
            file=raw.path, sites=bad_sites, columns=list(per_column),
        )
    if opts.missing == "drop-sites":
        empty = [c for c, n in per_column.items() if n == len(env)]
        if empty:
            raise InputError(
                f"{cap(raw.source)}: column(s) {format_items(empty)} are empty for every site, "
                "so missing='drop-sites' would drop every site. Remove the column(s), or use "
                "missing='drop-variables'.",
                file=raw.path, columns=empty,
            )
        log.append(Decision(
            "drop-sites",
            f"{len(bad_sites)} site(s) with empty environmental values were dropped from every "
            f"table (missing='drop-sites'): {format_items(bad_sites, limit=20)}; empty cells per "
            f"column: {', '.join(f'{c} {n}' for c, n in per_column.items())}.",
            len(bad_sites), sites=tuple(bad_sites), columns=tuple(per_column),
        ))
        return env.loc[~site_mask], bad_sites
    dropped = list(per_column)
    log.append(Decision(
        "drop-variables",
        f"{len(dropped)} environmental variable(s) with empty values were dropped "
        f"(missing='drop-variables'): "
        f"{', '.join(f'{c} ({n} empty)' for c, n in per_column.items())}.",
        len(dropped), sites=tuple(bad_sites), columns=tuple(dropped),
    ))
    return env.drop(columns=dropped), []


_POLICY_WORDS = {
    "half-limit": "replaced by half the detection limit (substitution, common practice; biased, "
                  "Helsel 2012)",
    "limit": "replaced by the detection limit (substitution; an upper bound, biased upwards; "
             "Helsel 2012)",
    "zero": "replaced by 0 (substitution; a lower bound, biased downwards; Helsel 2012)",
}


def apply_censored(env: pd.DataFrame, censored: pd.DataFrame, table: SiteTable, opts: Options,
                   log: list[Decision]) -> pd.DataFrame:
    """The environment after ``censored=`` (values below a detection limit replaced)."""
    mask = censored.to_numpy()
    if not mask.any():
        return env
    raw = table.raw
    per_column = {c: int(n) for c, n in zip(env.columns, mask.sum(axis=0), strict=True) if n}
    if opts.censored == "error":
        options = "; ".join(f"censored={k!r}: {v}" for k, v in CENSORED_POLICIES.items()
                            if k != "error")
        where = {s: table.where(s) for s in env.index}
        cells = _describe_cells(env, mask, where)
        raise InputError(
            f"{cap(raw.source)} has {int(mask.sum())} value(s) below a detection limit "
            f"(written like '<0.5'): {cells}. Per column: "
            f"{', '.join(f'{c!r} ({n})' for c, n in per_column.items())}. Choose a policy with "
            f"censored=: {options}. The choice and its effect are recorded in Survey.log.",
            file=raw.path, sites=sorted({env.index[i] for i in np.nonzero(mask)[0]}),
            columns=list(per_column),
        )
    env = env.copy()
    for col, n in per_column.items():
        c = censored[col].to_numpy()
        values = env[col].to_numpy(dtype=float).copy()
        limits = values[c]
        limit_text = format_items(sorted({f"<{v:g}" for v in limits}), quote=False)
        sites = tuple(env.index[c])
        if opts.censored == "half-limit":
            values[c] = limits / 2
            words = _POLICY_WORDS["half-limit"]
        elif opts.censored == "limit":
            words = _POLICY_WORDS["limit"]
        elif opts.censored == "zero":
            values[c] = 0.0
            words = _POLICY_WORDS["zero"]
        else:
            detected = values[~c]
            if len(detected) < MIN_DETECTS_ROS:
                raise InputError(
                    f"{cap(raw.source)}: column {col!r} has only {len(detected)} detected "
                    f"value(s) and {n} below a detection limit; censored='ros' needs at least "
                    f"{MIN_DETECTS_ROS} detected values to fit its line. Use a substitution "
                    "policy (censored='half-limit', 'limit' or 'zero') and say so in the report, "
                    "or drop the column.",
                    file=raw.path, columns=[col],
                )
            if np.any(detected <= 0) or np.any(limits <= 0):
                raise InputError(
                    f"{cap(raw.source)}: column {col!r} holds zero or negative values, which "
                    "censored='ros' cannot fit on a log scale. Use a substitution policy "
                    "(censored='half-limit', 'limit' or 'zero') for this table.",
                    file=raw.path, columns=[col],
                )
            values, n_capped = ros_impute(values, c)
            words = ("imputed by robust regression on order statistics (log-normal fit to the "
                     f"{len(detected)} detected values; Helsel 2012)")
            if n_capped:
                words += (f"; {n_capped} imputed value(s) above their own limit were set to the "
                          "limit")
        env[col] = values
        log.append(Decision(
            "censored",
            f"{col}: {n} of {len(values)} values were below a detection limit ({limit_text}) and "
            f"were {words}.",
            n, sites=sites, columns=(col,),
        ))
    return env


def _show(value: object) -> str:
    if isinstance(value, float | np.floating):
        return f"{float(value):g}"
    return repr(str(value))


def _constant_columns(env: pd.DataFrame) -> list[str]:
    out = []
    for col in env.columns:
        s = env[col]
        if isinstance(s.dtype, pd.CategoricalDtype):
            if s.nunique(dropna=True) <= 1:
                out.append(col)
        else:
            v = s.to_numpy(dtype=float)
            if len(v) and np.nanmax(v) == np.nanmin(v):
                out.append(col)
    return out



def apply_empty_sites(community: pd.DataFrame, table: SiteTable, opts: Options,
                      log: list[Decision]) -> pd.Index | None:
    """The sites to keep under ``empty_sites=`` (None when no site is empty)."""
    totals = community.sum(axis=1).to_numpy()
    empty = [s for s, t in zip(community.index, totals, strict=True) if t == 0]
    if not empty:
        return None
    if opts.empty_sites == "error":
        shown = ", ".join(f"{s!r}{table.where(s)}" for s in empty[:10])
        more = f" and {len(empty) - 10} more" if len(empty) > 10 else ""
        raise InputError(
            f"{cap(table.raw.source)}: {len(empty)} site(s) have no taxa at all (every abundance "
            f"is 0): {shown}{more}. Dissimilarities between empty sites are undefined. Remove "
            "these sites from every table, or pass empty_sites='drop' to drop them (recorded in "
            "Survey.log).",
            file=table.raw.path, sites=empty,
        )
    log.append(Decision(
        "drop-sites",
        f"{len(empty)} site(s) with no taxa at all were dropped (empty_sites='drop'): "
        f"{format_items(empty, limit=20)}.",
        len(empty), sites=tuple(empty),
    ))
    return community.index[totals > 0]


def apply_empty_taxa(community: pd.DataFrame, table: SiteTable, opts: Options,
                     log: list[Decision]) -> pd.DataFrame:
    """The community after ``empty_taxa=`` (taxa that are 0 at every site)."""
    zero_taxa = [c for c, t in zip(community.columns, community.sum(axis=0), strict=True)
                 if t == 0]
    if not zero_taxa:
        return community
    source = table.raw.source
    if opts.empty_taxa == "error":
        raise InputError(
            f"{cap(source)}: {len(zero_taxa)} taxon column(s) are 0 at every site: "
            f"{format_items(zero_taxa)}. Remove them, or pass empty_taxa='drop' (the "
            "default), which drops them and records it in Survey.log.",
            file=table.raw.path, columns=zero_taxa,
        )
    if opts.empty_taxa == "drop":
        if len(zero_taxa) == community.shape[1]:
            raise InputError(f"{cap(source)}: every taxon is 0 at every site.",
                             file=table.raw.path)
        community = community.drop(columns=zero_taxa)
        log.append(Decision(
            "drop-taxa",
            f"{len(zero_taxa)} taxon column(s) that are 0 at every site were dropped "
            f"(empty_taxa='drop'): {format_items(zero_taxa, limit=20)}.",
            len(zero_taxa), columns=tuple(zero_taxa),
        ))
    return community


def apply_constant(env: pd.DataFrame, table: SiteTable, opts: Options,
                   log: list[Decision]) -> list[str]:
    """The environmental columns to drop under ``constant=`` (empty when none is constant)."""
    constant = _constant_columns(env)
    if not constant:
        return []
    if opts.constant == "error":
        values = ", ".join(
            f"{c!r} (every site = {_show(env[c].dropna().iloc[0])})" for c in constant[:10]
        )
        raise InputError(
            f"{cap(table.raw.source)}: {len(constant)} column(s) take the same value at "
            f"every site: {values}. A constant variable cannot explain turnover. Remove it, "
            "or pass constant='drop' to drop such columns (recorded in Survey.log).",
            file=table.raw.path, columns=constant,
        )
    log.append(Decision(
        "drop-variables",
        f"{len(constant)} environmental variable(s) constant over the sites were dropped "
        f"(constant='drop'): {format_items(constant, limit=20)}.",
        len(constant), columns=tuple(constant),
    ))
    return constant
