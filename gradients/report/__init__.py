"""Report stage: project files, the whole job, and the report folder it writes.

The public names are :func:`load_project` (read and validate a project file),
:class:`Project`, :func:`run_project` (run it and write the report folder), :func:`run_demo`
(the whole job on the bundled demo data), :func:`init_project` (write a template project),
:func:`analyse` and :func:`write_report` (the two halves of a run, for use from Python), and
:class:`StepError` (an analysis step failed for a reason other than the data; no report folder
is written).
"""

from ._demo import init_project, project_template, run_demo
from ._pipeline import StepError
from ._project import SCHEMA, Project, load_project, project_from_dict
from ._run import analyse, read_project_survey, run_project, write_report

__all__ = [
    "SCHEMA",
    "Project",
    "StepError",
    "analyse",
    "init_project",
    "load_project",
    "project_from_dict",
    "project_template",
    "read_project_survey",
    "run_demo",
    "run_project",
    "write_report",
]
