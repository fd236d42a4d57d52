"""Community dissimilarities (and Gower's coefficient for mixed tables)."""

from __future__ import annotations

import dataclasses
import numbers
from collections.abc import Callable, Mapping, Sequence

import numpy as np
import pandas as pd
import scipy.sparse
from scipy.sparse.csgraph import connected_components, dijkstra

from .._errors import InputError, format_items
from .._validation import check_choice
from . import _kernels as K
from ._matrix import DistanceMatrix
from ._tables import (
    community_frame,
    condensed_positions_for,
    frame_from,
    pair_of_position,
)
from ._transforms import COMMUNITY_TRANSFORMS, transform_community

__all__ = ["EMPTY_OPTIONS", "METRICS", "dissimilarity", "extend_dissimilarity", "gower_distance"]

EMPTY_OPTIONS = ("error", "zero", "max", "alike")
GOWER_TYPES = ("quantitative", "qualitative", "dichotomous")


@dataclasses.dataclass(frozen=True)
class Metric:
    """One dissimilarity: how to compute it and what data it takes.

    ``compute(x, out)`` fills the condensed ``out`` from the float64 table ``x`` and writes NaN
    for undefined pairs. ``data`` is ``"abundance"`` (non-negative numbers), ``"presence"``
    (reduced to 0/1 first), ``"signed"`` (any real numbers) or ``"mixed"`` (Gower).
    ``upper`` is the largest value the coefficient can take (None if unbounded); ``empty_site``
    says whether a single empty site already makes its pairs undefined.
    """

    compute: Callable[[np.ndarray, np.ndarray], None]
    data: str
    upper: float | None
    reference: str
    empty_site: bool = False


def _totals(x: np.ndarray) -> np.ndarray:
    return x.sum(axis=1)


def _bray_curtis(x: np.ndarray, out: np.ndarray) -> None:
    K.bray_curtis(x, _totals(x), out)


def _min_kind(kind: int) -> Callable[[np.ndarray, np.ndarray], None]:
    def compute(x: np.ndarray, out: np.ndarray) -> None:
        K.min_based(x, _totals(x), kind, out)

    return compute


def _euclidean(x: np.ndarray, out: np.ndarray) -> None:
    K.squared_euclidean(x, out, True)


def _manhattan(x: np.ndarray, out: np.ndarray) -> None:
    K.manhattan(x, out)


def _canberra(x: np.ndarray, out: np.ndarray) -> None:
    K.canberra(x, out)


def _rows_scaled(x: np.ndarray, scale: np.ndarray) -> np.ndarray:
    return np.divide(x, scale[:, None], out=np.zeros_like(x), where=scale[:, None] > 0)


def _hellinger(x: np.ndarray, out: np.ndarray) -> None:
    y = np.sqrt(_rows_scaled(x, _totals(x)))
    K.squared_euclidean(np.ascontiguousarray(y), out, True)
    _undefined_for_empty(out, _totals(x) == 0)


def _chord(x: np.ndarray, out: np.ndarray) -> None:
    norm = np.sqrt(np.einsum("ij,ij->i", x, x))
    K.squared_euclidean(np.ascontiguousarray(_rows_scaled(x, norm)), out, True)
    _undefined_for_empty(out, norm == 0)


def _chi_square(x: np.ndarray, out: np.ndarray) -> None:
    col = x.sum(axis=0)
    keep = col > 0
    x = x[:, keep]
    col = col[keep]
    grand = col.sum()
    rows = _totals(x)
    y = _rows_scaled(x, rows) / np.sqrt(col / grand)[None, :]
    K.squared_euclidean(np.ascontiguousarray(y), out, True)
    _undefined_for_empty(out, rows == 0)


def _morisita_horn(x: np.ndarray, out: np.ndarray) -> None:
    tot = _totals(x)
    sq = np.einsum("ij,ij->i", x, x)
    lam = np.divide(sq, tot * tot, out=np.zeros_like(tot), where=tot > 0)
    K.morisita_horn(x, tot, lam, out)


def _gower_not_here(x: np.ndarray, out: np.ndarray) -> None:
    raise RuntimeError("Gower's coefficient is computed by gower_distance(), not from an array.")


