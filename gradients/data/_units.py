"""Units of environmental columns: read, checked against one quantity per column, converted.

Each numeric column may carry a unit (a units row under the header, a mapping given by the
caller, or one unit per row in a long-form laboratory file). Units are read with ``pint`` [1]_,
a library made for physical units; each column has one *quantity* (mass fraction in sediment or
soil, concentration in water, percent, pH, conductivity, ...), declared by the caller or
inferred from its units, and its values are converted to that quantity's one unit (mg/kg for
mass fractions, mg/L for concentrations in water, ...). A column whose units belong to different
quantities (mg/L among mg/kg) is an error that names the column and the rows.

References
----------
.. [1] Grecco, H. E. and contributors. Pint: makes units easy. https://pint.readthedocs.io
"""

from __future__ import annotations

import functools
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import InputError, format_items
from ._log import Decision

__all__ = ["QUANTITIES", "UNIT_WORDS", "convert_column", "is_unit", "parse_unit", "registry"]

#: Quantities a column can hold: name -> (the one unit values are converted to, pint
#: dimensionality of that unit, or None for pH, which is not a physical unit).
QUANTITIES: dict[str, tuple[str, str | None]] = {
    "mass fraction": ("mg/kg", "dimensionless"),
    "percent": ("%", "dimensionless"),
    "concentration in water": ("mg/L", "[mass] / [length] ** 3"),
    "amount concentration": ("mmol/L", "[substance] / [length] ** 3"),
    "amount content": ("cmol/kg", "[substance] / [mass]"),
    "conductivity": ("µS/cm", "[current] ** 2 * [time] ** 3 / [mass] / [length] ** 3"),
    "pH": ("pH", None),
    "temperature": ("degC", "[temperature]"),
    "length": ("m", "[length]"),
    "turbidity": ("NTU", "[turbidity]"),
}

#: Example spellings, for messages.
UNIT_WORDS = "mg/kg, µg/g, g/kg, %, mg/L, µg/L, µS/cm, mS/m, pH, mmol/L, cmol/kg, degC, m, NTU"

#: Dry-weight basis written after a unit ("mg/kg dw", "mg/kg dry weight"): the basis is dropped.
_DRY = re.compile(r"\s*[\(\[]?\s*(d\.?\s?w\.?|dry\s*(weight|wt\.?|mass|matter)?)\s*[\)\]]?\s*$",
                  re.I)
_PH = re.compile(r"^(ph|ph\s*units?|s\.?u\.?|std\.?\s*units?|standard\s*units?)$", re.I)
_AMBIGUOUS = {"ppm": ("mg/kg", "mg/L"), "ppb": ("µg/kg", "µg/L"), "ppt": ("ng/kg", "ng/L")}
_NUMBER = re.compile(r"^[+-]?(\d+([.,]\d*)?|[.,]\d+)([eE][+-]?\d+)?$")


@functools.lru_cache(maxsize=1)
def registry() -> Any:
    """The one ``pint.UnitRegistry`` of the suite (made on first use: pint loads slowly)."""
    import pint

    ureg = pint.UnitRegistry()
    ureg.define("nephelometric_turbidity_unit = [turbidity] = NTU")
    return ureg


@dataclass(frozen=True)
class ParsedUnit:
    """A unit as read: its text, pint's unit (None for pH) and its quantity."""

    text: str
    unit: Any
    quantity: str | None  # None: a physical unit of no listed quantity (kept as given)
    ambiguous: bool = False


_POWER = re.compile(r"(?<=[A-Za-z])([23])(?![\d.,])")


def _clean(text: str) -> str:
    out = _DRY.sub("", text.strip()).strip()
    return out.replace("μ", "µ")  # Greek mu as the micro sign


def _pint_text(text: str) -> str:
    """Spelling for pint: ``m3`` and ``m³`` as powers, the per-mille sign by name."""
    out = text.replace("³", "3").replace("²", "2").replace("‰", "permille")
    return _POWER.sub(r"**\1", out)


