"""Validation of every permutation test of ``gradients`` by simulation.

For each test: data simulated under its null hypothesis at 10, 30 and 100 sites, for normal
data, skewed data and data with one outlier, give the rejection rate at alpha = 0.01 and 0.05
with its 99 % binomial (Clopper-Pearson) interval; data with a planted gradient of three
strengths give its power. The families, one module each:

- ``fitting``: vector fits, factor fits, surfaces (the test of the surface and its curvature);
- ``mantel``: simple Mantel tests with each correlation;
- ``partial``: partial Mantel tests with each permutation method, after Legendre (2000),
  including the confounded case (control correlated with the predictor);
- ``correlogram``: Mantel correlogram classes;
- ``regression``: multiple regression on distance matrices (R2 and each coefficient);
- ``partition``: dbRDA (model, marginal term, partial model, first axis) and the global test
  of forward selection;
- ``spatial``: Mantel tests of spatially autocorrelated fields, plain and spatially
  constrained null (Guillot & Rousset 2013; Moran spectral randomisation);
- ``decay``: coverage of the site-bootstrap interval of the distance-decay slope.

Run from the repository root::

    python -m validation [--quick] [--only NAME [NAME ...]] [--seed S]

A full run rewrites the generated tables of ``docs/validation.md`` (between its
``<!-- validation:... -->`` markers), the figures under ``docs/figures/validation/`` and the
raw rates under ``validation/results/``. ``--quick`` runs a few data sets per cell, prints the
tables and writes nothing unless ``--out`` is given; the unit tests run pieces of it.
"""

from __future__ import annotations

FAMILIES = ("fitting", "mantel", "partial", "correlogram", "regression", "partition",
            "spatial", "decay")

__all__ = ["FAMILIES"]