def _undefined_for_empty(out: np.ndarray, empty: np.ndarray) -> None:
    n = empty.size
    for i in np.flatnonzero(empty):
        out[condensed_positions_for(int(i), n)] = np.nan


#: metric name -> Metric. Adding a dissimilarity is one function and one entry here.
METRICS: dict[str, Metric] = {
    "bray-curtis": Metric(_bray_curtis, "abundance", 1.0, "Bray & Curtis 1957"),
    "jaccard": Metric(_min_kind(K.MIN_JACCARD), "presence", 1.0, "Jaccard 1912"),
    "sorensen": Metric(_min_kind(K.MIN_SORENSEN), "presence", 1.0, "Sørensen 1948"),
    "ruzicka": Metric(_min_kind(K.MIN_RUZICKA), "abundance", 1.0, "Růžička 1958"),
    "kulczynski": Metric(_min_kind(K.MIN_KULCZYNSKI), "abundance", 1.0, "Kulczynski 1928",
                         empty_site=True),
    "hellinger": Metric(_hellinger, "abundance", float(np.sqrt(2.0)),
                        "Rao 1995; Legendre & Gallagher 2001", empty_site=True),
    "chord": Metric(_chord, "abundance", float(np.sqrt(2.0)), "Orlóci 1967", empty_site=True),
    "chi-square": Metric(_chi_square, "abundance", None,
                         "Legendre & Legendre 2012, D16", empty_site=True),
    "euclidean": Metric(_euclidean, "signed", None, "common practice"),
    "manhattan": Metric(_manhattan, "signed", None, "common practice"),
    "canberra": Metric(_canberra, "signed", None, "Lance & Williams 1966"),
    "morisita-horn": Metric(_morisita_horn, "abundance", 1.0, "Horn 1966", empty_site=True),
    "gower": Metric(_gower_not_here, "mixed", 1.0, "Gower 1971"),
}


