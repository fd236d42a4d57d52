"""Transforms of community and environmental tables that keep labels and say what they did."""

from __future__ import annotations

import dataclasses
import numbers
from collections.abc import Mapping

import numpy as np
import pandas as pd
import scipy.stats

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import check_choice
from ._tables import cells_text, community_frame, frame_from, numeric_array

__all__ = [
    "COMMUNITY_TRANSFORMS",
    "ENVIRONMENT_TRANSFORMS",
    "TransformResult",
    "ilr_basis",
    "transform_community",
    "transform_environment",
]


@dataclasses.dataclass(frozen=True, repr=False)
class TransformResult(ResultMixin):
    """A transformed table and an account of what was done to it.

    Attributes
    ----------
    table : pandas.DataFrame
        The transformed table, same site labels (index) as the input.
    method : str
        Short name of the transform (``"hellinger"``; ``"mixed"`` when columns got different
        transforms), suitable for :attr:`DistanceMatrix.transform`.
    description : str
        One or two sentences for a methods paragraph.
    details : pandas.DataFrame
        One row per input column: ``column``, ``method``, ``output`` (the column(s) it became),
        ``detail`` (parameters used) and, for ``log10``, ``skewness_before`` and
        ``skewness_after``.
    notes : tuple of str
        Warnings in words (empty sites, zeros replaced, missing values left missing).
    """

    table: pd.DataFrame
    method: str
    description: str
    details: pd.DataFrame
    notes: tuple[str, ...] = ()

    _repr_skip = ("notes", "table", "details")


# ---------------------------------------------------------------- community transforms
def _relative(x: np.ndarray) -> np.ndarray:
    tot = x.sum(axis=1, keepdims=True)
    return np.divide(x, tot, out=np.zeros_like(x), where=tot > 0)


def _hellinger(x: np.ndarray) -> np.ndarray:
    return np.sqrt(_relative(x))


def _wisconsin(x: np.ndarray) -> np.ndarray:
    top = x.max(axis=0, keepdims=True)
    y = np.divide(x, top, out=np.zeros_like(x), where=top > 0)
    return _relative(y)


def _log1p(x: np.ndarray) -> np.ndarray:
    return np.log1p(x)


def _presence(x: np.ndarray) -> np.ndarray:
    return (x > 0).astype(np.float64)


#: name -> (function, sentence for the methods paragraph, whether empty sites stay all-zero)
COMMUNITY_TRANSFORMS: dict[str, tuple] = {
    "relative": (_relative, "abundances divided by the site total (relative abundances)", True),
    "hellinger": (
        _hellinger,
        "Hellinger transform: square root of relative abundances (Legendre & Gallagher 2001)",
        True,
    ),
    "wisconsin": (
        _wisconsin,
        "Wisconsin double standardisation: each taxon divided by its maximum, then each site "
        "by its total",
        True,
    ),
    "log1p": (_log1p, "natural logarithm of abundance + 1, ln(x + 1)", False),
    "presence": (_presence, "reduced to presence (1) / absence (0)", False),
}


def transform_community(table: object, method: str) -> TransformResult:
    """Transform a community table (sites x taxa).

    Parameters
    ----------
    table : pandas.DataFrame or Survey-like
        Non-negative abundances, sites as rows; an object with a ``.community`` DataFrame is
        accepted too.
    method : {'relative', 'hellinger', 'wisconsin', 'log1p', 'presence'}
        ``relative``: x_ij / x_i+. ``hellinger``: sqrt(x_ij / x_i+) (Legendre & Gallagher
        2001 [1]_). ``wisconsin``: x_ij / max_i x_ij, then divided by the site total (Legendre &
        Legendre 2012, ch. 7 [2]_). ``log1p``: ln(x_ij + 1). ``presence``: 1 if x_ij > 0.

    Returns
    -------
    TransformResult
        ``.table`` keeps the site labels and taxon names.

    Notes
    -----
    A site with no taxa has no relative abundances (0/0). Such rows are kept as all-zero rows
    and named in ``notes``; :func:`dissimilarity` then reports the pairs that are undefined.

    References
    ----------
    .. [1] Legendre, P. & Gallagher, E. D. (2001). Ecologically meaningful transformations for
           ordination of species data. Oecologia 129, 271-280.
    .. [2] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import transform_community
    >>> t = pd.DataFrame({"a": [1, 3], "b": [3, 1]}, index=["s1", "s2"])
    >>> float(transform_community(t, "relative").table.loc["s1", "b"])
    0.75
    """
    check_choice("method", method, tuple(COMMUNITY_TRANSFORMS))
    frame, x = community_frame(table)
    func, sentence, zero_rows_matter = COMMUNITY_TRANSFORMS[method]
    y = func(x)
    notes: list[str] = []
    empty = frame.index[x.sum(axis=1) == 0]
    if zero_rows_matter and len(empty):
        notes.append(
            f"{len(empty)} site(s) with no taxa ({format_items(empty)}) have no relative "
            "abundances; they are left as rows of zeros."
        )
    out = pd.DataFrame(y, index=frame.index, columns=frame.columns)
    details = pd.DataFrame(
        {"column": list(frame.columns), "method": method, "output": list(frame.columns),
         "detail": ""}
    )
    description = f"Community table: {sentence}."
    return TransformResult(out, method, description, details, tuple(notes))


