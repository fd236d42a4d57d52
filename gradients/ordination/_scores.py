"""Site scores from any source, aligned by site label, and weighted-average taxon scores.

:func:`as_scores` is the one way in the suite to turn site scores into a checked, labelled
table: an ordination result (anything with a ``scores`` table, so no result class is named
here) or scores computed elsewhere and imported as a DataFrame.
"""

from __future__ import annotations

import numbers
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._validation import check_labels_match
from ._common import check_numeric_table

__all__ = ["AxesLike", "as_scores", "taxon_scores"]

AxesLike = int | Sequence[str] | None


def _scores_table(obj: Any) -> pd.DataFrame | pd.Series | None:
    """The table of site scores: the object itself, or its ``scores`` table (duck typing)."""
    if isinstance(obj, pd.DataFrame | pd.Series):
        return obj
    inner = getattr(obj, "scores", None)
    if isinstance(inner, pd.DataFrame):  # pcoa, nmds, pca results, or any result like them
        return inner
    return None


def _is_real_column(column: pd.Series) -> bool:
    """Real numbers: a numeric dtype (not bool or complex), or an object column of numbers."""
    if pd.api.types.is_bool_dtype(column) or pd.api.types.is_complex_dtype(column):
        return False
    if pd.api.types.is_numeric_dtype(column):
        return True
    if column.dtype == object:  # e.g. read from a spreadsheet cell by cell
        kind = pd.api.types.infer_dtype(column, skipna=True)
        return kind in ("integer", "floating", "mixed-integer-float", "decimal", "empty")
    return False


def _select_axes(frame: pd.DataFrame, axes: object) -> pd.DataFrame:
    if axes is None:
        return frame
    if isinstance(axes, numbers.Integral) and not isinstance(axes, bool):
        k = int(axes)
        if k < 1 or k > frame.shape[1]:
            raise InputError(f"`axes={k}` asks for {k} axes but the scores have "
                             f"{frame.shape[1]} column(s): {format_items(frame.columns)}.")
        return frame.iloc[:, :k]
    if isinstance(axes, str):
        axes = [axes]
    if not isinstance(axes, Sequence | pd.Index | np.ndarray):
        raise InputError(f"`axes` must be None, a number of axes or a list of column names; got "
                         f"{axes!r}.")
    wanted = list(axes)
    if not wanted:
        raise InputError("`axes` is empty; name at least one column of the scores.")
    missing = [a for a in wanted if a not in frame.columns]
    if missing:
        raise InputError(f"`axes` names column(s) {format_items(missing)} that the scores do "
                         f"not have; they have {format_items(frame.columns)}.", columns=missing)
    if len(set(wanted)) != len(wanted):
        raise InputError(f"`axes` names a column more than once: {format_items(wanted)}.")
    return frame.loc[:, wanted]


