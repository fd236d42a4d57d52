"""`Survey` and `read_survey`: community, environment and locations on one ordered index of sites.

:class:`Survey` validates tables already in memory; :func:`read_survey` reads files and applies
exactly the same rules. Every decision taken on the input (sites dropped, censored values
replaced, variables dropped, an encoding guessed) is kept in :attr:`Survey.log`, which the methods
paragraph of a report reads. The checks themselves live in the modules before this one (see the
package docstring); this module holds the public type and the reader.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._assemble import Parts, build_parts, derive, raw_table, same_table
from ._log import Decision
from ._options import (
    CONSTANT_POLICIES,
    EMPTY_SITE_POLICIES,
    EMPTY_TAXON_POLICIES,
    MISSING_POLICIES,
    check_options,
)
from ._sites import MIN_SITES, cell_label

__all__ = [
    "CONSTANT_POLICIES",
    "EMPTY_SITE_POLICIES",
    "EMPTY_TAXON_POLICIES",
    "MISSING_POLICIES",
    "Survey",
    "read_survey",
]


class Survey:
    """Community, environment and locations of one survey, aligned on one ordered set of sites.

    Parameters
    ----------
    community : DataFrame
        Sites x taxa abundances (counts, cover, biomass; non-negative numbers). Site IDs are
        taken from the column named `site_column`, or from the index when there is no such
        column and the index is not a plain 0..n-1 range.
    environment : DataFrame, optional
        Sites x environmental variables. Numeric columns stay numeric; text columns (and those
        named in `factors`) become pandas ``category`` columns. Cells written like ``<0.5`` are
        values below a detection limit, handled by `censored`.
    locations : GeoDataFrame or DataFrame, optional
        Site points with a CRS, or a table with coordinate columns (see `coordinates`, `crs`).
    site_column : str, default "site"
        Name of the column holding site IDs in every table (matched ignoring case and spaces
        when no column has exactly this name; recorded in the log).
    coordinates : (str, str), optional
        The x and y columns of a locations table. By default found from common names:
        lon/long/longitude/lng and lat/latitude (degrees, default CRS EPSG:4326), or
        x/easting and y/northing (projected; `crs` required).
    crs : str, int or pyproj.CRS, optional
        CRS of coordinate columns, or of a GeoDataFrame or GIS layer that has none.
    factors : list of str, optional
        Environmental columns to treat as categorical even if they hold numbers (e.g. habitat
        codes 1, 2, 3).
    shared_sites_only : bool, default False
        When the tables hold different sites: False stops with an error listing them both ways;
        True keeps the sites found in every table and records what was dropped.
    missing : {"error", "drop-sites", "drop-variables"}, default "error"
        What to do with empty environmental cells.
    censored : {"error", "half-limit", "limit", "zero", "ros"}, default "error"
        What to do with values below a detection limit; see Notes.
    empty_sites : {"error", "drop"}, default "error"
        What to do with sites where every abundance is 0.
    empty_taxa : {"drop", "keep", "error"}, default "drop"
        What to do with taxa that are 0 at every site (after any sites are dropped). They carry
        no information about turnover, so by default they are dropped and the log says so.
    constant : {"error", "drop"}, default "error"
        What to do with environmental columns that take one value at every site.
    units : dict, optional
        Unit of environmental columns, e.g. ``{"Cu": "µg/g", "EC": "mS/m"}``; a units row under
        the header of the environmental table gives them too (see ``docs/soil-water.md``).
        Values are converted to the one unit of their quantity (mg/kg, mg/L, µS/cm, ...) and
        each conversion is recorded in `log`.
    quantities : dict, optional
        Quantity of environmental columns (``"mass fraction"``, ``"concentration in water"``,
        ``"percent"``, ``"pH"``, ``"conductivity"``, ...); by default inferred from the units.
        A unit that cannot be converted to its column's quantity is an error.

    Attributes
    ----------
    community : DataFrame
        Sites x taxa, int64 when every abundance is a whole number, float64 otherwise.
    environment : DataFrame
        Sites x variables, float64 and ``category`` columns (no columns when none was given).
    locations : GeoDataFrame or None
        One point per site, with a CRS.
    censored : DataFrame of bool
        Like `environment`: True where the value was below a detection limit and was replaced
        by the `censored` policy.
    detection_limits : DataFrame of float
        Like `environment`: the detection limit of each censored cell, NaN elsewhere.
    log : tuple of Decision
        Every decision taken on the input, in order.
    units, quantities : dict
        The unit (after conversion) and the quantity of each environmental column that has one.
    sources : dict
        The file each table was read from (None for DataFrames).

    Notes
    -----
    Checks, in order: site IDs (present, unique); abundances (numbers, not censored, not empty,
    not negative); environmental columns (numeric or categorical, no stray text in numeric
    columns); locations (points, CRS, latitude within [-90, 90], longitude within [-180, 180],
    swapped axes); the same sites in every table (`shared_sites_only`); sites with no taxa
    (`empty_sites`); empty cells (`missing`); censored values (`censored`, applied to the sites
    that remain); taxa absent everywhere (`empty_taxa`); constant variables (`constant`).
    Every problem raises :class:`gradients.InputError` naming the file, sites, columns and the
    fix.

    Substituting half the detection limit for censored values is common practice but biased;
    robust regression on order statistics (``censored="ros"``) imputes them from a log-normal
    fit to the detected values and is the better-founded choice when there are enough detected
    values [1]_. The number of values replaced per column and the policy are recorded in `log`.

    References
    ----------
    .. [1] Helsel, D. R. (2012). *Statistics for Censored Environmental Data Using Minitab and
       R*, 2nd ed. Wiley.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients.data import Survey
    >>> community = pd.DataFrame({"site": ["a", "b", "c"], "Taxon 1": [3, 0, 1],
    ...                           "Taxon 2": [0, 5, 2]})
    >>> environment = pd.DataFrame({"site": ["c", "b", "a"], "Cu": ["12", "<5", "40"]})
    >>> s = Survey(community, environment, censored="half-limit")
    >>> s.environment["Cu"].tolist()
    [40.0, 2.5, 12.0]
    >>> print(s.log[-1])
    Cu: 1 of 3 values were below a detection limit (<5) and were replaced by half the detection \
