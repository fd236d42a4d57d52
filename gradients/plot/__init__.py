"""Plot stage: the figures of a ``gradients`` report, drawn from result objects.

Every function takes the result objects of the analyses (an ordination result, a vector,
factor or surface fit, a correlogram, a distance decay) and an optional ``ax=``: given axes are
drawn into, otherwise a new figure is made in the house style. Each returns the
:class:`~matplotlib.axes.Axes` it drew into (the :class:`~matplotlib.figure.Figure` where it
draws several panels) and never writes a file: save with ``ax.figure.savefig(...)``. The report
draws its figures with these same functions.

- Ordination: :func:`biplot`, built from the layers :func:`sites`, :func:`taxa`,
  :func:`arrows` and :func:`centroids` (and :func:`legend` for the legend of the layers);
  :func:`surface` (a fitted surface as contours); :func:`shepard` (the Shepard diagram of an
  NMDS).
- Matrix tests: :func:`correlogram` (Mantel correlogram), :func:`distance_decay`.
- Group contrasts: :func:`dendrogram` (the tree of a site clustering), :func:`dispersion`
  (distances to class centroids behind a dispersion test).
- Hypotheses: :func:`hypotheses`.
- Ranking: :func:`ranking` (variables ranked against turnover), :func:`turnover_curves` (the
  fitted turnover functions, steepest stretch marked).
- Space and environment: :func:`partition` (the fractions of a variation partitioning, one
  bar), :func:`spatial_eigenvector_map` (spatial eigenvectors over the sites).
- Soil and water: :func:`texture_triangle` (sites on the soil texture triangle over the
  class boundaries); :func:`quotient_map` (sites on a map by exceedance of screening values).
- Planning: :func:`power_curve` (power of a survey plan against the number of sites).
- :func:`house_style`: the house style as a ``with`` block, to restyle or save a figure.

No pyplot is used: figures are built on :class:`matplotlib.figure.Figure` directly, so nothing
opens a window and no global matplotlib state changes.
"""

from ._biplot import biplot
from ._groups import dendrogram, dispersion
from ._hypotheses import hypotheses
from ._matrix import correlogram, distance_decay
from ._ordination import arrows, centroids, legend, sites, taxa
from ._partition import partition, spatial_eigenvector_map
from ._planning import power_curve
from ._ranking import ranking, turnover_curves
from ._soil import quotient_map, texture_triangle
from ._style import house_style
from ._surfaces import shepard, surface

__all__ = [
    "arrows",
    "biplot",
    "centroids",
    "correlogram",
    "dendrogram",
    "dispersion",
    "distance_decay",
    "house_style",
    "hypotheses",
    "legend",
    "partition",
    "power_curve",
    "quotient_map",
    "ranking",
    "shepard",
    "sites",
    "spatial_eigenvector_map",
    "surface",
    "taxa",
    "texture_triangle",
    "turnover_curves",
]
