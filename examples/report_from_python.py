"""Run a project from Python, look at the verdicts, then write the report folder.

Run from the top of the repository:

    python examples/report_from_python.py

The project is the Corvanne Basin example (invented demo data) in examples/corvanne/.
"""

from __future__ import annotations

import sys
from pathlib import Path

from gradients.report import analyse, load_project, read_project_survey, write_report

here = Path(__file__).parent
project = load_project(here / "corvanne" / "project.toml")
survey = read_project_survey(project)
print(f"{survey.community.shape[0]} sites, {survey.community.shape[1]} taxa")
for decision in survey.log:
    print("input decision:", decision)

settings = {**project.settings, "permutations.count": 199}  # quicker than the file's 999
outcome = analyse(survey, settings=settings, hypotheses=project.hypotheses)
for line in outcome.summary:
    print(line)

verdicts = outcome.tables["hypothesis_verdicts"]
print(verdicts[["verdict", "partial_mantel_r", "partial_mantel_pvalue_holm"]])

out = Path(sys.argv[1]) if len(sys.argv) > 1 else Path("corvanne-report-python")
folder = write_report(outcome, out, force=True)
print(f"report written to {folder / 'report.html'}")
