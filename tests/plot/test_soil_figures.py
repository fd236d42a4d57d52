"""The texture triangle: sites where the ternary coordinates put them, boundaries from the rules.

Ternary coordinates (common practice for three-part compositions): with sand at the lower left,
silt at the lower right and clay at the top of an equilateral triangle of side 100, a
composition lies at x = silt + clay / 2, y = clay * sqrt(3) / 2. The class regions are checked
against the classifier (two ways: the clipped polygons and the inequalities evaluated on
points) and against the Soil Survey Manual's limits (Soil Science Division Staff 2017, USDA
Handbook 18; from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

import gradients
from gradients import InputError, plot
from gradients.data._demo import DEMO_DIR
from gradients.plot._soil import texture_polygons


@pytest.fixture
def soils() -> pd.DataFrame:
    return pd.DataFrame({"sand": [40.0, 65.0, 10.0, 90.0], "silt": [40.0, 25.0, 85.0, 5.0],
                         "clay": [20.0, 10.0, 5.0, 5.0], "Cu": [10.0, 20.0, 30.0, 40.0]},
                        index=pd.Index(["a", "b", "c", "d"], name="site"))


def _site_points(ax) -> np.ndarray:
    return np.vstack([c.get_offsets() for c in ax.collections if c.get_label() == "_gr:sites"])


def test_sites_are_drawn_at_their_ternary_coordinates(soils):
    ax = plot.texture_triangle(soils)
    drawn = _site_points(ax)
    # common practice: x = silt + clay/2, y = clay * sqrt(3)/2
    expected = np.column_stack([soils["silt"] + soils["clay"] / 2,
                                soils["clay"] * math.sqrt(3) / 2])
    assert sorted(map(tuple, np.round(drawn, 9))) == sorted(map(tuple, np.round(expected, 9)))
    legend = ax.figure.legends[0]
    assert [t.get_text() for t in legend.get_texts()] == ["sand", "sandy loam", "loam", "silt"]


def test_class_regions_agree_with_the_classifier():
    # two ways: points inside each clipped region (its centroid and points pulled towards it
    # from each vertex) are classified into that region's class by texture_class
    for name, polys in texture_polygons().items():
        assert polys, name
        for poly in polys:
            centre = poly.mean(axis=0)
            inner = np.vstack([centre, 0.9 * poly + 0.1 * centre])
            clay = inner[:, 1] * 2 / math.sqrt(3)
            silt = inner[:, 0] - clay / 2
            sand = 100 - silt - clay
            got = gradients.texture_class(sand, silt, clay)
            assert set(got) == {name}, (name, list(got))


def test_regions_tile_the_triangle():
    # theory: the classes partition the triangle, so their areas add up to the triangle's
    area = 0.0
    for polys in texture_polygons().values():
        for p in polys:
            x, y = p[:, 0], p[:, 1]
            area += 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))
    assert area == pytest.approx(100 * 100 * math.sqrt(3) / 4, rel=1e-9)


def test_loam_corners_sit_on_the_manuals_limits():
    # from memory; USDA Soil Survey Manual: loam is 7-27 % clay, 28-50 % silt, sand <= 52 %
    (poly,) = texture_polygons()["loam"]
    clay = poly[:, 1] * 2 / math.sqrt(3)
    silt = poly[:, 0] - clay / 2
    sand = 100 - silt - clay
    corners = sorted(zip(np.round(sand, 6), np.round(silt, 6), np.round(clay, 6), strict=True))
    assert corners == sorted([(52.0, 41.0, 7.0), (43.0, 50.0, 7.0), (23.0, 50.0, 27.0),
                              (45.0, 28.0, 27.0), (52.0, 28.0, 20.0)])


def test_colour_by_a_variable_or_by_groups(soils):
    ax = plot.texture_triangle(soils, color="Cu")
    (points,) = [c for c in ax.collections if c.get_label() == "_gr:sites"]
    assert np.allclose(points.get_array(), soils["Cu"].to_numpy())
    groups = pd.Series(["x", "y", "x", "y"], index=soils.index, name="zone")
    ax = plot.texture_triangle(soils, color=groups)
    assert len([c for c in ax.collections if c.get_label() == "_gr:sites"]) == 2


def test_bad_inputs_name_the_fix(soils):
    with pytest.raises(InputError, match="has no column"):
        plot.texture_triangle(soils.rename(columns={"clay": "Clay"}))
    with pytest.raises(InputError, match=r"do not sum to 100"):
        plot.texture_triangle(soils.assign(sand=[10.0, 65, 10, 90]))
    with pytest.raises(InputError, match="`color` names 'pH'"):
        plot.texture_triangle(soils, color="pH")
    with pytest.raises(InputError, match="no value for site"):
        plot.texture_triangle(soils, color=pd.Series([1.0], index=["a"]))


def test_quotient_map_places_projected_sites_by_exceedance_class():
    # pyproj (the reference library) projects the demo's lon/lat to its UTM zone (EPSG:32632
    # for 9.4 E, 61 N: zone 32 north); the map draws kilometres
    from pyproj import Transformer

    survey = gradients.demo_survey()
    result = gradients.guideline_quotients(survey, DEMO_DIR / "screening.csv")
    ax = plot.quotient_map(result, survey.locations)
    drawn = [c for c in ax.collections if c.get_label() == "_gr:quotients"]
    assert len(drawn) == 3
    counts = result.table["exceedance"].value_counts()
    assert [len(c.get_offsets()) for c in drawn] == [int(counts.get(k, 0))
                                                     for k in result.exceedance_classes]
    to_utm = Transformer.from_crs("EPSG:4326", "EPSG:32632", always_xy=True)
    lon, lat = survey.locations.geometry.x.to_numpy(), survey.locations.geometry.y.to_numpy()
    x, y = to_utm.transform(lon, lat)
    expected = sorted(zip(np.round(np.asarray(x) / 1000, 6), np.round(np.asarray(y) / 1000, 6),
                          strict=True))
    got = sorted(map(tuple, np.round(np.vstack([c.get_offsets() for c in drawn]), 6)))
    assert got == expected
    legend = ax.figure.legends[0]
    words = [t.get_text() for t in legend.get_texts()]
    assert words[0].startswith("no value above its probable effect value (")
    assert ax.get_title(loc="right").endswith("screening values only")


def test_quotient_map_refuses_what_it_cannot_draw():
    survey = gradients.demo_survey()
    result = gradients.guideline_quotients(survey, DEMO_DIR / "screening.csv")
    with pytest.raises(InputError, match="must be the result of guideline_quotients"):
        plot.quotient_map(survey, survey.locations)
    with pytest.raises(InputError, match="`locations` must be a GeoDataFrame"):
        plot.quotient_map(result, survey.environment)
    with pytest.raises(InputError, match="no point for site"):
        plot.quotient_map(result, survey.locations.iloc[:5])
