"""read_survey on files: every format round-trips; file-level problems give clear messages."""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest

from gradients import InputError
from gradients.data import Survey, read_survey


def write(path: Path, text: str, encoding: str = "utf-8") -> Path:
    path.write_bytes(text.encode(encoding))
    return path


def _expected(community, environment, lonlat=None) -> Survey:
    return Survey(community, environment, lonlat)


def test_csv_round_trip(tmp_path, community, environment):
    community.to_csv(tmp_path / "c.csv", index=False)
    environment.to_csv(tmp_path / "e.csv", index=False)
    s = read_survey(tmp_path / "c.csv", str(tmp_path / "e.csv"))
    assert s.equals(_expected(community, environment))
    assert s.sources["community"] == str(tmp_path / "c.csv")
    assert s.log == ()


def test_tsv_round_trip(tmp_path, community, environment):
    community.to_csv(tmp_path / "c.tsv", sep="\t", index=False)
    environment.to_csv(tmp_path / "e.txt", sep="\t", index=False)
    assert read_survey(tmp_path / "c.tsv", tmp_path / "e.txt").equals(
        _expected(community, environment))


def test_semicolon_with_decimal_comma(tmp_path, community, environment):
    community.to_csv(tmp_path / "c.csv", sep=";", index=False)
    environment.to_csv(tmp_path / "e.csv", sep=";", decimal=",", index=False)
    assert "12,5" in (tmp_path / "e.csv").read_text()
    s = read_survey(tmp_path / "c.csv", tmp_path / "e.csv")
    assert s.equals(_expected(community, environment))
    assert [d.action for d in s.log] == ["decimal-comma"]


def test_decimal_comma_not_guessed_with_points(tmp_path, community):
    # a semicolon file that uses decimal points: "1,5" would be ambiguous, so it is refused
    write(tmp_path / "e.csv", "site;Cu;Zn\nS1;1.5;2\nS2;1,5;3\nS3;2.5;4\nS4;3.5;5\n")
    with pytest.raises(InputError, match=r"mixes decimal separators.*1 use a decimal comma: "
                                         r"line 3, column 'Cu' \('1,5'\)"):
        read_survey(community, tmp_path / "e.csv")


def test_one_decimal_point_in_a_decimal_comma_file_is_named(tmp_path, community):
    # The other way round: a decimal-comma file with one stray point used to turn every
    # column into text without a word; now the cell is named and the fix given.
    write(tmp_path / "e.csv", "site;Cu;Zn\nS1;1,5;2,1\nS2;1,25;3,0\nS3;118.97;4,2\nS4;3,5;5,5\n")
    with pytest.raises(InputError, match=r"1 use a decimal point: line 4, column 'Cu' "
                                         r"\('118.97'\).*a decimal comma, like the rest"):
        read_survey(community, tmp_path / "e.csv")


def test_xlsx_round_trip_and_sheets(tmp_path, community, environment):
    path = tmp_path / "survey.xlsx"
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        community.to_excel(writer, sheet_name="counts", index=False)
        environment.to_excel(writer, sheet_name="chemistry", index=False)
    s = read_survey(path, path, sheet={"community": "counts", "environment": 1})
    assert s.equals(_expected(community, environment))
    s = read_survey(path)  # first sheet, and the log says so
    assert s.log[0].action == "sheet" and "'counts'" in s.log[0].detail
    with pytest.raises(InputError, match=r"no sheet 'chem'; its sheets are 'counts', "
                       r"'chemistry'"):
        read_survey(path, path, sheet={"community": 0, "environment": "chem"})
    with pytest.raises(InputError, match=r"sheet=5 does not exist"):
        read_survey(path, sheet=5)


def test_xlsx_row_numbers_in_messages(tmp_path, community):
    path = tmp_path / "c.xlsx"
    community.assign(site=["S1", "S2", "S2", "S4"]).to_excel(path, index=False)
    with pytest.raises(InputError, match=r"'S2' \(row 3, row 4\)"):
        read_survey(path)


@pytest.mark.parametrize("ext,driver", [("gpkg", "GPKG"), ("geojson", "GeoJSON"),
                                        ("shp", "ESRI Shapefile")])
