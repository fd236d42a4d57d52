"""USDA soil texture classes against the class definitions of the Soil Survey Manual.

Source of every class rule and check point: Soil Science Division Staff (2017), *Soil Survey
Manual*, USDA Handbook 18, chapter 3 (soil texture), from memory. The check points are
compositions chosen well inside each class; the boundary points sit exactly on a limit the
Manual states ("52 percent or less sand", "20 to less than 35 percent clay", ...).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import gradients
from gradients import InputError
from gradients.data._texture import RESOLUTION, USDA_CLASSES, USDA_RULES, class_masks

# (sand, silt, clay) -> class; from memory; USDA Soil Survey Manual
CHECK_POINTS = [
    (40, 40, 20, "loam"),
    (65, 25, 10, "sandy loam"),
    (30, 35, 35, "clay loam"),
    (10, 55, 35, "silty clay loam"),
    (50, 10, 40, "sandy clay"),
    (10, 45, 45, "silty clay"),
    (60, 10, 30, "sandy clay loam"),
    (20, 65, 15, "silt loam"),
    (82, 12, 6, "loamy sand"),
    (90, 5, 5, "sand"),
    (20, 20, 60, "clay"),
    (10, 85, 5, "silt"),
]


@pytest.mark.parametrize(("sand", "silt", "clay", "expected"), CHECK_POINTS)
def test_check_points_classify_as_listed(sand, silt, clay, expected):
    # from memory; USDA Soil Survey Manual (Soil Science Division Staff 2017)
    assert gradients.texture_class([sand], [silt], [clay]).tolist() == [expected]


def test_check_points_all_at_once_keep_site_labels():
    # from memory; USDA Soil Survey Manual: the same points as one vectorised call with labels
    index = pd.Index([f"S{i}" for i in range(len(CHECK_POINTS))], name="site")
    frame = pd.DataFrame([p[:3] for p in CHECK_POINTS], index=index,
                         columns=["sand", "silt", "clay"], dtype=float)
    out = gradients.texture_class(frame["sand"], frame["silt"], frame["clay"])
    assert out.index.equals(index)
    assert out.name == "texture_class"
    assert out.tolist() == [p[3] for p in CHECK_POINTS]
    assert list(out.cat.categories) == list(USDA_CLASSES)


# Points exactly on a limit: the class is the one whose inequality includes the limit.
# From memory; USDA Soil Survey Manual (class definitions, chapter 3).
BOUNDARY_POINTS = [
    (52, 38, 10, "loam"),             # loam: "52 percent or less sand"
    (52.5, 37.5, 10, "sandy loam"),   # sandy loam: "more than 52 percent sand"
    (55, 25, 20, "sandy clay loam"),  # sandy clay loam: "20 to less than 35 percent clay"
    (50, 28, 22, "loam"),             # loam: "28 to less than 50 percent silt"
    (40, 50, 10, "silt loam"),        # silt loam: "50 percent or more silt"
    (20, 80, 0, "silt"),              # silt: "80 percent or more silt"
    (10, 78, 12, "silt loam"),        # silt: "less than 12 percent clay" (12 is silt loam)
    (45, 28, 27, "clay loam"),        # clay loam: "27 ... percent clay", "45 percent or less" sand
    (46, 27, 27, "sandy clay loam"),  # sandy clay loam: "more than 45 percent sand"
    (20, 53, 27, "silty clay loam"),  # silty clay loam: "20 percent or less sand"
    (30, 30, 40, "clay"),             # clay: "40 percent or more clay", "less than 40" silt
    (20, 40, 40, "silty clay"),       # silty clay: "40 percent or more silt"
    (46, 19, 35, "sandy clay"),       # sandy clay: "35 percent or more clay"
    (85, 15, 0, "loamy sand"),        # sand: silt + 1.5 clay "less than 15" (15 is loamy sand)
    (70, 30, 0, "sandy loam"),        # loamy sand: silt + 2 clay "less than 30"
    (50, 43, 7, "loam"),              # loam: "7 to less than 27 percent clay"
]


@pytest.mark.parametrize(("sand", "silt", "clay", "expected"), BOUNDARY_POINTS)
def test_points_on_boundaries_follow_the_inequalities(sand, silt, clay, expected):
    # from memory; USDA Soil Survey Manual: each limit belongs to the class whose rule says
    # "or more" / "or less" and not to the one whose rule says "more than" / "less than"
    assert gradients.texture_class([sand], [silt], [clay]).tolist() == [expected]


def test_every_point_of_a_fine_grid_has_exactly_one_class():
    # theory: the Manual's classes partition the triangle; on a 0.5 % grid, every limit of every
    # rule lies on grid points, so boundaries are hit exactly
    step = 0.5
    sand, clay = np.meshgrid(np.arange(0, 100 + step, step), np.arange(0, 100 + step, step))
    keep = sand + clay <= 100
    s = np.rint(sand[keep] * RESOLUTION).astype(np.int64)
    c = np.rint(clay[keep] * RESOLUTION).astype(np.int64)
    masks = class_masks(s, 100 * RESOLUTION - s - c, c, USDA_RULES)
    assert np.all(masks.sum(axis=0) == 1)
    assert np.all(masks.any(axis=1))  # and every class is reached


@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(st.floats(0, 1), st.floats(0, 1), st.floats(0, 1)).filter(
    lambda t: sum(t) > 1e-6), min_size=1, max_size=40))
def test_random_compositions_get_exactly_one_class(rows):
    # theory: the classes partition the triangle; random compositions closed to 100
    arr = np.array(rows, dtype=float)
    arr = arr / arr.sum(axis=1, keepdims=True) * 100
    out = gradients.texture_class(arr[:, 0], arr[:, 1], arr[:, 2])
    assert out.notna().all()
    closed = arr
    s = np.rint(closed[:, 0] * RESOLUTION).astype(np.int64)
    c = np.rint(closed[:, 2] * RESOLUTION).astype(np.int64)
    masks = class_masks(s, 100 * RESOLUTION - s - c, c, USDA_RULES)
    assert np.all(masks.sum(axis=0) == 1)
    assert [USDA_CLASSES[k] for k in masks.argmax(axis=0)] == out.tolist()


def test_loop_over_the_rules_by_hand_agrees():
    # two ways: each inequality of the Manual written out as plain Python comparisons
    def by_hand(sand, silt, clay):
        if sand > 85 and silt + 1.5 * clay < 15:
            return "sand"
        if 70 <= sand <= 91 and silt + 1.5 * clay >= 15 and silt + 2 * clay < 30:
            return "loamy sand"
        if (7 <= clay < 20 and sand > 52 and silt + 2 * clay >= 30) or (
                clay < 7 and silt < 50 and sand > 43 and silt + 2 * clay >= 30):
            return "sandy loam"
        if 7 <= clay < 27 and 28 <= silt < 50 and sand <= 52:
            return "loam"
        if (silt >= 50 and 12 <= clay < 27) or (50 <= silt < 80 and clay < 12):
            return "silt loam"
        if silt >= 80 and clay < 12:
            return "silt"
        if 20 <= clay < 35 and silt < 28 and sand > 45:
            return "sandy clay loam"
        if 27 <= clay < 40 and 20 < sand <= 45:
            return "clay loam"
        if 27 <= clay < 40 and sand <= 20:
            return "silty clay loam"
        if clay >= 35 and sand > 45:
            return "sandy clay"
        if clay >= 40 and silt >= 40:
            return "silty clay"
        if clay >= 40 and sand <= 45 and silt < 40:
            return "clay"
        return None

    rng = np.random.default_rng(5)
    whole = rng.integers(0, 101, size=(3000, 2))
    whole = whole[whole.sum(axis=1) <= 100]
    sand, clay = whole[:, 0].astype(float), whole[:, 1].astype(float)
    silt = 100 - sand - clay
    out = gradients.texture_class(sand, silt, clay).tolist()
    assert out == [by_hand(a, b, c) for a, b, c in zip(sand, silt, clay, strict=True)]


def test_sums_far_from_100_are_an_error_naming_the_samples():
    sand = pd.Series([40.0, 30.0, 60.0], index=["A", "B", "C"])
    silt = pd.Series([40.0, 30.0, 20.0], index=["A", "B", "C"])
    clay = pd.Series([20.0, 20.0, 20.5], index=["A", "B", "C"])
    with pytest.raises(InputError, match=r"do not sum to 100 \(within 1\) at 1 sample.*B \(sum "
                       r"80\).*renormalise=True") as info:
        gradients.texture_class(sand, silt, clay)
    assert info.value.sites == ("B",)
    # C sums to 100.5: within the tolerance, closed to 100 and classified without a record
    out = gradients.texture_class(sand, silt, clay, renormalise=True)
    assert out["B"] == gradients.texture_class([37.5], [37.5], [25.0])[0]  # 30/80 -> 37.5 %
    decision = out.attrs["decision"]
    assert decision.action == "renormalise" and decision.sites == ("B",)
    with pytest.raises(InputError, match=r"within 0\.1"):
        gradients.texture_class(sand, silt, clay, tolerance=0.1, renormalise=False)


def test_bad_inputs_are_clear_errors():
    with pytest.raises(InputError, match="negative parts at sample"):
        gradients.texture_class([110], [-10], [0])
    with pytest.raises(InputError, match=r"Every part .* is zero"):
        gradients.texture_class([0], [0], [0])
    with pytest.raises(InputError, match="same length"):
        gradients.texture_class([40, 50], [40], [20])
    with pytest.raises(InputError, match="must hold numbers"):
        gradients.texture_class(["forty"], [40], [20])
    with pytest.raises(InputError, match="`system` must be one of 'usda'"):
        gradients.texture_class([40], [40], [20], system="fao")
    with pytest.raises(InputError, match="`tolerance` must be a non-negative number"):
        gradients.texture_class([40], [40], [20], tolerance=-1)
    with pytest.raises(InputError, match="different samples"):
        gradients.texture_class(pd.Series([40.0], index=["a"]), pd.Series([40.0], index=["b"]),
                                pd.Series([20.0], index=["a"]))


def test_missing_parts_give_a_missing_class():
    out = gradients.texture_class([40, np.nan], [40, 40], [20, 20])
    assert out.tolist()[0] == "loam" and pd.isna(out.tolist()[1])
