"""Argument checks shared by every stage.

Each public function validates its arguments first, through these helpers, so that the same
argument has the same rule and the same message everywhere.
"""

from __future__ import annotations

import functools
import numbers
import warnings
from collections.abc import Callable, Mapping, Sequence
from typing import Any, TypeVar

import numpy as np
import pandas as pd

from ._errors import InputError, format_items

__all__ = [
    "ALTERNATIVES",
    "RNGLike",
    "align_strata",
    "check_alternative",
    "check_choice",
    "check_confidence_level",
    "check_labels_match",
    "check_n_jobs",
    "check_n_resamples",
    "check_rng",
    "check_unambiguous_series",
    "renamed_keywords",
    "seed_sequence",
]

ALTERNATIVES = ("greater", "less", "two-sided")

RNGLike = int | np.integer | np.random.Generator | np.random.SeedSequence | None


def _check_rng_kind(rng: object) -> None:
    """The one rule for an ``rng`` argument (SPEC 7), with the one set of messages.

    Accepted: None, a non-negative int, a ``numpy.random.Generator`` or a
    ``numpy.random.SeedSequence``. A legacy ``RandomState`` is refused with the fix.
    """
    if rng is None or isinstance(rng, np.random.Generator | np.random.SeedSequence):
        return
    if isinstance(rng, numbers.Integral) and not isinstance(rng, bool):
        if int(rng) < 0:
            raise InputError(f"`rng` must be a non-negative integer seed; got {rng}.")
        return
    if isinstance(rng, np.random.RandomState):
        raise InputError(
            "`rng` must be an int, a numpy.random.Generator or None; got a legacy "
            "numpy.random.RandomState. Pass numpy.random.default_rng(seed) instead."
        )
    raise InputError(f"`rng` must be an int, a numpy.random.Generator or None; got {rng!r}.")


def check_rng(rng: RNGLike) -> np.random.Generator:
    """Normalise ``rng`` (SPEC 7) to a ``numpy.random.Generator``, for direct draws.

    When `rng` is None, a new `numpy.random.Generator` is created using entropy from the
    operating system. A Generator is returned as it is (draws then advance it).
    """
    _check_rng_kind(rng)
    if isinstance(rng, np.random.Generator):
        return rng
    return np.random.default_rng(rng)


def seed_sequence(rng: RNGLike) -> np.random.SeedSequence:
    """Normalise ``rng`` (SPEC 7) to a root :class:`~numpy.random.SeedSequence`.

    The form the permutation engine needs, whose batch ``i`` draws from child ``i``. The
    same rule as :func:`check_rng` decides what is accepted: an int seeds the sequence
    directly; a :class:`numpy.random.Generator` is asked for 128 bits (so the same generator
    state gives the same plan); None draws fresh entropy from the operating system.
    """
    _check_rng_kind(rng)
    if isinstance(rng, np.random.SeedSequence):
        return rng
    if rng is None:
        return np.random.SeedSequence()
    if isinstance(rng, np.random.Generator):
        return np.random.SeedSequence(rng.integers(0, 2**32, size=4, dtype=np.uint64).tolist())
    return np.random.SeedSequence(int(rng))


def check_n_jobs(n_jobs: object) -> int | None:
    """Return ``n_jobs``: a positive number of workers, -1 (up to all cores, by the engine's
    size rule) or None (the workers of an enclosing ``joblib.parallel_config``; one outside)."""
    if n_jobs is None:
        return None
    ok = isinstance(n_jobs, numbers.Integral) and not isinstance(n_jobs, bool)
    if not ok or int(n_jobs) == 0 or int(n_jobs) < -1:
        raise InputError("`n_jobs` must be a positive integer or -1 (all cores), or None "
                         f"(joblib's setting); got {n_jobs!r}.")
    return int(n_jobs)


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


def check_confidence_level(confidence_level: object) -> float:
    """Return ``confidence_level`` as a float strictly between 0 and 1 (scipy's word)."""
    ok = isinstance(confidence_level, numbers.Real) and not isinstance(confidence_level, bool)
    if not ok or not 0 < float(confidence_level) < 1:  # type: ignore[arg-type]
        raise InputError("`confidence_level` must be a number between 0 and 1 (e.g. 0.95); got "
                         f"{confidence_level!r}.")
    return float(confidence_level)  # type: ignore[arg-type]


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


