"""The bad-input corpus: broken projects run through the command line, ``check`` then ``run``.

Every case starts from the small valid project of ``conftest.py`` and breaks one thing: a
project key of the wrong name, type or value, a malformed CSV or Excel file, a GeoPackage with
the wrong geometry or no CRS, coordinates in the wrong order or unit, hostile names, sites that
do not match, impossible compositions, values no computation can hold, an output folder that
cannot be written. For each, both commands must end with exit status 2 and one clear message
naming the file, row or key and the fix (the expected phrases of the case), with no
traceback, no raw numpy warning, no "bug in gradients", and no report folder or half-written
folder left behind. ``check`` is the dry run of ``run``: the test asserts that it fails
whenever ``run`` refuses (common practice for a validating command: the same checks, one code
path).
"""

from __future__ import annotations

import csv
import json
import re
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from gradients.cli import main
from gradients.data import simulate_survey

# -- the valid base project every case breaks --------------------------------------------------

N_SITES = 16


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int | float):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    raise TypeError(value)


def toml_text(data: dict[str, Any]) -> str:
    """A TOML file for ``data`` (top-level values, then one [section] per dict, nested once)."""
    lines = [f"{json.dumps(k)} = {_toml_value(v)}" for k, v in data.items()
             if not isinstance(v, dict)]
    for name, table in data.items():
        if not isinstance(table, dict):
            continue
        lines.append(f"[{name}]")
        lines += [f"{json.dumps(k, ensure_ascii=False)} = {_toml_value(v)}"
                  for k, v in table.items() if not isinstance(v, dict)]
        for sub, inner in table.items():
            if isinstance(inner, dict):
                lines.append(f"[{name}.{sub}]")
                lines += [f"{json.dumps(k, ensure_ascii=False)} = {_toml_value(v)}"
                          for k, v in inner.items()]
    return "\n".join(lines) + "\n"


def base_settings() -> dict[str, Any]:
    """The project file of the valid base project, as a dict."""
    return {
        "title": "Corpus base project",
        "inputs": {"community": "community.csv", "environment": "environment.csv",
                   "locations": "locations.csv", "crs": "EPSG:4326",
                   "below_detection": "half-limit"},
        "environment": {"log10": ["Cu", "Zn"], "compositions": [["sand", "silt", "clay"]],
                        "factors": ["habitat"], "surfaces": ["Cu"]},
        "hypotheses": {"contamination": ["Cu", "Zn"], "texture": ["sand", "silt", "clay"],
                       "water": ["pH", "conductivity"]},
        "analyses": {"starts": 2},
        "ranking": {"permutations": 9, "turnover_permutations": 0},
        "permutations": {"count": 9, "seed": 3},
        "output": {"folder": "report"},
    }


def base_tables() -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    """Community, environment and locations of the base project (site IDs as a column)."""
    truth = simulate_survey(n_sites=N_SITES, n_taxa=10, rng=5)
    community = truth.community.reset_index()
    env = truth.environment.copy()
    env = env[["site", "Cu", "Zn", "sand", "silt", "clay", "pH", "conductivity", "habitat"]]
    loc = truth.locations
    locations = pd.DataFrame({"site": list(loc.index),
                              "longitude": [p.x for p in loc.geometry],
                              "latitude": [p.y for p in loc.geometry]})
    return community, env, locations