# ---------------------------------------------------------------- environmental transforms
ENVIRONMENT_TRANSFORMS = ("zscore", "log10", "clr", "ilr")
_ELEMENTWISE = ("zscore", "log10")
_COMPOSITIONAL = ("clr", "ilr")

#: Fraction of the detection limit put in place of a zero (Martín-Fernández et al. 2003).
ZERO_FRACTION = 0.65


def ilr_basis(parts: int) -> np.ndarray:
    """Orthonormal contrast matrix ``V`` (parts x parts - 1) with ``ilr = clr @ V``.

    Column ``i`` (1-based) balances the first ``i`` parts against part ``i + 1``:
    ``z_i = sqrt(i / (i + 1)) * ln(g(x_1..x_i) / x_{i+1})``, ``g`` the geometric mean; the
    Helmert-type basis of Egozcue et al. (2003).
    """
    v = np.zeros((parts, parts - 1))
    for i in range(1, parts):
        v[:i, i - 1] = np.sqrt(1.0 / (i * (i + 1)))
        v[i, i - 1] = -np.sqrt(i / (i + 1.0))
    return v


def _skew(values: np.ndarray) -> float:
    values = values[np.isfinite(values)]
    if values.size < 3 or np.ptp(values) == 0:
        return float("nan")
    return float(scipy.stats.skew(values, bias=False))


def _parse_plan(
    frame: pd.DataFrame, method: str | Mapping[object, str]
) -> list[tuple[tuple[object, ...], str]]:
    """[(columns, method), ...]; elementwise methods get one column per entry."""
    plan: list[tuple[tuple[object, ...], str]] = []
    if isinstance(method, str):
        check_choice("method", method, ENVIRONMENT_TRANSFORMS)
        if method in _COMPOSITIONAL:
            plan.append((tuple(frame.columns), method))
        else:
            plan.extend(((c,), method) for c in frame.columns)
        return plan
    if not isinstance(method, Mapping) or not method:
        raise InputError(
            "`method` must be a transform name or a non-empty mapping from column (or a tuple "
            f"of columns for a composition) to a transform name; got {method!r}."
        )
    seen: set[object] = set()
    for key, how in method.items():
        check_choice(f"method[{key!r}]", how, ENVIRONMENT_TRANSFORMS)
        cols = tuple(key) if isinstance(key, tuple) else (key,)
        missing = [c for c in cols if c not in frame.columns]
        if missing:
            raise InputError(
                f"Column(s) {format_items(missing)} named in `method` are not in the "
                f"environmental table (it has {format_items(frame.columns)}).",
                columns=missing,
            )
        again = [c for c in cols if c in seen]
        if again:
            raise InputError(
                f"Column(s) {format_items(again)} appear more than once in `method`; give each "
                "column one transform.",
                columns=again,
            )
        seen.update(cols)
        if how in _COMPOSITIONAL:
            if len(cols) < 2:
                raise InputError(
                    f"A {how} transform needs a composition of at least two parts; give the "
                    f"parts together as a tuple key, e.g. {{('sand', 'silt', 'clay'): '{how}'}}; "
                    f"got {key!r}.",
                    columns=list(cols),
                )
            plan.append((cols, how))
        else:
            plan.extend(((c,), how) for c in cols)
    return plan


