"""The one rule for compositions: parts must sum to their total, or be renormalised on request.

A composition (sand, silt and clay percentages; parts of a budget) is only meaningful when its
parts add up to the whole. :func:`check_closure` refuses samples whose parts sum to something
else than the total by more than a tolerance, naming them, unless the caller asks for them to be
renormalised; every renormalisation is recorded as a :class:`~gradients.data.Decision`. Samples
within the tolerance are closed exactly to the total (the tolerance allows for rounding in
laboratory reports, where three parts each rounded to a whole percent may sum to 99 or 101).
"""

from __future__ import annotations

import numbers

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from ._log import Decision

__all__ = ["DEFAULT_TOLERANCE", "check_closure"]

#: Default tolerance on the sum of a composition, in the units of its parts (percentage points
#: for percentages): three parts each rounded to a whole percent can sum to 98.5-101.5.
DEFAULT_TOLERANCE = 1.0


def _check_tolerance(tolerance: object) -> float:
    ok = isinstance(tolerance, numbers.Real) and not isinstance(tolerance, bool)
    if not ok or not np.isfinite(float(tolerance)) or float(tolerance) < 0:  # type: ignore[arg-type]
        raise InputError(f"`tolerance` must be a non-negative number (percentage points); got "
                         f"{tolerance!r}.")
    return float(tolerance)  # type: ignore[arg-type]


def check_closure(
    parts: pd.DataFrame,
    *,
    total: float = 100.0,
    tolerance: float = DEFAULT_TOLERANCE,
    renormalise: bool = False,
    what: str = "composition",
    key: str = "renormalise=True",
) -> tuple[pd.DataFrame, Decision | None]:
    """Check that each row of ``parts`` sums to ``total``; return the closed rows.

    Parameters
    ----------
    parts : DataFrame
        One row per sample (labelled), one numeric column per part.
    total : float, default 100
        The whole the parts must add up to.
    tolerance : float, default 1.0
        Largest accepted ``|sum - total|``. Rows within it are rescaled exactly to ``total``.
    renormalise : bool, default False
        Rescale rows outside the tolerance too (each part times ``total / sum``), with a record.
    what : str
        Name of the composition for messages ("sand, silt and clay").
    key : str
        How the caller switches renormalisation on, quoted in the message (a keyword or a
        project-file key).

    Returns
    -------
    closed : DataFrame
        ``parts`` with each complete row rescaled to ``total``; rows with a missing part are left
        as they are (missing).
    decision : Decision or None
        The record of the rows renormalised beyond the tolerance (None when there were none).

    Raises
    ------
    gradients.InputError
        A negative part; a row whose parts are all zero; a row outside the tolerance when
        ``renormalise`` is False. The message names the samples and their sums.
    """
    tol = _check_tolerance(tolerance)
    if not isinstance(renormalise, bool | np.bool_):
        raise InputError(f"`renormalise` must be True or False; got {renormalise!r}.")
    values = parts.to_numpy(dtype=float)

    def labels(rows: np.ndarray) -> list[str]:  # only the rows a message or record names
        return [str(parts.index[i]) for i in rows]

    complete = ~np.isnan(values).any(axis=1)
    negative = complete & (values < 0).any(axis=1)
    if negative.any():
        bad = labels(np.flatnonzero(negative))
        raise InputError(
            f"The {what} has negative parts at sample(s) {format_items(bad)}; parts of a "
            "composition are amounts and cannot be negative. Correct these values.",
            sites=bad, columns=[str(c) for c in parts.columns])
    sums = values.sum(axis=1)
    zero = complete & (sums == 0)
    if zero.any():
        bad = labels(np.flatnonzero(zero))
        raise InputError(
            f"Every part of the {what} is zero at sample(s) {format_items(bad)}, so they cannot "
            "be closed to their total. Correct or remove these samples.",
            sites=bad, columns=[str(c) for c in parts.columns])
    off = complete & (np.abs(sums - total) > tol)
    decision = None
    if off.any():
        idx = np.flatnonzero(off)
        named = labels(idx)
        listed = format_items([f"{name} (sum {sums[i]:g})" for name, i in zip(named, idx,
                                                                              strict=True)],
                              quote=False)
        if not renormalise:
            raise InputError(
                f"The parts of the {what} do not sum to {total:g} (within {tol:g}) at "
                f"{len(idx)} sample(s): {listed}. Check these rows for a typing error or a part "
                f"missing from the table; or, if the parts are on purpose given out of a "
                f"different whole, ask for them to be renormalised with {key} (each part is "
                f"then scaled by {total:g}/sum, and the samples are listed in the input "
                "decisions).",
                sites=named, columns=[str(c) for c in parts.columns])
        decision = Decision(
            "renormalise",
            f"The {what} did not sum to {total:g} (within {tol:g}) at {len(idx)} sample(s) "
            f"and was renormalised (each part scaled by {total:g}/sum): {listed}.",
            len(idx), sites=tuple(named),
            columns=tuple(str(c) for c in parts.columns))
    closed = values.copy()
    closed[complete] = values[complete] * (total / sums[complete])[:, None]
    return pd.DataFrame(closed, index=parts.index, columns=parts.columns), decision