def write_table(frame: pd.DataFrame, path: Path) -> Path:
    frame.to_csv(path, index=False, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    return path


class Workspace:
    """One case's folder: the project file and its tables, to break before a command runs."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.settings = base_settings()
        self.community, self.environment, self.locations = base_tables()

    @property
    def project(self) -> Path:
        return self.root / "project.toml"

    @property
    def out(self) -> Path:
        return self.root / "report"

    def write(self) -> Path:
        write_table(self.community, self.root / "community.csv")
        write_table(self.environment, self.root / "environment.csv")
        write_table(self.locations, self.root / "locations.csv")
        if not self.project.exists():
            self.project.write_text(toml_text(self.settings), encoding="utf-8")
        return self.project


@pytest.fixture
def workspace(tmp_path: Path) -> Workspace:
    root = tmp_path / "case"
    root.mkdir()
    return Workspace(root)


# -- the cases -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class Case:
    name: str
    build: Callable[[Workspace], None]
    expect: tuple[str, ...]


def settings(**changes: object) -> Callable[[Workspace], None]:
    """A case that sets ``section.key`` values (``None`` removes a key)."""

    def build(ws: Workspace) -> None:
        for dotted, value in changes.items():
            section, _, key = dotted.replace("__", ".").partition(".")
            table = ws.settings.setdefault(section, {})
            if value is None:
                table.pop(key, None)
            else:
                table[key] = value
        ws.write()

    return build


def _set(**kw: object) -> Callable[[Workspace], None]:
    return settings(**kw)


def raw_project(text: str | bytes) -> Callable[[Workspace], None]:
    def build(ws: Workspace) -> None:
        ws.write()
        if isinstance(text, bytes):
            ws.project.write_bytes(text)
        else:
            ws.project.write_text(text, encoding="utf-8")

    return build


def table_edit(role: str, edit: Callable[[pd.DataFrame], pd.DataFrame | None],
               **changes: object) -> Callable[[Workspace], None]:
    def build(ws: Workspace) -> None:
        frame = getattr(ws, role).copy()
        out = edit(frame)
        setattr(ws, role, frame if out is None else out)
        settings(**changes)(ws)

    return build


def raw_file(name: str, content: str | bytes, **changes: object) -> Callable[[Workspace], None]:
    def build(ws: Workspace) -> None:
        settings(**changes)(ws)
        path = ws.root / name
        if isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8")

    return build


def cell(role: str, row: int, column: str, value: object, **changes: object
         ) -> Callable[[Workspace], None]:
    def edit(frame: pd.DataFrame) -> None:
        if not isinstance(value, int | float) and pd.api.types.is_numeric_dtype(frame[column]):
            frame[column] = frame[column].astype(object)
        elif isinstance(value, float) and pd.api.types.is_integer_dtype(frame[column]):
            frame[column] = frame[column].astype(float)
        frame.loc[row, column] = value

    return table_edit(role, edit, **changes)


def _gpkg(ws: Workspace, geometry: str, crs: str | None) -> None:
    import geopandas as gpd
    from shapely.geometry import LineString, Point

    loc = ws.locations
    if geometry == "line":
        geoms = [LineString([(x, y), (x + 0.01, y + 0.01)])
                 for x, y in zip(loc["longitude"], loc["latitude"], strict=True)]
    else:
        geoms = [Point(x, y) for x, y in zip(loc["longitude"], loc["latitude"], strict=True)]
    gdf = gpd.GeoDataFrame({"site": loc["site"]}, geometry=geoms, crs=crs)
    with warnings.catch_warnings():  # pyogrio warns about the missing CRS: that is the case
        warnings.simplefilter("ignore", UserWarning)
        gdf.to_file(ws.root / "locations.gpkg", layer="sites", driver="GPKG")
    ws.settings["inputs"]["locations"] = "locations.gpkg"
    ws.settings["inputs"].pop("crs", None)
    ws.write()


def _xlsx_with(ws: Workspace, content: bytes | None, sheet: str | None = None) -> None:
    path = ws.root / "community.xlsx"
    if content is None:
        ws.community.to_excel(path, index=False, sheet_name="counts")
    else:
        path.write_bytes(content)
    ws.settings["inputs"]["community"] = "community.xlsx"
    if sheet is not None:
        ws.settings["inputs"]["sheets"] = {"community": sheet}
    ws.write()


def _swap_coordinates(frame: pd.DataFrame) -> pd.DataFrame:
    """Sites east of 90 degrees with their longitude written in the latitude column."""
    frame = frame.assign(longitude=frame["longitude"] + 100)
    return frame.rename(columns={"longitude": "latitude", "latitude": "longitude"})


def _drop_location_column(ws: Workspace) -> None:
    ws.settings["inputs"].pop("locations")
    ws.settings["inputs"].pop("crs")
    ws.settings["analyses"]["correlogram"] = True
    ws.write()


def _hostile_site(frame: pd.DataFrame) -> pd.DataFrame:
    frame.loc[0, "site"] = "../../etc/=HYPERLINK(\"x\")"
    return frame


def _output_is_file(ws: Workspace) -> None:
    ws.write()
    ws.out.write_text("not a folder", encoding="utf-8")


def _output_not_a_report(ws: Workspace) -> None:
    ws.write()
    ws.out.mkdir()
    (ws.out / "notes.txt").write_text("keep me", encoding="utf-8")


def _output_unwritable(ws: Workspace) -> None:
    ws.settings["output"]["folder"] = "/sys/gradients-corpus-report"
    ws.write()


def _project_is_folder(ws: Workspace) -> None:
    ws.write()
    ws.project.unlink()
    ws.project.mkdir()


def _community_folder(ws: Workspace) -> None:
    ws.settings["inputs"]["community"] = "tables"
    (ws.root / "tables").mkdir()
    ws.write()


def _no_project(ws: Workspace) -> None:
    ws.write()
    ws.project.unlink()


def _proportions(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.assign(**{p: pd.to_numeric(frame[p]) / 100 for p in ("sand", "silt", "clay")})


def site(i: int) -> str:
    """The ID of the base project's site ``i`` (0-based)."""
    return str(base_tables()[0]["site"].iloc[i])


def _identical(frame: pd.DataFrame) -> None:
    taxa = frame.columns[1:]
    frame.loc[:, taxa] = np.tile(frame.loc[0, taxa].to_numpy(), (len(frame), 1))


def _shift_sand(delta: float) -> Callable[[pd.DataFrame], None]:
    def edit(frame: pd.DataFrame) -> None:
        frame["sand"] = pd.to_numeric(frame["sand"])
        frame.loc[2, "sand"] = frame.loc[2, "sand"] + delta

    return edit


CASES: list[Case] = [
    # -- project files: keys, types and values -------------------------------------------------
    Case("unknown section", _set(analysis__ordination="nmds"),
         ("Unknown section [analysis]", "Did you mean 'analyses'?")),
    Case("misspelt key", _set(inputs__comunity="community.csv"),
         ("Unknown key `comunity` in [inputs]", "Did you mean 'community'?")),
    Case("misspelt top-level key", raw_project('titel = "x"\n[inputs]\ncommunity = "c.csv"\n'),
         ("Unknown key `titel` at the top level", "Did you mean 'title'?")),
    Case("count in quotes", _set(permutations__count="999"),
         ("`permutations.count` must be a whole number (no quotes)",)),
    Case("zero permutations", _set(permutations__count=0),
         ("`permutations.count` must be at least 1",)),
    Case("negative seed", _set(permutations__seed=-1), ("`permutations.seed` must be at least 0",)),
    Case("level out of range", _set(output__level=5.0),
         ("`output.level` must be a number between 0 and 1",)),
    Case("misspelt ordination", _set(analyses__ordination="nmsd"),
         ("`analyses.ordination` must be one of", "Did you mean 'nmds'?")),
    Case("unknown dissimilarity", _set(community__dissimilarity="bray"),
         ("`community.dissimilarity` must be one of",)),
    Case("switch in quotes", _set(analyses__vectors="yes"),
         ("`analyses.vectors` must be true or false",)),
    Case("hypothesis as a string", _set(hypotheses__water="pH"),
         ("`hypotheses.water` must be a list", 'water = ["pH"]')),
    Case("empty hypothesis", _set(hypotheses__water=[]),
         ("`hypotheses.water` lists no variables",)),
    Case("variable in two hypotheses", _set(hypotheses__water=["pH", "Cu"]),
         ("'Cu' is in both hypotheses",)),
    Case("misspelt hypothesis variable", _set(hypotheses__texture=["sand", "slit", "clay"]),
         ("`hypotheses.texture` names 'slit'", "Fix the names")),
    Case("covariable also tested", _set(design__covariables=["pH"]),
         ("`design.covariables` 'pH' are also in a hypothesis",)),
    Case("composition split between hypotheses",
         _set(hypotheses__texture=["sand", "silt"], hypotheses__water=["pH", "clay"]),
         ("is split between hypotheses", "put all of them in one hypothesis")),
    Case("composition partly named", _set(hypotheses__texture=["sand"]),
         ("`hypotheses.texture` names only 'sand'", "Add 'silt', 'clay' to `hypotheses.texture`",
          "`environment.compositions`")),
    Case("texture with two columns", _set(environment__texture=["sand", "silt"]),
         ("`environment.texture` must name three columns",)),
    Case("texture as a string", _set(environment__texture="sand"),
         ("`environment.texture` must name three columns",)),
    Case("compositions not nested", _set(environment__compositions=["sand", "silt"]),
         ("`environment.compositions` must be a list of lists",)),
    Case("composition of one part", _set(environment__compositions=[["sand"]]),
         ("a composition needs at least two parts",)),
    Case("log10 of a composition part", _set(environment__log10=["Cu", "Zn", "sand"]),
         ("'sand' are in both `environment.log10` and `environment.compositions`",)),
    Case("invalid TOML", raw_project('[inputs]\ncommunity = "community.csv\n'),
         ("is not valid TOML", "Check quotes")),
    Case("project not UTF-8", raw_project(b'title = "\xe9t\xe9"\n'), ("is not UTF-8 text",)),
    Case("project is a folder", _project_is_folder, ("is a folder, not a project file",)),
    Case("no project file", _no_project, ("does not exist", "gradients init")),
    Case("community key missing", _set(inputs__community=None),
         ("`inputs.community` is required",)),
    Case("community is a folder", _community_folder,
         ("`inputs.community` names", "which is a folder, not a file")),
    Case("environment file missing", _set(inputs__environment="chemistry.csv"),
         ("`inputs.environment` names the file", "does not exist")),
    Case("network method without network", _set(geography__method="network"),
         ("`geography.network` is not given",)),
    Case("sheet of an unknown role", _set(inputs__sheets={"taxa": "counts"}),
         ("`inputs.sheets` names 'taxa'",)),
    Case("three coordinate columns", _set(inputs__coordinates=["x", "y", "z"]),
         ("`inputs.coordinates` must name two columns",)),
    Case("empty hypothesis name", raw_project('[inputs]\ncommunity = "community.csv"\n'
                                              'environment = "environment.csv"\n'
                                              '[hypotheses]\n"" = ["pH"]\n'),
         ("A hypothesis in [hypotheses] has an empty name",)),
    Case("section given as a value", raw_project('analyses = 3\n'),
         ("`analyses` must be a section", "write [analyses]")),
    # -- analyses asked for that the data do not allow -----------------------------------------
    Case("surface of a categorical column", _set(environment__surfaces=["habitat"]),
         ("`environment.surfaces` names 'habitat', which is not a numeric",
          "[environment] surfaces")),
    Case("log10 of a zero", cell("environment", 3, "Cu", 0.0),
         ("log10 needs positive values", "'Cu'", "`[environment] log10`")),
    Case("log10 of a negative value", cell("environment", 5, "Zn", -4.0),
         ("log10 needs positive values", "'Zn'", "`[environment] log10`")),
    Case("log10 of a categorical column", _set(environment__log10=["Cu", "habitat"]),
         ("`environment.log10` names 'habitat', which are categorical",)),
    Case("strata not a column", _set(design__strata="catchment"),
         ("`design.strata` names 'catchment'",)),
    Case("ranking part of a composition", _set(ranking__variables=["sand", "Cu"]),
         ("`ranking.variables` names part of the composition",)),
    Case("ranking a categorical column", _set(ranking__variables=["Cu", "habitat"]),
         ("`ranking.variables` names 'habitat', which are not numeric",)),
    Case("terms not a column", _set(groups__terms=["habitat", "season"]),
         ("`groups.terms` names 'season'",)),
    Case("too many dimensions", _set(analyses__dimensions=20),
         ("NMDS in 20 dimensions needs at least 22 sites", "`[analyses] dimensions`")),
    Case("correlogram asked for without locations", _drop_location_column,
         ("no site locations were given", "`analyses.correlogram` is switched on")),
    Case("factor with one class", table_edit("environment", lambda f: f.assign(habitat="pool")),
         ("'habitat'",)),
    Case("factor with a different class at every site",
         table_edit("environment", lambda f: f.assign(habitat=[f"h{i}" for i in range(len(f))])),
         ("'habitat' has a different class at every site", "`environment.factors`")),
    Case("categorical variable different at every site",
         table_edit("environment", lambda f: f.assign(station=[f"st{i}" for i in range(len(f))]),
                    hypotheses__water=["pH", "station"]),
         ("'station' is categorical with a different class at every site",
          "counts for nothing", "`hypotheses.water`")),
    # -- malformed tables ------------------------------------------------------------------------
    Case("empty community file", raw_file("community.csv", ""), ("community", "is empty")),
    Case("text in a count", cell("community", 4, "Taxon A03", "lots"), ("community", "lots")),
    Case("negative count", cell("community", 2, "Taxon A02", -3), ("community", "-3")),
    Case("duplicate site IDs", table_edit("community", lambda f: f.assign(
        site=[*f["site"][:-1], f["site"].iloc[0]])), (site(0),)),
    Case("ragged CSV row", raw_file("environment.csv",
                                    "site,Cu,Zn\nFB01,1,2\nFB02,1,2,3,4\n"),
         ("environment",)),
    Case("identical communities", table_edit("community", _identical),
         ("only 1 different site", "`[inputs] community`")),
    Case("abundance of 1e308", cell("community", 1, "Taxon A01", 1e308),
         ("too large to analyse", "Taxon A01", "`[inputs] community`")),
    Case("environmental value of 1e308", cell("environment", 6, "pH", 1e308),
         ("'pH'", "too large to analyse", site(6))),
    Case("missing environmental cell", cell("environment", 7, "conductivity", ""),
         ("conductivity", site(7), '[inputs] missing = "drop-sites"', "line 9")),
    Case("value below detection", cell("environment", 1, "pH", "<5",
                                       inputs__below_detection="error"),
         ("pH", site(1), "below_detection")),
    Case("constant column", table_edit("environment", lambda f: f.assign(pH=7.0)),
         ("pH", '[inputs] constant = "drop"')),
    Case("site missing from the environment", table_edit("environment", lambda f: f.iloc[1:]),
         (site(0), '[inputs] unmatched_sites = "keep-shared"')),
    Case("hostile site name", table_edit("community", _hostile_site),
         ("../../etc/", '[inputs] unmatched_sites = "keep-shared"')),
    Case("Excel file that is not a workbook",
         lambda ws: _xlsx_with(ws, b"site,Taxon\nFB01,3\n"), ("community.xlsx",)),
    Case("Excel file cut short",
         lambda ws: _xlsx_with(ws, b"PK\x03\x04" + b"\x00" * 40), ("community.xlsx",)),
    Case("Excel sheet that does not exist", lambda ws: _xlsx_with(ws, None, sheet="taxa"),
         ("no sheet 'taxa'", "[inputs.sheets]")),
    # -- locations ---------------------------------------------------------------------------------
    Case("GeoPackage of lines", lambda ws: _gpkg(ws, "line", "EPSG:4326"),
         ("locations", "LineString")),
    Case("GeoPackage without a CRS", lambda ws: _gpkg(ws, "point", None),
         ("locations", "CRS")),
    Case("CSV locations without a CRS",
         table_edit("locations", lambda f: f.rename(columns={"longitude": "x", "latitude": "y"}),
                    inputs__crs=None),
         ("need a coordinate reference system", "`[inputs] crs`")),
    Case("latitude and longitude swapped",
         table_edit("locations", _swap_coordinates), ("latitude",)),
    Case("metres given as degrees",
         table_edit("locations", lambda f: f.assign(longitude=f["longitude"] * 1e5,
                                                    latitude=f["latitude"] * 1e5)),
         ("look like projected coordinates", "`[inputs] crs`")),
    Case("every site at one point",
         table_edit("locations", lambda f: f.assign(longitude=9.4, latitude=61.1)),
         ("Every site has the same location", "`[inputs] locations`")),
    Case("site missing from the locations", table_edit("locations", lambda f: f.iloc[:-1]),
         (site(15), '[inputs] unmatched_sites = "keep-shared"')),
    # -- compositions ------------------------------------------------------------------------------
    Case("composition not summing to 100", table_edit("environment", _shift_sand(20.0)),
         ("do not sum to 100", site(2), "[environment] renormalise_compositions = true")),
    Case("composition with a negative part", cell("environment", 4, "clay", -2.0),
         ("negative parts", site(4))),
    Case("proportions with the default total",
         table_edit("environment", _proportions),
         ("do not sum to 100", "composition_total")),
    Case("texture not summing to 100", table_edit("environment", _shift_sand(-30.0),
                                                  environment__compositions=[],
                                                  environment__texture=["sand", "silt", "clay"]),
         ("`environment.texture`", site(2), "renormalise_compositions = true")),
    # -- output folders ----------------------------------------------------------------------------
    Case("output path is a file", _output_is_file, ("is a file, not a folder",)),
    Case("output folder of other files", _output_not_a_report, ("report",)),
    Case("output folder cannot be written", _output_unwritable,
         ("/sys/gradients-corpus-report", "permission problem")),
]

#: A Python keyword argument in advice (``crs='EPSG:4326'``, ``sheet=``): on the command line
#: the advice names the project file's keys instead.
PYTHON_KEYWORD = re.compile(r"\b[a-z_]+=($|[\s'\"(\[{.,]|True|False|None)")

FORBIDDEN = ("Traceback", "RuntimeWarning", "floating-point warning", "bug in gradients",
             "unexpected error")


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str]:
    code = main(list(argv))
    captured = capsys.readouterr()
    return code, captured.err + captured.out


def _left_behind(ws: Workspace, before: set[str]) -> list[str]:
    return sorted(p.name for p in ws.root.iterdir() if p.name not in before)


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_case(case: Case, workspace: Workspace, capsys: pytest.CaptureFixture[str]) -> None:
    case.build(workspace)
    before = {p.name for p in workspace.root.iterdir()}
    code_check, said_check = _run(capsys, "check", str(workspace.project))
    code_run, said_run = _run(capsys, "run", str(workspace.project))
    # check is the dry run of run: it fails whenever run refuses, and here both must
    assert code_run == 2, said_run
    assert code_check == 2, f"check passed where run refused with: {said_run}"
    for said in (said_check, said_run):
        assert said.count("\n") <= 12, said
        for phrase in case.expect:
            assert phrase in said, f"{phrase!r} missing from: {said}"
        for bad in FORBIDDEN:
            assert bad not in said, said
        assert not PYTHON_KEYWORD.search(said), said
    assert _left_behind(workspace, before) == []
    assert not list(workspace.root.glob(".report.partial-*"))


def test_the_corpus_is_large_enough() -> None:
    assert len(CASES) >= 60
    assert len({c.name for c in CASES}) == len(CASES)
