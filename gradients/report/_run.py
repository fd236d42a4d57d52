"""Running a whole job: project -> survey -> analyses -> report folder."""

from __future__ import annotations

import hashlib
import json
import platform
import sys
import time
from importlib import metadata
from pathlib import Path
from typing import Any

import pandas as pd

from .._errors import InputError
from ._html import render_html
from ._memory import check_memory
from ._methods import methods_paragraph
from ._model import Outcome
from ._pipeline import Context, run_steps
from ._project import Project, defaults, load_project
from ._safety import safe_name
from ._writers import OutputFolder, write_csv, write_workbook

__all__ = ["analyse", "read_project_survey", "run_project", "write_report"]

DEPENDENCIES = ("numpy", "scipy", "pandas", "statsmodels", "matplotlib", "geopandas", "shapely",
                "pyproj", "pyogrio", "numba", "joblib", "openpyxl", "pint")


def _version() -> str:
    from .. import __version__

    return __version__


def software_versions() -> dict[str, str]:
    """Versions of Python, gradients and its dependencies."""
    out = {"gradients": _version(), "python": platform.python_version()}
    for name in DEPENDENCIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def read_project_survey(project: Project) -> Any:
    """Read and validate the survey tables a project names."""
    from ..data import read_survey

    s = project.settings
    try:
        return _read(read_survey, s)
    except InputError as exc:
        raise InputError(_project_words(str(exc)), file=exc.file, sites=exc.sites,
                         columns=exc.columns) from None


#: The data stage's advice names Python options; in a project they are keys of [inputs].
_PROJECT_KEYS = {
    "shared_sites_only=True": '[inputs] unmatched_sites = "keep-shared"',
    "missing='drop-sites'": '[inputs] missing = "drop-sites"',
    "missing='drop-variables'": '[inputs] missing = "drop-variables"',
    "empty_sites='drop'": '[inputs] empty_sites = "drop"',
    "constant='drop'": '[inputs] constant = "drop"',
    "censored='ros'": '[inputs] below_detection = "ros"',
    "censored='half-limit'": '[inputs] below_detection = "half-limit"',
    "censored='limit'": '[inputs] below_detection = "limit"',
    "censored='zero'": '[inputs] below_detection = "zero"',
}


def _project_words(message: str) -> str:
    """Say the data stage's advice in the project file's keys."""
    for option, key in _PROJECT_KEYS.items():
        message = message.replace(f"`{option}`", key).replace(option, key)
    return message


def _read(read_survey: Any, s: dict[str, Any]) -> Any:
    return read_survey(
        s["inputs.community"], s["inputs.environment"], s["inputs.locations"],
        site_column=s["inputs.site_column"],
        sheet=dict(s.get("inputs.sheets") or {}) or None,
        coordinates=tuple(s["inputs.coordinates"]) or None,
        crs=s["inputs.crs"],
        factors=list(s["environment.factors"]) or None,
        shared_sites_only=s["inputs.unmatched_sites"] == "keep-shared",
        missing=s["inputs.missing"],
        censored=s["inputs.below_detection"],
        empty_sites=s["inputs.empty_sites"],
        constant=s["inputs.constant"],
        units=dict(s.get("environment.units") or {}) or None,
        quantities=dict(s.get("environment.quantities") or {}) or None,
    )


