"""Principal component analysis of a site x variable table, with both biplot scalings."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from .._errors import InputError, format_items
from .._result import ResultMixin
from .._validation import check_choice
from ._common import axis_names, check_numeric_table, orient_columns

__all__ = ["SCALINGS", "PCAResult", "check_numeric_table", "pca"]

SCALINGS = ("distance", "correlation")


@dataclasses.dataclass(frozen=True, repr=False)
class PCAResult(ResultMixin):
    """Result of :func:`pca`.

    Attributes
    ----------
    eigenvalues : pandas.Series
        Variances of the principal components (``axis1`` ...), eigenvalues of the covariance
        matrix of the (standardised) table with divisor ``n - 1``.
    proportion_explained : pandas.Series
        Each eigenvalue over their sum.
    eigenvectors : pandas.DataFrame
        Unit-length eigenvectors ``U``, variables x axes.
    scaling : str
        The scaling of ``scores`` and ``loadings``: ``"distance"`` or ``"correlation"``.
    scores : pandas.DataFrame
        Site scores in that scaling (``site_scores(scaling)``).
    loadings : pandas.DataFrame
        Variable scores in that scaling (``variable_scores(scaling)``).
    scaled : bool
        Whether the variables were standardised (correlation-matrix PCA).
    centre, spread : pandas.Series
        Mean of each variable, and the standard deviation (``ddof=1``) it was divided by (1 when
        not scaled).
    table : pandas.DataFrame
        One row per axis: ``eigenvalue``, ``proportion``, ``cumulative``.
    notes : tuple of str
    """

    eigenvalues: pd.Series
    proportion_explained: pd.Series
    eigenvectors: pd.DataFrame
    scaling: str
    scores: pd.DataFrame
    loadings: pd.DataFrame
    scaled: bool
    centre: pd.Series
    spread: pd.Series
    table: pd.DataFrame
    _principal: pd.DataFrame = dataclasses.field(repr=False, default=None)  # type: ignore
    notes: tuple[str, ...] = ()

    def site_scores(self, scaling: str | None = None) -> pd.DataFrame:
        """Site scores for a biplot in the given scaling (default: ``self.scaling``).

        ``"distance"``: the principal components ``F = Y U`` (distances among sites preserved).
        ``"correlation"``: ``F Lambda^(-1/2)``, each axis with variance 1.
        """
        scaling = self.scaling if scaling is None else check_choice("scaling", scaling, SCALINGS)
        if scaling == "distance":
            return self._principal.copy()
        return self._principal / np.sqrt(self.eigenvalues.to_numpy())

    def variable_scores(self, scaling: str | None = None) -> pd.DataFrame:
        """Variable scores (arrows) for a biplot in the given scaling (default ``self.scaling``).

        ``"distance"``: the unit-length eigenvectors ``U``. ``"correlation"``:
        ``U Lambda^(1/2)``; for a standardised table these are the correlations between the
        variables and the axes.
        """
        scaling = self.scaling if scaling is None else check_choice("scaling", scaling, SCALINGS)
        if scaling == "distance":
            return self.eigenvectors.copy()
        return self.eigenvectors * np.sqrt(self.eigenvalues.to_numpy())


def pca(table: pd.DataFrame, *, scale: bool = True, scaling: str = "distance") -> PCAResult:
    """Principal component analysis of a site x variable table.

    Parameters
    ----------
    table : pandas.DataFrame
        Sites (rows, labels kept) x numeric variables, no missing values.
    scale : bool, default True
        Standardise each variable to unit standard deviation (``ddof=1``) first, i.e. a PCA of
        the correlation matrix, the usual choice for environmental variables in different units.
        ``False`` analyses the covariance matrix of the centred table.
    scaling : {"distance", "correlation"}, default "distance"
        Biplot scaling of ``scores`` and ``loadings``; both stay available through
        :meth:`PCAResult.site_scores` and :meth:`PCAResult.variable_scores`.

    Returns
    -------
    PCAResult

    Notes
    -----
    With ``Y`` the centred (and, if `scale`, standardised) table and its singular value
    decomposition ``Y = W S V'``, the eigenvectors are ``U = V``, the eigenvalues
    ``lambda = S**2 / (n - 1)`` (variances of the components, divisor ``n - 1``, so they sum
    to the number of variables when `scale`) and the principal components ``F = Y U = W S``.
    Following Legendre & Legendre [1]_ (sect. 9.1):

    - distance biplot (scaling 1): sites ``F``, variables ``U``; distances among sites
      approximate their Euclidean distances in the table;
    - correlation biplot (scaling 2): sites ``F Lambda^(-1/2)``, variables ``U Lambda^(1/2)``;
      angles between variable arrows reflect their correlations, and for a standardised table
      the variable scores are the correlations of the variables with the components.

    Axes with zero variance (more variables than sites minus one, or collinear variables) are
    dropped. Sign convention: each eigenvector is oriented so that its largest-magnitude
    element is positive.

    References
    ----------
    .. [1] Legendre, P. & Legendre, L. (2012). Numerical Ecology, 3rd English ed., ch. 9.
       Elsevier.

    Examples
    --------
    >>> import pandas as pd
    >>> from gradients.ordination import pca
    >>> env = pd.DataFrame({"pH": [6.1, 6.8, 7.4, 5.9], "Cu": [12.0, 30.0, 41.0, 8.0]},
    ...                    index=["s1", "s2", "s3", "s4"])
    >>> res = pca(env)
    >>> round(float(res.eigenvalues.sum()), 6)
    2.0
    """
    if not isinstance(scale, bool | np.bool_):
        raise InputError(f"`scale` must be True or False; got {scale!r}.")
    check_choice("scaling", scaling, SCALINGS)
    frame = check_numeric_table(table, name="table")
    n, p = frame.shape
    if n < 2 or p < 1:
        raise InputError(f"PCA needs at least 2 sites and 1 variable; the table is {n} x {p}.")
    values = frame.to_numpy()
    centre = values.mean(axis=0)
    y = values - centre
    spread = np.ones(p)
    if scale:
        spread = values.std(axis=0, ddof=1)
        const = spread <= 1e-12 * np.maximum(np.abs(centre), 1.0)
        if const.any():
            cols = list(frame.columns[const])
            raise InputError(
                f"Column(s) {format_items(cols)} do not vary among sites, so they cannot be "
                "standardised. Drop them before the PCA.",
                columns=cols,
            )
        y = y / spread
    w, s, vt = np.linalg.svd(y, full_matrices=False)
    keep = s > 1e-10 * s[0] if s.size and s[0] > 0 else np.zeros(s.shape, dtype=bool)
    if not keep.any():
        raise InputError("No variable varies among sites: there is nothing to ordinate.")
    notes: list[str] = []
    if not keep.all():
        notes.append(f"{int((~keep).sum())} axis/axes with zero variance dropped (more variables "
                     "than sites minus one, or collinear variables).")
    w, s, u = w[:, keep], s[keep], vt[keep].T
    signs = orient_columns(u)
    u, w = u * signs, w * signs
    k = s.size
    names = axis_names(k)
    eig = s**2 / (n - 1)
    index = pd.Index(names, name="axis")
    eigenvalues = pd.Series(eig, index=index, name="eigenvalue")
    prop = eig / eig.sum()
    proportion = pd.Series(prop, index=index, name="proportion")
    vectors = pd.DataFrame(u, index=frame.columns.copy(), columns=names)
    principal = pd.DataFrame(w * s, index=frame.index.copy(), columns=names)
    table_out = pd.DataFrame({"eigenvalue": eig, "proportion": prop,
                              "cumulative": np.cumsum(prop)}, index=index)
    partial = PCAResult(
        eigenvalues=eigenvalues, proportion_explained=proportion, eigenvectors=vectors,
        scaling=scaling, scores=principal, loadings=vectors, scaled=bool(scale),
        centre=pd.Series(centre, index=frame.columns.copy(), name="centre"),
        spread=pd.Series(spread, index=frame.columns.copy(), name="spread"),
        table=table_out, _principal=principal, notes=tuple(notes),
    )
    return dataclasses.replace(partial, scores=partial.site_scores(scaling),
                               loadings=partial.variable_scores(scaling))
