"""Survey options: the keywords of `Survey` and `read_survey`, checked before any table is read.

The policy tables here name the choices of ``missing=``, ``empty_sites=``, ``empty_taxa=`` and
``constant=`` (``censored=`` is in :mod:`._censored`); :mod:`._policies` applies them.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._errors import InputError
from .._validation import check_choice
from ._censored import CENSORED_POLICIES
from ._units import check_quantities, check_units

__all__ = [
    "CONSTANT_POLICIES",
    "EMPTY_SITE_POLICIES",
    "EMPTY_TAXON_POLICIES",
    "MISSING_POLICIES",
    "Options",
    "check_options",
]

MISSING_POLICIES: dict[str, str] = {
    "error": "stop with an error listing the empty cells",
    "drop-sites": "drop every site with an empty environmental cell (from every table)",
    "drop-variables": "drop every environmental variable with an empty cell",
}
EMPTY_SITE_POLICIES = ("error", "drop")
EMPTY_TAXON_POLICIES = ("drop", "keep", "error")
CONSTANT_POLICIES = ("error", "drop")


@dataclass(frozen=True)
class Options:
    """The checked keyword options of one :class:`Survey` or :func:`read_survey` call."""

    site_column: str
    coordinates: tuple[str, str] | None
    crs: Any
    factors: tuple[str, ...]
    shared_sites_only: bool
    missing: str
    censored: str
    empty_sites: str
    empty_taxa: str
    constant: str
    units: dict[str, str] = field(default_factory=dict)
    quantities: dict[str, str] = field(default_factory=dict)


def check_options(
    site_column: object,
    coordinates: object,
    crs: object,
    factors: object,
    shared_sites_only: object,
    missing: object,
    censored: object,
    empty_sites: object,
    empty_taxa: object,
    constant: object,
    units: object = None,
    quantities: object = None,
) -> Options:
    """The options checked (types and policy names), with the messages of the suite."""
    if not isinstance(site_column, str) or not site_column.strip():
        raise InputError(f"`site_column` must be a column name (a non-empty str); got "
                         f"{site_column!r}.")
    coords = None
    if coordinates is not None:
        ok = (isinstance(coordinates, Sequence) and not isinstance(coordinates, str)
              and len(coordinates) == 2 and all(isinstance(c, str) for c in coordinates))
        if not ok:
            raise InputError("`coordinates` must be a pair of column names (x, y), for example "
                             f"('longitude', 'latitude'); got {coordinates!r}.")
        coords = (str(coordinates[0]), str(coordinates[1]))
    if factors is None:
        facs: tuple[str, ...] = ()
    elif isinstance(factors, str):
        facs = (factors,)
    elif isinstance(factors, Iterable) and all(isinstance(f, str) for f in factors):
        facs = tuple(factors)
    else:
        raise InputError(f"`factors` must be a list of column names; got {factors!r}.")
    if not isinstance(shared_sites_only, bool | np.bool_):
        raise InputError(f"`shared_sites_only` must be True or False; got {shared_sites_only!r}.")
    return Options(
        site_column=site_column,
        coordinates=coords,
        crs=crs,
        factors=facs,
        shared_sites_only=bool(shared_sites_only),
        missing=check_choice("missing", missing, tuple(MISSING_POLICIES)),
        censored=check_choice("censored", censored, tuple(CENSORED_POLICIES)),
        empty_sites=check_choice("empty_sites", empty_sites, EMPTY_SITE_POLICIES),
        empty_taxa=check_choice("empty_taxa", empty_taxa, EMPTY_TAXON_POLICIES),
        constant=check_choice("constant", constant, CONSTANT_POLICIES),
        units=check_units(units),
        quantities=check_quantities(quantities),
    )