def dissimilarity(
    table: object,
    metric: str = "bray-curtis",
    *,
    transform: str | None = None,
    empty: str = "error",
    binary: bool | None = None,
    extended: bool = False,
    saturated: float | None = None,
    dtype: type | np.dtype | None = None,
    weights: Mapping[object, float] | Sequence[float] | None = None,
    variable_types: Mapping[object, str] | None = None,
) -> DistanceMatrix:
    """Dissimilarities between the sites (rows) of a community table.

    Parameters
    ----------
    table : pandas.DataFrame or Survey-like
        Sites x taxa (abundances, cover or presence), site labels as the index; an object with a
        ``.community`` DataFrame is accepted too. For ``metric='gower'`` any mix of numeric,
        categorical and boolean columns.
    metric : str, default 'bray-curtis'
        One of ``'bray-curtis'``, ``'jaccard'``, ``'sorensen'``, ``'ruzicka'``,
        ``'kulczynski'``, ``'hellinger'``, ``'chord'``, ``'chi-square'``, ``'euclidean'``,
        ``'manhattan'``, ``'canberra'``, ``'morisita-horn'``, ``'gower'``. Formulas in Notes and
        in ``docs/distance.md``.
    transform : str, optional
        A community transform applied first (see :func:`transform_community`): ``'relative'``,
        ``'hellinger'``, ``'wisconsin'``, ``'log1p'``, ``'presence'``. Recorded on the result.
    empty : {'error', 'zero', 'max', 'alike'}, default 'error'
        What to do with pairs the coefficient leaves undefined (0/0), which come from sites with
        no taxa. ``'error'`` raises an :class:`InputError` naming the empty sites and the pairs.
        ``'zero'`` sets every undefined value to 0; ``'max'`` to the coefficient's largest value
        (1, or sqrt(2) for chord and Hellinger). ``'alike'`` treats two empty sites as
        identical (0) and an empty site as maximally different (the largest value) from any
        site with taxa. ``'max'`` and ``'alike'`` need a bounded coefficient.
    binary : bool, optional
        ``True`` reduces the table to presence/absence before a quantitative coefficient
        (Bray-Curtis on presences is Sørensen). Jaccard and Sørensen are binary by definition;
        their quantitative forms are ``'ruzicka'`` and ``'bray-curtis'``.
    extended : bool, default False
        Replace saturated dissimilarities (pairs sharing no taxa, d at its maximum) by the
        shortest path through unsaturated pairs (extended dissimilarities, De'ath 1999 [4]_).
    saturated : float, optional
        With ``extended=True``: values at or above this are saturated. Default: the
        coefficient's largest value (1 for Bray-Curtis); required for unbounded coefficients.
    dtype : {numpy.float64, numpy.float32}, optional
        Storage of the result; float32 halves memory (n = 5,000 sites take 50 MB).
    weights, variable_types : optional
        Gower only; see :func:`gower_distance`.

    Returns
    -------
    DistanceMatrix
        Labelled by the table's index, with ``metric`` and ``transform`` recorded.

    Notes
    -----
    For sites i and j with abundances ``x``, ``y``, totals ``A = sum x``, ``B = sum y``,
    ``W = sum min(x_k, y_k)`` and, for presences, ``a`` shared taxa, ``b``, ``c`` taxa found at
    only one of them (Legendre & Legendre 2012, ch. 7 [1]_):

    - Bray-Curtis: ``sum |x_k - y_k| / (A + B)``; Sørensen: ``(b + c) / (2a + b + c)``.
    - Jaccard: ``(b + c) / (a + b + c)``; Ružička: ``1 - W / (A + B - W)``.
    - Kulczynski: ``1 - (W/A + W/B) / 2``.
    - Hellinger: Euclidean distance of ``sqrt(x_k / A)`` (Legendre & Gallagher 2001 [2]_);
      chord: Euclidean distance of ``x / ||x||``.
    - chi-square distance: ``sqrt(sum_k (x_k/A - y_k/B)^2 / (c_k / c))``, ``c_k`` the taxon
      totals and ``c`` the grand total (taxa absent everywhere are left out).
    - Euclidean, Manhattan; Canberra ``sum |x_k - y_k| / (|x_k| + |y_k|)`` over terms with a
      non-zero denominator (Lance & Williams 1966), as :func:`scipy.spatial.distance.canberra`.
    - Morisita-Horn: ``1 - 2 sum x_k y_k / ((l_x + l_y) A B)``, ``l_x = sum x_k^2 / A^2``
      (Horn 1966 [3]_).
    - Gower: see :func:`gower_distance`.

    Extended dissimilarities here are exact shortest-path lengths (Dijkstra) through the graph
    whose edges are the unsaturated pairs; unsaturated pairs keep their own value. De'ath's
    stepwise stepping-stone computation approximates these path lengths. If the unsaturated
    pairs leave the sites in more than one group, no path exists and an error lists the groups.

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed. Elsevier.
    .. [2] Legendre, P. & Gallagher, E. D. (2001). Oecologia 129, 271-280.
    .. [3] Horn, H. S. (1966). Measurement of "overlap" in comparative ecological studies.
           American Naturalist 100, 419-424.
    .. [4] De'ath, G. (1999). Extended dissimilarity: a method of robust estimation of
           ecological distances from high beta diversity data. Plant Ecology 144, 191-199.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients import dissimilarity
    >>> t = pd.DataFrame({"a": [1, 0], "b": [3, 2]}, index=["s1", "s2"])
    >>> float(dissimilarity(t, "bray-curtis")["s1", "s2"])
    0.3333333333333333
    """
    check_choice("metric", metric, tuple(METRICS))
    check_choice("empty", empty, EMPTY_OPTIONS)
    spec = METRICS[metric]
    out_dtype = _check_dtype(dtype)
    if binary is not None and not isinstance(binary, bool | np.bool_):
        raise InputError(f"`binary` must be True, False or None; got {binary!r}.")
    if (weights is not None or variable_types is not None) and metric != "gower":
        raise InputError("`weights` and `variable_types` apply to metric='gower' only.")
    if spec.data == "presence" and binary is False:
        alt = "ruzicka" if metric == "jaccard" else "bray-curtis"
        raise InputError(
            f"{metric!r} is a presence/absence coefficient; its quantitative form is "
            f"metric={alt!r}."
        )
    if metric == "gower":
        if transform is not None or binary:
            raise InputError("`transform` and `binary` do not apply to metric='gower'.")
        frame = frame_from(table, attribute="community", name="table")
        result = gower_distance(frame, weights=weights, variable_types=variable_types,
                                empty=empty, dtype=out_dtype)
    else:
        if transform is not None:
            check_choice("transform", transform, tuple(COMMUNITY_TRANSFORMS))
            if binary:
                raise InputError(
                    "Give either `transform` or `binary=True`, not both: presence/absence "
                    "discards what the transform changed."
                )
        frame, x = community_frame(table, nonnegative=spec.data != "signed")
        transform_name = None
        if transform is not None:
            x = np.ascontiguousarray(transform_community(frame, transform).table.to_numpy(
                dtype=np.float64))
            transform_name = transform
        if spec.data == "presence" or binary:
            x = (x > 0).astype(np.float64)
            if binary:
                transform_name = "presence"
        n = x.shape[0]
        out = np.empty(n * (n - 1) // 2, dtype=out_dtype)
        spec.compute(x, out)
        _resolve_undefined(out, x, frame.index, metric, spec, empty)
        result = DistanceMatrix(out, frame.index, metric=metric, transform=transform_name,
                                dtype=out_dtype)
    if extended:
        return extend_dissimilarity(result, saturated=saturated)
    if saturated is not None:
        raise InputError("`saturated` applies only with extended=True.")
    return result


def _check_dtype(dtype: object) -> np.dtype:
    try:
        dt = np.dtype(np.float64 if dtype is None else dtype)
    except TypeError:
        raise InputError(f"`dtype` must be float64 or float32; got {dtype!r}.") from None
    if dt not in (np.dtype(np.float64), np.dtype(np.float32)):
        raise InputError(f"`dtype` must be float64 or float32; got {dt}.")
    return dt


def _resolve_undefined(
    out: np.ndarray,
    x: np.ndarray | None,
    labels: pd.Index,
    metric: str,
    spec: Metric,
    empty: str,
    *,
    empty_rows: np.ndarray | None = None,
    nothing: str = "no taxa",
) -> None:
    undefined = np.isnan(out)
    if not undefined.any():
        return
    n = len(labels)
    if empty_rows is None:
        empty_rows = ~np.any(x != 0, axis=1) if x is not None else np.zeros(n, dtype=bool)
    pos = np.flatnonzero(undefined)
    if empty == "error":
        i, j = pair_of_position(pos[:5], n)
        pairs = ", ".join(f"({labels[a]!r}, {labels[b]!r})" for a, b in zip(i, j, strict=True))
        more = f" and {pos.size - 5} more" if pos.size > 5 else ""
        empties = labels[empty_rows]
        why = (f"site(s) with {nothing}: {format_items(empties)}" if len(empties)
               else "pairs with nothing to compare")
        raise InputError(
            f"{metric} is undefined (0/0) for {pos.size} pair(s) of sites: {pairs}{more}; "
            f"caused by {why}. Drop those sites, or choose what an undefined pair means with "
            "empty='zero', 'max' or 'alike' (documented in dissimilarity()).",
            sites=list(empties) if len(empties) else list(labels[i]) + list(labels[j]),
        )
    if empty == "zero":
        out[pos] = 0.0
        return
    if spec.upper is None:
        raise InputError(
            f"empty={empty!r} needs a coefficient with a largest value; {metric} has none. "
            "Use empty='zero' or drop the empty sites."
        )
    if empty == "max":
        out[pos] = spec.upper
        return
    # 'alike': two empty sites are identical; an empty site and one with taxa are maximally apart
    i, j = pair_of_position(pos, n)
    both = empty_rows[i] & empty_rows[j]
    out[pos] = np.where(both, 0.0, spec.upper)


def gower_distance(
    table: pd.DataFrame,
    *,
    weights: Mapping[object, float] | Sequence[float] | None = None,
    variable_types: Mapping[object, str] | None = None,
    empty: str = "error",
    dtype: type | np.dtype | None = None,
) -> DistanceMatrix:
    """Gower's (1971) dissimilarity ``1 - S`` for a table of mixed variable types.

    Parameters
    ----------
    table : pandas.DataFrame
        Sites as rows. Numeric columns are ``quantitative``; boolean columns ``dichotomous``;
        text, categorical and other columns ``qualitative``. Missing values are allowed.
    weights : mapping column -> weight, or sequence, optional
        Non-negative weight ``w_k`` of each variable; default 1.
    variable_types : mapping column -> {'quantitative', 'qualitative', 'dichotomous'}
        Override the type read from the dtype (e.g. a 0/1 numeric column that records
        presence: ``'dichotomous'``; a numeric code: ``'qualitative'``).
    empty : {'error', 'zero', 'max', 'alike'}
        For pairs with no variable to compare (see :func:`dissimilarity`).
    dtype : {numpy.float64, numpy.float32}, optional

    Returns
    -------
    DistanceMatrix

    Notes
    -----
    Gower (1971) [1]_: ``S_ij = sum_k w_k delta_ijk s_ijk / sum_k w_k delta_ijk``. For a
    quantitative variable ``s = 1 - |x_ik - x_jk| / R_k`` with ``R_k`` its range over the sites;
    qualitative ``s = 1`` if the two states agree, else 0; dichotomous ``s = 1`` if both present,
    0 otherwise, and a pair of absences is no comparison (``delta = 0``). ``delta_ijk = 0`` also
    when either value is missing. A quantitative variable with zero range carries no
    information and is left out (``delta = 0``). The dissimilarity returned is ``1 - S``; with no
    missing values ``S`` is positive semi-definite, so ``sqrt(1 - S)`` is Euclidean (Gower 1971).

    References
    ----------
    .. [1] Gower, J. C. (1971). A general coefficient of similarity and some of its properties.
           Biometrics 27, 857-871.
    """
    check_choice("empty", empty, EMPTY_OPTIONS)
    out_dtype = _check_dtype(dtype)
    frame = frame_from(table, attribute="environment", name="table")
    cols = list(frame.columns)
    types = {c: _gower_type(frame[c]) for c in cols}
    if variable_types is not None:
        if not isinstance(variable_types, Mapping):
            raise InputError("`variable_types` must be a mapping column -> type.")
        for c, t in variable_types.items():
            if c not in frame.columns:
                raise InputError(
                    f"Column {c!r} in `variable_types` is not in the table.", columns=[c]
                )
            types[c] = check_choice(f"variable_types[{c!r}]", t, GOWER_TYPES)
    w = _weights(weights, cols)
    n, p = frame.shape
    x = np.empty((n, p), dtype=np.float64)
    kind = np.empty(p, dtype=np.int64)
    ranges = np.zeros(p, dtype=np.float64)
    for k, c in enumerate(cols):
        s = frame[c]
        t = types[c]
        missing = s.isna().to_numpy()
        if t == "quantitative":
            if not (pd.api.types.is_numeric_dtype(s) or pd.api.types.is_bool_dtype(s)):
                raise InputError(
                    f"Column {c!r} is marked quantitative but holds text; convert it to numbers "
                    "or mark it 'qualitative'.",
                    columns=[c],
                )
            v = s.to_numpy(dtype=np.float64, na_value=np.nan, copy=True)
            if np.isinf(v).any():
                raise InputError(f"Column {c!r} holds infinite values.", columns=[c])
            kind[k] = 0
            ok = ~np.isnan(v)
            ranges[k] = float(np.ptp(v[ok])) if ok.any() else 0.0
        elif t == "qualitative":
            codes, _ = pd.factorize(s, use_na_sentinel=True)
            v = codes.astype(np.float64)
            v[codes < 0] = np.nan
            kind[k] = 1
        else:
            if pd.api.types.is_bool_dtype(s) or pd.api.types.is_numeric_dtype(s):
                v = s.to_numpy(dtype=np.float64, na_value=np.nan, copy=True)
            else:
                raise InputError(
                    f"Column {c!r} is marked dichotomous; it must hold True/False or 1/0.",
                    columns=[c],
                )
            bad = ~np.isnan(v) & (v != 0) & (v != 1)
            if bad.any():
                raise InputError(
                    f"Column {c!r} is marked dichotomous but holds values other than 0/1 at "
                    f"site(s) {format_items(frame.index[bad])}.",
                    sites=list(frame.index[bad]),
                    columns=[c],
                )
            kind[k] = 2
        v[missing] = np.nan
        x[:, k] = v
    out = np.empty(n * (n - 1) // 2, dtype=out_dtype)
    K.gower(x, kind, ranges, w, out)
    no_data = np.all(np.isnan(x) | (w[None, :] == 0), axis=1)
    _resolve_undefined(out, None, frame.index, "gower", METRICS["gower"], empty,
                       empty_rows=no_data, nothing="no value to compare")
    return DistanceMatrix(out, frame.index, metric="gower", dtype=out_dtype)


def _gower_type(s: pd.Series) -> str:
    if pd.api.types.is_bool_dtype(s):
        return "dichotomous"
    if pd.api.types.is_numeric_dtype(s):
        return "quantitative"
    return "qualitative"


def _weights(weights: object, cols: list[object]) -> np.ndarray:
    if weights is None:
        return np.ones(len(cols))
    if isinstance(weights, Mapping):
        unknown = [c for c in weights if c not in cols]
        if unknown:
            raise InputError(
                f"`weights` names column(s) not in the table: {format_items(unknown)}.",
                columns=unknown,
            )
        w = np.array([weights.get(c, 1.0) for c in cols], dtype=np.float64)
    else:
        w = np.asarray(weights, dtype=np.float64)
        if w.shape != (len(cols),):
            raise InputError(
                f"`weights` must give one weight per variable ({len(cols)}); got {w.size}."
            )
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise InputError(f"`weights` must be finite and non-negative; got {w.tolist()}.")
    if not np.any(w > 0):
        raise InputError("At least one weight must be positive.")
    return w


def extend_dissimilarity(d: DistanceMatrix, *, saturated: float | None = None) -> DistanceMatrix:
    """Replace saturated dissimilarities by shortest paths through unsaturated pairs.

    Parameters
    ----------
    d : DistanceMatrix
    saturated : float, optional
        Values ``>= saturated`` (less a rounding slack of 1e-10 relative) are saturated. Default
        the coefficient's largest value (1 for the 0-1 coefficients).

    Returns
    -------
    DistanceMatrix
        ``metric`` becomes ``'extended <metric>'``.

    Notes
    -----
    De'ath (1999): when sites share no taxa their dissimilarity is saturated and says nothing
    about how far apart they lie on a gradient; a chain of overlapping sites between them does.
    Path lengths come from :func:`scipy.sparse.csgraph.dijkstra`.
    """
    if saturated is None:
        upper = METRICS[d.metric].upper if d.metric in METRICS else None
        if upper is None:
            raise InputError(
                f"Give `saturated=` for extended dissimilarities of {d.metric or 'this matrix'}, "
                "which has no largest value."
            )
        saturated = upper
    if not isinstance(saturated, numbers.Real) or not np.isfinite(saturated) or saturated <= 0:
        raise InputError(f"`saturated` must be a positive number; got {saturated!r}.")
    n = d.n
    values = d.condensed.astype(np.float64)
    sat = values >= saturated - 1e-10 * max(1.0, float(saturated))
    if not sat.any():
        return DistanceMatrix(d.condensed, d.labels, metric=f"extended {d.metric}",
                              transform=d.transform, dtype=d.dtype, validate=False)
    keep = np.flatnonzero(~sat)
    i, j = pair_of_position(keep, n)
    graph = scipy.sparse.csr_matrix((values[keep], (i, j)), shape=(n, n))
    n_groups, group = connected_components(graph, directed=False)
    if n_groups > 1:
        groups = [list(d.labels[group == g]) for g in range(n_groups)]
        shown = "; ".join(f"[{format_items(g, limit=5)}]" for g in groups[:5])
        more = f" and {n_groups - 5} more" if n_groups > 5 else ""
        raise InputError(
            f"Extended dissimilarities need every site linked through unsaturated pairs "
            f"(d < {saturated:g}), but the sites fall into {n_groups} separate groups: "
            f"{shown}{more}. Analyse the groups separately or raise `saturated`.",
            sites=[g[0] for g in groups],
        )
    paths = dijkstra(graph, directed=False)
    si, sj = pair_of_position(np.flatnonzero(sat), n)
    values[sat] = paths[si, sj]
    return DistanceMatrix(values, d.labels, metric=f"extended {d.metric}", transform=d.transform,
                          dtype=d.dtype)
