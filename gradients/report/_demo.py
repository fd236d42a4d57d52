"""The demo job, its planted-truth step, and the template project written by ``gradients init``."""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

import pandas as pd

from .._errors import InputError
from ._model import Section
from ._pipeline import Context
from ._project import project_from_dict
from ._run import analyse, write_report
from ._writers import OutputFolder

__all__ = ["DEMO_HYPOTHESES", "DEMO_PERMUTATIONS", "init_project", "planted_truth_step",
           "project_template", "run_demo"]

#: Default permutations of the demo (and of the template project).
DEMO_PERMUTATIONS = 999

#: The demo's named hypotheses: two planted gradients and one group of variables that the
#: generator makes inert (pH, organic matter) or only a nuisance (conductivity).
DEMO_HYPOTHESES: dict[str, tuple[str, ...]] = {
    "contamination": ("Cu", "Zn", "Pb", "Cd"),
    "texture": ("sand", "silt", "clay"),
    "water_and_organic": ("pH", "organic_matter", "conductivity"),
}


def project_template(*, data_folder: str = "data", permutations: int = DEMO_PERMUTATIONS,
                     seed: int = 1) -> str:
    """The text of a commented, runnable project file for the demo data."""
    return f'''# gradients project file (TOML). Every key is described in docs/project-file.md.
# Run it with:   gradients check project.toml   then   gradients run project.toml
# Relative paths are read from the folder holding this file.

title = "Corvanne Basin invertebrate survey (invented demo data)"

[inputs]
community = "{data_folder}/community.csv"      # sites x taxa counts, one row per site
environment = "{data_folder}/environment.csv"  # sites x variables; "<0.2" = below detection
locations = "{data_folder}/locations.gpkg"     # site points (GeoPackage, GeoJSON, CSV + crs)
site_column = "site"                  # the column with the site IDs in every table
below_detection = "ros"               # "error", "half-limit", "limit", "zero" or "ros"
missing = "error"                     # empty cells: "error", "drop-sites", "drop-variables"
unmatched_sites = "error"             # "error" or "keep-shared"

[community]
transform = "none"                    # "none", "relative", "hellinger", "wisconsin", "log1p",
                                      # "presence"
dissimilarity = "bray-curtis"

[environment]
log10 = ["Cu", "Zn", "Pb", "Cd"]      # right-skewed concentrations
compositions = [["sand", "silt", "clay"]]  # parts that sum to 100 %: isometric log-ratios
factors = ["habitat"]                 # categorical variables shown as class centroids
surfaces = ["Cu", "sand"]             # variables drawn as smooth surfaces on the ordination

# Each hypothesis is a named group of variables; each is tested against community turnover
# while controlling for the others and for space.
[hypotheses]
contamination = ["Cu", "Zn", "Pb", "Cd"]
texture = ["sand", "silt", "clay"]
water_and_organic = ["pH", "organic_matter", "conductivity"]

[design]
covariables = []                      # variables controlled for in every test
# strata = "campaign"                 # permute within the classes of this column

[analyses]
ordination = "nmds"                   # "nmds" or "pcoa"
dimensions = 2

[permutations]
count = {permutations}
seed = {seed}

[output]
folder = "report"
'''


def init_project(folder: str | Path) -> Path:
    """Write a runnable template project (``project.toml`` plus the demo data) into ``folder``.

    ``folder`` must not exist or be empty. Returns the project file.
    """
    from ..data._demo import DEMO_DIR

    folder = Path(folder).expanduser()
    if folder.exists() and (not folder.is_dir() or any(folder.iterdir())):
        raise InputError(f"{str(folder)!r} already exists and is not an empty folder; choose a "
                         "new folder for the template project.")
    data = folder / "data"
    data.mkdir(parents=True, exist_ok=True)
    for name in ("community.csv", "environment.csv", "locations.gpkg"):
        shutil.copyfile(DEMO_DIR / name, data / name)
    project = folder / "project.toml"
    project.write_text(project_template(), encoding="utf-8")
    return project


def demo_settings(n_resamples: int, seed: int, folder: Path) -> dict[str, Any]:
    import tomllib

    from ..data._demo import DEMO_DIR

    data = tomllib.loads(project_template(data_folder=str(DEMO_DIR), permutations=n_resamples,
                                          seed=seed))
    data["title"] = "Corvanne Basin demo: recovering a planted truth"
    data["output"]["folder"] = str(folder)
    return data