def _per_column(value: object, column: object, name: str) -> float | None:
    if value is None:
        return None
    if isinstance(value, Mapping):
        value = value.get(column)
        if value is None:
            return None
    if not isinstance(value, numbers.Real) or not np.isfinite(value):
        raise InputError(f"`{name}` for column {column!r} must be a finite number; got {value!r}.")
    return float(value)


def transform_environment(
    table: object,
    method: str | Mapping[object, str],
    *,
    offset: float | Mapping[object, float] | None = None,
    detection_limit: float | Mapping[object, float] | None = None,
    ddof: int = 1,
) -> TransformResult:
    """Transform environmental variables (sites x variables).

    Parameters
    ----------
    table : pandas.DataFrame or Survey-like
        Sites as rows; an object with an ``.environment`` DataFrame is accepted too.
    method : str or mapping
        One of ``'zscore'``, ``'log10'``, ``'clr'``, ``'ilr'`` for the whole table (for
        ``clr``/``ilr`` the whole table is one composition), or a mapping from column name to
        method. A composition is given as a tuple key:
        ``{('sand', 'silt', 'clay'): 'ilr', 'copper': 'log10', 'ph': 'zscore'}``. Columns not
        named are passed through unchanged.
    offset : float or mapping column -> float, optional
        For ``log10``: use ``log10(x + offset)``. Without it, a zero or negative value is an
        error; choose the constant deliberately (and report it).
    detection_limit : float or mapping column -> float, optional
        For ``clr``/``ilr``: the detection limit of each part, in the table's units. A zero is
        replaced by ``0.65 * detection_limit`` (multiplicative replacement). Default: the
        smallest positive value of that part in the table.
    ddof : int, default 1
        Delta degrees of freedom of the standard deviation for ``zscore``; 1 gives the sample
        standard deviation, so z-scored columns have mean 0 and sample sd 1.

    Returns
    -------
    TransformResult
        ``.table`` keeps the site labels. ``zscore`` and ``log10`` keep column names; ``clr``
        gives ``clr_<part>`` columns and ``ilr`` gives ``ilr_1 .. ilr_(D-1)``, whose balances are
        spelled out in ``.details``. ``log10`` rows of ``.details`` carry the skewness (adjusted
        Fisher-Pearson, ``scipy.stats.skew(bias=False)``) before and after.

    Notes
    -----
    Centred log-ratio (Aitchison 1986 [1]_): ``clr(x)_j = ln(x_j / g(x))``, ``g`` the geometric
    mean of the parts; the coordinates sum to zero. Isometric log-ratio (Egozcue et al. 2003
    [2]_): ``ilr = clr @ V`` for the orthonormal Helmert-type basis of :func:`ilr_basis`, whose
    column ``i`` balances the first ``i`` parts against part ``i + 1``. Euclidean distances of
    ilr coordinates equal Aitchison distances.

    Zeros cannot be log-transformed. Each row is closed to proportions, and a zero in part ``j``
    is replaced by ``delta_j = 0.65 * detection_limit_j`` (as a proportion of the row total),
    the other parts being multiplied by ``1 - sum(delta)`` so that the row stays closed and the
    ratios among non-zero parts are unchanged: the multiplicative replacement of
    Martín-Fernández, Barceló-Vidal & Pawlowsky-Glahn (2003) [3]_, with their suggested 65 %
    of the detection limit.

    Missing values stay missing (z-scores use the available values); a composition with a
    missing part is an error.

    References
    ----------
    .. [1] Aitchison, J. (1986). The Statistical Analysis of Compositional Data. Chapman & Hall.
    .. [2] Egozcue, J. J., Pawlowsky-Glahn, V., Mateu-Figueras, G. & Barceló-Vidal, C. (2003).
           Isometric logratio transformations for compositional data analysis. Mathematical
           Geology 35, 279-300.
    .. [3] Martín-Fernández, J. A., Barceló-Vidal, C. & Pawlowsky-Glahn, V. (2003). Dealing with
           zeros and missing values in compositional data sets using nonparametric imputation.
           Mathematical Geology 35, 253-278.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import transform_environment
    >>> soil = pd.DataFrame({"sand": [60, 20], "silt": [30, 50], "clay": [10, 30]},
    ...                     index=["s1", "s2"])
    >>> res = transform_environment(soil, {("sand", "silt", "clay"): "clr"})
    >>> list(res.table.columns)
    ['clr_sand', 'clr_silt', 'clr_clay']
    """
    frame = frame_from(table, attribute="environment", name="environmental table")
    if not isinstance(ddof, numbers.Integral) or isinstance(ddof, bool) or ddof < 0:
        raise InputError(f"`ddof` must be a non-negative integer; got {ddof!r}.")
    plan = _parse_plan(frame, method)
    pieces: dict[object, pd.DataFrame] = {}
    rows: list[dict[str, object]] = []
    notes: list[str] = []
    sentences: list[str] = []
    for cols, how in plan:
        sub = frame.loc[:, list(cols)]
        x = numeric_array(
            sub, name="environmental table", allow_missing=how in _ELEMENTWISE,
            hint=" To transform only some columns, give `method` as a mapping, e.g. "
                 "{'ph': 'zscore', 'copper': 'log10'}; other columns pass through unchanged.",
        )
        if how == "zscore":
            (col,) = cols
            v = x[:, 0]
            ok = np.isfinite(v)
            if ok.sum() <= ddof:
                raise InputError(
                    f"Column {col!r} has {int(ok.sum())} value(s); a z-score needs more than "
                    f"ddof = {ddof}.",
                    columns=[col],
                )
            mean = float(np.mean(v[ok]))
            sd = float(np.std(v[ok], ddof=ddof))
            if not sd > 0:
                raise InputError(
                    f"Column {col!r} is constant (every site {mean:.6g}); it cannot be "
                    "z-scored and says nothing about differences among sites. Leave it out.",
                    columns=[col],
                )
            pieces[col] = pd.DataFrame({col: (v - mean) / sd}, index=frame.index)
            rows.append({"column": col, "method": how, "output": col,
                         "detail": f"mean {mean:.6g}, sd {sd:.6g} (ddof={ddof})"})
            if not ok.all():
                notes.append(f"Column {col!r}: {int((~ok).sum())} missing value(s) left missing.")
        elif how == "log10":
            (col,) = cols
            v = x[:, 0]
            c = _per_column(offset, col, "offset")
            shifted = v + (c or 0.0)
            bad = np.isfinite(shifted) & (shifted <= 0)
            if bad.any():
                lowest = float(np.nanmin(v))
                if c is None:
                    fix = (f"Pass offset={{{col!r}: c}} to use log10(x + c) with a constant c > "
                           f"{-lowest:.6g} chosen deliberately (and reported), or use 'zscore'.")
                else:
                    fix = f"The offset {c:.6g} is too small; it must exceed {-lowest:.6g}."
                raise InputError(
                    f"log10 needs positive values; column {col!r} has {int(bad.sum())} zero or "
                    f"negative value(s) (at {cells_text(bad[:, None], sub)}). {fix}",
                    sites=list(frame.index[bad]),
                    columns=[col],
                )
            y = np.log10(shifted)
            pieces[col] = pd.DataFrame({col: y}, index=frame.index)
            rows.append({
                "column": col, "method": how, "output": col,
                "detail": f"log10(x + {c:.6g})" if c else "log10(x)",
                "skewness_before": _skew(v), "skewness_after": _skew(y),
            })
        else:
            out, detail, note = _logratio(sub, x, how, detection_limit)
            pieces[cols[0]] = out
            for j, col in enumerate(cols):
                rows.append({"column": col, "method": how,
                             "output": ", ".join(map(str, out.columns)) if how == "ilr"
                             else out.columns[j],
                             "detail": detail})
            if note:
                notes.append(note)
            sentences.append(
                f"{format_items(cols, quote=False)} treated as one composition and "
                + ("centred log-ratio transformed (Aitchison 1986)" if how == "clr" else
                   "isometric log-ratio transformed with a Helmert-type balance basis "
                   "(Egozcue et al. 2003)")
                + (f"; {note}" if note else "")
            )
    # assemble in the original column order, compositions at the place of their first part
    first_of: dict[object, object] = {}
    for cols, _ in plan:
        for c in cols:
            first_of[c] = cols[0]
    parts: list[pd.DataFrame] = []
    passed: list[object] = []
    for c in frame.columns:
        if c not in first_of:
            parts.append(frame[[c]])
            passed.append(c)
        elif first_of[c] == c:
            parts.append(pieces[c])
    result = pd.concat(parts, axis=1)
    details = pd.DataFrame(rows)
    where = {c: k for k, c in enumerate(frame.columns)}
    details = details.iloc[np.argsort([where[c] for c in details["column"]], kind="stable")]
    details = details.reset_index(drop=True)
    if "skewness_before" not in details:
        details["skewness_before"] = np.nan
        details["skewness_after"] = np.nan
    used = sorted({how for _, how in plan})
    zs = [c for cols, how in plan if how == "zscore" for c in cols]
    lg = [c for cols, how in plan if how == "log10" for c in cols]
    if lg:
        sentences.insert(0, f"{format_items(lg, quote=False)} log10-transformed")
    if zs:
        sentences.insert(0, f"{format_items(zs, quote=False)} z-scored (mean 0, sd 1 with "
                            f"ddof={ddof})")
    if passed:
        sentences.append(f"{format_items(passed, quote=False)} left unchanged")
    description = "Environmental table: " + "; ".join(sentences) + "."
    name = used[0] if len(used) == 1 else "mixed"
    return TransformResult(result, name, description, details, tuple(notes))


