"""I-spline bases (Ramsay 1988): monotone functions from 0 to 1 for the turnover model.

An I-spline of order ``k`` is the integral of an M-spline of order ``k``, a piecewise
polynomial density; so each rises from 0 at the lowest knot to 1 at the highest and never
falls, and any combination with non-negative coefficients is monotone. The turnover model uses
order 2 (piecewise-linear M-splines, piecewise-quadratic I-splines): with knots
``kappa_0 < ... < kappa_{q+1}`` there are ``q + 2`` of them, one per knot, so the default of
three knots at the minimum, median and maximum gives three bases per predictor.

They are evaluated through B-splines: with the knot sequence of the M-splines extended by one
more copy of each boundary knot, ``I_i(x | k) = sum_{j > i} B_j(x | k + 1)`` (Ramsay 1988,
Section 2; the B-splines sum to one), computed with :meth:`scipy.interpolate.BSpline.design_matrix`.
Outside the knots the bases are constant (0 below, 1 above).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.interpolate import BSpline

from .._errors import InputError

__all__ = ["ORDER", "ISplineBasis", "quantile_knots"]

#: Order of the M-splines; the I-splines are piecewise polynomials of this degree.
ORDER = 2


def quantile_knots(values: np.ndarray, n_splines: int) -> np.ndarray:
    """``n_splines`` knots at evenly spaced quantiles of ``values`` (repeated ones dropped)."""
    probs = np.linspace(0.0, 1.0, n_splines)
    return np.unique(np.quantile(values, probs))


@dataclass(frozen=True)
class ISplineBasis:
    """The I-spline bases of one predictor, defined by its knots (lowest and highest included).

    Examples
    --------
    >>> import numpy as np
    >>> basis = ISplineBasis(np.array([0.0, 1.0, 4.0]))
    >>> basis(np.array([0.0, 4.0])).round(3).tolist()
    [[0.0, 0.0, 0.0], [1.0, 1.0, 1.0]]
    """

    knots: np.ndarray

    def __post_init__(self) -> None:
        knots = np.asarray(self.knots, dtype=np.float64)
        if knots.ndim != 1 or knots.size < 2 or not np.all(np.isfinite(knots)) \
                or np.any(np.diff(knots) <= 0):
            raise InputError("Knots must be at least two finite, strictly increasing values; "
                             f"got {self.knots!r}.")
        object.__setattr__(self, "knots", knots)

    @property
    def size(self) -> int:
        """Number of basis functions (one per knot)."""
        return int(self.knots.size)

    @property
    def low(self) -> float:
        return float(self.knots[0])

    @property
    def high(self) -> float:
        return float(self.knots[-1])

    def __call__(self, x: np.ndarray) -> np.ndarray:
        """Values of every basis at ``x``: shape ``(len(x), size)``."""
        x = np.clip(np.asarray(x, dtype=np.float64).ravel(), self.low, self.high)
        k = self.knots
        t = np.concatenate([[k[0]] * (ORDER + 1), k[1:-1], [k[-1]] * (ORDER + 1)])
        b = BSpline.design_matrix(x, t, ORDER).toarray()  # (len(x), size + 1), rows sum to 1
        tail = np.cumsum(b[:, ::-1], axis=1)[:, ::-1]  # tail[:, j] = sum_{l >= j} B_l
        return np.clip(tail[:, 1:], 0.0, 1.0)