@functools.lru_cache(maxsize=512)
def parse_unit(text: str) -> ParsedUnit | None:
    """Read a unit written in a table (None when ``text`` is not a unit)."""
    raw = str(text).strip()
    if not raw or _NUMBER.match(raw) or not re.search(r"[A-Za-zµμ%°]", raw):
        return None
    if _PH.match(raw):
        return ParsedUnit("pH", None, "pH")
    cleaned = _clean(raw)
    if cleaned.lower() in _AMBIGUOUS:
        return ParsedUnit(cleaned, None, None, ambiguous=True)
    ureg = registry()
    try:
        unit = ureg.parse_units(_pint_text(cleaned))
    except Exception:  # pint raises several error types for text that is not a unit
        return None
    dim = str(unit.dimensionality)
    if dim == "dimensionless":
        names = getattr(unit, "_units", {})
        if unit == ureg.parse_units("percent"):
            quantity: str | None = "percent"
        elif names and all(str(ureg.parse_units(n).dimensionality) == "[mass]" for n in names):
            quantity = "mass fraction"  # a mass per mass: mg/kg, µg/g, g/kg
        else:
            quantity = None
    else:
        quantity = next((q for q, (_, d) in QUANTITIES.items() if d == dim), None)
    return ParsedUnit(cleaned, unit, quantity)


def is_unit(text: object) -> bool:
    """True when ``text`` reads as a unit (used to recognise a units row)."""
    if not isinstance(text, str):
        return False
    return parse_unit(text) is not None


def _rows_text(rows: Sequence[int], locate: Callable[[int], str], limit: int = 8) -> str:
    shown = [locate(i) for i in rows[:limit]]
    more = f" and {len(rows) - limit} more" if len(rows) > limit else ""
    return ", ".join(shown) + more


