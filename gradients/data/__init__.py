"""Data stage: read, validate and align survey tables; the bundled demo scenario.

The public names are :class:`Survey`, :func:`read_survey`, :class:`Decision` (one record of
:attr:`Survey.log`), :func:`demo_survey` and :func:`simulate_survey`; for soil and water inputs,
:func:`texture_class` and :func:`guideline_quotients` (with its
:class:`GuidelineQuotientsResult`).

Module order (a module imports only modules above it in this list, so there is no import cycle):

1. ``_log``: :class:`Decision`, one record of what was done to the input.
2. ``_cells``: every cell read as a number, a missing value, a censored value or text.
3. ``_censored``: the ``censored=`` policies and robust ROS imputation.
4. ``_units``: units of environmental columns (pint), one quantity per column, conversion.
5. ``_compositions``: the one rule for compositions (parts sum to their total, or renormalise).
6. ``_texture``: USDA soil texture classes from sand, silt and clay.
7. ``_files``: files read into raw tables of cells (encodings, delimiters, sheets, layers).
8. ``_longform``: laboratory files in long form (one row per site and variable), pivoted.
9. ``_options``: the keyword options of :class:`Survey`, checked once.
10. ``_sites``: site matching: site IDs as labels, tables indexed by them, aligned on one index.
11. ``_tables``: parsing the community and environment tables.
12. ``_locations``: locations and CRS.
13. ``_policies``: missing and censored values, empty sites and taxa, constant columns.
14. ``_assemble``: raw inputs through every check into the parts of a survey.
15. ``_survey``: :class:`Survey` and :func:`read_survey`.
16. ``_screening``: guideline quotients against a screening table.
17. ``_demo_network``: the demo basin's river network, built from the site positions.
18. ``_demo_zones``: the demo's bank land-use zones, drawn after every other draw.
19. ``_demo``: the simulated demo survey with its planted truth.
"""

from ._demo import DemoScenario, demo_survey, simulate_survey
from ._log import Decision
from ._screening import GuidelineQuotientsResult, guideline_quotients
from ._survey import Survey, read_survey
from ._texture import texture_class

__all__ = ["Decision", "DemoScenario", "GuidelineQuotientsResult", "Survey", "demo_survey",
           "guideline_quotients", "read_survey", "simulate_survey", "texture_class"]
