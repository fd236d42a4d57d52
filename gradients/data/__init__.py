"""Data stage: read, validate and align survey tables; the bundled demo scenario.

The public names are :class:`Survey`, :func:`read_survey`, :class:`Decision` (one record of
:attr:`Survey.log`), :func:`demo_survey` and :func:`simulate_survey`.
"""

from ._demo import DemoScenario, demo_survey, simulate_survey
from ._log import Decision
from ._survey import Survey, read_survey

__all__ = ["Decision", "DemoScenario", "Survey", "demo_survey", "read_survey", "simulate_survey"]
