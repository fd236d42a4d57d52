"""The project file: one TOML file that says what to analyse and how.

Every key is listed in :data:`SCHEMA` (section -> key -> :class:`Key`), which is the single
source for validation, for the defaults and for ``docs/project-file.md``. Unknown keys are
errors (with the closest known key suggested); wrong types name the key and the fix; relative
paths are resolved against the folder holding the project file.
"""

from __future__ import annotations

import difflib
import numbers
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .._errors import InputError, format_items

__all__ = [
    "COMMUNITY_TRANSFORMS",
    "DISSIMILARITIES",
    "GEOGRAPHY_METHODS",
    "ORDINATIONS",
    "SCHEMA",
    "Key",
    "Project",
    "load_project",
    "project_from_dict",
]

COMMUNITY_TRANSFORMS = ("none", "relative", "hellinger", "wisconsin", "log1p", "presence")
DISSIMILARITIES = (
    "bray-curtis", "jaccard", "sorensen", "ruzicka", "kulczynski", "hellinger", "chord",
    "chi-square", "euclidean", "manhattan", "canberra", "morisita-horn",
)
ORDINATIONS = ("nmds", "pcoa")
CENSORED = ("error", "half-limit", "limit", "zero", "ros")
MISSING = ("error", "drop-sites", "drop-variables")
UNMATCHED = ("error", "keep-shared")
#: How the distance between sites is measured (the methods of ``geographic_distance``).
GEOGRAPHY_METHODS = ("auto", "geodesic", "euclidean", "network")


@dataclass(frozen=True)
class Key:
    """One key of the project file: its type, default, allowed values and meaning."""

    kind: str  # "str", "path", "int", "float", "number", "bool", "names", "choice", "cores",
    # "compositions", "mapping", "counts"
    default: Any = None
    help: str = ""
    choices: tuple[str, ...] = ()
    required: bool = False
    minimum: float | None = None


