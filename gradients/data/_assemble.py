"""Assembling a survey: raw inputs (files or DataFrames) through every check into aligned tables.

:func:`build_parts` runs the stages in the order :class:`Survey` documents: site IDs, the
community, locations, the environment, alignment, then the input policies; the result is the
:class:`Parts` a :class:`Survey` is made of.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._files import RawTable, read_file, table_from_frame
from ._locations import parse_locations
from ._log import Decision
from ._longform import pivot_long
from ._options import Options
from ._policies import (
    apply_censored,
    apply_constant,
    apply_empty_sites,
    apply_empty_taxa,
    apply_missing,
)
from ._sites import MIN_SITES, align_sites, site_tables
from ._tables import apply_units, parse_community, parse_environment, split_units_row

__all__ = ["Parts", "build_parts", "derive", "raw_table", "same_table"]


@dataclass
class Parts:
    """The validated tables, decisions and sources a :class:`Survey` is made of."""

    community: pd.DataFrame
    environment: pd.DataFrame
    locations: Any
    censored: pd.DataFrame
    limits: pd.DataFrame
    log: tuple[Decision, ...]
    sources: dict[str, str | None]
    units: dict[str, str] = field(default_factory=dict)
    quantities: dict[str, str] = field(default_factory=dict)


def build_parts(raws: dict[str, RawTable], opts: Options, *, shared_table: bool = False) -> Parts:
    """Every check of :class:`Survey`, in its documented order, on the raw tables."""
    if "environment" in raws:
        wide = pivot_long(raws["environment"], opts.site_column, opts.quantities)
        if wide is not None:
            raws = {**raws, "environment": wide}
        else:
            split_units_row(raws["environment"], opts.site_column)
    tables = site_tables(raws, opts)
    log: list[Decision] = [d for raw in raws.values() for d in raw.log]
    community = parse_community(tables["community"])
    locations = None
    if "locations" in tables:
        locations, loc_log, used = parse_locations(tables["locations"], opts)
        log.extend(loc_log)
        if shared_table and used and "environment" in tables:
            env_table = tables["environment"]
            env_table.data = env_table.data.drop(columns=list(used))
            log.append(Decision(
                "coordinates",
                f"The columns {used[0]!r} and {used[1]!r} of {env_table.raw.source} were used as "
                "site locations, not as environmental variables.",
                2, columns=used,
            ))
    if "environment" in tables:
        env, cens, env_log = parse_environment(tables["environment"], opts)
        log.extend(env_log)
        env, units, quantities, unit_log = apply_units(env, tables["environment"], opts)
        log.extend(unit_log)
    else:
        units, quantities = {}, {}
        if opts.units or opts.quantities:
            raise InputError("`units` and `quantities` describe environmental columns, but no "
                             "environmental table was given.")
        env = pd.DataFrame(index=community.index.copy())
        cens = pd.DataFrame(index=community.index.copy())

    index = align_sites(tables, opts, log)
    community = community.loc[index]
    env = env.loc[index]
    cens = cens.loc[index]
    if locations is not None:
        locations = locations.loc[index]

    keep = apply_empty_sites(community, tables["community"], opts, log)
    if keep is not None:
        community, env, cens = (t.loc[keep] for t in (community, env, cens))
        if locations is not None:
            locations = locations.loc[keep]

    if "environment" in tables:
        env, dropped_sites = apply_missing(env, cens, tables["environment"], opts, log)
        cens = cens.loc[env.index, list(env.columns)]
        if dropped_sites:
            keep = env.index
            community = community.loc[keep]
            if locations is not None:
                locations = locations.loc[keep]
        limits = env.select_dtypes("number").where(cens[env.select_dtypes("number").columns])
        limits = limits.reindex(columns=env.columns)
        env = apply_censored(env, cens, tables["environment"], opts, log)
    else:
        limits = pd.DataFrame(index=community.index.copy())

    if len(community) < MIN_SITES:
        raise InputError(
            f"Only {len(community)} site(s) are left after the checks; at least {MIN_SITES} are "
            "needed to compare communities. See Survey.log decisions above: "
            + " ".join(d.detail for d in log),
            file=tables["community"].raw.path,
        )

    community = apply_empty_taxa(community, tables["community"], opts, log)
    if "environment" in tables:
        constant = apply_constant(env, tables["environment"], opts, log)
        if constant:
            env = env.drop(columns=constant)
            cens = cens.drop(columns=constant)
            limits = limits.drop(columns=constant)

    for frame in (community, env, cens, limits):
        frame.index = pd.Index(list(community.index), name="site", dtype=object)
    if locations is not None:
        locations.index = pd.Index(list(community.index), name="site", dtype=object)
    cens = cens.astype(bool)
    sources = {role: (raws[role].path if role in raws else None)
               for role in ("community", "environment", "locations")}
    kept = set(env.columns)
    units = {c: u for c, u in units.items() if c in kept}
    quantities = {c: q for c, q in quantities.items() if c in kept}
    return Parts(community, env, locations, cens, limits, tuple(log), sources, units, quantities)


def raw_table(obj: object, role: str, *, sheet: Any = None, layer: Any = None,
              allow_paths: bool) -> RawTable:
    """A DataFrame, GeoDataFrame or (with `allow_paths`) a file read as a raw table."""
    import geopandas as gpd

    if isinstance(obj, RawTable):
        return obj
    if isinstance(obj, gpd.GeoDataFrame):
        raw = table_from_frame(pd.DataFrame(obj), role)
        raw.geo = obj if role == "locations" else None
        if role != "locations":
            raw.frame = pd.DataFrame(obj.drop(columns=obj.geometry.name))
        if len(obj) == 0:
            raise InputError(f"The {role} GeoDataFrame is empty: it holds no rows.")
        return raw
    if isinstance(obj, pd.DataFrame):
        if obj.shape[0] == 0:
            raise InputError(f"The {role} DataFrame is empty: it holds no rows.")
        return table_from_frame(obj, role)
    if isinstance(obj, str | os.PathLike):
        if allow_paths:
            if isinstance(sheet, Mapping):
                sheet = sheet.get(role)
            if isinstance(layer, Mapping):
                layer = layer.get(role)
            return read_file(obj, role, sheet=sheet, layer=layer)
        raise InputError(
            f"Survey() takes DataFrames; the {role} was given as a path ({str(obj)!r}). Use "
            "gradients.read_survey(...) to read files.",
            file=str(obj),
        )
    raise InputError(
        f"The {role} must be a pandas DataFrame{' or a file path' if allow_paths else ''}; got "
        f"{type(obj).__name__}.",
    )


def same_table(environment: object, locations: object) -> bool:
    """True when the environment and the locations are the same table (or the same file)."""
    if environment is None or locations is None:
        return False
    if environment is locations:
        return True
    if isinstance(environment, str | os.PathLike) and isinstance(locations, str | os.PathLike):
        try:
            return os.path.samefile(environment, locations)
        except OSError:
            return False
    return False


def derive(parts: Parts, columns: pd.DataFrame, decision: Decision,
           units: Mapping[str, str] | None = None) -> Parts:
    """``parts`` with numeric ``columns`` (labelled by site) added to the environment and
    ``decision`` to the log; the new columns are not censored."""
    env = parts.environment
    clash = [c for c in columns.columns if c in env.columns]
    if clash:
        raise InputError(f"The environmental table already has column(s) "
                         f"{format_items(clash)}; rename them so that the derived column(s) can "
                         "be added.", columns=clash)
    sites = env.index
    added = columns.reindex(sites).astype(float)
    new_env = pd.concat([env, added], axis=1)
    new_env.columns = pd.Index(list(new_env.columns), dtype=object)
    cens = pd.concat([parts.censored, pd.DataFrame(False, index=sites, columns=added.columns)],
                     axis=1).astype(bool)
    limits = pd.concat([parts.limits, pd.DataFrame(np.nan, index=sites, columns=added.columns)],
                       axis=1)
    return Parts(parts.community, new_env, parts.locations, cens, limits,
                 (*parts.log, decision), parts.sources, {**parts.units, **dict(units or {})},
                 parts.quantities)