def test_gis_round_trip(tmp_path, community, environment, lonlat, ext, driver):
    gdf = gpd.GeoDataFrame({"site": lonlat["site"]},
                           geometry=gpd.points_from_xy(lonlat["longitude"], lonlat["latitude"]),
                           crs="EPSG:4326")
    path = tmp_path / f"sites.{ext}"
    gdf.iloc[::-1].to_file(path, driver=driver, engine="pyogrio")
    s = read_survey(community, environment, path)
    assert s.equals(_expected(community, environment, lonlat))
    assert s.locations.crs.to_epsg() == 4326
    np.testing.assert_allclose(s.locations.geometry.y, lonlat["latitude"])


def test_gis_without_crs(tmp_path, community):
    gdf = gpd.GeoDataFrame({"site": community["site"]},
                           geometry=gpd.points_from_xy([1, 2, 3, 4], [5, 6, 7, 8]))
    shp = tmp_path / "sites.shp"
    with pytest.warns(UserWarning, match="crs"):
        gdf.to_file(shp, engine="pyogrio")
    with pytest.raises(InputError, match=r"sites.shp' has no coordinate reference system.*crs="):
        read_survey(community, None, shp)
    s = read_survey(community, None, shp, crs="EPSG:32632")
    assert s.locations.crs.to_epsg() == 32632 and s.log[-1].action == "crs"


def test_gis_polygons_refused(tmp_path, community):
    gdf = gpd.GeoDataFrame({"site": community["site"]}, crs="EPSG:4326",
                           geometry=gpd.points_from_xy([1, 2, 3, 4], [5, 6, 7, 8]).buffer(0.1))
    gdf.to_file(tmp_path / "p.gpkg", engine="pyogrio")
    with pytest.raises(InputError, match=r"must be points.*Polygon.*representative_point"):
        read_survey(community, None, tmp_path / "p.gpkg")


def test_csv_lonlat_round_trip(tmp_path, community, environment, lonlat):
    lonlat.to_csv(tmp_path / "loc.csv", index=False)
    s = read_survey(community, environment, tmp_path / "loc.csv")
    assert s.equals(_expected(community, environment, lonlat))
    assert s.log[-1].action == "crs" and "EPSG:4326" in s.log[-1].detail


def test_csv_xy_needs_crs(tmp_path, community):
    xy = pd.DataFrame({"site": community["site"], "Easting": [5e5, 5.1e5, 5.2e5, 5.3e5],
                       "Northing": [6.7e6, 6.71e6, 6.72e6, 6.73e6]})
    xy.to_csv(tmp_path / "xy.csv", index=False)
    with pytest.raises(InputError, match=r"xy.csv'.*'Easting'/'Northing' need a coordinate "
                       r"reference system.*crs="):
        read_survey(community, None, tmp_path / "xy.csv")
    s = read_survey(community, None, tmp_path / "xy.csv", crs=32632)
    assert s.locations.crs.to_epsg() == 32632
    np.testing.assert_allclose(s.locations.geometry.x, xy["Easting"])
    with pytest.raises(InputError, match="not a coordinate reference system"):
        read_survey(community, None, tmp_path / "xy.csv", crs="EPSG:99999999")


def test_explicit_coordinates(tmp_path, community, lonlat):
    df = lonlat.rename(columns={"longitude": "E_deg", "latitude": "N_deg"})
    with pytest.raises(InputError, match=r"no coordinate columns; columns found: "
                       r"'E_deg', 'N_deg'"):
        Survey(community, None, df)
    s = Survey(community, None, df, coordinates=("E_deg", "N_deg"), crs="EPSG:4326")
    np.testing.assert_allclose(s.locations.geometry.x, lonlat["longitude"])