SCHEMA: dict[str, dict[str, Key]] = {
    "": {
        "title": Key("str", "Survey report", "Title printed at the top of the report."),
    },
    "inputs": {
        "community": Key("path", None, "Site x taxon table (CSV/TSV or .xlsx), one row per site.",
                         required=True),
        "environment": Key("path", None, "Site x variable table (CSV/TSV or .xlsx).",
                           required=True),
        "locations": Key("path", None, "Site locations: GeoPackage, GeoJSON, Shapefile, or a "
                         "CSV/xlsx with longitude/latitude or x/y columns (then give `crs`)."),
        "site_column": Key("str", "site",
                           "Name of the column holding the site IDs in every table."),
        "crs": Key("str", None, "Coordinate reference system of CSV/xlsx locations, e.g. "
                   "\"EPSG:4326\" for longitude/latitude."),
        "coordinates": Key("names", (), "The x and y (or longitude and latitude) columns of a "
                           "CSV/xlsx locations table, e.g. [\"easting\", \"northing\"]; found "
                           "from common names when not given."),
        "empty_sites": Key("choice", "error", "Sites where every abundance is 0: stop, or drop "
                           "them (the log says which).", choices=("error", "drop")),
        "constant": Key("choice", "error", "Environmental columns with one value at every site: "
                        "stop, or drop them.", choices=("error", "drop")),
        "below_detection": Key("choice", "error", "What to do with values written like `<0.5`.",
                               choices=CENSORED),
        "missing": Key("choice", "error", "What to do with empty environmental cells.",
                       choices=MISSING),
        "sheets": Key("mapping", {}, "Sheet to read from each .xlsx input, as a table "
                      "`[inputs.sheets]` with lines such as `environment = \"chemistry\"` "
                      "(keys: community, environment, locations); the first sheet by default."),
        "unmatched_sites": Key("choice", "error", "Sites present in one table but not another: "
                               "stop, or keep only the sites shared by all tables.",
                               choices=UNMATCHED),
    },
    "community": {
        "transform": Key("choice", "none", "Transform of abundances before the dissimilarity.",
                         choices=COMMUNITY_TRANSFORMS),
        "dissimilarity": Key("choice", "bray-curtis", "Dissimilarity between sites.",
                             choices=DISSIMILARITIES),
    },
    "environment": {
        "log10": Key("names", (), "Right-skewed variables (e.g. metal concentrations) taken as "
                     "log10 before they are used."),
        "compositions": Key("compositions", (), "Groups of parts that sum to a constant (e.g. "
                            "[[\"sand\", \"silt\", \"clay\"]]), taken as isometric log-ratios."),
        "factors": Key("names", (), "Categorical variables whose class centroids are placed in "
                       "the ordination."),
        "surfaces": Key("names", (), "Variables drawn as smooth surfaces over the ordination."),
        "units": Key("mapping", {}, "Unit of environmental columns, as a table "
                     "`[environment.units]` with lines such as `Cu = \"µg/g\"`; values are "
                     "converted to the one unit of their quantity (mg/kg, mg/L, µS/cm, ...). A "
                     "units row under the header of the table does the same."),
        "quantities": Key("mapping", {}, "Quantity of environmental columns, as a table "
                          "`[environment.quantities]` with lines such as `Cu = \"mass "
                          "fraction\"`; by default inferred from the units. Quantities: mass "
                          "fraction, percent, concentration in water, amount concentration, "
                          "amount content, conductivity, pH, temperature, length, turbidity."),
        "renormalise_compositions": Key("bool", False, "Rescale to their total the samples "
                                        "whose parts of a composition (each of "
                                        "`compositions`, and the `texture`) do not sum to it "
                                        "within 1 % of the total, instead of stopping with an "
                                        "error naming them; listed in the input decisions."),
        "composition_total": Key("number", 100.0, "The whole the parts of each of "
                                 "`compositions` sum to: 100 for percentages, 1 for "
                                 "proportions (the texture is always in percent).",
                                 minimum=0),
        "texture": Key("names", (), "The sand, silt and clay columns, in this order (e.g. "
                       "[\"sand\", \"silt\", \"clay\"], percentages): the report then gives "
                       "each site's USDA texture class and the texture triangle."),
        "screening": Key("path", None, "A screening table (CSV or .xlsx: variable, value, unit, "
                         "kind, source): the report then gives guideline quotients, their "
                         "exceedances and a map, and `mean_quotient` becomes a variable that "
                         "hypotheses may name."),
        "screening_kind": Key("str", "probable effect", "The kind of screening value the "
                              "quotients use (a value of the table's `kind` column)."),
    },
    "hypotheses": {},  # free names -> list of variables (checked separately)
    "design": {
        "covariables": Key("names", (), "Variables controlled for in every hypothesis test "
                           "(e.g. sampling depth)."),
        "strata": Key("str", None, "A categorical column: permutations stay within its classes "
                      "(e.g. catchment or survey campaign)."),
    },
    "geography": {
        "method": Key("choice", "auto", "How the distance between sites is measured, for every "
                      "spatial analysis: \"geodesic\" (on the ellipsoid), \"euclidean\" "
                      "(straight lines in a projected CRS), \"network\" (in-stream, along "
                      "`network`); \"auto\": network if `network` is given, else geodesic for "
                      "longitude/latitude and euclidean for projected coordinates.",
                      choices=GEOGRAPHY_METHODS),
        "network": Key("path", None, "The river (channel) network for in-stream distances: a "
                       "GeoPackage (or GeoJSON, Shapefile) of lines in a projected CRS."),
        "snap_tolerance": Key("number", 100.0, "In-stream distances: the largest distance, in "
                              "metres, from a site to the nearest line of the network.",
                              minimum=0),
    },
    "groups": {
        "terms": Key("names", (), "Terms of the design the site classes are tested with, in "
                     "order: class variables, and `a:b` for the interaction of two, e.g. "
                     "[\"zone\", \"period\", \"zone:period\"]. Default: each of "
                     "`environment.factors` as a main effect."),
        "sums_of_squares": Key("choice", "sequential", "Sums of squares of the PERMANOVA: "
                               "'sequential' (each term adjusted for the terms before it) or "
                               "'marginal' (each term adjusted for all the others).",
                               choices=("sequential", "marginal")),
        "top_taxa": Key("int", 5, "Indicator taxa shown per class in the report (all of them "
                        "are in tables/indicator_taxa.csv).", minimum=1),
        "cluster": Key("bool", False, "Cluster the sites by their communities and draw the "
                       "dendrogram."),
        "cluster_method": Key("choice", "average", "Linkage of the clustering; 'ward' needs "
                              "Euclidean dissimilarities (e.g. hellinger).",
                              choices=("average", "complete", "ward")),
        "clusters": Key("int", None, "Number of clusters of the cut; by default the number "
                        "from 2 to 10 with the widest mean silhouette.", minimum=2),
        "contiguous": Key("choice", "none", "Keep clusters contiguous: 'transect' (neighbours "
                          "in the order of the sites) or 'space' (neighbours from the site "
                          "locations).", choices=("none", "transect", "space")),
    },
    "analyses": {
        "ordination": Key("choice", "nmds", "Ordination of the community dissimilarities.",
                          choices=ORDINATIONS),
        "dimensions": Key("int", 2, "Number of ordination axes.", minimum=2),
        "starts": Key("int", 20, "NMDS only: number of starting configurations (one from PCoA, "
                      "the rest random); more starts make a poor local solution less likely.",
                      minimum=1),
        "vectors": Key("bool", True, "Fit environmental variables as arrows on the ordination."),
        "factors": Key("bool", True, "Fit the `environment.factors` as class centroids."),
        "surfaces": Key("bool", True, "Fit the `environment.surfaces` as smooth surfaces."),
        "mantel": Key("bool", True, "Mantel test of community against each hypothesis and "
                      "against geographic distance."),
        "partial_mantel": Key("bool", True, "Partial Mantel test of each hypothesis controlling "
                              "for the others, the covariables and space."),
        "regression": Key("bool", True, "Multiple regression on distance matrices with all "
                          "hypotheses and space together."),
        "correlogram": Key("bool", True, "Mantel correlogram of community against geographic "
                           "distance classes (needs locations)."),
        "distance_decay": Key("bool", True, "Distance decay of similarity (needs locations)."),
        "partition": Key("bool", True, "Space and environment: variation partitioning of the "
                         "community between the hypotheses' variables and spatial eigenvectors "
                         "(needs locations)."),
        "verdicts": Key("bool", True, "The decision table with one verdict per hypothesis."),
        "groups": Key("bool", True, "Compare the site classes (`environment.factors`): "
                      "PERMANOVA with its dispersion check, indicator taxa, and the clustering "
                      "of `[groups]`."),
        "ranking": Key("bool", True, "Rank the numeric variables against community turnover "
                       "(best subsets, turnover model, one ranking table)."),
    },
    "ranking": {
        "variables": Key("names", (), "Candidate variables of the ranking (default: every "
                         "numeric variable); a composition's parts are listed together."),
        "permutations": Key("int", 199, "Permutations of the subset search, forward "
                            "selection, vector fits and Mantel tests of the ranking (each "
                            "repeats a whole search).", minimum=1),
        "turnover_permutations": Key("int", 99, "Permutations per predictor of the turnover "
                                     "model (each refits the model); 0 skips its tests.",
                                     minimum=0),
    },
    "partition": {
        "selection_level": Key("float", 0.05, "Significance level of the forward selection of "
                               "spatial eigenvectors and environmental variables (each step and "
                               "the global test)."),
    },
    "permutations": {
        "count": Key("int", 999, "Number of permutations for every test.", minimum=1),
        "seed": Key("int", 1, "Seed of the random number generator: the same seed gives the "
                    "same p-values and byte-identical tables.", minimum=0),
        "cores": Key("cores", "all", "Cores the permutation tests may use: \"all\" (by the "
                     "engine's size rule) or a whole number; the tables do not depend on it."),
        "cluster": Key("str", None, "Address of a Dask scheduler, e.g. \"tcp://10.0.0.5:8786\": "
                       "permutation batches then run on its workers (needs the `dask` extra)."),
        "precision": Key("choice", "float64", "Storage of the Mantel and partial Mantel tests' "
                         "work arrays: \"float64\", or \"float32\" for large surveys (a third "
                         "of the memory; the change in r is bounded and said in the notes).",
                         choices=("float64", "float32")),
    },
    "plan": {  # `gradients plan`: survey power by simulation (gradients/planning)
        "sites": Key("counts", (20, 40, 60, 80), "Numbers of sites of the planned surveys "
                     "(each at least 5), e.g. [20, 40, 60, 80]."),
        "surveys": Key("int", 200, "Surveys simulated per number of sites.", minimum=1),
        "permutations": Key("int", 199, "Permutations of each test in each simulated survey.",
                            minimum=1),
        "target": Key("float", 0.8, "Power the smallest number of sites is sought for."),
        "level": Key("float", 0.05, "Significance level at which a test detects a hypothesis."),
        "tests": Key("names", ("partial_mantel",), "Tests planned for: \"partial_mantel\", "
                     "\"mantel\", \"vectors\"."),
        "bootstrap": Key("int", 0, "Bootstrap resamples of the pilot, each refitted and "
                         "simulated, for the spread of power (0: none).", minimum=0),
        "jitter": Key("number", 0.1, "Jitter of resampled pilot sites, as a share of each "
                      "variable's spread.", minimum=0),
        "starts": Key("int", 3, "NMDS starts in each simulated survey (the vectors test).",
                      minimum=1),
        "folder": Key("path", "plan", "Folder the plan is written to."),
    },
    "output": {
        "folder": Key("path", "report", "Folder the report is written to."),
        "level": Key("float", 0.05, "Significance level used for the verdicts."),
    },
}


