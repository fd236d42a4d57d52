"""Fitting stage: environmental vectors, factor centroids and smooth surfaces on ordination axes.

:func:`fit_vectors` fits every numeric variable as a direction (Kantvilas & Minchin 1989),
:func:`fit_factors` fits site classes as centroids, and :func:`fit_surface` fits one variable as
a penalised thin plate regression spline over two axes (Wood 2003). Every p-value comes from
the suite's permutation engine, with restricted designs (strata, cyclic, toroidal, blocks)
passed through; permutations are evaluated in batches by the kernels in ``_kernels``.
"""

from ._factors import ClassCentroidsResult, fit_factors
from ._surface import SurfaceFitResult, fit_surface
from ._vectors import GradientArrowsResult, fit_vectors

__all__ = ["ClassCentroidsResult", "GradientArrowsResult", "SurfaceFitResult", "fit_factors",
           "fit_surface", "fit_vectors"]