def test_reordering_across_files(tmp_path, community, environment, lonlat):
    community.iloc[[3, 1, 0, 2]].to_csv(tmp_path / "c.csv", index=False)
    environment.iloc[[1, 0, 2, 3]].to_csv(tmp_path / "e.csv", index=False)
    lonlat.iloc[[2, 3, 1, 0]].to_csv(tmp_path / "l.csv", index=False)
    s = read_survey(tmp_path / "c.csv", tmp_path / "e.csv", tmp_path / "l.csv")
    assert list(s.sites) == ["S4", "S2", "S1", "S3"]
    for site in s.sites:
        row = environment.set_index("site").loc[site]
        assert s.environment.loc[site, "Cu"] == row["Cu"]
        assert s.locations.loc[site].geometry.y == lonlat.set_index("site").loc[site, "latitude"]
        assert s.community.loc[site, "Alpha"] == community.set_index("site").loc[site, "Alpha"]
    assert sum(d.action == "reorder" for d in s.log) == 2


# -- file-level problems ------------------------------------------------------------------------


def test_file_not_found(tmp_path):
    with pytest.raises(InputError, match=r"community file '.*nope.csv' does not exist"):
        read_survey(tmp_path / "nope.csv")


@pytest.mark.parametrize("content", [b"", b"   \n\n", b"\xef\xbb\xbf"])
def test_empty_file(tmp_path, content):
    (tmp_path / "c.csv").write_bytes(content)
    with pytest.raises(InputError, match=r"community file '.*c.csv' is empty"):
        read_survey(tmp_path / "c.csv")


def test_header_only(tmp_path):
    write(tmp_path / "c.csv", "site,A,B\n")
    with pytest.raises(InputError, match=r"has a header \(line 1\) but no data rows"):
        read_survey(tmp_path / "c.csv")


def test_xlsx_that_is_csv_text(tmp_path, community):
    community.to_csv(tmp_path / "c.xlsx", index=False)
    with pytest.raises(InputError, match=r"c.xlsx' has the extension '.xlsx' but holds plain "
                       r"text.*rename it to .csv"):
        read_survey(tmp_path / "c.xlsx")


def test_gpkg_that_is_not_sqlite(tmp_path, community, lonlat):
    lonlat.to_csv(tmp_path / "l.gpkg", index=False)
    with pytest.raises(InputError, match=r"l.gpkg' has the extension '.gpkg' but holds plain "
                       r"text, not an SQLite database"):
        read_survey(community, None, tmp_path / "l.gpkg")


def test_csv_that_is_a_workbook(tmp_path, community):
    community.to_excel(tmp_path / "c.csv", index=False, engine="openpyxl")
    with pytest.raises(InputError, match=r"c.csv' has the extension '.csv' but holds a ZIP "
                       r"archive.*\.xlsx"):
        read_survey(tmp_path / "c.csv")


def test_binary_junk_csv(tmp_path):
    (tmp_path / "c.csv").write_bytes(bytes(range(256)) * 8)
    with pytest.raises(InputError, match=r"c.csv' has the extension '.csv' but holds binary"):
        read_survey(tmp_path / "c.csv")
    rows = b"".join(b"S%d,1\n" % i for i in range(3, 400))
    (tmp_path / "d.csv").write_bytes(b"site,A\nS1,1\nS2,\x01\n" + rows)
    with pytest.raises(InputError, match=r"control characters \(line 3\)"):
        read_survey(tmp_path / "d.csv")


def test_old_xls_refused(tmp_path):
    (tmp_path / "c.xls").write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 100)
    with pytest.raises(InputError, match=r"old-style .xls workbook.*save it as .xlsx or CSV"):
        read_survey(tmp_path / "c.xls")


def test_damaged_xlsx(tmp_path):
    (tmp_path / "c.xlsx").write_bytes(b"PK\x03\x04" + b"garbage" * 20)
    with pytest.raises(InputError, match=r"could not be opened as an Excel workbook"):
        read_survey(tmp_path / "c.xlsx")


def test_encodings(tmp_path):
    text = "site,Ölandia sp.,Bêta\nS1,1,0\nS2,0,2\n"
    s = read_survey(write(tmp_path / "a.csv", text, "utf-8"))
    assert list(s.taxa) == ["Ölandia sp.", "Bêta"] and s.log == ()
    s = read_survey(write(tmp_path / "b.csv", "\ufeff" + text, "utf-8"))
    assert list(s.taxa) == ["Ölandia sp.", "Bêta"] and s.log == ()
    s = read_survey(write(tmp_path / "c.csv", text, "utf-16"))
    assert list(s.taxa) == ["Ölandia sp.", "Bêta"] and s.log[0].action == "encoding"
    s = read_survey(write(tmp_path / "d.csv", text, "latin-1"))
    assert list(s.taxa) == ["Ölandia sp.", "Bêta"]
    assert s.log[0].action == "encoding" and "Latin-1" in s.log[0].detail
    assert "line 1" in s.log[0].detail