@dataclass(frozen=True)
class Project:
    """A validated project: every setting with its default filled in.

    ``settings`` maps ``"section.key"`` to its value (paths resolved to absolute paths);
    ``hypotheses`` maps each hypothesis name to its tuple of variables; ``source`` is the
    project file (None when built from a dict).
    """

    settings: dict[str, Any]
    hypotheses: dict[str, tuple[str, ...]] = field(default_factory=dict)
    source: Path | None = None
    #: The ``"section.key"`` settings the file gives itself (the others are defaults).
    given: frozenset[str] = frozenset()

    def __getitem__(self, key: str) -> Any:
        return self.settings[key]

    @property
    def base(self) -> Path:
        return self.source.parent if self.source is not None else Path.cwd()


def _where(section: str, key: str | None = None) -> str:
    if key is None:
        return f"[{section}]" if section else "the top level"
    return f"`{section}.{key}`" if section else f"`{key}`"


def _suggest(name: str, known: list[str]) -> str:
    close = difflib.get_close_matches(name, known, n=1, cutoff=0.6)
    if close:
        return f" Did you mean {close[0]!r}?"
    return f" Known keys here: {format_items(known, limit=20)}."


def _check_names(value: Any, where: str) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
        raise InputError(
            f"{where} must be a list of column names, e.g. [\"Cu\", \"Zn\"]; got {value!r}."
        )
    dup = sorted({v for v in value if value.count(v) > 1})
    if dup:
        raise InputError(f"{where} names {format_items(dup)} more than once; list each once.")
    return tuple(value)


