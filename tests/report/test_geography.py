"""Which distance is "space": the [geography] keys, their checks, and the one matrix that every
spatial analysis of a report uses.

Outside references: `gradients.geographic_distance` (whose in-stream distances are checked
against shortest paths by hand in tests/distance, and geodesic ones against pyproj) computes
the expected matrix directly; scipy's `pearsonr` gives the Mantel r expected from it (Mantel
1967: r of the unfolded matrices); geopandas and pyproj write the altered network files that
the checks must refuse.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from scipy.stats import pearsonr

import gradients
from gradients import InputError
from gradients.cli import main
from gradients.data._demo import DEMO_DIR
from gradients.report import init_project, load_project, project_from_dict
from gradients.report._check import check_project
from gradients.report._demo import demo_settings
from gradients.report._run import analyse

BASE = '[inputs]\ncommunity = "c.csv"\nenvironment = "e.csv"\n'


@pytest.fixture
def tables(tmp_path: Path) -> Path:
    (tmp_path / "c.csv").write_text("site,a,b\ns1,1,2\ns2,3,0\ns3,1,1\n", encoding="utf-8")
    (tmp_path / "e.csv").write_text("site,x,y\ns1,1,2\ns2,3,0\ns3,2,5\n", encoding="utf-8")
    (tmp_path / "l.csv").write_text("site,longitude,latitude\ns1,9.4,61.1\ns2,9.5,61.1\n"
                                    "s3,9.4,61.0\n", encoding="utf-8")
    return tmp_path


def _load(folder: Path, text: str):
    path = folder / "project.toml"
    path.write_text(text, encoding="utf-8")
    return load_project(path)


def test_geography_keys_are_parsed_with_their_defaults(tables: Path) -> None:
    project = _load(tables, BASE)
    assert project["geography.method"] == "auto"
    assert project["geography.network"] is None
    assert project["geography.snap_tolerance"] == 100.0
    assert project["analyses.partition"] is True
    assert project["partition.selection_level"] == 0.05
    (tables / "s.gpkg").write_bytes(b"")
    project = _load(tables, BASE + 'locations = "l.csv"\n[geography]\nmethod = "network"\n'
                    'network = "s.gpkg"\nsnap_tolerance = 25\n[partition]\n'
                    "selection_level = 0.01\n")
    assert project["geography.network"] == (tables / "s.gpkg").resolve()
    assert project["geography.snap_tolerance"] == 25.0  # a whole number is read as metres
    assert project["partition.selection_level"] == 0.01


@pytest.mark.parametrize(("text", "message"), [
    ('[geography]\nmethod = "river"\n',
     r"`geography.method` must be one of 'auto', 'geodesic', 'euclidean', 'network'; got "
     r"'river'"),
    ('[geography]\nmethod = "netwrok"\n', r"Did you mean 'network'\?"),
    ('[geography]\nmethod = "network"\n',
     r'`geography.method = "network"` .* `geography.network` is not given: add network = '
     r'"streams.gpkg"'),
    ('[geography]\nnetwork = "missing.gpkg"\n',
     r"`geography.network` names the file .*missing.gpkg', which does not exist"),
    ('[geography]\nsnap_tolerance = -5\n', r"`geography.snap_tolerance` must be at least 0"),
    ('[geography]\nsnap_tolerance = "50 m"\n',
     r"`geography.snap_tolerance` must be a number \(no quotes\)"),
    ('[geography]\nsnap = 5\n', r"Unknown key `snap` in \[geography\].*'snap_tolerance'"),
    ("[partition]\nselection_level = 5\n",
     r"`partition.selection_level` must be a number between 0 and 1"),
    ("[analyses]\npartition = 1\n", r"`analyses.partition` must be true or false"),
])
def test_bad_geography_and_partition_keys_name_the_key_and_the_fix(
        tables: Path, text: str, message: str) -> None:
    with pytest.raises(InputError, match=message):
        _load(tables, BASE + text)


def test_a_network_needs_network_distances_and_locations(tables: Path) -> None:
    (tables / "s.gpkg").write_bytes(b"")
    with pytest.raises(InputError, match=r"`geography.network` is given but `geography.method` "
                                         r"is 'geodesic'"):
        _load(tables, BASE + 'locations = "l.csv"\n[geography]\nmethod = "geodesic"\n'
                             'network = "s.gpkg"\n')
    with pytest.raises(InputError, match=r"`geography.network` is given but `inputs.locations` "
                                         r"is not"):
        _load(tables, BASE + '[geography]\nnetwork = "s.gpkg"\n')


# ---------------------------------------------------------------- gradients check


@pytest.fixture
def template(tmp_path: Path) -> Path:
    """The template project (in-stream distances along the demo's streams.gpkg)."""
    return init_project(tmp_path / "p")


def _rewrite_network(project: Path, frame: gpd.GeoDataFrame) -> None:
    path = project.parent / "data" / "streams.gpkg"
    path.unlink()
    frame.to_file(path, driver="GPKG", layer="streams")


def test_check_accepts_the_template_and_says_which_distance(template: Path, capsys) -> None:
    assert main(["check", str(template)]) == 0
    assert "geography:  in-stream distances along streams.gpkg (sites within 50 m of a line)" \
        in capsys.readouterr().out


def test_check_names_a_site_off_the_network(template: Path, capsys) -> None:
    streams = gpd.read_file(template.parent / "data" / "streams.gpkg")
    # drop the longest side channel: its floodplain site is then far from every line
    side = streams[streams["kind"] == "side channel"].length.idxmax()
    _rewrite_network(template, streams.drop(index=side))
    with pytest.raises(InputError, match=r"`geography.network` \(streams.gpkg\): 1 site\(s\) lie "
                                         r"farther than `geography.snap_tolerance` = 50 m .* "
                                         r"raise `geography.snap_tolerance`") as info:
        check_project(template)
    assert len(info.value.sites) == 1 and info.value.sites[0].startswith("FP")
    assert main(["check", str(template)]) != 0
    assert "geography.snap_tolerance" in capsys.readouterr().err


def test_check_refuses_a_network_that_cannot_carry_in_stream_distances(template: Path) -> None:
    streams = gpd.read_file(template.parent / "data" / "streams.gpkg")
    _rewrite_network(template, streams.to_crs("EPSG:4326"))
    with pytest.raises(InputError, match=r"`geography.network` \(streams.gpkg\) is in "
                                         r"longitude/latitude .* Reproject the file"):
        check_project(template)
    # Fennick Brook cut between two of its sites: every site still lies on a line, but the
    # upper brook no longer reaches the confluence
    import shapely

    brook = streams.index[streams["name"] == "Fennick Brook"][0]
    coords = shapely.get_coordinates(streams.geometry[brook])
    pieces = [shapely.linestrings(coords[:6]), shapely.linestrings(coords[6:])]
    cut = gpd.GeoDataFrame({"name": ["upper", "lower"], "kind": ["tributary"] * 2},
                           geometry=pieces, crs=streams.crs)
    _rewrite_network(template, gpd.GeoDataFrame(
        pd.concat([streams.drop(index=brook), cut], ignore_index=True), crs=streams.crs))
    with pytest.raises(InputError, match=r"parts of the network that do not connect"):
        check_project(template)
    points = gpd.GeoDataFrame(geometry=streams.geometry.centroid, crs=streams.crs)
    _rewrite_network(template, points)
    with pytest.raises(InputError, match=r"holds no lines \(found Point\)"):
        check_project(template)
    (template.parent / "data" / "streams.gpkg").write_text("not a GeoPackage", encoding="utf-8")
    with pytest.raises(InputError, match=r"`geography.network` names .* could not be read"):
        check_project(template)


def test_check_refuses_straight_lines_on_longitude_latitude(template: Path) -> None:
    text = template.read_text(encoding="utf-8")
    text = text.replace('method = "network"', 'method = "euclidean"')
    text = "\n".join(line for line in text.splitlines()
                     if not line.startswith(("network =", "snap_tolerance =")))
    template.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=r'`geography.method = "euclidean"` .* '
                                         r'longitude/latitude .* Use method = "geodesic"'):
        check_project(template)


