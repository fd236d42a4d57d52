"""Planning stage: how many sites a survey needs to detect each gradient, by simulation.

A generating model of the community (:func:`fit_generating_model` from a pilot survey, or
:func:`assumed_model` from stated assumptions) draws many surveys of each planned size;
:func:`survey_power` analyses each as ``gradients run`` analyses a project and reports the share
that detect each hypothesis (:class:`SurveyPowerResult`). :func:`plan_project` does the same for
a project file and writes a small report folder (``gradients plan``). The stage sits above the
report, whose analysis steps it re-runs.
"""

from ._assumed import assumed_model
from ._folder import plan_project
from ._model import GeneratingModelResult, fit_generating_model
from ._power import SurveyPowerResult, survey_power

__all__ = [
    "GeneratingModelResult",
    "SurveyPowerResult",
    "assumed_model",
    "fit_generating_model",
    "plan_project",
    "survey_power",
]