def _check_value(section: str, name: str, key: Key, value: Any, base: Path) -> Any:
    where = _where(section, name)
    if key.kind in ("str", "path"):
        if not isinstance(value, str) or not value.strip():
            raise InputError(f"{where} must be a text value in quotes, e.g. {name} = \"...\"; "
                             f"got {value!r}.")
        if key.kind == "path":
            return (base / Path(value).expanduser()).resolve()
        return value
    if key.kind == "choice":
        if value not in key.choices:
            close = difflib.get_close_matches(str(value), list(key.choices), n=1)
            hint = f" Did you mean {close[0]!r}?" if close else ""
            raise InputError(f"{where} must be one of {format_items(key.choices)}; got "
                             f"{value!r}.{hint}")
        return value
    if key.kind == "cores":
        if value == "all":
            return value
        if not isinstance(value, int) or isinstance(value, bool) or value < 1:
            raise InputError(f"{where} must be \"all\" or a whole number of cores, at least 1 "
                             f"(e.g. {name} = 2); got {value!r}.")
        return value
    if key.kind == "bool":
        if not isinstance(value, bool):
            raise InputError(f"{where} must be true or false (no quotes); got {value!r}.")
        return value
    if key.kind == "int":
        if not isinstance(value, int) or isinstance(value, bool):
            raise InputError(f"{where} must be a whole number (no quotes); got {value!r}.")
        if key.minimum is not None and value < key.minimum:
            raise InputError(f"{where} must be at least {key.minimum}; got {value}.")
        return value
    if key.kind == "number":
        if not isinstance(value, numbers.Real) or isinstance(value, bool) or not (
                value == value and abs(value) != float("inf")):
            raise InputError(f"{where} must be a number (no quotes), e.g. {name} = 50; got "
                             f"{value!r}.")
        if key.minimum is not None and value < key.minimum:
            raise InputError(f"{where} must be at least {key.minimum:g}; got {value}.")
        return float(value)
    if key.kind == "float":
        if not isinstance(value, numbers.Real) or isinstance(value, bool) or not 0 < value < 1:
            raise InputError(f"{where} must be a number between 0 and 1, e.g. 0.05; got "
                             f"{value!r}.")
        return float(value)
    if key.kind == "names":
        return _check_names(value, where)
    if key.kind == "counts":
        if isinstance(value, int) and not isinstance(value, bool):
            value = [value]
        if not isinstance(value, list) or not value or not all(
                isinstance(v, int) and not isinstance(v, bool) for v in value):
            raise InputError(f"{where} must be a list of whole numbers, e.g. [20, 40, 60]; got "
                             f"{value!r}.")
        return tuple(value)
    if key.kind == "compositions":
        if not isinstance(value, list) or not all(isinstance(v, list) for v in value):
            raise InputError(f"{where} must be a list of lists of column names, e.g. "
                             f"[[\"sand\", \"silt\", \"clay\"]]; got {value!r}.")
        groups = tuple(_check_names(v, where) for v in value)
        for g in groups:
            if len(g) < 2:
                raise InputError(f"{where}: a composition needs at least two parts; got {list(g)}.")
        return groups
    if key.kind == "mapping":
        if not isinstance(value, dict) or not all(
                isinstance(k, str) and isinstance(v, str) and v.strip() for k, v in value.items()):
            raise InputError(f"{where} must be a table of column = \"text\" lines, e.g. "
                             f"[{section}.{name}] then Cu = \"mg/kg\"; got {value!r}.")
        return dict(value)
    raise AssertionError(key.kind)  # pragma: no cover