def _jsonable(value: Any) -> Any:
    if isinstance(value, Path):
        return str(value)
    if isinstance(value, tuple | list):
        return [_jsonable(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    return value


def analyse(survey: Any, *, settings: dict[str, Any] | None = None,
            hypotheses: dict[str, tuple[str, ...]] | None = None, title: str | None = None,
            inputs: dict[str, Path] | None = None, demo: Any = None) -> Outcome:
    """Run every analysis a project asks for on ``survey`` and collect the report content.

    Parameters
    ----------
    survey : Survey
        The validated survey.
    settings : dict, optional
        ``"section.key"`` settings as in :class:`Project` (defaults for those not given).
    hypotheses : dict, optional
        Hypothesis name -> variables.
    title : str, optional
    inputs : dict, optional
        Role -> input file, for the checksums in ``run.json``.
    demo : DemoScenario, optional
        The planted truth of a simulated survey; adds the section comparing it with what was
        found.
    """
    from .steps import STEPS, order_sections

    full = defaults()
    full.update(settings or {})
    hypotheses = dict(hypotheses or {})
    start = time.perf_counter()
    ctx = Context(settings=full, hypotheses=hypotheses, survey=survey,
                  seed=int(full["permutations.seed"]), n_resamples=int(full["permutations.count"]))
    ctx.results["demo"] = demo
    run_steps(ctx, STEPS)
    decisions = [str(d) for d in getattr(ctx.survey, "log", ())]
    decisions += [str(d) for d in ctx.results.get("input_decisions", [])]
    strata = full["design.strata"]
    groups: dict[str, dict[str, int]] = {}
    env = survey.environment
    grouping = [strata] if strata else []
    fac = ctx.results.get("factors")
    if fac is not None:
        grouping += [f for f in fac.table.index if f not in grouping]
    for g in grouping:
        if g in env.columns:
            groups[str(g)] = {str(k): int(v) for k, v in
                              env[g].value_counts(sort=False).sort_index().items()}
    methods = methods_paragraph(
        version=_version(), sentences=ctx.methods, decisions=decisions,
        n_resamples=ctx.n_resamples, seed=ctx.seed, n_sites=survey.community.shape[0],
        n_taxa=survey.community.shape[1], groups=groups, strata=strata)
    run_info: dict[str, Any] = {
        "software": software_versions(),
        "platform": {"system": platform.system(), "machine": platform.machine(),
                     "python_implementation": platform.python_implementation()},
        "command": sys.argv[:1] and [Path(sys.argv[0]).name, *sys.argv[1:]],
        "inputs": {role: {"path": str(p), "sha256": sha256(Path(p))}
                   for role, p in (inputs or {}).items() if p is not None},
        "parameters": _jsonable(full),
        "hypotheses": _jsonable(hypotheses),
        "seed": ctx.seed,
        "permutations": ctx.n_resamples,
        "survey": {"n_sites": int(survey.community.shape[0]),
                   "n_taxa": int(survey.community.shape[1]),
                   "n_variables": int(env.shape[1]),
                   "locations": survey.locations is not None},
        "decisions": decisions,
        "skipped": [{"analysis": a, "reason": r} for a, r in ctx.skipped],
        "timings": {**ctx.timings, "analysis_total": round(time.perf_counter() - start, 3)},
    }
    sites = pd.DataFrame(ctx.site_columns) if ctx.site_columns else None
    return Outcome(title=title or full["title"], sections=order_sections(ctx.sections),
                   methods=methods,
                   run_info=run_info, sites=sites, locations=survey.locations,
                   skipped=ctx.skipped, summary=list(ctx.results.get("summary", [])))


def _unique(name: str, used: set[str]) -> str:
    base, k = name, 2
    while name.lower() in used:
        name = f"{base}-{k}"
        k += 1
    used.add(name.lower())
    return name


def write_report(outcome: Outcome, out: str | Path, *, force: bool = False) -> Path:
    """Write the report folder for ``outcome`` and return its path.

    The folder is written beside ``out`` under a temporary name and renamed into place when
    complete; see :class:`~gradients.report._writers.OutputFolder`.
    """
    from ._figure_files import save_figure  # matplotlib is loaded only to write figures

    start = time.perf_counter()
    folder = OutputFolder(out, force=force)
    tables = outcome.tables
    used: set[str] = set()
    table_files = {name: _unique(safe_name(name), used) for name in tables}
    used = set()
    figure_files: dict[str, str] = {}
    for s in outcome.sections:
        for name in s.figures:
            figure_files[name] = _unique(safe_name(name), used)
    files = (["report.html", "methods.md", "run.json", "tables.xlsx"]
             + [f"tables/{f}.csv" for f in table_files.values()]
             + [f"figures/{f}.{ext}" for f in figure_files.values() for ext in ("png", "svg")])
    has_gis = outcome.locations is not None
    if has_gis:
        files.append("sites.gpkg")
    info = dict(outcome.run_info)
    info["files"] = sorted(files)
    outcome.run_info = info
    with folder:
        for name, frame in tables.items():
            write_csv(frame, folder.path(f"tables/{table_files[name]}.csv"))
        write_workbook(tables, folder.path("tables.xlsx"))
        from ..permutation import current_reporter

        reporter = current_reporter()
        svg: dict[str, bytes] = {}
        for s in outcome.sections:
            for name, fig in s.figures.items():
                if reporter is not None:
                    reporter("writing figures", len(svg), len(figure_files))
                base = figure_files[name]
                save_figure(fig, folder.path(f"figures/{base}"))
                svg[name] = folder.path(f"figures/{base}.svg").read_bytes()
        if reporter is not None:
            reporter("writing figures", len(figure_files), len(figure_files))
        if has_gis:
            _write_gis(outcome, folder.path("sites.gpkg"))
        folder.path("methods.md").write_text("# Methods\n\n" + outcome.methods, encoding="utf-8")
        html = render_html(outcome, svg, figure_files)
        folder.path("report.html").write_text(html, encoding="utf-8")
        info["timings"] = {**info["timings"],
                           "writing": round(time.perf_counter() - start, 3)}
        folder.path("run.json").write_text(json.dumps(info, indent=2, ensure_ascii=False)
                                           + "\n", encoding="utf-8")
        return folder.commit()


def _write_gis(outcome: Outcome, path: Path) -> None:
    import geopandas as gpd

    loc = outcome.locations
    frame = pd.DataFrame(index=loc.index)
    if outcome.sites is not None:
        frame = frame.join(outcome.sites)
    for col in frame.columns:  # texture and exceedance classes: plain text in the layer
        if isinstance(frame[col].dtype, pd.CategoricalDtype) or frame[col].dtype == object:
            frame[col] = frame[col].astype(object).where(frame[col].notna(), None)
    frame.columns = [str(c) for c in frame.columns]
    gdf = gpd.GeoDataFrame(frame, geometry=loc.geometry.values, crs=loc.crs)
    gdf.index = pd.Index([str(i) for i in loc.index], name="site")
    gdf = gdf.reset_index()
    gdf.to_file(path, layer="sites", driver="GPKG")


def run_project(project: str | Path | Project, *, out: str | Path | None = None,
                force: bool = False) -> Path:
    """Run the project file ``project`` and write its report folder; return the folder."""
    if not isinstance(project, Project):
        project = load_project(project)
    target = Path(out) if out is not None else Path(project["output.folder"])
    OutputFolder(target, force=force)  # refuse early, before minutes of computation
    survey = read_project_survey(project)
    check_hypotheses(project, survey)
    check_memory(project, survey)
    s = project.settings
    inputs = {"community": s["inputs.community"], "environment": s["inputs.environment"],
              "locations": s["inputs.locations"], "network": s["geography.network"]}
    if project.source is not None:
        inputs["project"] = project.source
    outcome = analyse(survey, settings=s, hypotheses=project.hypotheses, inputs=inputs)
    return write_report(outcome, target, force=force)


def check_hypotheses(project: Project, survey: Any) -> None:
    """Raise InputError when the project names variables the survey does not have."""
    env = survey.environment
    named = {f"hypotheses.{h}": list(v) for h, v in project.hypotheses.items()}
    for key in ("design.covariables", "environment.log10", "environment.factors",
                "environment.surfaces", "environment.texture"):
        named[key] = list(project[key])
    # columns the report derives before the analyses (see report/steps/soil.py)
    derived = {"mean_quotient"} if project["environment.screening"] else set()
    named["environment.compositions"] = [p for g in project["environment.compositions"]
                                         for p in g]
    if project["design.strata"]:
        named["design.strata"] = [project["design.strata"]]
    for key, names in named.items():
        absent = [v for v in names if v not in env.columns and v not in derived]
        if absent:
            from .._errors import format_items

            raise InputError(
                f"`{key}` names {format_items(absent)}, which the environmental table does not "
                f"have (it has {format_items(env.columns, limit=30)}). Fix the names in the "
                "project file.", columns=absent)
