"""``gradients check``: validate a project (or tables) and say what would be analysed."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ._geography import site_distances
from ._memory import check_memory
from ._project import Project, load_project, project_from_dict
from ._run import check_hypotheses, read_project_survey

__all__ = ["check_project", "check_tables", "describe"]


def check_project(path: str | Path) -> tuple[Any, Project]:
    """Load and validate a project file and its tables; return the survey and project.

    The distance between sites is computed as a run would (:func:`site_distances`), so that a
    river network that misses a site, or a method that does not suit the coordinates, is
    reported here with the key to change.
    """
    project = load_project(path)
    survey = read_project_survey(project)
    check_hypotheses(project, survey)
    if survey.locations is not None:
        site_distances(project.settings, survey.locations)
    check_memory(project, survey)
    return survey, project


def check_tables(community: str, environment: str, locations: str | None, *,
                 site_column: str = "site", crs: str | None = None,
                 censored: str = "error") -> tuple[Any, Project]:
    """Validate tables named on the command line (no project file)."""
    inputs: dict[str, Any] = {"community": str(Path(community).absolute()),
                              "environment": str(Path(environment).absolute()),
                              "site_column": site_column, "below_detection": censored}
    if locations:
        inputs["locations"] = str(Path(locations).absolute())
    if crs:
        inputs["crs"] = crs
    project = project_from_dict({"inputs": inputs})
    return read_project_survey(project), project


def describe(survey: Any, project: Project) -> str:
    """What a run of ``project`` would analyse, in a few lines of text."""
    env = survey.environment
    numeric = [c for c in env.columns if str(env[c].dtype) != "category"]
    factors = [c for c in env.columns if str(env[c].dtype) == "category"]
    lines = ["Inputs are valid.",
             f"  sites:      {survey.community.shape[0]}",
             f"  taxa:       {survey.community.shape[1]}",
             f"  variables:  {len(numeric)} numeric ({', '.join(map(str, numeric)) or 'none'})"]
    if factors:
        lines.append(f"              {len(factors)} categorical ({', '.join(map(str, factors))})")
    lines.append(f"  locations:  {'yes' if survey.locations is not None else 'no'}"
                 + (f" (CRS {survey.locations.crs.to_string()})"
                    if survey.locations is not None else ""))
    if survey.locations is not None:
        method = project["geography.method"]
        network = project["geography.network"]
        if network is not None:
            lines.append(f"  geography:  in-stream distances along {Path(network).name} "
                         f"(sites within {project['geography.snap_tolerance']:g} m of a line)")
        else:
            lines.append(f"  geography:  {method} distances" + (
                " (geodesic for longitude/latitude, euclidean for projected coordinates)"
                if method == "auto" else ""))
    censored = getattr(survey, "censored", None)
    if censored is not None and censored.to_numpy().any():
        counts = censored.sum()
        parts = ", ".join(f"{c} {int(n)}" for c, n in counts.items() if n)
        lines.append(f"  censored:   {int(counts.sum())} cells below a detection limit ({parts}),"
                     f" handled by {project['inputs.below_detection']!r}")
    else:
        lines.append("  censored:   none")
    if project.hypotheses:
        lines.append("Hypotheses:")
        width = max(len(h) for h in project.hypotheses)
        for h, vs in project.hypotheses.items():
            lines.append(f"  {h:<{width}}  {', '.join(vs)}")
    else:
        lines.append("Hypotheses: none named (add a [hypotheses] section to test groups of "
                     "variables).")
    if project["design.covariables"]:
        lines.append(f"Covariables: {', '.join(project['design.covariables'])}")
    if project["design.strata"]:
        lines.append(f"Permutations within: {project['design.strata']}")
    analyses = [k.split(".")[1] for k, v in project.settings.items()
                if k.startswith("analyses.") and v is True]
    lines.append(f"Analyses: {project['analyses.ordination']} ordination; {', '.join(analyses)}")
    lines.append(f"Permutations: {project['permutations.count']}, seed "
                 f"{project['permutations.seed']}")
    if project.source is not None:
        lines.append(f"Output folder: {project['output.folder']}")
    log = list(getattr(survey, "log", ()))
    if log:
        lines.append("Input decisions:")
        lines.extend(f"  - {d}" for d in log)
    return "\n".join(lines)