def project_from_dict(data: dict[str, Any], *, base: Path | None = None,
                      source: Path | None = None) -> Project:
    """Validate a parsed project file (``tomllib`` output) and fill in the defaults."""
    base = base if base is not None else Path.cwd()
    settings: dict[str, Any] = {}
    sections = [s for s in SCHEMA if s]
    top_keys = list(SCHEMA[""])
    for name, value in data.items():
        if isinstance(value, dict):
            if name not in SCHEMA or not name:
                raise InputError(f"Unknown section [{name}] in the project file."
                                 + _suggest(name, sections))
        elif name in sections:
            raise InputError(f"`{name}` must be a section: write [{name}] on its own line and "
                             "put its keys below it.")
        elif name not in top_keys:
            hint = _suggest(name, top_keys + sections)
            raise InputError(f"Unknown key `{name}` at the top level of the project file.{hint}")
    hypotheses: dict[str, tuple[str, ...]] = {}
    for section, keys in SCHEMA.items():
        table = data if not section else data.get(section, {})
        if section == "hypotheses":
            for hname, variables in table.items():
                if not hname.strip():
                    raise InputError("A hypothesis in [hypotheses] has an empty name.")
                if isinstance(variables, str):
                    raise InputError(
                        f"{_where('hypotheses', hname)} must be a list of column names in "
                        f"square brackets, even for one variable: write {hname} = "
                        f'["{variables}"] (a hypothesis is a group of variables).')
                hypotheses[hname] = _check_names(variables, _where("hypotheses", hname))
                if not hypotheses[hname]:
                    raise InputError(f"{_where('hypotheses', hname)} lists no variables; name "
                                     "at least one column.")
            continue
        for name in (table if section else []):
            if name not in keys:
                raise InputError(f"Unknown key `{name}` in [{section}] of the project file."
                                 + _suggest(name, list(keys)))
        for name, key in keys.items():
            full = f"{section}.{name}" if section else name
            if name in table:
                settings[full] = _check_value(section, name, key, table[name], base)
            elif key.required:
                raise InputError(f"{_where(section, name)} is required: add it to [{section}] "
                                 f"({key.help})")
            elif key.kind == "path" and key.default is not None:
                settings[full] = (base / key.default).resolve()
            else:
                settings[full] = dict(key.default) if key.kind == "mapping" else key.default
    texture = settings["environment.texture"]
    if texture and len(texture) != 3:
        raise InputError("`environment.texture` must name three columns, sand, silt and clay in "
                         f"this order, e.g. [\"sand\", \"silt\", \"clay\"]; got "
                         f"{list(texture)}.", columns=list(texture))
    for full in ("inputs.community", "inputs.environment", "inputs.locations",
                 "environment.screening", "geography.network"):
        path = settings.get(full)
        if path is not None and Path(path).is_dir():
            raise InputError(
                f"`{full}` names {str(path)!r}, which is a folder, not a file. Give the path "
                "of the file itself (relative paths are read from the folder holding the "
                "project file).", file=str(path))
        if path is not None and not Path(path).is_file():
            raise InputError(
                f"`{full}` names the file {str(path)!r}, which does not exist. Relative paths "
                "are read from the folder holding the project file; check the name.",
                file=str(path),
            )
    bad_roles = sorted(set(settings["inputs.sheets"]) - {"community", "environment",
                                                          "locations"})
    if bad_roles:
        raise InputError(f"`inputs.sheets` names {format_items(bad_roles)}; its keys are the "
                         "inputs 'community', 'environment' and 'locations', e.g. "
                         "[inputs.sheets] then environment = \"chemistry\".")
    coords = settings["inputs.coordinates"]
    if coords and len(coords) != 2:
        raise InputError("`inputs.coordinates` must name two columns, x then y (or longitude "
                         f"then latitude); got {list(coords)}.")
    _cross_check(settings, hypotheses)
    _check_geography(settings)
    given = frozenset(f"{section}.{name}" if section else name
                      for section, keys in SCHEMA.items() if section != "hypotheses"
                      for name in (data if not section else data.get(section, {}))
                      if name in keys)
    return Project(settings, hypotheses, source, given)