def test_duplicate_sites_give_line_numbers(tmp_path):
    write(tmp_path / "c.csv", "site,A,B\nS1,1,0\n\nS2,0,2\nS1,3,3\n")
    with pytest.raises(InputError, match=r"c.csv' repeats site ID\(s\): 'S1' \(line 2, line 5\)"):
        read_survey(tmp_path / "c.csv")


def test_duplicate_header_names(tmp_path):
    write(tmp_path / "c.csv", "site,A,B,A\nS1,1,0,1\nS2,0,2,1\n")
    with pytest.raises(InputError, match=r"repeats column name\(s\): 'A' \(columns 2, 4\)"):
        read_survey(tmp_path / "c.csv")


def test_unnamed_header_column(tmp_path):
    write(tmp_path / "c.csv", "site,A,,B\nS1,1,5,0\nS2,0,6,2\n")
    with pytest.raises(InputError, match=r"header column\(s\) 3 have no name"):
        read_survey(tmp_path / "c.csv")


def test_trailing_empty_columns_tolerated(tmp_path):
    s = read_survey(write(tmp_path / "c.csv", "site,A,B,,\nS1,1,0,,\nS2,0,2,,\n"))
    assert list(s.taxa) == ["A", "B"]


def test_ragged_rows(tmp_path):
    write(tmp_path / "c.csv", "site,A,B\nS1,1,0\nS2,0,2,7\n")
    with pytest.raises(InputError, match=r"1 line\(s\) have more fields than the header's 3 "
                       r"\(lines 3\)"):
        read_survey(tmp_path / "c.csv")


def test_non_numeric_cell_names_line(tmp_path, environment):
    write(tmp_path / "c.csv", "site,A,B\nS1,1,0\nS2,0,2\nS3,x,1\nS4,1,1\n")
    with pytest.raises(InputError, match=r"c.csv': 1 abundance cell\(s\) are not numbers: site "
                       r"'S3', taxon 'A': 'x', line 4") as info:
        read_survey(tmp_path / "c.csv", environment)
    assert info.value.file == str(tmp_path / "c.csv")


def test_missing_site_column_in_file(tmp_path, environment):
    write(tmp_path / "c.csv", "taxon,S1,S2,S3,S4\nA,1,0,2,1\nB,0,3,1,1\n")
    with pytest.raises(InputError, match=r"c.csv' has no site column 'site'; columns found: "
                       r"'taxon', 'S1'.*looks transposed"):
        read_survey(tmp_path / "c.csv", environment)


def test_no_delimiter(tmp_path):
    write(tmp_path / "c.csv", "site\nS1\nS2\n")
    with pytest.raises(InputError, match="Could not find the column delimiter"):
        read_survey(tmp_path / "c.csv")


def test_path_objects_and_strings_agree(tmp_path, community):
    community.to_csv(tmp_path / "c.csv", index=False)
    assert read_survey(str(tmp_path / "c.csv")).equals(read_survey(Path(tmp_path / "c.csv")))


def test_environment_and_locations_in_one_table(tmp_path, community, environment, lonlat):
    both = environment.merge(lonlat, on="site")
    both.to_csv(tmp_path / "sites.csv", index=False)
    for s in (read_survey(community, tmp_path / "sites.csv", tmp_path / "sites.csv"),
              Survey(community, both, both)):
        assert list(s.environment.columns) == ["Cu", "pH", "habitat"]
        assert s.locations.crs.to_epsg() == 4326
        assert any(d.action == "coordinates" for d in s.log)
    # different frames: the coordinate columns stay environmental variables
    s = Survey(community, both, lonlat)
    assert "longitude" in s.environment.columns


