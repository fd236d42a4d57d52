"""The demo job and the template project written by ``gradients init``."""

from __future__ import annotations

import numbers
import shutil
import warnings
from pathlib import Path
from typing import Any

from .._errors import InputError
from .._validation import RNGLike, check_rng
from ._project import project_from_dict
from ._run import analyse, read_project_survey, write_report
from ._writers import OutputFolder

__all__ = ["DEMO_HYPOTHESES", "DEMO_PERMUTATIONS", "DEMO_SEED", "demo_seed", "init_project",
           "project_template", "run_demo"]

#: Default permutations of the demo (and of the template project).
DEMO_PERMUTATIONS = 999
#: Default seed of the demo's permutations (and of the template project).
DEMO_SEED = 1

#: The demo's named hypotheses: two planted gradients and one group of variables that the
#: generator makes inert (pH, organic matter) or only a nuisance (conductivity).
DEMO_HYPOTHESES: dict[str, tuple[str, ...]] = {
    "contamination": ("Cu", "Zn", "Pb", "Cd"),
    "texture": ("sand", "silt", "clay"),
    "water_and_organic": ("pH", "organic_matter", "conductivity"),
}


def project_template(*, data_folder: str = "data", permutations: int = DEMO_PERMUTATIONS,
                     seed: int = DEMO_SEED) -> str:
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
factors = ["habitat", "zone"]         # categorical variables: class centroids, groups
surfaces = ["Cu", "sand"]             # variables drawn as smooth surfaces on the ordination
texture = ["sand", "silt", "clay"]    # sand, silt, clay (%): USDA texture classes and triangle
screening = "{data_folder}/screening.csv"    # screening table: guideline quotients (screening only;
                                      # check its values against the publication before use)
screening_kind = "probable effect"    # which values of the table the quotients use

[environment.units]                   # units of the columns (a units row in the table also works)
Cu = "mg/kg dw"
Zn = "mg/kg dw"
Pb = "mg/kg dw"
Cd = "mg/kg dw"
sand = "%"
silt = "%"
clay = "%"
pH = "pH"
organic_matter = "%"
conductivity = "µS/cm"

# Each hypothesis is a named group of variables; each is tested against community turnover
# while controlling for the others and for space.
[hypotheses]
contamination = ["Cu", "Zn", "Pb", "Cd"]
texture = ["sand", "silt", "clay"]
water_and_organic = ["pH", "organic_matter", "conductivity"]

[design]
covariables = []                      # variables controlled for in every test
# strata = "campaign"                 # permute within the classes of this column

# How far apart sites are, for every spatial analysis: in-stream distances along the river.
[geography]
method = "network"                    # "auto", "geodesic", "euclidean" or "network"
network = "{data_folder}/streams.gpkg"        # the river lines (GeoPackage, projected CRS)
snap_tolerance = 50                   # metres: each site must lie this close to a line
# Site classes (the factors above) compared: PERMANOVA with a dispersion check, indicator
# taxa of every class, and a clustering of the sites.
[groups]
terms = ["habitat", "zone"]           # design terms in order; "a:b" is an interaction
top_taxa = 5                          # indicator taxa shown per class
cluster = true                        # cluster the sites and draw the dendrogram
clusters = 4                          # number of clusters (default: widest silhouette)
contiguous = "space"                  # "none", "transect" (site order) or "space"

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
    for name in ("community.csv", "environment.csv", "locations.gpkg", "screening.csv",
                 "streams.gpkg"):
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


def demo_seed(rng: RNGLike) -> int:
    """The integer seed of a demo run: ``rng`` itself when it is an int, else drawn from it.

    The report derives one random stream per analysis from this integer and records it (in
    ``run.json`` and the methods paragraph), so a run made with a Generator or with None can be
    repeated by passing the recorded integer.
    """
    if isinstance(rng, numbers.Integral) and not isinstance(rng, bool):
        check_rng(rng)  # refuses a negative seed with the shared message
        return int(rng)
    return int(check_rng(rng).integers(0, 2**32))


def run_demo(out: str | Path, *, force: bool = False, n_resamples: int = DEMO_PERMUTATIONS,
             rng: RNGLike = DEMO_SEED, overrides: dict[str, Any] | None = None,
             seed: int | None = None) -> Path:
    """Run the whole job on the bundled Corvanne Basin data and write the report to ``out``.

    Parameters
    ----------
    out : str or Path
        The report folder to write (it must not exist unless ``force``).
    force : bool, default False
        Replace an existing report folder, once the new one is complete.
    n_resamples : int, default 999
        Permutations per test.
    rng : int, numpy.random.Generator or None, default 1
        Randomness of the permutations (the demo data themselves are the bundled files). An int
        is the seed of the run: the same int gives byte-identical tables. A Generator gives an
        integer seed drawn from it; when `rng` is None, a new `numpy.random.Generator` is
        created using entropy from the operating system and the seed is drawn from it. Either
        way the seed used is recorded in ``run.json`` and the methods paragraph.
    overrides : dict, optional
        ``"section.key"`` settings that replace the demo's (for example
        ``{"analyses.starts": 5}`` for a quicker run).
    seed : int, optional
        Deprecated: the old name of an integer `rng`, accepted for one release with a
        ``DeprecationWarning``.

    Returns
    -------
    Path
        The report folder.
    """
    from ..data import simulate_survey
    from ..data._demo import DEFAULT_SEED, DEMO_DIR

    if seed is not None:
        if not (isinstance(rng, numbers.Integral) and int(rng) == DEMO_SEED):
            raise InputError("Pass either `rng` or the deprecated `seed` to run_demo, not both.")
        warnings.warn("run_demo(seed=) is deprecated and will be removed in the next release; "
                      "pass rng= instead (an int seed, a numpy.random.Generator or None).",
                      DeprecationWarning, stacklevel=2)
        rng = seed
    run_seed = demo_seed(rng)
    OutputFolder(out, force=force)  # refuse early
    project = project_from_dict(demo_settings(n_resamples, run_seed, Path(out)))
    survey = read_project_survey(project)  # the bundled files, with the project's units
    truth = simulate_survey(rng=DEFAULT_SEED)
    inputs = {name.split(".")[0]: DEMO_DIR / name
              for name in ("community.csv", "environment.csv", "locations.gpkg")}
    inputs["network"] = DEMO_DIR / "streams.gpkg"
    settings = {**project.settings, **(overrides or {})}
    outcome = analyse(survey, settings=settings, hypotheses=project.hypotheses,
                      inputs=inputs, demo=truth)
    return write_report(outcome, out, force=force)