def _logratio(
    sub: pd.DataFrame, x: np.ndarray, how: str, detection_limit: object
) -> tuple[pd.DataFrame, str, str]:
    cols = list(sub.columns)
    neg = x < 0
    if neg.any():
        raise InputError(
            f"A composition cannot have negative parts; negative at {cells_text(neg, sub)}.",
            sites=list(sub.index[np.nonzero(neg)[0]].unique()),
        )
    total = x.sum(axis=1)
    empty = total <= 0
    if empty.any():
        raise InputError(
            f"Every part of the composition {format_items(cols)} is zero at site(s) "
            f"{format_items(sub.index[empty])}; a log-ratio is undefined. Drop those sites.",
            sites=list(sub.index[empty]),
        )
    zero = x == 0
    note = ""
    detail = ""
    if zero.any():
        delta = np.zeros(len(cols))
        used_limits = []
        for j, col in enumerate(cols):
            if not zero[:, j].any():
                continue
            dl = _per_column(detection_limit, col, "detection_limit")
            source = "given"
            if dl is None:
                pos = x[:, j][x[:, j] > 0]
                if pos.size == 0:
                    raise InputError(
                        f"Part {col!r} is zero at every site; it cannot enter a log-ratio. "
                        "Leave it out of the composition.",
                        columns=[col],
                    )
                dl = float(pos.min())
                source = "smallest positive value"
            if dl <= 0:
                raise InputError(f"`detection_limit` for {col!r} must be positive; got {dl}.")
            delta[j] = ZERO_FRACTION * dl
            used_limits.append(f"{col} {dl:.6g} ({source})")
        prop = x / total[:, None]
        d_prop = delta[None, :] / total[:, None] * zero
        fill = d_prop.sum(axis=1)
        if np.any(fill >= 1):
            bad = sub.index[fill >= 1]
            raise InputError(
                f"Zero replacement would exceed the whole composition at site(s) "
                f"{format_items(bad)}; the detection limits are too large for those rows.",
                sites=list(bad),
            )
        prop = np.where(zero, d_prop, prop * (1 - fill)[:, None])
        x = prop
        nz = int(zero.sum())
        note = (f"{nz} zero(s) replaced multiplicatively by 0.65 x detection limit "
                f"(Martín-Fernández et al. 2003); limits: {'; '.join(used_limits)}")
        detail = "zeros replaced: 0.65 x detection limit"
    logx = np.log(x)
    clr = logx - logx.mean(axis=1, keepdims=True)
    if how == "clr":
        out = pd.DataFrame(clr, index=sub.index, columns=[f"clr_{c}" for c in cols])
        return out, detail or "clr", note
    v = ilr_basis(len(cols))
    z = clr @ v
    names = [f"ilr_{i}" for i in range(1, len(cols))]
    balances = "; ".join(
        f"ilr_{i} = ({', '.join(map(str, cols[:i]))} | {cols[i]})" for i in range(1, len(cols))
    )
    out = pd.DataFrame(z, index=sub.index, columns=names)
    return out, (detail + "; " if detail else "") + balances, note