def _is_default_index(index: pd.Index) -> bool:
    return isinstance(index, pd.RangeIndex) and index.start == 0 and index.step == 1


def align_strata(
    values: object,
    sites: pd.Index | Sequence[object] | int,
    *,
    name: str = "strata",
    sites_name: str = "the sites",
) -> np.ndarray | None:
    """One group label per site, in site order: strata (or blocks) aligned to the site labels.

    Parameters
    ----------
    values : Series, sequence, array or None
        The group labels. A Series whose index holds the sites' labels is matched by label,
        whatever the index type (integer site IDs often come as a RangeIndex). A Series on a
        default 0..n-1 index that is not the sites' labels, and any other sequence, are taken
        in site order. Any other Series index must hold exactly the sites' labels.
    sites : Index or sequence of labels, or int
        The site labels in site order, or only the number of sites (then everything is taken
        in site order).
    name : str
        The argument's name in messages (``strata``, ``blocks``).
    sites_name : str
        What holds the sites, in messages (``the matrices``, ```scores```).

    Returns
    -------
    ndarray of object or None
        None when ``values`` is None.

    Raises
    ------
    InputError
        A default-index Series that could be read either way (see
        :func:`check_unambiguous_series`), labels that do not match (both sides named), the
        wrong number of labels, or missing labels (the sites named).
    """
    if values is None:
        return None
    labels = None if isinstance(sites, numbers.Integral) else pd.Index(sites)
    n = int(sites) if labels is None else len(labels)  # type: ignore[arg-type]
    if isinstance(values, pd.Series):
        if labels is None:
            out = values.reset_index(drop=True)
        else:
            check_unambiguous_series(values, labels, name)
            if len(values) == n and set(values.index) == set(labels):
                out = values.loc[labels]
            elif _is_default_index(values.index):
                out = values.reset_index(drop=True)
            else:
                check_labels_match(
                    labels, values.index, left_name=sites_name, right_name=f"`{name}`",
                    fix=f"Give `{name}` one label for every site of {sites_name}, indexed by "
                        "site label.")
                out = values.loc[labels]
    else:
        if isinstance(values, str):
            values = [values]
        if isinstance(values, np.ndarray) and values.ndim != 1:
            raise InputError(f"`{name}` must give one label per site (one dimension); got an "
                             f"array of shape {values.shape}.")
        out = pd.Series(values if isinstance(values, np.ndarray) else list(values))  # type: ignore[call-overload]
    if len(out) != n:
        raise InputError(f"`{name}` must give one label per site: {len(out)} labels for "
                         f"{n} sites.")
    missing = out.isna().to_numpy()
    if missing.any():
        if labels is None:
            where = np.flatnonzero(missing)
            raise InputError(f"`{name}` is missing for site position(s) "
                             f"{format_items(where.tolist(), quote=False)}; give every site one.")
        bad = labels[missing]
        raise InputError(f"`{name}` is missing for site(s) {format_items(bad)}; give every "
                         "site one.", sites=list(bad))
    return out.to_numpy(dtype=object)


_F = TypeVar("_F", bound=Callable[..., Any])


def renamed_keywords(renamed: Mapping[str, str]) -> Callable[[_F], _F]:
    """Accept the old names of renamed keywords for one more release, with a warning.

    ``renamed`` maps each old keyword to its new name. A call with an old keyword warns
    (:class:`DeprecationWarning`, pointing at the caller) and passes the value on under the new
    name; a call giving both names is a :class:`TypeError`, as Python's own "got multiple
    values" is. The wrapped function's signature shows only the new names.
    """

    def decorate(func: _F) -> _F:
        @functools.wraps(func)
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            for old, new in renamed.items():
                if old not in kwargs:
                    continue
                if new in kwargs:
                    raise TypeError(f"{func.__name__}() got both `{old}` and `{new}`; `{old}` is "
                                    f"the old name of `{new}`: pass only `{new}`.")
                warnings.warn(f"`{old}` is deprecated and will be removed in the next release; "
                              f"use `{new}` (same meaning).", DeprecationWarning, stacklevel=2)
                kwargs[new] = kwargs.pop(old)
            return func(*args, **kwargs)

        return wrapper  # type: ignore[return-value]

    return decorate
