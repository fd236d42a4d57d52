"""The labelled distance-matrix type every analysis consumes."""

from __future__ import annotations

import numbers
from collections.abc import Sequence

import numpy as np
import pandas as pd
import scipy.linalg
from scipy.spatial.distance import squareform

from .._errors import InputError, format_items
from .._validation import RNGLike, check_rng

__all__ = ["DistanceMatrix", "as_distance_matrix"]


class DistanceMatrix:
    """Dissimilarities among sites, labelled, stored condensed.

    The condensed vector holds the ``n (n - 1) / 2`` entries above the diagonal in row-major
    order (``d[0,1], d[0,2], ..., d[1,2], ...``), the order of
    :func:`scipy.spatial.distance.squareform`, so memory is half that of a square array.

    Parameters
    ----------
    condensed : array_like, shape (n * (n - 1) / 2,)
        The upper-triangle entries.
    labels : sequence
        The ``n`` site labels, unique, in the order of the rows.
    metric : str, optional
        The dissimilarity it was built with (``"bray-curtis"``, ``"geodesic"``, ...), kept so that
        a report can say it.
    transform : str, optional
        What was done to the data before (``"hellinger"``, ...), for the same reason.
    dtype : {numpy.float64, numpy.float32}, optional
        Storage type; float32 halves memory for large ``n``. Default float64.
    validate : bool, default True
        Check that every entry is finite and non-negative.

    Examples
    --------
    >>> import numpy as np
    >>> from gradients import DistanceMatrix
    >>> d = DistanceMatrix.from_square(np.array([[0, 1, 2], [1, 0, 3], [2, 3, 0.]]),
    ...                                labels=["a", "b", "c"])
    >>> d["a", "c"]
    2.0
    """

    __slots__ = ("_condensed", "_labels", "metric", "transform")

    def __init__(
        self,
        condensed: np.ndarray | Sequence[float],
        labels: Sequence[object] | pd.Index,
        *,
        metric: str | None = None,
        transform: str | None = None,
        dtype: type | np.dtype | None = None,
        validate: bool = True,
    ) -> None:
        dtype = np.dtype(np.float64 if dtype is None else dtype)
        if dtype not in (np.dtype(np.float64), np.dtype(np.float32)):
            raise InputError(f"`dtype` must be float64 or float32; got {dtype}.")
        labels = pd.Index(labels)
        if labels.has_duplicates:
            dup = labels[labels.duplicated()].unique()
            raise InputError(
                f"Distance-matrix labels must be unique; repeated: {format_items(dup)}. "
                "Give each site its own label.",
                sites=list(dup),
            )
        values = np.asarray(condensed, dtype=dtype)
        if values.ndim != 1:
            raise InputError(
                f"Condensed distances must be one-dimensional; got shape {values.shape}. "
                "Use DistanceMatrix.from_square() for a square matrix."
            )
        n = len(labels)
        if values.size != n * (n - 1) // 2:
            raise InputError(
                f"{values.size} condensed distances do not fit {n} labels "
                f"(expected n(n-1)/2 = {n * (n - 1) // 2})."
            )
        if validate:
            _check_entries(values, labels)
        values = np.ascontiguousarray(values)
        values.flags.writeable = False
        self._condensed = values
        self._labels = labels
        self.metric = metric
        self.transform = transform

    # ----------------------------------------------------------------- construction
    @classmethod
    def from_square(
        cls,
        data: np.ndarray | pd.DataFrame,
        labels: Sequence[object] | None = None,
        *,
        metric: str | None = None,
        transform: str | None = None,
        dtype: type | np.dtype | None = None,
        atol: float = 1e-8,
    ) -> DistanceMatrix:
        """Build from a square array or a labelled square DataFrame.

        Checks that the matrix is square, symmetric within ``atol`` (relative to its largest
        entry), has a zero diagonal and finite, non-negative entries; an :class:`InputError`
        names the cells that break a rule. A DataFrame's row and column labels must agree.
        """
        if isinstance(data, pd.DataFrame):
            if labels is None:
                labels = data.index
            if not data.index.equals(data.columns):
                if set(data.index) == set(data.columns) and len(data.index) == len(data.columns):
                    data = data.loc[:, data.index]
                else:
                    raise InputError(
                        "A distance matrix given as a table needs the same site labels on its "
                        "rows and columns; rows only: "
                        f"{format_items(set(data.index) - set(data.columns)) or 'none'}; "
                        f"columns only: "
                        f"{format_items(set(data.columns) - set(data.index)) or 'none'}."
                    )
            try:
                array = data.to_numpy(dtype=np.float64)
            except (TypeError, ValueError) as exc:
                raise InputError(
                    f"A distance matrix must hold numbers only ({exc}). Remove text cells."
                ) from None
        else:
            try:
                array = np.asarray(data, dtype=np.float64)
            except (TypeError, ValueError) as exc:
                raise InputError(f"A distance matrix must hold numbers only ({exc}).") from None
        if array.ndim != 2 or array.shape[0] != array.shape[1]:
            raise InputError(f"A distance matrix must be square; got shape {array.shape}.")
        n = array.shape[0]
        labels = pd.Index(range(n) if labels is None else labels)
        if len(labels) != n:
            raise InputError(f"{len(labels)} labels given for a {n} x {n} matrix.")
        bad = ~np.isfinite(array)
        if bad.any():
            raise InputError(
                "A distance matrix must hold finite numbers; missing or infinite at "
                f"{_cells(bad, labels)}. Fill or drop those sites."
            )
        diag = np.diag(array)
        if np.any(diag != 0):
            idx = np.flatnonzero(diag != 0)
            raise InputError(
                "A distance matrix must have zeros on its diagonal; non-zero at "
                f"{format_items([labels[i] for i in idx])} (values "
                f"{format_items([f'{diag[i]:.6g}' for i in idx], quote=False)})."
            )
        scale = max(float(np.max(np.abs(array))), 1.0)
        asym = np.abs(array - array.T) > atol * scale
        if asym.any():
            raise InputError(
                "A distance matrix must be symmetric; d[i, j] differs from d[j, i] at "
                f"{_cells(np.triu(asym), labels)}. Check the table, or average it with its "
                "transpose if the difference is rounding."
            )
        condensed = squareform((array + array.T) / 2.0, checks=False)
        return cls(condensed, labels, metric=metric, transform=transform, dtype=dtype)

    #: Same as :meth:`from_square`; the name that reads naturally for a labelled DataFrame.
    from_frame = from_square

    # ----------------------------------------------------------------- access
    @property
    def labels(self) -> pd.Index:
        """Site labels, in row order."""
        return self._labels

    @property
    def condensed(self) -> np.ndarray:
        """The upper-triangle entries (read-only view), scipy ``squareform`` order."""
        return self._condensed

    @property
    def n(self) -> int:
        """Number of sites."""
        return len(self._labels)

    @property
    def dtype(self) -> np.dtype:
        return self._condensed.dtype

    def __len__(self) -> int:
        return self.n

    def square(self) -> np.ndarray:
        """The full symmetric ``n x n`` array (a new copy)."""
        return squareform(self._condensed, checks=False)

    def to_frame(self) -> pd.DataFrame:
        """The square matrix as a DataFrame labelled by site on both axes."""
        return pd.DataFrame(self.square(), index=self._labels, columns=self._labels)

    def _index(self, label: object) -> int:
        try:
            return int(self._labels.get_loc(label))
        except KeyError:
            raise InputError(f"Site {label!r} is not in this distance matrix.",
                             sites=[label]) from None

    def __getitem__(self, key: tuple[object, object]) -> float:
        a, b = key
        i, j = self._index(a), self._index(b)
        if i == j:
            return 0.0
        i, j = min(i, j), max(i, j)
        n = self.n
        return float(self._condensed[n * i - i * (i + 1) // 2 + (j - i - 1)])

    def __repr__(self) -> str:
        how = ", ".join(x for x in (self.metric, self.transform) if x)
        shown = format_items(self._labels, limit=4)
        return (f"DistanceMatrix({self.n} sites{', ' + how if how else ''}, "
                f"{self.dtype}; labels {shown})")

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, DistanceMatrix):
            return NotImplemented
        return self._labels.equals(other._labels) and np.array_equal(
            self._condensed, other._condensed
        )

    __hash__ = None  # type: ignore[assignment]

    # ----------------------------------------------------------------- reshaping
    def subset(self, labels: Sequence[object] | pd.Index) -> DistanceMatrix:
        """The matrix among ``labels`` only, in the order given."""
        labels = pd.Index(labels)
        missing = [x for x in labels if x not in self._labels]
        if missing:
            raise InputError(
                f"{len(missing)} requested site(s) are not in this distance matrix: "
                f"{format_items(missing)}.",
                sites=missing,
            )
        idx = self._labels.get_indexer(labels)
        return self._take(idx, labels)

    def _take(self, idx: np.ndarray, labels: pd.Index) -> DistanceMatrix:
        idx = np.asarray(idx, dtype=np.intp)
        n = self.n
        i, j = np.triu_indices(len(idx), k=1)
        a, b = idx[i], idx[j]
        lo, hi = np.minimum(a, b), np.maximum(a, b)
        pos = n * lo - lo * (lo + 1) // 2 + (hi - lo - 1)
        out = DistanceMatrix.__new__(DistanceMatrix)
        values = np.ascontiguousarray(self._condensed[pos])
        values.flags.writeable = False
        out._condensed = values
        out._labels = pd.Index(labels)
        out.metric = self.metric
        out.transform = self.transform
        return out

    def align(self, other: DistanceMatrix | Sequence[object] | pd.Index, *,
              name: str = "this matrix", other_name: str = "the other matrix") -> DistanceMatrix:
        """Reorder to another matrix's labels (or a list); both must hold the same sites."""
        target = other.labels if isinstance(other, DistanceMatrix) else pd.Index(other)
        if self._labels.equals(target):
            return self
        from .._validation import check_labels_match

        check_labels_match(self._labels, target, left_name=name, right_name=other_name,
                           fix="Use .subset() on both to keep only the shared sites.")
        return self.subset(target)

    def astype(self, dtype: type | np.dtype) -> DistanceMatrix:
        """A copy stored as ``dtype`` (float64 or float32)."""
        return DistanceMatrix(self._condensed, self._labels, metric=self.metric,
                              transform=self.transform, dtype=dtype, validate=False)

    # ----------------------------------------------------------------- properties
    def is_metric(
        self,
        *,
        sample: int | None = None,
        rng: RNGLike = None,
        atol: float | None = None,
    ) -> bool:
        """Whether every triple of sites obeys the triangle inequality.

        Checks ``d[i, j] <= d[i, k] + d[k, j] + atol`` for all triples when ``n`` is at most
        ``EXACT_METRIC_LIMIT`` (500) and `sample` is None, otherwise for `sample` random triples
        (100,000 when `sample` is None).

        Parameters
        ----------
        sample : int, optional
            Number of random triples to check instead of all of them. A sampled check can
            only prove that the matrix is *not* metric; ``True`` means no violation was found.
        rng : int, numpy.random.Generator or None
            Source of the sampled triples. When `rng` is None, a new `numpy.random.Generator`
            is created using entropy from the operating system.
        atol : float, optional
            Slack allowed for rounding. Default ``8 * eps * max(d)`` for the storage type
            (float64 or float32).

        Returns
        -------
        bool

        Notes
        -----
        A metric dissimilarity satisfies the triangle inequality; Bray-Curtis, Kulczynski and
        Morisita-Horn, among others, need not (Legendre & Legendre 2012, ch. 7 [1]_).

        References
        ----------
        .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed.
               Elsevier, Amsterdam.
        """
        n = self.n
        if n < 3:
            return True
        values = self._condensed
        top = float(values.max()) if values.size else 0.0
        if atol is None:
            atol = 8.0 * float(np.finfo(self.dtype).eps) * max(top, 1.0)
        elif not (np.isfinite(atol) and atol >= 0):
            raise InputError(f"`atol` must be a non-negative number; got {atol!r}.")
        if sample is None and n <= EXACT_METRIC_LIMIT:
            d = self.square().astype(np.float64, copy=False)
            for k in range(n):
                # all (i, j) through the intermediate site k at once
                if np.any(d > d[:, k : k + 1] + d[k : k + 1, :] + atol):
                    return False
            return True
        if sample is None:
            sample = 100_000
        if not isinstance(sample, numbers.Integral) or isinstance(sample, bool) or sample < 1:
            raise InputError(f"`sample` must be a positive integer; got {sample!r}.")
        gen = check_rng(rng)
        done = 0
        while done < sample:
            m = min(int(sample) - done, 1_000_000)
            i, j, k = (gen.integers(0, n, size=m) for _ in range(3))
            keep = (i != j) & (j != k) & (i != k)
            i, j, k = i[keep], j[keep], k[keep]
            dij, dik, dkj = self._lookup(i, j), self._lookup(i, k), self._lookup(k, j)
            if np.any(dij > dik + dkj + atol):
                return False
            done += m
        return True

    def is_euclidean(self, *, tol: float | None = None) -> bool:
        """Whether the sites can be placed in a Euclidean space with these distances.

        True when no eigenvalue of Gower's centred matrix ``G = -1/2 J D^2 J`` (``J`` the
        centring matrix) is below ``-tol * max|eigenvalue|``.

        Parameters
        ----------
        tol : float, optional
            Relative tolerance for rounding; default 1e-8 for float64 storage and 1e-5 for
            float32.

        Returns
        -------
        bool

        Notes
        -----
        Gower (1966) [1]_: a distance matrix is Euclidean exactly when ``G`` is positive
        semi-definite, which is also when a principal coordinate analysis has no negative
        eigenvalues. The eigenvalues are computed here with :func:`scipy.linalg.eigh`, which costs
        ``O(n^3)``: about a second for ``n = 1000``, a minute or more for ``n = 5000``.

        References
        ----------
        .. [1] Gower, J. C. (1966). Some distance properties of latent root and vector methods
               used in multivariate analysis. Biometrika 53, 325-338.
        """
        if tol is None:
            tol = 1e-8 if self.dtype == np.dtype(np.float64) else 1e-5
        elif not (np.isfinite(tol) and tol >= 0):
            raise InputError(f"`tol` must be a non-negative number; got {tol!r}.")
        eig = gower_eigenvalues(self)
        if eig.size == 0:
            return True
        scale = float(np.max(np.abs(eig)))
        if scale == 0.0:
            return True
        return bool(eig[0] >= -tol * scale)

    def _lookup(self, i: np.ndarray, j: np.ndarray) -> np.ndarray:
        """Entries ``d[i, j]`` for index arrays with ``i != j``."""
        lo, hi = np.minimum(i, j), np.maximum(i, j)
        n = self.n
        pos = n * lo - lo * (lo + 1) // 2 + (hi - lo - 1)
        return self._condensed[pos].astype(np.float64, copy=False)


EXACT_METRIC_LIMIT = 500


def gower_eigenvalues(d: DistanceMatrix) -> np.ndarray:
    """Eigenvalues, ascending, of Gower's centred matrix ``-1/2 J D^2 J`` (Gower 1966)."""
    a = d.square().astype(np.float64, copy=False)
    a = -0.5 * a * a
    a -= a.mean(axis=0, keepdims=True)
    a -= a.mean(axis=1, keepdims=True)
    return scipy.linalg.eigh(a, eigvals_only=True, overwrite_a=True, check_finite=False)


def _check_entries(values: np.ndarray, labels: pd.Index) -> None:
    bad = ~np.isfinite(values)
    if bad.any():
        raise InputError(
            "Distances must be finite; missing or infinite for "
            f"{_pairs(np.flatnonzero(bad), labels)}."
        )
    neg = values < 0
    if neg.any():
        raise InputError(
            f"Distances must be non-negative; negative for {_pairs(np.flatnonzero(neg), labels)}."
        )


def _pairs(positions: np.ndarray, labels: pd.Index, limit: int = 5) -> str:
    n = len(labels)
    i, j = np.triu_indices(n, k=1)
    shown = [f"({labels[i[p]]!r}, {labels[j[p]]!r})" for p in positions[:limit]]
    extra = f" and {len(positions) - limit} more" if len(positions) > limit else ""
    return ", ".join(shown) + extra


def _cells(mask: np.ndarray, labels: pd.Index, limit: int = 5) -> str:
    rows, cols = np.nonzero(mask)
    shown = [f"({labels[r]!r}, {labels[c]!r})" for r, c in zip(rows[:limit], cols[:limit],
                                                                strict=True)]
    extra = f" and {len(rows) - limit} more" if len(rows) > limit else ""
    return ", ".join(shown) + extra


def as_distance_matrix(
    value: DistanceMatrix | np.ndarray | pd.DataFrame, *, name: str = "distance matrix"
) -> DistanceMatrix:
    """Accept a DistanceMatrix, a square array or a labelled square DataFrame.

    A 1-D array is read as condensed distances with labels ``0..n-1``.
    """
    if isinstance(value, DistanceMatrix):
        return value
    if isinstance(value, pd.DataFrame):
        return DistanceMatrix.from_square(value)
    try:
        array = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"`{name}` must be a DistanceMatrix, a square array or a square DataFrame; "
            f"got {type(value).__name__}."
        ) from None
    if array.ndim == 1:
        m = array.size
        n = int(np.rint((1 + np.sqrt(1 + 8 * m)) / 2))
        if n * (n - 1) // 2 != m:
            raise InputError(f"`{name}`: {m} values are not a condensed distance vector.")
        return DistanceMatrix(array, range(n))
    return DistanceMatrix.from_square(array)
