"""Argument checks shared by every stage.

Each public function validates its arguments first, through these helpers, so that the same
argument has the same rule and the same message everywhere.
"""

from __future__ import annotations

import numbers
from collections.abc import Sequence

import numpy as np
import pandas as pd

from ._errors import InputError, format_items

__all__ = [
    "ALTERNATIVES",
    "check_alternative",
    "check_choice",
    "check_labels_match",
    "check_n_resamples",
    "check_rng",
]

ALTERNATIVES = ("greater", "less", "two-sided")

RNGLike = int | np.integer | np.random.Generator | np.random.SeedSequence | None


def check_rng(rng: RNGLike) -> np.random.Generator:
    """Normalise ``rng`` (SPEC 7): an int, a ``numpy.random.Generator``, or None.

    When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
    operating system.
    """
    if isinstance(rng, np.random.Generator):
        return rng
    if rng is None or isinstance(rng, numbers.Integral | np.random.SeedSequence):
        if isinstance(rng, numbers.Integral) and not isinstance(rng, bool) and int(rng) < 0:
            raise InputError(f"`rng` must be a non-negative integer seed; got {rng}.")
        if isinstance(rng, bool):
            raise InputError(
                f"`rng` must be an int, a numpy.random.Generator or None; got {rng!r}."
            )
        return np.random.default_rng(rng)
    if isinstance(rng, np.random.RandomState):
        raise InputError(
            "`rng` must be an int, a numpy.random.Generator or None; got a legacy "
            "numpy.random.RandomState. Pass numpy.random.default_rng(seed) instead."
        )
    raise InputError(f"`rng` must be an int, a numpy.random.Generator or None; got {rng!r}.")


def check_alternative(alternative: str) -> str:
    """Return ``alternative`` if it is one of 'greater', 'less', 'two-sided'."""
    if alternative not in ALTERNATIVES:
        raise InputError(
            f"`alternative` must be one of {format_items(ALTERNATIVES)}; got {alternative!r}."
        )
    return alternative


def check_n_resamples(n_resamples: object, *, allow_zero: bool = False) -> int:
    """Return ``n_resamples`` as an int, requiring a positive whole number."""
    ok = isinstance(n_resamples, numbers.Integral) and not isinstance(n_resamples, bool)
    if not ok or int(n_resamples) < (0 if allow_zero else 1):
        kind = "a non-negative" if allow_zero else "a positive"
        raise InputError(f"`n_resamples` must be {kind} integer; got {n_resamples!r}.")
    return int(n_resamples)


def check_choice(name: str, value: object, choices: Sequence[str]) -> str:
    """Return ``value`` if it is one of ``choices``, else raise a message listing them."""
    if not isinstance(value, str) or value not in choices:
        raise InputError(f"`{name}` must be one of {format_items(choices)}; got {value!r}.")
    return value


def check_labels_match(
    left: pd.Index | Sequence[object],
    right: pd.Index | Sequence[object],
    *,
    left_name: str,
    right_name: str,
    fix: str = "",
) -> None:
    """Raise an :class:`InputError` unless two label sets hold the same sites.

    The message shows the labels found on only one side, both ways, and the fix.
    """
    left = pd.Index(left)
    right = pd.Index(right)
    if left.equals(right) or (len(left) == len(right) and set(left) == set(right)):
        return
    only_left = [x for x in left if x not in set(right)]
    only_right = [x for x in right if x not in set(left)]
    parts = []
    if only_left:
        parts.append(f"{len(only_left)} site(s) in {left_name} but not in {right_name}: "
                     f"{format_items(only_left)}")
    if only_right:
        parts.append(f"{len(only_right)} site(s) in {right_name} but not in {left_name}: "
                     f"{format_items(only_right)}")
    if not parts:
        parts.append(f"{left_name} and {right_name} hold different numbers of sites "
                     f"({len(left)} and {len(right)}); check for repeated labels")
    message = "; ".join(parts) + "."
    if fix:
        message += " " + fix
    raise InputError(message, sites=[*only_left, *only_right])


def check_unambiguous_series(values: pd.Series, labels: pd.Index, name: str) -> None:
    """Refuse a Series whose default index could be read as site labels or as positions.

    With integer site labels 0..n-1 in another order, a Series on a default RangeIndex (a
    column taken from a table in row order, say) could mean "one value per position" or
    "one value per site label", and the two give different answers.
    """
    index = values.index
    default = isinstance(index, pd.RangeIndex) and index.start == 0 and index.step == 1
    if (default and len(values) == len(labels) and not pd.Index(labels).equals(index)
            and set(index) == set(labels)):
        raise InputError(
            f"`{name}` is a Series on a default 0..{len(labels) - 1} index, and the site "
            "labels are those same integers in another order, so it is unclear whether its "
            "values follow the site labels or the order of the sites. Pass "
            f"`{name}.to_numpy()` for values in site order, or index the Series by site label "
            "explicitly (for example with set_index on the site column).")