def run_demo(out: str | Path, *, force: bool = False, n_resamples: int = DEMO_PERMUTATIONS,
             seed: int = 1, overrides: dict[str, Any] | None = None) -> Path:
    """Run the whole job on the bundled Corvanne Basin data and write the report to ``out``.

    ``overrides`` maps ``"section.key"`` settings to values that replace the demo's (for
    example ``{"analyses.starts": 5}`` for a quicker run).
    """
    from ..data import demo_survey, simulate_survey
    from ..data._demo import DEFAULT_SEED, DEMO_DIR

    OutputFolder(out, force=force)  # refuse early
    project = project_from_dict(demo_settings(n_resamples, seed, Path(out)))
    survey = demo_survey(censored=project["inputs.below_detection"])
    truth = simulate_survey(seed=DEFAULT_SEED)
    inputs = {name.split(".")[0]: DEMO_DIR / name
              for name in ("community.csv", "environment.csv", "locations.gpkg")}
    settings = {**project.settings, **(overrides or {})}
    outcome = analyse(survey, settings=settings, hypotheses=project.hypotheses,
                      inputs=inputs, demo=truth)
    return write_report(outcome, out, force=force)


PLANTED = {
    "contamination": ("strong", "every taxon has a unimodal response to the distance-decaying "
                      "contamination from the Tellmark works"),
    "texture": ("moderate", "every taxon has a unimodal response to the fine fraction "
                "(silt + clay)"),
    "water_and_organic": ("none", "pH and organic matter are pure noise; conductivity follows "
                          "the valley position (and so texture) but has no effect of its own"),
}


def planted_truth_step(ctx: Context) -> None:
    """Demo only: a section comparing the planted truth with what the analyses found."""
    from ..fitting import fit_vectors
    from .steps._common import _fmt_p, _section  # lazily: the steps package lists this step

    truth = ctx.results.get("demo")
    if truth is None:
        return
    verdicts = ctx.results.get("verdicts")
    rows = []
    for name, (strength, how) in PLANTED.items():
        if name not in ctx.hypotheses:
            continue
        row: dict[str, object] = {"effect": name, "planted": strength, "how": how}
        if verdicts is not None and name in verdicts.index:
            row["found"] = verdicts.loc[name, "verdict"]
            for col in ("partial_mantel_r", "partial_mantel_pvalue"):
                if col in verdicts:
                    row[col] = verdicts.loc[name, col]
        expected = strength != "none"
        found = str(row.get("found", ""))
        if found:
            row["recovered"] = (found != "not supported") == expected
        rows.append(row)
    geo = (ctx.results.get("mantel") or {}).get("geography")
    rows.append({"effect": "space", "planted": "weak",
                 "how": "two smooth random fields (range 3 km) shift every taxon a little",
                 "found": (f"Mantel r = {geo.statistic:.2f}, {_fmt_p(geo.pvalue)}"
                           if geo is not None else "not tested")})
    fac = ctx.results.get("factors")
    if fac is not None and "habitat" in fac.table.index:
        rows.append({"effect": "habitat", "planted": "weak",
                     "how": "each taxon's log-abundance shifted by N(0, 0.3) per habitat",
                     "found": f"r2 = {fac.table.loc['habitat', 'r2']:.2f}, "
                              f"{_fmt_p(fac.table.loc['habitat', 'pvalue'])}"})
    if not rows:
        return
    sec = Section("planted_truth", "Demo only: what was planted and what was found")
    sec.paragraphs.append(
        "The demo data are invented: a seeded generator (gradients.data.simulate_survey) made "
        "the Corvanne Basin communities respond strongly to contamination, moderately to "
        "texture, weakly to space and habitat, and not at all to pH and organic matter. This "
        "section compares that planted truth with what the analyses found.")
    table = pd.DataFrame(rows).set_index("effect")
    sec.tables["planted_truth"] = table
    sec.shown.append("planted_truth")
    site = truth.site_truth.loc[ctx.results["ordination"].scores.index,
                                ["contamination", "fines"]]
    fit = fit_vectors(ctx.results["ordination"].scores, site.astype(float),
                      n_resamples=ctx.n_resamples, rng=ctx.rng("planted"))
    recovered = fit.table[["r2", "pvalue"]].copy()
    recovered.index.name = "planted_gradient"
    sec.tables["planted_gradients_on_ordination"] = recovered
    sec.shown.append("planted_gradients_on_ordination")
    sec.paragraphs.append(
        "The true (unobserved) gradients fitted onto the ordination: "
        + "; ".join(f"{k} r2 = {v.r2:.2f}" for k, v in recovered.iterrows())
        + ". A high r2 means the ordination of the communities alone recovers the planted "
        "gradient.")
    ctx.sections.insert(1 if _section(ctx, "verdicts") is not None else 0, sec)