def as_scores(
    obj: Any,
    *,
    sites: Sequence[object] | pd.Index | None = None,
    axes: AxesLike = None,
) -> pd.DataFrame:
    """Site scores as a labelled DataFrame of floats, from an ordination result or a table.

    Use it wherever site scores are expected (the fits use it too): it accepts any object
    with a ``scores`` DataFrame, such as the results of :func:`pcoa`, :func:`nmds` and
    :func:`pca`, or any DataFrame of site scores computed elsewhere (rows labelled by site,
    numeric columns, one per axis).

    Parameters
    ----------
    obj : ordination result, pandas.DataFrame or pandas.Series
        The scores: an object with a ``scores`` DataFrame (its type is not checked), or the
        table itself. A Series is one axis. A numpy array is accepted only together with
        `sites`, whose labels it then takes in row order.
    sites : sequence of labels, optional
        Align to these sites: the result has exactly these rows, in this order. Every site in
        `sites` must have scores and every site with scores must be in `sites`; otherwise an
        :class:`InputError` names the sites found on only one side.
    axes : int or sequence of str, optional
        Keep the first ``axes`` columns, or the columns named (in that order). Only the
        columns kept are checked.

    Returns
    -------
    pandas.DataFrame
        A new float64 frame, sites x axes, labels kept.

    Raises
    ------
    InputError
        Non-numeric columns (named), missing or infinite values (cells named), repeated site
        labels or column names, misaligned sites (named), unknown axes.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients.ordination import as_scores
    >>> s = pd.DataFrame({"dim1": [0.1, -0.2, 0.3]}, index=["b", "a", "c"])
    >>> as_scores(s, sites=["a", "b", "c"])["dim1"].tolist()
    [-0.2, 0.1, 0.3]
    """
    frame = _scores_table(obj)
    if isinstance(frame, pd.Series):
        frame = frame.to_frame(name=frame.name if frame.name is not None else "axis1")
    if frame is None:
        if isinstance(obj, np.ndarray | list | tuple):
            if sites is None:
                raise InputError(
                    "Scores given as an array carry no site labels; pass a DataFrame labelled "
                    "by site, or give `sites=` in row order."
                )
            array = np.asarray(obj)
            if array.ndim == 1:
                array = array[:, None]
            if array.ndim != 2 or array.shape[0] != len(sites):
                raise InputError(f"Scores of shape {array.shape} do not match {len(sites)} sites.")
            frame = pd.DataFrame(array, index=pd.Index(sites),
                                 columns=[f"axis{i + 1}" for i in range(array.shape[1])])
        else:
            raise InputError(
                "Scores must be an ordination result (an object with a `scores` DataFrame, such "
                "as the result of pcoa, nmds or pca) or a DataFrame of site scores (sites x "
                f"axes); got {type(obj).__name__}."
            )
    if frame.shape[1] == 0:
        raise InputError("The scores have no columns; give at least one axis.")
    if frame.shape[0] == 0:
        raise InputError("The scores have no rows (sites).")
    if frame.index.has_duplicates:
        dup = frame.index[frame.index.duplicated()].unique()
        raise InputError(f"The scores repeat site label(s) {format_items(dup)}; each site may "
                         "appear once.", sites=list(dup))
    if frame.columns.has_duplicates:
        dup = frame.columns[frame.columns.duplicated()].unique()
        raise InputError(f"The scores repeat column name(s) {format_items(dup)}.",
                         columns=list(dup))
    frame = _select_axes(frame, axes)
    bad = [c for c in frame.columns if not _is_real_column(frame[c])]
    if bad:
        raise InputError(
            f"Score column(s) {format_items(bad)} are not numeric. Scores must be numbers, one "
            "column per axis; if a column holds the site labels, make it the index with "
            "DataFrame.set_index(...).",
            columns=bad,
        )
    values = frame.to_numpy(dtype=np.float64, na_value=np.nan)
    missing = ~np.isfinite(values)
    if missing.any():
        rows, cols = np.nonzero(missing)
        cells = [f"({frame.index[r]!r}, {frame.columns[c]!r})"
                 for r, c in zip(rows, cols, strict=True)]
        raise InputError(
            f"The scores have {len(cells)} missing or infinite value(s) at (site, axis) "
            f"{format_items(cells, quote=False)}. Drop those sites or fill the values.",
            sites=list(dict.fromkeys(frame.index[rows])),
            columns=list(dict.fromkeys(frame.columns[cols])),
        )
    out = pd.DataFrame(values, index=frame.index.copy(), columns=frame.columns.copy())
    if sites is not None:
        target = pd.Index(sites)
        if target.has_duplicates:
            dup = target[target.duplicated()].unique()
            raise InputError(f"`sites` repeats label(s) {format_items(dup)}.", sites=list(dup))
        if not out.index.equals(target):
            check_labels_match(
                target, out.index, left_name="the sites asked for", right_name="the scores",
                fix="Align the inputs first: keep the same sites in both (for example "
                    "scores.loc[sites]).",
            )
            out = out.loc[target]
    return out


def taxon_scores(scores: Any, community: pd.DataFrame) -> pd.DataFrame:
    """Weighted-average taxon scores: each taxon at the abundance-weighted mean of its sites.

    Parameters
    ----------
    scores : ordination result or DataFrame of site scores
        Anything :func:`as_scores` accepts; aligned to the community's sites by label.
    community : pandas.DataFrame
        Sites x taxa abundances (non-negative numbers), labelled by site.

    Returns
    -------
    pandas.DataFrame
        Taxa x axes: ``u_k = sum_i y_ik x_i / sum_i y_ik`` for each taxon ``k``.

    Notes
    -----
    These are the weighted averages of correspondence analysis (ter Braak 1987), placed onto
    an ordination that did not itself produce taxon scores, for biplots. They describe where a
    taxon is most abundant, not a fitted response. Taxa absent from every site have no weighted
    average and are refused.

    References
    ----------
    .. [1] ter Braak, C. J. F. (1987). Ordination. In Jongman, R. H. G., ter Braak, C. J. F. &
       van Tongeren, O. F. R. (eds), Data Analysis in Community and Landscape Ecology,
       pp. 91–173. Pudoc, Wageningen.
    """
    comm = check_numeric_table(community, name="community")
    values = comm.to_numpy()
    if (values < 0).any():
        rows, cols = np.nonzero(values < 0)
        cells = [f"({comm.index[r]!r}, {comm.columns[c]!r})" for r, c in zip(rows, cols,
                                                                               strict=True)]
        raise InputError(f"Abundances must be non-negative; negative at (site, taxon) "
                         f"{format_items(cells, quote=False)}.",
                         columns=list(dict.fromkeys(comm.columns[cols])))
    totals = values.sum(axis=0)
    absent = comm.columns[totals <= 0]
    if len(absent):
        raise InputError(f"Taxon/taxa {format_items(absent)} are absent from every site, so "
                         "they have no weighted average; drop them from the community table.",
                         columns=list(absent))
    site = as_scores(scores, sites=comm.index)
    weighted = values.T @ site.to_numpy() / totals[:, None]
    return pd.DataFrame(weighted, index=comm.columns.copy(), columns=site.columns.copy())