limit (substitution, common practice; biased, Helsel 2012).
    """

    __slots__ = ("_censored", "_community", "_environment", "_frozen", "_limits", "_locations",
                 "_log", "_quantities", "_sources", "_units")

    def __init__(
        self,
        community: pd.DataFrame,
        environment: pd.DataFrame | None = None,
        locations: pd.DataFrame | None = None,
        *,
        site_column: str = "site",
        coordinates: tuple[str, str] | None = None,
        crs: Any = None,
        factors: Sequence[str] | None = None,
        shared_sites_only: bool = False,
        missing: str = "error",
        censored: str = "error",
        empty_sites: str = "error",
        empty_taxa: str = "drop",
        constant: str = "error",
        units: Mapping[str, str] | None = None,
        quantities: Mapping[str, str] | None = None,
    ) -> None:
        opts = check_options(site_column, coordinates, crs, factors, shared_sites_only, missing,
                              censored, empty_sites, empty_taxa, constant,
                              None if units is None else dict(units),
                              None if quantities is None else dict(quantities))
        raws = {"community": raw_table(community, "community", allow_paths=False)}
        if environment is not None:
            raws["environment"] = raw_table(environment, "environment", allow_paths=False)
        if locations is not None:
            raws["locations"] = raw_table(locations, "locations", allow_paths=False)
        self._set(build_parts(raws, opts, shared_table=same_table(environment, locations)))

    def _set(self, parts: Parts) -> None:
        object.__setattr__(self, "_community", parts.community)
        object.__setattr__(self, "_environment", parts.environment)
        object.__setattr__(self, "_locations", parts.locations)
        object.__setattr__(self, "_censored", parts.censored)
        object.__setattr__(self, "_limits", parts.limits)
        object.__setattr__(self, "_log", parts.log)
        object.__setattr__(self, "_sources", dict(parts.sources))
        object.__setattr__(self, "_units", dict(parts.units))
        object.__setattr__(self, "_quantities", dict(parts.quantities))
        object.__setattr__(self, "_frozen", True)

    @classmethod
    def _from_parts(cls, parts: Parts) -> Survey:
        obj = object.__new__(cls)
        obj._set(parts)
        return obj

    def __getstate__(self) -> dict[str, object]:
        return {name: getattr(self, name) for name in self.__slots__}

    def __setstate__(self, state: dict[str, object]) -> None:
        for name, value in state.items():
            object.__setattr__(self, name, value)

    def __setattr__(self, name: str, value: object) -> None:
        raise AttributeError(f"Survey is read-only; cannot set {name!r}. Build a new Survey "
                             "(or use .subset()) instead.")

    # -- tables ---------------------------------------------------------------------------
    @property
    def community(self) -> pd.DataFrame:
        """Sites x taxa abundances."""
        return self._community

    @property
    def environment(self) -> pd.DataFrame:
        """Sites x environmental variables (float64 and category columns)."""
        return self._environment

    @property
    def locations(self) -> Any:
        """GeoDataFrame of one point per site with a CRS, or None."""
        return self._locations

    @property
    def censored(self) -> pd.DataFrame:
        """Boolean mask like `environment`: True where a value was below a detection limit."""
        return self._censored

    @property
    def detection_limits(self) -> pd.DataFrame:
        """Detection limit of each censored cell (NaN elsewhere), like `environment`."""
        return self._limits

    @property
    def log(self) -> tuple[Decision, ...]:
        """Every decision taken on the input, in order."""
        return self._log

    @property
    def units(self) -> dict[str, str]:
        """Unit of each environmental column that has one (after conversion), e.g. mg/kg."""
        return dict(self._units)

    @property
    def quantities(self) -> dict[str, str]:
        """Quantity of each environmental column that has one, e.g. ``"mass fraction"``."""
        return dict(self._quantities)

    @property
    def sources(self) -> dict[str, str | None]:
        """File each table was read from (None for tables given as DataFrames or absent)."""
        return dict(self._sources)

    @property
    def sites(self) -> pd.Index:
        """The ordered site IDs shared by every table."""
        return self._community.index

    @property
    def taxa(self) -> pd.Index:
        """The taxon names (community columns)."""
        return self._community.columns

    @property
    def n_sites(self) -> int:
        return int(self._community.shape[0])

    @property
    def n_taxa(self) -> int:
        return int(self._community.shape[1])

    # -- helpers --------------------------------------------------------------------------
    def numeric_environment(self) -> pd.DataFrame:
        """The numeric environmental columns (float64)."""
        return self._environment.select_dtypes("number")

    def factors(self) -> pd.DataFrame:
        """The categorical environmental columns (pandas ``category``)."""
        return self._environment.select_dtypes("category")

    def subset(self, sites: Iterable[object]) -> Survey:
        """A new Survey holding only `sites`, in the order given.

        Taxa that become 0 at every remaining site are kept (the subset is a view of the same
        survey); the log gains one ``"subset"`` record.
        """
        if isinstance(sites, str):
            sites = [sites]
        wanted = [cell_label(s) for s in sites]
        unknown = [s for s in wanted if s not in set(self.sites)]
        if unknown:
            raise InputError(f"Survey.subset: site(s) {format_items(unknown)} are not in the "
                             f"survey; its sites are {format_items(list(self.sites))}.",
                             sites=[str(s) for s in unknown])
        repeated = sorted({s for s in wanted if wanted.count(s) > 1})
        if repeated:
            raise InputError(f"Survey.subset: site(s) {format_items(repeated)} are repeated.",
                             sites=repeated)
        if len(wanted) < MIN_SITES:
            raise InputError(f"Survey.subset needs at least {MIN_SITES} sites; got "
                             f"{len(wanted)}.")
        index = pd.Index(wanted, name="site", dtype=object)
        dropped = [s for s in self.sites if s not in set(wanted)]
        record = Decision("subset", f"A subset of {len(wanted)} of the {self.n_sites} sites was "
                          f"kept; {len(dropped)} dropped: {format_items(dropped, limit=20)}.",
                          len(dropped), sites=tuple(dropped))
        parts = Parts(
            community=self._community.loc[index],
            environment=self._environment.loc[index],
            locations=None if self._locations is None else self._locations.loc[index],
            censored=self._censored.loc[index],
            limits=self._limits.loc[index],
            log=(*self._log, record),
            sources=self._sources,
            units=self._units,
            quantities=self._quantities,
        )
        return Survey._from_parts(parts)

    def _with_derived(self, columns: pd.DataFrame, decision: Decision,
                      units: Mapping[str, str] | None = None) -> Survey:
        """A new Survey whose environment gains ``columns`` (derived from the survey, such as the
        mean guideline quotient), with ``decision`` in the log (see :func:`._assemble.derive`)."""
        parts = Parts(self._community, self._environment, self._locations, self._censored,
                      self._limits, self._log, self._sources, self._units, self._quantities)
        return Survey._from_parts(derive(parts, columns, decision, units))

    def describe(self) -> pd.DataFrame:
        """One row per table: its source, sites, columns, kinds of columns and a short note.

        Used by ``gradients check`` to show what would be analysed.
        """
        c = self._community
        values = c.to_numpy()
        zeros = float(np.mean(values == 0)) * 100 if values.size else 0.0
        kind = "whole numbers (counts)" if c.dtypes.eq(np.int64).all() else "decimals"
        rows = [{
            "table": "community", "source": self._sources.get("community") or "DataFrame",
            "sites": self.n_sites, "columns": self.n_taxa, "numeric": self.n_taxa,
            "categorical": 0, "censored": 0,
            "note": f"abundances as {kind}; {zeros:.0f}% zeros; total {values.sum():g}",
        }]
        num = self.numeric_environment()
        fac = self.factors()
        if self._environment.shape[1] or self._sources.get("environment"):
            levels = ", ".join(f"{k} ({fac[k].cat.categories.size} levels)" for k in fac.columns)
            n_cens = int(self._censored.to_numpy().sum())
            note = f"categorical: {levels}" if levels else "all numeric"
            if n_cens:
                cols = [k for k in self._censored.columns if self._censored[k].any()]
                note += f"; censored values in {', '.join(cols)}"
            rows.append({
                "table": "environment",
                "source": self._sources.get("environment") or "DataFrame",
                "sites": self.n_sites, "columns": self._environment.shape[1],
                "numeric": num.shape[1], "categorical": fac.shape[1], "censored": n_cens,
                "note": note,
            })
        if self._locations is not None:
            loc = self._locations
            xmin, ymin, xmax, ymax = loc.total_bounds
            rows.append({
                "table": "locations", "source": self._sources.get("locations") or "DataFrame",
                "sites": len(loc), "columns": 2, "numeric": 2, "categorical": 0, "censored": 0,
                "note": f"points in {loc.crs.to_string()}; x {xmin:g} to {xmax:g}, y {ymin:g} to "
                        f"{ymax:g}",
            })
        return pd.DataFrame(rows).set_index("table")

    def equals(self, other: object) -> bool:
        """True if `other` is a Survey with the same tables (the logs may differ)."""
        if not isinstance(other, Survey):
            return False
        same = (self._community.equals(other._community)
                and self._environment.equals(other._environment)
                and self._censored.equals(other._censored)
                and self._units == other._units and self._quantities == other._quantities)
        if self._locations is None or other._locations is None:
            return same and self._locations is None and other._locations is None
        return (same and self._locations.crs == other._locations.crs
                and bool(self._locations.geometry.geom_equals_exact(
                    other._locations.geometry, tolerance=1e-9).all()))

    def __repr__(self) -> str:
        env = self._environment
        lines = [f"Survey: {self.n_sites} sites x {self.n_taxa} taxa"]
        if env.shape[1]:
            num, fac = self.numeric_environment().shape[1], self.factors().shape[1]
            lines.append(f"  environment: {env.shape[1]} variables ({num} numeric, "
                         f"{fac} categorical): {format_items(list(env.columns), quote=False)}")
        else:
            lines.append("  environment: none")
        if self._locations is not None:
            lines.append(f"  locations: {len(self._locations)} points in "
                         f"{self._locations.crs.to_string()}")
        else:
            lines.append("  locations: none")
        if self._log:
            lines.append("  decisions:")
            lines.extend(f"    [{i}] {d.detail}" for i, d in enumerate(self._log, start=1))
        return "\n".join(lines)


def read_survey(
    community: str | os.PathLike[str] | pd.DataFrame,
    environment: str | os.PathLike[str] | pd.DataFrame | None = None,
    locations: str | os.PathLike[str] | pd.DataFrame | None = None,
    *,
    site_column: str = "site",
    sheet: str | int | Mapping[str, str | int] | None = None,
    layer: str | int | Mapping[str, str | int] | None = None,
    coordinates: tuple[str, str] | None = None,
    crs: Any = None,
    factors: Sequence[str] | None = None,
    shared_sites_only: bool = False,
    missing: str = "error",
    censored: str = "error",
    empty_sites: str = "error",
    empty_taxa: str = "drop",
    constant: str = "error",
    units: Mapping[str, str] | None = None,
    quantities: Mapping[str, str] | None = None,
) -> Survey:
    """Read a survey from files (or DataFrames) and validate it.

    Parameters
    ----------
    community, environment, locations : path or DataFrame
        Paths (str or Path) or DataFrames. Tables: CSV, TSV, semicolon- or '|'-separated text
        (delimiter found with :class:`csv.Sniffer`; decimal commas read in files not separated
        by commas), Excel ``.xlsx``. Locations also: GeoPackage ``.gpkg``, GeoJSON, Shapefile,
        or a table with coordinate columns. Text is read as UTF-8 (with or without a byte-order
        mark), UTF-16 with a byte-order mark, and otherwise as Latin-1 with a record in the log.
    site_column : str, default "site"
        The column holding site IDs in every table.
    sheet : str, int or mapping, optional
        Sheet of an ``.xlsx`` file, by name or 0-based index; a mapping such as
        ``{"community": "counts", "environment": "chemistry"}`` chooses per table. Default:
        the first sheet (recorded in the log when there are several).
    layer : str, int or mapping, optional
        Layer of a GeoPackage, as for `sheet`.
    coordinates, crs, factors, shared_sites_only, missing, censored, empty_sites, empty_taxa, \
