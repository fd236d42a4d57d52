"""``gradients check``: the dry run of a project (or of tables), saying what would be analysed.

The check is the run's own pre-flight (:func:`~gradients.report._run.prepare_run`): the inputs
are read, the distance matrices prepared and every analysis the run would make checks its
inputs, with no permutation drawn. Whatever would make ``gradients run`` refuse makes the check
fail with the same message; an analysis the run would leave out is listed with its reason.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ._project import Project, load_project, project_from_dict
from ._run import Prepared, prepare_run

__all__ = ["check", "check_project", "check_tables", "describe"]


def check(path: str | Path, *, out: str | Path | None = None) -> Prepared:
    """The dry run of the project file ``path``; raise InputError on any error.

    The output folder (``out``, else ``output.folder``) is checked as a run would check it:
    that it can be written at all, and that it is not a file or a folder of other files
    (which ``--force`` would not replace). An existing report folder is said by
    :func:`describe`: a run replaces it only with ``--force``.
    """
    from ._writers import check_target, check_writable

    project = load_project(path)
    target = Path(out if out is not None else project["output.folder"]).expanduser().absolute()
    check_target(target, force=True)
    check_writable(target)
    prepared = prepare_run(project)
    prepared.refuse()
    return prepared


def check_project(path: str | Path) -> tuple[Any, Project]:
    """Load and validate a project file and its tables; return the survey and project.

    The whole pre-flight of a run is made (see :func:`check`): the distance between sites is
    computed as a run would, so that a river network that misses a site is reported here with
    the key to change, and so is every input an analysis of the run would refuse.
    """
    prepared = prepare_run(load_project(path))
    prepared.refuse()
    assert prepared.project is not None
    return prepared.survey, prepared.project


def check_tables(community: str, environment: str, locations: str | None, *,
                 site_column: str = "site", crs: str | None = None,
                 censored: str = "error") -> Prepared:
    """Validate tables named on the command line (no project file): the pre-flight of a run
    with the default settings."""
    inputs: dict[str, Any] = {"community": str(Path(community).absolute()),
                              "environment": str(Path(environment).absolute()),
                              "site_column": site_column, "below_detection": censored}
    if locations:
        inputs["locations"] = str(Path(locations).absolute())
    if crs:
        inputs["crs"] = crs
    project = project_from_dict({"inputs": inputs})
    prepared = prepare_run(project)
    prepared.refuse()
    return prepared


def describe(survey: Any, project: Project, prepared: Prepared | None = None) -> str:
    """What a run of ``project`` would analyse, in a few lines of text (with the warnings and
    the analyses left out, when ``prepared`` is given)."""
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
        folder = Path(project["output.folder"])
        lines.append(f"Output folder: {folder}" + (
            " (it exists: `gradients run` replaces it only with --force)"
            if folder.exists() else ""))
    log = [str(d) for d in getattr(survey, "log", ())]
    if prepared is not None:
        log += [str(d) for d in prepared.context.results.get("input_decisions", [])]
    if log:
        lines.append("Input decisions:")
        lines.extend(f"  - {d}" for d in log)
    if prepared is not None:
        if prepared.planned_skips:
            lines.append("Analyses not run (a reason of the data):")
            lines.extend(f"  - {name}: {why}" for name, why in prepared.planned_skips.items())
        if prepared.warnings:
            lines.append("Warnings:")
            lines.extend(f"  - {f.message}" for f in prepared.warnings)
    return "\n".join(lines)
