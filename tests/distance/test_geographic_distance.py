"""Geographic distance: geodesic, planar and in-stream."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pyproj
import pytest
from scipy.spatial.distance import pdist
from shapely.geometry import LineString, Point

from gradients import InputError
from gradients.distance import geographic_distance


def _dms(d, m, s):
    return d + m / 60 + s / 3600


# Worked example of Vincenty (1975, Survey Review 23:88), as printed in the ICSM Geocentric Datum
# of Australia (GDA) Technical Manual: Flinders Peak to Buninyong on GRS80
FLINDERS = (_dms(144, 25, 29.52440), -_dms(37, 57, 3.72030))
BUNINYONG = (_dms(143, 55, 35.38390), -_dms(37, 39, 10.15610))


def _vincenty_sites(crs="EPSG:4326"):
    return gpd.GeoDataFrame(geometry=[Point(*FLINDERS), Point(*BUNINYONG)],
                            index=["Flinders Peak", "Buninyong"], crs=crs)


def test_published_geodesic_example_grs80():
    # Vincenty (1975), GDA technical manual: 54 972.271 m on GRS80, to 1 mm
    d = geographic_distance(_vincenty_sites("EPSG:4283"), ellipsoid="GRS80")
    assert d.metric == "geodesic"
    assert abs(d["Flinders Peak", "Buninyong"] - 54972.271) < 1e-3


def test_wgs84_agrees_with_grs80():
    # GRS80 and WGS84 share a and differ in f by ~1.6e-11 (semi-minor axes 0.1 mm apart); on
    # this 55 km line the two geodesics differ by 7e-8 m (measured when this test was
    # written), so the default WGS84 reproduces the published value to 1 mm as well
    wgs = geographic_distance(_vincenty_sites())["Flinders Peak", "Buninyong"]
    grs = geographic_distance(_vincenty_sites(), ellipsoid="GRS80")["Flinders Peak", "Buninyong"]
    assert abs(wgs - grs) < 1e-6
    assert abs(wgs - 54972.271) < 1e-3
    # the CRS's own ellipsoid (GDA94 is on GRS80)
    own = geographic_distance(_vincenty_sites("EPSG:4283"), ellipsoid="crs")
    assert own["Flinders Peak", "Buninyong"] == pytest.approx(grs, abs=1e-9)


def test_chunked_geodesic_matches_pyproj_pair_by_pair():
    # reference library: pyproj.Geod.inv one pair at a time
    rng = np.random.default_rng(0)
    lon, lat = rng.uniform(-180, 180, 9), rng.uniform(-80, 80, 9)
    sites = gpd.GeoDataFrame(geometry=[Point(a, b) for a, b in zip(lon, lat, strict=True)],
                             index=[f"p{i}" for i in range(9)], crs="EPSG:4326")
    geod = pyproj.Geod(ellps="WGS84")
    ref = [geod.inv(lon[i], lat[i], lon[j], lat[j])[2] for i in range(9) for j in range(i + 1, 9)]
    for chunk in (1, 5, 1000):
        d = geographic_distance(sites, chunk_size=chunk)
        np.testing.assert_allclose(d.condensed, ref, rtol=1e-12)


def test_projected_crs_euclidean_in_metres():
    # EPSG:2227 is in US survey feet (1200/3937 m, pyproj's conversion factor); plain
    # Euclidean distance, converted to metres
    xy = np.array([[6_000_000.0, 2_100_000.0], [6_003_000.0, 2_104_000.0], [6_010_000.0, 2e6]])
    sites = gpd.GeoDataFrame(geometry=[Point(*p) for p in xy], index=list("abc"),
                             crs="EPSG:2227")
    d = geographic_distance(sites)
    assert d.metric == "euclidean"
    np.testing.assert_allclose(d.condensed, pdist(xy) * 1200 / 3937, rtol=1e-12)
    assert d["a", "b"] == pytest.approx(5000 * 1200 / 3937)


def test_projected_geodesic_agrees_with_lonlat():
    # the same two points in UTM zone 55S: geodesic goes back to the CRS's own lon/lat
    utm = _vincenty_sites().to_crs("EPSG:32755")
    d = geographic_distance(utm, method="geodesic")
    assert abs(d["Flinders Peak", "Buninyong"] - 54972.271) < 1e-3


def test_refuses_euclidean_on_degrees():
    with pytest.raises(InputError, match=r"meaningless.*to_crs"):
        geographic_distance(_vincenty_sites(), method="euclidean")


def test_location_errors():
    nocrs = gpd.GeoDataFrame(geometry=[Point(0, 0), Point(1, 1)], index=["a", "b"])
    with pytest.raises(InputError, match="no coordinate reference system"):
        geographic_distance(nocrs)
    lines = gpd.GeoDataFrame(geometry=[Point(0, 0), LineString([(0, 0), (1, 1)])],
                             index=["a", "b"], crs="EPSG:4326")
    with pytest.raises(InputError, match="must be points; site\\(s\\) 'b'"):
        geographic_distance(lines)
    with pytest.raises(InputError, match="GeoDataFrame"):
        geographic_distance([(0, 0), (1, 1)])


# ------------------------------------------------------------------ in-stream distance
CRS = "EPSG:32633"


def _river():
    # Hand-drawn network (metres): a main stem in two pieces meeting at J = (500, 0), and a
    # tributary from J bending at (500, 300) up to (800, 700) (pieces of 300 m and 500 m).
    return gpd.GeoDataFrame(
        geometry=[
            LineString([(0, 0), (500, 0)]),
            LineString([(500, 0), (1000, 0)]),
            LineString([(500, 0), (500, 300), (800, 700)]),
        ],
        crs=CRS,
    )


def _sites(points, names):
    return gpd.GeoDataFrame(geometry=[Point(*p) for p in points], index=names, crs=CRS)


def test_in_stream_hand_network():
    # A at (100, 5) snaps to (100, 0); B at (950, -3) snaps to (950, 0); C lies 8 m off the
    # tributary's upper piece, beside (650, 500), which is 250 m along that 500 m piece.
    # By hand: A-B = 850; A-C = 400 + 300 + 250 = 950; B-C = 450 + 300 + 250 = 1000.
    c = (650 + 8 * 0.8, 500 - 8 * 0.6)
    sites = _sites([(100, 5), (950, -3), c], ["A", "B", "C"])
    d = geographic_distance(sites, network=_river(), snap_tolerance=20)
    assert d.metric == "in-stream"
    np.testing.assert_allclose(d.condensed, [850, 950, 1000], rtol=1e-12)


def test_in_stream_lines_that_cross_or_touch_mid_segment():
    # A tributary crossing the main stem at (500, 0) with no shared vertex, and one whose end
    # point lies on the interior of the main stem at (200, 0): both must be joined there.
    net = gpd.GeoDataFrame(geometry=[
        LineString([(0, 0), (1000, 0)]),
        LineString([(500, -200), (500, 600)]),
        LineString([(200, 0), (200, 400)]),
    ], crs=CRS)
    sites = _sites([(100, 0), (500, 600), (200, 400), (500, -200)], ["A", "D", "T", "S"])
    d = geographic_distance(sites, network=net, snap_tolerance=1)
    # by hand: A-D = 400 + 600; A-T = 100 + 400; D-T = 600 + 300 + 400; A-S = 400 + 200;
    # D-S = 800; T-S = 400 + 300 + 200
    expect = {("A", "D"): 1000, ("A", "T"): 500, ("D", "T"): 1300, ("A", "S"): 600,
              ("D", "S"): 800, ("T", "S"): 900}
    for (a, b), v in expect.items():
        assert d[a, b] == pytest.approx(v, rel=1e-12), (a, b)


def test_two_sites_on_one_point_and_on_a_vertex():
    sites = _sites([(500, -1), (500, -2), (0, 0)], ["x", "y", "z"])  # x, y both snap to J
    d = geographic_distance(sites, network=_river(), snap_tolerance=5)
    assert d["x", "y"] == 0.0
    assert d["x", "z"] == pytest.approx(500)


def test_in_stream_far_site_named():
    sites = _sites([(100, 0), (100, 300)], ["near", "far"])
    with pytest.raises(InputError, match=r"'far' \(300\.0 m\)"):
        geographic_distance(sites, network=_river(), snap_tolerance=50)


def test_in_stream_disconnected_named():
    net = _river()
    net.loc[3, "geometry"] = LineString([(2000, 0), (3000, 0)])
    sites = _sites([(100, 0), (950, 0), (2500, 0)], ["A", "B", "island"])
    with pytest.raises(InputError, match=r"2 parts.*\['A', 'B'\]; \['island'\]"):
        geographic_distance(sites, network=net)


def test_in_stream_crs_errors():
    sites = _sites([(100, 0), (950, 0)], ["A", "B"])
    with pytest.raises(InputError, match=r"locations\.to_crs\(network\.crs\)"):
        geographic_distance(sites.to_crs("EPSG:3857"), network=_river())
    with pytest.raises(InputError, match="projected CRS"):
        geographic_distance(sites.to_crs("EPSG:4326"), network=_river().to_crs("EPSG:4326"))


def test_in_stream_on_a_grid_is_manhattan():
    # theory: on a full rectangular grid of channels, the shortest path between two crossings
    # has the L1 (Manhattan) length; every line here is one straight segment, so all joins
    # come from noding the crossings. Reference: scipy pdist 'cityblock'.
    coords = np.arange(0.0, 600.0, 100.0)
    lines = [LineString([(0, c), (500, c)]) for c in coords]
    lines += [LineString([(c, 0), (c, 500)]) for c in coords]
    net = gpd.GeoDataFrame(geometry=lines, crs=CRS)
    rng = np.random.default_rng(8)
    xy = rng.choice(coords, size=(12, 2))
    xy = np.unique(xy, axis=0)
    sites = _sites(xy, [f"g{i}" for i in range(len(xy))])
    d = geographic_distance(sites, network=net, snap_tolerance=1)
    np.testing.assert_allclose(d.condensed, pdist(xy, "cityblock"), rtol=1e-12)