def convert_column(
    values: np.ndarray,
    units: Sequence[str | None],
    *,
    column: str,
    source: str,
    declared: str | None = None,
    locate: Callable[[int], str],
    file: str | None = None,
) -> tuple[np.ndarray, str | None, str | None, Decision | None]:
    """Convert one numeric column to the one unit of its quantity.

    Parameters
    ----------
    values : ndarray of float
        The column (detection limits in place of censored values, which convert alike).
    units : sequence of str or None
        The unit of each row (the same text repeated for a units row or a mapping).
    column, source : str
        Names for messages.
    declared : str, optional
        The quantity the caller declared (a key of :data:`QUANTITIES`).
    locate : callable
        Row position -> where it is in the input ("line 4"), for messages.

    Returns
    -------
    values : ndarray
        Converted values.
    unit, quantity : str or None
        The column's unit after conversion and its quantity (None when it has no unit).
    decision : Decision or None
        The record of a conversion (None when nothing was converted).
    """
    values = np.asarray(values, dtype=float)
    given = [u.strip() if isinstance(u, str) and u.strip() not in ("", "-") else None
             for u in units]
    rows_of: dict[str, list[int]] = {}
    for i, u in enumerate(given):
        if u is not None:
            rows_of.setdefault(u, []).append(i)
    if not rows_of:
        if declared is not None:
            canonical = QUANTITIES[declared][0]
            return values, canonical, declared, None
        return values, None, None, None
    no_unit = [i for i, u in enumerate(given) if u is None and not np.isnan(values[i])]
    if no_unit:
        raise InputError(
            f"{source}: column {column!r} gives a unit in some rows but not in "
            f"{_rows_text(no_unit, locate)}. Write the unit in every row of the column.",
            file=file, columns=[column])
    parsed: dict[str, ParsedUnit] = {}
    for text, rows in rows_of.items():
        p = parse_unit(text)
        if p is None:
            raise InputError(
                f"{source}: column {column!r} has the unit {text!r} "
                f"({_rows_text(rows, locate)}), which is not a unit that can be read. Write it "
                f"as a unit such as {UNIT_WORDS} (a dry-weight basis such as 'mg/kg dw' is "
                "accepted).", file=file, columns=[column])
        if p.ambiguous:
            solid, water = _AMBIGUOUS[p.text.lower()]
            raise InputError(
                f"{source}: column {column!r} is in {p.text!r} ({_rows_text(rows, locate)}), "
                f"which means {solid} in a solid and {water} in water. Write {solid!r} or "
                f"{water!r} instead.", file=file, columns=[column])
        parsed[text] = p
    ureg = registry()
    if declared is not None:
        target, dim = QUANTITIES[declared]
        for text, p in parsed.items():
            if declared == "pH":
                ok = p.quantity == "pH"
            elif p.unit is None or str(p.unit.dimensionality) != dim:
                ok = False
            else:  # a mass fraction may be written in % and a percentage in g/kg
                ok = dim != "dimensionless" or p.quantity in ("mass fraction", "percent")
            if not ok:
                raise InputError(
                    f"{source}: column {column!r} is declared as {declared} (in {target}) but "
                    f"{_rows_text(rows_of[text], locate)} are in {text!r}, which cannot be "
                    f"converted to {target}. Correct the unit, move these values to a column "
                    "of their own, or declare the column's quantity to match its unit.",
                    file=file, columns=[column])
        quantity: str | None = declared
    else:
        kinds = {p.quantity for p in parsed.values()}
        if kinds == {"percent", "mass fraction"}:
            kinds = {"mass fraction"}
        dims = {str(p.unit.dimensionality) if p.unit is not None else "pH"
                for p in parsed.values()}
        if len(kinds) > 1 or (None in kinds and len(dims) > 1):
            listed = "; ".join(f"{t!r} ({parsed[t].quantity or 'other'}) in "
                               f"{_rows_text(r, locate)}" for t, r in rows_of.items())
            raise InputError(
                f"{source}: column {column!r} mixes quantities that cannot be converted into "
                f"one another: {listed}. One column holds one quantity: put each quantity in "
                "a column of its own, or correct the units.", file=file, columns=[column])
        quantity = next(iter(kinds))
    if quantity is None:
        target = max(rows_of, key=lambda t: len(rows_of[t]))
        target = parsed[target].text
    else:
        target = QUANTITIES[quantity][0]
    out = values.copy()
    changes = []
    for text, rows in rows_of.items():
        p = parsed[text]
        if quantity == "pH" or p.text == target:
            continue
        idx = np.asarray(rows)
        to = ureg.parse_units(_pint_text(target))
        out[idx] = ureg.Quantity(values[idx], p.unit).to(to).magnitude
        one = ureg.Quantity(1.0, p.unit).to(to).magnitude
        linear = ureg.Quantity(0.0, p.unit).to(to).magnitude == 0
        how = f" (1 {p.text} = {one:g} {target})" if linear else ""
        changes.append(f"{len(rows)} value(s) from {p.text} to {target}{how}")
    decision = None
    if changes:
        decision = Decision(
            "units",
            f"{column} ({quantity or 'as given'}): {'; '.join(changes)}.",
            sum(len(rows_of[t]) for t in rows_of if parsed[t].text != target),
            columns=(column,))
    return out, target, quantity, decision


def check_quantities(quantities: object, name: str = "quantities") -> dict[str, str]:
    """A mapping column -> quantity, checked against :data:`QUANTITIES`."""
    if quantities is None:
        return {}
    if not isinstance(quantities, dict) or not all(isinstance(k, str) for k in quantities):
        raise InputError(f"`{name}` must map column names to quantities, e.g. "
                         f"{{'Cu': 'mass fraction'}}; got {quantities!r}.")
    bad = {k: v for k, v in quantities.items() if v not in QUANTITIES}
    if bad:
        raise InputError(f"`{name}` names unknown quantities {format_items(bad.values())} (for "
                         f"{format_items(bad)}); the quantities are {format_items(QUANTITIES)}.",
                         columns=list(bad))
    return dict(quantities)


def check_units(units: object, name: str = "units") -> dict[str, str]:
    """A mapping column -> unit text (each checked when its column is converted)."""
    if units is None:
        return {}
    if not isinstance(units, dict) or not all(isinstance(k, str) and isinstance(v, str)
                                              for k, v in units.items()):
        raise InputError(f"`{name}` must map column names to units, e.g. {{'Cu': 'mg/kg'}}; "
                         f"got {units!r}.")
    return dict(units)
