"""Site locations: CRS, coordinate columns, bounds and swapped axes."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
from shapely.geometry import Point

from gradients import InputError
from gradients.data import Survey


def test_lonlat_columns_default_crs(community, lonlat):
    s = Survey(community, None, lonlat)
    assert s.locations.crs.to_epsg() == 4326
    assert list(s.locations.index) == list(s.sites)
    np.testing.assert_allclose(s.locations.geometry.x, lonlat["longitude"])
    assert s.log[-1].action == "crs"


@pytest.mark.parametrize("x,y", [("lon", "lat"), ("Long", "Lat"), ("Longitude (deg)", "Latitude"),
                                 ("lng", "lat")])
def test_common_lonlat_names(community, lonlat, x, y):
    df = lonlat.rename(columns={"longitude": x, "latitude": y})
    assert Survey(community, None, df).locations.crs.to_epsg() == 4326


def test_latitude_out_of_range(community, lonlat):
    df = lonlat.assign(latitude=[61.0, 95.0, 61.2, 61.3], longitude=[100.0, 101, 102, 103])
    with pytest.raises(InputError, match=r"latitude \('latitude'\) outside \[-90, 90\] at 'S2' "
                       r"\(95\)") as info:
        Survey(community, None, df)
    assert info.value.sites == ("S2",)


def test_longitude_out_of_range(community, lonlat):
    df = lonlat.assign(longitude=[9.1, 190.0, 9.3, 9.4])
    with pytest.raises(InputError, match=r"longitude \('longitude'\) outside \[-180, 180\] at "
                       r"'S2' \(190\)"):
        Survey(community, None, df)


def test_swapped_columns(community, lonlat):
    # the "latitude" column holds the longitudes of a place at 120 degrees east
    df = lonlat.assign(longitude=[45.1, 45.2, 45.3, 45.4], latitude=[120.0, 120.1, 120.2, 120.3])
    with pytest.raises(InputError, match=r"look swapped.*'latitude'.*outside \[-90, 90\].*"
                       r"coordinates=\('latitude', 'longitude'\)"):
        Survey(community, None, df)


def test_swapped_geodataframe(community):
    gdf = gpd.GeoDataFrame({"site": community["site"]}, crs="EPSG:4326",
                           geometry=gpd.points_from_xy([45.0, 46, 47, 48], [120.0, 121, 122, 123]))
    with pytest.raises(InputError, match="look swapped"):
        Survey(community, None, gdf)


def test_metres_named_as_degrees(community, lonlat):
    df = lonlat.assign(longitude=[5e5, 5.1e5, 5.2e5, 5.3e5], latitude=[6.7e6] * 4)
    with pytest.raises(InputError, match=r"look like projected coordinates \(metres\).*crs="):
        Survey(community, None, df)


def test_projected_crs_not_range_checked(community, lonlat):
    df = lonlat.assign(longitude=[5e5, 5.1e5, 5.2e5, 5.3e5], latitude=[6.7e6] * 4)
    s = Survey(community, None, df, crs="EPSG:32632")
    assert s.locations.crs.to_epsg() == 32632


def test_geodataframe_without_crs(community):
    gdf = gpd.GeoDataFrame({"site": community["site"]},
                           geometry=gpd.points_from_xy([1, 2, 3, 4], [5, 6, 7, 8]))
    with pytest.raises(InputError, match=r"no coordinate reference system \(CRS\).*set_crs"):
        Survey(community, None, gdf)
    assert Survey(community, None, gdf, crs=4326).locations.crs.to_epsg() == 4326


def test_crs_conflict(community):
    gdf = gpd.GeoDataFrame({"site": community["site"]}, crs="EPSG:4326",
                           geometry=gpd.points_from_xy([1, 2, 3, 4], [5, 6, 7, 8]))
    with pytest.raises(InputError, match=r"already in EPSG:4326.*to_crs"):
        Survey(community, None, gdf, crs="EPSG:3857")


def test_geodataframe_index_as_sites(community):
    gdf = gpd.GeoDataFrame(index=["S4", "S3", "S2", "S1"], crs="EPSG:4326",
                           geometry=gpd.points_from_xy([4, 3, 2, 1], [8, 7, 6, 5]))
    s = Survey(community, None, gdf)
    assert s.locations.loc["S1"].geometry.equals(Point(1, 5))


def test_missing_geometry(community):
    gdf = gpd.GeoDataFrame({"site": community["site"]}, crs="EPSG:4326",
                           geometry=[Point(1, 5), None, Point(3, 7), Point()])
    with pytest.raises(InputError, match=r"site\(s\) 'S2', 'S4' have no geometry"):
        Survey(community, None, gdf)


def test_non_numeric_coordinate(community, lonlat):
    df = lonlat.astype({"latitude": object})
    df.loc[2, "latitude"] = "61°12'N"
    with pytest.raises(InputError, match=r"coordinate column 'latitude'.*site 'S3'.*61°12'N.*"
                       r"decimal degrees"):
        Survey(community, None, df)


def test_ambiguous_coordinate_columns(community, lonlat):
    df = lonlat.assign(x=1.0, y=2.0)
    with pytest.raises(InputError, match=r"ambiguous.*coordinates="):
        Survey(community, None, df)


def test_locations_site_mismatch(community, lonlat):
    df = lonlat.assign(site=["S1", "S2", "S3", "S5"])
    with pytest.raises(InputError, match=r"'S4'.*locations DataFrame.*'S5'"):
        Survey(community, None, df)