COMMUNITY = "site,A,B\nS1,1,0\nS2,0,2\nS3,4,1\n"
ENVIRONMENT = "site,Cu,pH\nS1,12,6.5\nS2,30,7.1\nS3,8,6.9\n"


@pytest.mark.parametrize("community,environment,pattern", [
    # each bad input, written to files: the message names the file, the site(s) and column(s)
    (COMMUNITY, "site,Cu,pH\nS1,12,6.5\nS2,30,7.1\nS4,8,6.9\n",
     r"'S3'.*c.csv.*e.csv|c.csv.*but not in.*e.csv.*'S3'"),
    ("site,A,B\nS1,1,0\nS2,0,2\nS2,4,1\n", ENVIRONMENT,
     r"c.csv' repeats site ID.*'S2' \(line 3, line 4\)"),
    ("id,A,B\nS1,1,0\nS2,0,2\nS3,4,1\n", ENVIRONMENT, r"c.csv' has no site column 'site'.*'id'"),
    ("site,A,B\nS1,1,0\nS2,0,x\nS3,4,1\n", ENVIRONMENT,
     r"c.csv'.*site 'S2', taxon 'B': 'x', line 3"),
    ("site,A,B\nS1,1,0\nS2,0,-2\nS3,4,1\n", ENVIRONMENT, r"c.csv'.*negative: site 'S2', taxon 'B'"),
    ("site,A,B\nS1,1,0\nS2,0,0\nS3,4,1\n", ENVIRONMENT, r"c.csv'.*no taxa at all.*'S2', line 3"),
    (COMMUNITY, "site,Cu,pH\nS1,12,6.5\nS2,,7.1\nS3,8,6.9\n",
     r"e.csv' has 1 empty.*site 'S2', column 'Cu', line 3"),
    (COMMUNITY, "site,Cu,pH\nS1,12,7\nS2,30,7\nS3,8,7\n", r"e.csv'.*'pH' \(every site = 7\)"),
    (COMMUNITY, "site,Cu,pH\nS1,<5,6.5\nS2,30,7.1\nS3,8,6.9\n",
     r"e.csv' has 1 value\(s\) below a detection limit.*site 'S1', column 'Cu', line 2"),
])
def test_bad_inputs_in_files_name_file_site_column(tmp_path, community, environment, pattern):
    c = write(tmp_path / "c.csv", community)
    e = write(tmp_path / "e.csv", environment)
    with pytest.raises(InputError, match=pattern):
        read_survey(c, e)


@pytest.mark.parametrize("locations,pattern", [
    ("site,lon,lat\nS1,9,61\nS2,9,95\nS3,9,61\n",
     r"l.csv'.*latitude \('lat'\).*'S2' \(95, line 3\)"),
    ("site,lon,lat\nS1,9,61\nS2,200,61\nS3,9,61\n", r"l.csv'.*longitude \('lon'\).*'S2'"),
    ("site,longitude,latitude\nS1,61,120\nS2,61,121\nS3,61,122\n", r"l.csv'.*look swapped"),
    ("site,x,y\nS1,1,2\nS2,3,4\nS3,5,6\n", r"l.csv'.*need a coordinate reference system"),
])
def test_bad_locations_in_files(tmp_path, locations, pattern):
    c = write(tmp_path / "c.csv", COMMUNITY)
    loc = write(tmp_path / "l.csv", locations)
    with pytest.raises(InputError, match=pattern):
        read_survey(c, None, loc)


def test_site_ids_written_as_whole_decimals_in_text_match_integers(tmp_path):
    # A spreadsheet's CSV export writes integer IDs as "1.0"; they match "1" elsewhere
    # (documented in docs/data.md, "Site IDs").
    write(tmp_path / "c.csv", "site,t1,t2\n1.0,1,2\n2.0,3,0\n3.0,2,2\n")
    write(tmp_path / "e.csv", "site,pH\n1,7\n2,6.5\n3,6.9\n")
    survey = read_survey(tmp_path / "c.csv", tmp_path / "e.csv")
    assert list(survey.community.index) == ["1", "2", "3"]
    assert list(survey.environment.index) == ["1", "2", "3"]