constant, units, quantities
        As for :class:`Survey`.

    Returns
    -------
    Survey

    Raises
    ------
    gradients.InputError
        For any problem with the files or their content; the message names the file, the sites,
        the columns and the fix.

    Notes
    -----
    The file is checked before its content: it must exist, not be empty, hold what its
    extension says (an ``.xlsx`` that is really CSV text, or a ``.gpkg`` that is not an SQLite
    database, is refused with a message saying what it holds), and decode as text without
    control characters. Then the rules of :class:`Survey` apply, with line (text) or row
    (spreadsheet) numbers in the messages. See ``docs/data.md``.

    Examples
    --------
    >>> from importlib.resources import files
    >>> from gradients.data import read_survey
    >>> demo = files("gradients.data") / "demo"
    >>> s = read_survey(demo / "community.csv", demo / "environment.csv",
    ...                 demo / "locations.gpkg", censored="ros")
    >>> s.n_sites, s.n_taxa
    (60, 40)
    """
    opts = check_options(site_column, coordinates, crs, factors, shared_sites_only, missing,
                          censored, empty_sites, empty_taxa, constant,
                          None if units is None else dict(units),
                          None if quantities is None else dict(quantities))
    raws = {"community": raw_table(community, "community", sheet=sheet, layer=layer,
                              allow_paths=True)}
    if environment is not None:
        raws["environment"] = raw_table(environment, "environment", sheet=sheet, layer=layer,
                                   allow_paths=True)
    if locations is not None:
        raws["locations"] = raw_table(locations, "locations", sheet=sheet, layer=layer,
                                 allow_paths=True)
    def pick(option: object, role: str) -> object:
        return option.get(role) if isinstance(option, Mapping) else option

    shared = (same_table(environment, locations)
              and pick(sheet, "environment") == pick(sheet, "locations")
              and pick(layer, "environment") == pick(layer, "locations"))
    return Survey._from_parts(build_parts(raws, opts, shared_table=shared))