# ---------------------------------------------------------------- one matrix for every analysis


def test_every_spatial_analysis_uses_the_in_stream_distances(monkeypatch) -> None:
    # The expected matrix, computed directly: in-stream distances along the demo's streams
    # (gradients.geographic_distance, method="network"), in km.
    import gradients.matrix
    import gradients.partition

    survey = gradients.demo_survey()
    streams = gpd.read_file(DEMO_DIR / "streams.gpkg")
    metres = gradients.geographic_distance(survey.locations.to_crs(streams.crs),
                                           method="network", network=streams,
                                           snap_tolerance=50)
    expected = metres.condensed / 1000.0
    seen: dict[str, list[np.ndarray]] = {}

    def spy(module, name, pick):
        real = getattr(module, name)

        def wrapper(*args, **kwargs):
            for label, matrix in pick(args, kwargs):
                seen.setdefault(label, []).append(np.asarray(matrix.condensed))
            return real(*args, **kwargs)

        monkeypatch.setattr(module, name, wrapper)

    def null(kw):
        return [("spatial null", kw["spatial_null"])] if "spatial_null" in kw else []

    spy(gradients.matrix, "mantel", lambda a, kw: (
        [("mantel against geography", a[0])] if a[0].metric == "in-stream" else []) + null(kw))
    spy(gradients.matrix, "partial_mantel",
        lambda a, kw: [("partial control", a[2]["geography"]), *null(kw)])
    spy(gradients.matrix, "matrix_regression",
        lambda a, kw: [("regression control", a[1]["geography"])])
    spy(gradients.matrix, "mantel_correlogram", lambda a, kw: [("correlogram", a[1])])
    spy(gradients.matrix, "distance_decay", lambda a, kw: [("distance decay", a[1])])
    spy(gradients.partition, "spatial_eigenvectors",
        lambda a, kw: [("spatial eigenvectors", a[0])])
    calls = []
    real_distance = gradients.distance.geographic_distance
    monkeypatch.setattr(gradients.distance, "geographic_distance",
                        lambda *a, **kw: calls.append(kw) or real_distance(*a, **kw))
    project = project_from_dict(demo_settings(19, 3, Path("unused")))
    outcome = analyse(survey, settings={**project.settings, "analyses.starts": 2,
                                        "analyses.surfaces": False},
                      hypotheses=project.hypotheses)
    assert set(seen) == {"mantel against geography", "spatial null", "partial control",
                         "regression control", "correlogram", "distance decay",
                         "spatial eigenvectors"}
    for label, matrices in seen.items():
        for m in matrices:
            np.testing.assert_allclose(m, expected, rtol=1e-12, err_msg=label)
    # computed once, in the geography step, along the network
    assert [c.get("method") for c in calls] == ["network"]
    # and the Mantel r of the report against geography is Pearson's r (scipy) of the in-stream
    # distances computed directly and the community dissimilarities, pair by pair
    community = gradients.dissimilarity(survey.community, "bray-curtis")
    direct = pearsonr(expected, community.align(metres).condensed).statistic
    assert outcome.tables["mantel"].loc["geography", "statistic"] == pytest.approx(
        direct, rel=1e-12)
    assert "in-stream distances in kilometres along the river network of streams.gpkg" in \
        outcome.methods
    assert "used by every spatial analysis" in outcome.methods


def test_straight_line_distances_when_the_project_says_so() -> None:
    survey = gradients.demo_survey()
    project = project_from_dict(demo_settings(9, 3, Path("unused")))
    settings = {**project.settings, "geography.method": "geodesic", "geography.network": None,
                "analyses.starts": 2, "analyses.surfaces": False, "analyses.partition": False,
                "analyses.correlogram": False, "analyses.distance_decay": False}
    outcome = analyse(survey, settings=settings, hypotheses=project.hypotheses)
    geodesic = gradients.geographic_distance(survey.locations)  # pyproj.Geod underneath
    community = gradients.dissimilarity(survey.community, "bray-curtis").align(geodesic)
    direct = pearsonr(geodesic.condensed, community.condensed).statistic  # unit-free
    assert outcome.tables["mantel"].loc["geography", "statistic"] == pytest.approx(
        direct, rel=1e-12)
    assert "geodesic distances in kilometres on the WGS84 ellipsoid" in outcome.methods
