"""Soil texture classes from sand, silt and clay percentages (USDA classes).

The twelve USDA texture classes are defined in the Soil Survey Manual [1]_ by inequalities on the
percentages of sand (2-0.05 mm), silt (0.05-0.002 mm) and clay (< 0.002 mm) of the fine-earth
fraction. :data:`USDA_RULES` writes those inequalities once, as data: the classifier evaluates
them and :func:`gradients.plot.texture_triangle` draws the class boundaries from the same rows, so
the table and the figure cannot disagree.

References
----------
.. [1] Soil Science Division Staff (2017). *Soil Survey Manual*. USDA Handbook 18. Government
   Printing Office, Washington, D.C. (Chapter 3, soil texture: the class definitions.)
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import check_choice
from ._compositions import DEFAULT_TOLERANCE, check_closure

__all__ = ["TEXTURE_SYSTEMS", "USDA_CLASSES", "USDA_RULES", "Constraint", "texture_class"]

#: One linear inequality ``a_sand * sand + a_silt * silt + a_clay * clay  op  bound`` on
#: percentages; coefficients are whole numbers so that the test is exact (``silt + 1.5 clay <
#: 15`` is written ``2 silt + 3 clay < 30``).
Constraint = tuple[int, int, int, str, int]

_S, _Z, _C = (1, 0, 0), (0, 1, 0), (0, 0, 1)


def _on(part: tuple[int, int, int], op: str, bound: int) -> Constraint:
    return (*part, op, bound)


#: The USDA classes as the Soil Survey Manual defines them: class -> branches (a class holds a
#: point when every inequality of one of its branches holds). Bounds the other inequalities
#: already imply (the sand limits of loamy sand, the 43 % sand of the second sandy loam branch)
#: are kept as the Manual states them.
USDA_RULES: dict[str, tuple[tuple[Constraint, ...], ...]] = {
    "sand": ((_on(_S, ">", 85), (0, 2, 3, "<", 30)),),
    "loamy sand": ((_on(_S, ">=", 70), _on(_S, "<=", 91), (0, 2, 3, ">=", 30),
                    (0, 1, 2, "<", 30)),),
    "sandy loam": (
        (_on(_C, ">=", 7), _on(_C, "<", 20), _on(_S, ">", 52), (0, 1, 2, ">=", 30)),
        (_on(_C, "<", 7), _on(_Z, "<", 50), _on(_S, ">", 43), (0, 1, 2, ">=", 30)),
    ),
    "loam": ((_on(_C, ">=", 7), _on(_C, "<", 27), _on(_Z, ">=", 28), _on(_Z, "<", 50),
              _on(_S, "<=", 52)),),
    "silt loam": (
        (_on(_Z, ">=", 50), _on(_C, ">=", 12), _on(_C, "<", 27)),
        (_on(_Z, ">=", 50), _on(_Z, "<", 80), _on(_C, "<", 12)),
    ),
    "silt": ((_on(_Z, ">=", 80), _on(_C, "<", 12)),),
    "sandy clay loam": ((_on(_C, ">=", 20), _on(_C, "<", 35), _on(_Z, "<", 28),
                         _on(_S, ">", 45)),),
    "clay loam": ((_on(_C, ">=", 27), _on(_C, "<", 40), _on(_S, ">", 20), _on(_S, "<=", 45)),),
    "silty clay loam": ((_on(_C, ">=", 27), _on(_C, "<", 40), _on(_S, "<=", 20)),),
    "sandy clay": ((_on(_C, ">=", 35), _on(_S, ">", 45)),),
    "silty clay": ((_on(_C, ">=", 40), _on(_Z, ">=", 40)),),
    "clay": ((_on(_C, ">=", 40), _on(_S, "<=", 45), _on(_Z, "<", 40)),),
}

#: The USDA class names, in the order of :data:`USDA_RULES` (coarse to fine, roughly).
USDA_CLASSES: tuple[str, ...] = tuple(USDA_RULES)

#: Texture systems: name -> (rules, class names). A new system is one entry.
TEXTURE_SYSTEMS: dict[str, tuple[dict[str, tuple[tuple[Constraint, ...], ...]], tuple[str, ...]]]
TEXTURE_SYSTEMS = {"usda": (USDA_RULES, USDA_CLASSES)}

#: Percentages are compared as whole multiples of 1e-9 percentage points, in integer arithmetic:
#: silt is then exactly 100 - sand - clay, so the classes cover the triangle without gaps or
#: overlaps whatever the rounding of the input.
RESOLUTION = 10**9

_OPS = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal}


def class_masks(sand: np.ndarray, silt: np.ndarray, clay: np.ndarray,
                rules: dict[str, tuple[tuple[Constraint, ...], ...]]) -> np.ndarray:
    """Boolean array (classes x samples): which class inequalities each sample satisfies.

    ``sand``, ``silt`` and ``clay`` are int64 multiples of :data:`RESOLUTION` summing exactly to
    ``100 * RESOLUTION``.
    """
    out = np.zeros((len(rules), len(sand)), dtype=bool)
    sums: dict[tuple[int, int, int], np.ndarray] = {}  # each linear form computed once
    tests: dict[tuple[int, int, int, str, int], np.ndarray] = {}  # each inequality once
    parts = {(1, 0, 0): sand, (0, 1, 0): silt, (0, 0, 1): clay}
    ok = np.empty(len(sand), dtype=bool)
    for k, branches in enumerate(rules.values()):
        for branch in branches:
            ok.fill(True)
            for constraint in branch:
                if constraint not in tests:
                    form = constraint[:3]
                    if form not in sums:
                        a_s, a_z, a_c = form
                        sums[form] = parts[form] if form in parts else (
                            a_s * sand + a_z * silt + a_c * clay)
                    tests[constraint] = _OPS[constraint[3]](sums[form],
                                                            constraint[4] * RESOLUTION)
                ok &= tests[constraint]
            out[k] |= ok
    return out


def _as_series(value: Any, name: str) -> pd.Series:
    if isinstance(value, pd.Series):
        s = value
    elif isinstance(value, pd.DataFrame):
        raise InputError(f"`{name}` must be one column of percentages (a Series or an array), "
                         "not a DataFrame; pass frame[\"" + name + "\"].")
    else:
        arr = np.atleast_1d(np.asarray(value))
        if arr.ndim != 1:
            raise InputError(f"`{name}` must be one-dimensional; got shape {arr.shape}.")
        if arr.dtype.kind in "fiu":  # numbers already: no cell-by-cell conversion
            return pd.Series(arr.astype(float, copy=False))
        s = pd.Series(arr.astype(object))
    if pd.api.types.is_numeric_dtype(s.dtype) and not pd.api.types.is_bool_dtype(s.dtype):
        return s.astype(float)
    numbers = pd.to_numeric(s, errors="coerce")
    bad = numbers.isna() & s.notna()
    if bool(bad.any()):
        rows = [str(i) for i in s.index[bad.to_numpy()]]
        raise InputError(f"`{name}` must hold numbers (percentages); sample(s) "
                         f"{format_items(rows)} do not.", sites=rows, columns=[name])
    return numbers.astype(float)


def texture_class(
    sand: Sequence[float] | np.ndarray | pd.Series,
    silt: Sequence[float] | np.ndarray | pd.Series,
    clay: Sequence[float] | np.ndarray | pd.Series,
    *,
    system: str = "usda",
    renormalise: bool = False,
    tolerance: float = DEFAULT_TOLERANCE,
) -> pd.Series:
    """The texture class of each sample from its sand, silt and clay percentages.

    Parameters
    ----------
    sand, silt, clay : Series or array-like of float
        Percentages of the fine-earth fraction. Series are aligned by their labels (site IDs),
        which the result keeps; arrays must have the same length.
    system : {"usda"}, default "usda"
        The classification: the twelve USDA classes of the Soil Survey Manual [1]_.
    renormalise : bool, default False
        Samples whose parts sum to more than `tolerance` away from 100 are an error (naming
        them); with True they are rescaled to 100 instead (each part times 100/sum), and the
        result's ``attrs["decision"]`` records which.
    tolerance : float, default 1.0
        Percentage points by which a sum may miss 100 (rounding in laboratory reports). Samples
        within it are closed exactly to 100 before they are classified.

    Returns
    -------
    Series of category
        Named ``"texture_class"``, one class name per sample (the Manual's names, such as
        ``"silty clay loam"``), indexed like the inputs; missing where a part is missing. The
        categories are all the classes of the system, in a fixed order.

    Raises
    ------
    gradients.InputError
        Inputs that are not numbers, Series whose labels differ, negative parts, all parts zero,
        or sums outside the tolerance (without `renormalise`); each message names the samples.

    Notes
    -----
    The classes are the Manual's inequalities, for example loam is 7 to less than 27 % clay, 28
    to less than 50 % silt and 52 % or less sand, and sand is more than 85 % sand with silt plus
    1.5 times clay below 15 (:data:`USDA_RULES` lists them all). A point on a boundary belongs to
    the class whose inequality includes it: 52 % sand with 10 % clay is loam, 20 % clay with
    less than 28 % silt is sandy clay loam. To make the inequalities exact, the closed
    percentages are compared as integer multiples of 1e-9 percentage points, with silt taken as
    100 - sand - clay; every composition then falls in exactly one class.

    References
    ----------
    .. [1] Soil Science Division Staff (2017). *Soil Survey Manual*. USDA Handbook 18.
       Government Printing Office, Washington, D.C.

    Examples
    --------
    >>> texture_class([40, 65], [40, 25], [20, 10]).tolist()
    ['loam', 'sandy loam']
    """
    check_choice("system", system, tuple(TEXTURE_SYSTEMS))
    rules, classes = TEXTURE_SYSTEMS[system]
    parts = [_as_series(v, n) for v, n in ((sand, "sand"), (silt, "silt"), (clay, "clay"))]
    given = [isinstance(v, pd.Series) for v in (sand, silt, clay)]
    if all(given):
        index = parts[0].index
        for p, n in zip(parts[1:], ("silt", "clay"), strict=True):
            if not (p.index.equals(index) or (len(p) == len(index) and set(p.index) == set(index))):
                raise InputError(
                    f"`sand` and `{n}` are labelled by different samples; pass the three columns "
                    "of one table (their labels are the site IDs).")
        parts = [p if p.index.equals(index) else p.loc[index] for p in parts]
    else:
        lengths = {len(p) for p in parts}
        if len(lengths) != 1:
            raise InputError(f"`sand`, `silt` and `clay` must have the same length; got "
                             f"{[len(p) for p in parts]}.")
        index = next((p.index for p, g in zip(parts, given, strict=True) if g), parts[0].index)
        parts = [pd.Series(p.to_numpy(), index=index) for p in parts]
    frame = pd.DataFrame({"sand": parts[0], "silt": parts[1], "clay": parts[2]}, index=index)
    closed, decision = check_closure(frame, total=100.0, tolerance=tolerance,
                                     renormalise=renormalise, what="sand, silt and clay "
                                     "percentages", key="renormalise=True")
    values = closed.to_numpy()
    complete = ~np.isnan(values).any(axis=1)
    labels = np.full(len(values), -1, dtype=np.int64)
    if complete.any():
        s = np.rint(values[complete, 0] * RESOLUTION).astype(np.int64)
        c = np.rint(values[complete, 2] * RESOLUTION).astype(np.int64)
        z = 100 * RESOLUTION - s - c
        masks = class_masks(s, z, c, rules)
        counts = masks.sum(axis=0)
        if np.any(counts != 1):  # pragma: no cover - the rules partition the triangle (tested)
            raise AssertionError("texture rules do not give exactly one class")
        labels[complete] = np.argmax(masks, axis=0)
    out = pd.Series(pd.Categorical.from_codes(labels, categories=list(classes)), index=index,
                    name="texture_class")
    if decision is not None:
        out.attrs["decision"] = decision
    return out