def _check_geography(settings: dict[str, Any]) -> None:
    """The [geography] keys agree with each other and with the inputs."""
    method, network = settings["geography.method"], settings["geography.network"]
    if method == "network" and network is None:
        raise InputError('`geography.method = "network"` measures in-stream distances along a '
                         "river network, but `geography.network` is not given: add network = "
                         '"streams.gpkg" (a GeoPackage of lines) to [geography], or choose '
                         'method = "geodesic".')
    if network is not None and method in ("geodesic", "euclidean"):
        raise InputError(f"`geography.network` is given but `geography.method` is {method!r}: "
                         'in-stream distances need method = "network" (or "auto"); remove '
                         "`network` to use straight-line distances.")
    if network is not None and settings["inputs.locations"] is None:
        raise InputError("`geography.network` is given but `inputs.locations` is not: "
                         "in-stream distances need the site locations.")


def _cross_check(settings: dict[str, Any], hypotheses: dict[str, tuple[str, ...]]) -> None:
    seen: dict[str, str] = {}
    for hname, variables in hypotheses.items():
        for v in variables:
            if v in seen:
                raise InputError(
                    f"Variable {v!r} is in both hypotheses {seen[v]!r} and {hname!r}; each "
                    "variable may belong to one hypothesis only, so that each test controls for "
                    "the others.", columns=[v])
            seen[v] = hname
    clash = [v for v in settings["design.covariables"] if v in seen]
    if clash:
        raise InputError(f"`design.covariables` {format_items(clash)} are also in a hypothesis; "
                         "a variable is either tested or controlled for, not both.", columns=clash)
    if settings["design.strata"] in seen:
        raise InputError("`design.strata` names a variable that is also in a hypothesis; use a "
                         "separate grouping column.")
    parts = [p for g in settings["environment.compositions"] for p in g]
    dup = sorted({p for p in parts if parts.count(p) > 1})
    if dup:
        raise InputError(f"`environment.compositions`: {format_items(dup)} are in more than one "
                         "composition.")
    for comp in settings["environment.compositions"]:
        homes = {seen[p] for p in comp if p in seen}
        if len(homes) > 1:  # (a part in no hypothesis may be a misspelling, named later)
            where = "; ".join(f"{p!r} in {seen[p]!r}" if p in seen else f"{p!r} in none"
                              for p in comp)
            raise InputError(
                f"The composition {list(comp)} of `environment.compositions` is split between "
                f"hypotheses ({where}): its parts are analysed together as log-ratios, so put "
                "all of them in one hypothesis (or leave them all out).", columns=list(comp))
    both = sorted(set(parts) & set(settings["environment.log10"]))
    if both:
        raise InputError(f"{format_items(both)} are in both `environment.log10` and "
                         "`environment.compositions`; choose one transform per variable.")


def load_project(path: str | Path) -> Project:
    """Read and validate a project file (TOML)."""
    path = Path(path).expanduser()
    if path.is_dir():
        raise InputError(f"{str(path)!r} is a folder, not a project file: give the path of "
                         "the .toml file itself (e.g. project.toml in that folder).",
                         file=str(path))
    if not path.is_file():
        raise InputError(f"Project file {str(path)!r} does not exist. Create one with "
                         "`gradients init DIR`.", file=str(path))
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise InputError(f"Project file {str(path)!r} is not UTF-8 text.", file=str(path)) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"Project file {str(path)!r} is not valid TOML: {exc}. Check quotes "
                         "around text and brackets around lists.", file=str(path)) from None
    try:
        return project_from_dict(data, base=path.resolve().parent, source=path.resolve())
    except InputError as exc:
        raise InputError(f"{path.name}: {exc}", file=str(path), sites=exc.sites,
                         columns=exc.columns) from None


def defaults() -> dict[str, Any]:
    """Every setting at its default, keyed ``"section.key"`` (inputs left empty)."""
    out: dict[str, Any] = {}
    for section, keys in SCHEMA.items():
        for name, key in keys.items():
            out[f"{section}.{name}" if section else name] = key.default
    return out

