"""Guideline quotients: measured values divided by the values of a screening table.

A screening table lists, for each variable, a value of one or more kinds (for freshwater
sediment, the consensus-based threshold and probable-effect concentrations of MacDonald,
Ingersoll & Berger 2000 [1]_) with its unit and source. No value is built into the code: the
table is the user's (``examples/screening/`` ships one to start from). The quotient of a sample
is its concentration over the screening value; the mean quotient over the variables of one
kind is a candidate contamination gradient that a hypothesis can use [1]_.

Screening values are not site-specific criteria: every output that shows quotients carries
:data:`CAUTION`.

References
----------
.. [1] MacDonald, D. D., Ingersoll, C. G. & Berger, T. A. (2000). Development and evaluation of
   consensus-based sediment quality guidelines for freshwater ecosystems. *Archives of
   Environmental Contamination and Toxicology* 39, 20-31.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from ._cells import parse_column
from ._files import RawTable, read_file
from ._units import parse_unit, registry

__all__ = ["CAUTION", "SCREENING_COLUMNS", "GuidelineQuotientsResult", "guideline_quotients",
           "read_screening"]

#: The caution every output that shows quotients carries.
CAUTION = ("Screening values are not site-specific criteria; defer to the local regulator and "
           "licensed professionals.")

#: Columns of a screening table (others, such as a note, are kept and ignored).
SCREENING_COLUMNS = ("variable", "value", "unit", "kind", "source")


def read_screening(screening: str | os.PathLike[str] | pd.DataFrame) -> pd.DataFrame:
    """Read and check a screening table: one row per variable and kind.

    Returns a DataFrame with columns ``variable, value, unit, kind, source`` (value as float,
    the others as stripped text), in file order.
    """
    if isinstance(screening, pd.DataFrame):
        raw = RawTable(frame=screening.reset_index(drop=True).astype(object),
                       source="the screening DataFrame", role="screening")
    elif isinstance(screening, str | os.PathLike):
        raw = read_file(screening, "screening")
    else:
        raise InputError("`screening` must be a path to a screening table (CSV or .xlsx) or a "
                         f"DataFrame; got {type(screening).__name__}.")
    frame = raw.frame
    names = {str(c).strip().casefold(): c for c in frame.columns}
    absent = [c for c in SCREENING_COLUMNS if c not in names]
    if absent:
        raise InputError(
            f"{raw.source[:1].upper() + raw.source[1:]} has no column(s) {format_items(absent)}; "
            f"a screening table needs {format_items(SCREENING_COLUMNS)} (one row per variable "
            f"and kind of value; found {format_items(map(str, frame.columns))}).",
            file=raw.path, columns=absent)
    table = pd.DataFrame({c: frame[names[c]] for c in SCREENING_COLUMNS})
    value = parse_column(table["value"], decimal_comma=raw.decimal_comma)
    bad = [raw.where(i) for i in range(len(table))
           if value.kinds[i] != 1 or not value.values[i] > 0]
    if bad:
        raise InputError(f"{raw.source[:1].upper() + raw.source[1:]}: the value is not a "
                         f"positive number in {format_items(bad, quote=False)}. Write each "
                         "screening value as a number such as 31.6.", file=raw.path)
    out = pd.DataFrame({"variable": [str(v).strip() for v in table["variable"]],
                        "value": value.values})
    for col in ("unit", "kind", "source"):
        cells = ["" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v).strip()
                 for v in table[col]]
        empty = [raw.where(i) for i, v in enumerate(cells) if not v]
        if empty:
            raise InputError(f"{raw.source[:1].upper() + raw.source[1:]}: the {col} is empty in "
                             f"{format_items(empty, quote=False)}. Every screening value needs "
                             "its unit, its kind (such as 'threshold' or 'probable effect') "
                             "and its source.", file=raw.path, columns=[col])
        out[col] = cells
    empty = [raw.where(i) for i, v in enumerate(out["variable"]) if not v]
    if empty:
        raise InputError(f"The variable is empty in {format_items(empty, quote=False)} of "
                         f"{raw.source}.", file=raw.path, columns=["variable"])
    keys = list(zip(out["variable"], out["kind"], strict=True))
    dupes = sorted({f"{v} ({k})" for v, k in keys if keys.count((v, k)) > 1})
    if dupes:
        raise InputError(f"{raw.source[:1].upper() + raw.source[1:]} lists {format_items(dupes)} "
                         "more than once; give one value per variable and kind.", file=raw.path)
    for unit, where in zip(out["unit"], range(len(out)), strict=True):
        if parse_unit(unit) is None:
            raise InputError(f"{raw.source[:1].upper() + raw.source[1:]}: the unit {unit!r} "
                             f"({raw.where(where)}) is not a unit that can be read; write it "
                             "as mg/kg, µg/L or the like.", file=raw.path, columns=["unit"])
    return out


@dataclass(frozen=True, repr=False)
class GuidelineQuotientsResult(ResultMixin):
    """Quotients of measured values over the screening values of one kind.

    Attributes
    ----------
    kind : str
        The kind of screening value used (``"probable effect"``, ``"threshold"``, ...).
    table : DataFrame
        One row per site: ``mean_quotient`` (mean over the variables compared), ``max_quotient``,
        ``n_compared``, ``n_exceeded`` (quotients above 1) and ``exceedance`` (the class in
        words, one of :attr:`exceedance_classes`).
    quotients : DataFrame
        Sites x variables: value / screening value (NaN where a value is missing).
    exceeds : DataFrame of bool
        Sites x variables: quotient above 1.
    values : DataFrame
        One row per variable compared: the screening value, its unit, the value in the unit of
        the column, the column's unit and the source.
    unmeasured : tuple of str
        Variables of the screening table (of this kind) that the environment does not hold.
    exceedance_classes : tuple of str
        The classes of ``table["exceedance"]``, from none to several values exceeded.
    notes : tuple of str
        The screening-only caution first, then what was assumed or left out.
    """

    kind: str
    table: pd.DataFrame
    quotients: pd.DataFrame
    exceeds: pd.DataFrame
    values: pd.DataFrame
    unmeasured: tuple[str, ...]
    exceedance_classes: tuple[str, ...]
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def n_sites(self) -> int:
        return len(self.table)

    @property
    def exceedances(self) -> pd.DataFrame:
        """One row per variable: its screening value, sites compared, sites above it, the
        largest quotient and the source."""
        rows = []
        for var in self.quotients.columns:
            q = self.quotients[var]
            rows.append({"variable": var, "screening_value": self.values.loc[var, "column_value"],
                         "unit": self.values.loc[var, "column_unit"], "kind": self.kind,
                         "n_compared": int(q.notna().sum()),
                         "n_exceeded": int(self.exceeds[var].sum()),
                         "max_quotient": float(q.max()) if q.notna().any() else np.nan,
                         "source": self.values.loc[var, "source"]})
        return pd.DataFrame(rows).set_index("variable")


def _classes(kind: str) -> tuple[str, ...]:
    return (f"no value above its {kind} value", f"one value above its {kind} value",
            f"two or more values above their {kind} values")


def _match(variable: str, columns: list[str]) -> str | None:
    if variable in columns:
        return variable
    folded = [c for c in columns if c.casefold() == variable.casefold()]
    return folded[0] if len(folded) == 1 else None


def guideline_quotients(
    environment: Any,
    screening: str | os.PathLike[str] | pd.DataFrame,
    *,
    kind: str = "probable effect",
    units: dict[str, str] | None = None,
) -> GuidelineQuotientsResult:
    """Quotients of each site's values over the values of a screening table, and their mean.

    Parameters
    ----------
    environment : Survey or DataFrame
        The measured values, one row per site (a Survey's environment, whose units are known;
        or a DataFrame indexed by site).
    screening : path or DataFrame
        The screening table: columns ``variable, value, unit, kind, source``, one row per
        variable and kind of value (CSV or ``.xlsx``). Variables are matched to columns by name
        (ignoring case when that is unambiguous).
    kind : str, default "probable effect"
        Which kind of value to use; quotients are computed for one kind at a time.
    units : dict, optional
        Units of the columns of a DataFrame `environment` (a Survey knows its own). A column
        without a known unit is taken to be in the unit of its screening value, with a note.

    Returns
    -------
    GuidelineQuotientsResult
        Per-site quotients and exceedance flags; ``table["mean_quotient"]``, the mean over the
        variables compared at each site.

    Raises
    ------
    gradients.InputError
        A malformed screening table, a kind it does not hold, a screening unit that cannot be
        converted to its column's unit, or no screening variable measured at all.

    Notes
    -----
    The quotient of site *i* and variable *j* is ``x_ij / s_j``, the screening value converted
    to the column's unit; the mean quotient of a site is the mean of its quotients over the
    variables compared (MacDonald et al. 2000 [1]_ use the mean of probable-effect quotients as
    an index of combined contamination). A value above its screening value (quotient above 1)
    is an exceedance. Variables of the screening table that were not measured are listed in
    `notes` and in ``unmeasured``, not an error. Values below detection are compared at the
    value the survey's censored-value policy gave them.

    Screening values are not site-specific criteria; defer to the local regulator and licensed
    professionals.

    References
    ----------
    .. [1] MacDonald, D. D., Ingersoll, C. G. & Berger, T. A. (2000). Development and
       evaluation of consensus-based sediment quality guidelines for freshwater ecosystems.
       *Archives of Environmental Contamination and Toxicology* 39, 20-31.

    Examples
    --------
    >>> import pandas as pd
    >>> env = pd.DataFrame({"Cu": [298.0, 74.5]}, index=["a", "b"])
    >>> table = pd.DataFrame({"variable": ["Cu"], "value": [149.0], "unit": ["mg/kg"],
    ...                       "kind": ["probable effect"], "source": ["example"]})
    >>> guideline_quotients(env, table, units={"Cu": "mg/kg"}).table["mean_quotient"].tolist()
    [2.0, 0.5]
    """
    if hasattr(environment, "environment") and hasattr(environment, "units"):
        frame = environment.environment
        known = dict(environment.units)
        censored = environment.censored
    elif isinstance(environment, pd.DataFrame):
        frame = environment
        known = dict(units or {})
        censored = None
    else:
        raise InputError("`environment` must be a Survey or a DataFrame of measured values "
                         f"(one row per site); got {type(environment).__name__}.")
    if not isinstance(kind, str) or not kind.strip():
        raise InputError(f"`kind` must be a kind of screening value such as 'probable effect'; "
                         f"got {kind!r}.")
    table = read_screening(screening)
    kinds = list(dict.fromkeys(table["kind"]))
    if kind not in kinds:
        raise InputError(f"The screening table has no values of kind {kind!r}; its kinds are "
                         f"{format_items(kinds)}. Choose one of these.")
    rows = table[table["kind"] == kind]
    numeric = [str(c) for c in frame.columns if pd.api.types.is_numeric_dtype(frame[c])
               and not pd.api.types.is_bool_dtype(frame[c])]
    ureg = registry()
    notes = [CAUTION]
    matched: dict[str, dict[str, Any]] = {}
    unmeasured: list[str] = []
    assumed: list[str] = []
    for _, row in rows.iterrows():
        column = _match(row["variable"], numeric)
        if column is None:
            unmeasured.append(row["variable"])
            continue
        screen_unit = parse_unit(row["unit"])
        column_unit = known.get(column)
        if column_unit is None:
            value, unit_text = float(row["value"]), screen_unit.text
            assumed.append(f"{column} ({screen_unit.text})")
        else:
            target = parse_unit(column_unit)
            try:
                value = float(ureg.Quantity(float(row["value"]), screen_unit.unit).to(
                    target.unit).magnitude)
            except Exception:  # pint: DimensionalityError or a unit without dimension (pH)
                raise InputError(
                    f"The screening value of {row['variable']!r} is in {row['unit']!r}, which "
                    f"cannot be converted to {column_unit!r}, the unit of column {column!r}. "
                    "Check the unit in the screening table or the column's unit.",
                    columns=[column]) from None
            unit_text = target.text
        matched[column] = {"screening_value": float(row["value"]),
                           "screening_unit": row["unit"], "column_value": value,
                           "column_unit": unit_text, "source": row["source"]}
    if not matched:
        raise InputError(
            f"None of the screening variables of kind {kind!r} "
            f"({format_items(list(rows['variable']))}) is a numeric column of the environment "
            f"(its columns are {format_items(numeric)}). Check the variable names.")
    if assumed:
        notes.append(f"No unit was declared for {format_items(assumed, quote=False)}; each was "
                     "taken to be in the unit of its screening value.")
    if unmeasured:
        notes.append(f"The screening table lists {format_items(unmeasured, quote=False)} "
                     f"({kind} values), which were not measured; they are left out of the "
                     "quotients.")
    values = pd.DataFrame.from_dict(matched, orient="index")
    values.index.name = "variable"
    data = frame.loc[:, list(matched)].astype(float)
    quotients = data / values["column_value"].to_numpy()
    exceeds = quotients > 1.0
    compared = quotients.notna()
    n_compared = compared.sum(axis=1)
    mean = quotients.mean(axis=1, skipna=True)
    n_exceeded = exceeds.sum(axis=1)
    classes = _classes(kind)
    exceedance = pd.Series(np.where(n_exceeded >= 2, classes[2],
                                    np.where(n_exceeded == 1, classes[1], classes[0])),
                           index=frame.index)
    out = pd.DataFrame({"mean_quotient": mean, "max_quotient": quotients.max(axis=1),
                        "n_compared": n_compared.astype(int),
                        "n_exceeded": n_exceeded.astype(int), "exceedance": exceedance},
                       index=frame.index)
    partial = int((n_compared < len(matched)).sum())
    if partial:
        notes.append(f"{partial} site(s) lack a value for some of the variables; their mean "
                     "quotient is over the variables they have (n_compared).")
    if censored is not None:
        cens = censored.reindex(columns=list(matched)).fillna(False).astype(bool)
        n_cens = int(cens.to_numpy().sum())
        if n_cens:
            notes.append(f"{n_cens} value(s) below a detection limit were compared at the "
                         "value the censored-value policy gave them.")
    quotients.columns.name = "variable"
    return GuidelineQuotientsResult(kind=kind, table=out, quotients=quotients,
                                    exceeds=exceeds, values=values, unmeasured=tuple(unmeasured),
                                    exceedance_classes=classes, notes=tuple(notes))
