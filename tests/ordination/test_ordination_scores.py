"""Imported site scores (as_scores) and weighted-average taxon scores (ter Braak 1987)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.distance import DistanceMatrix
from gradients.ordination import as_scores, nmds, pca, pcoa, taxon_scores

SITES = ["a", "b", "c", "d", "e", "f"]


def _scores() -> pd.DataFrame:
    rng = np.random.default_rng(0)
    return pd.DataFrame(rng.normal(size=(6, 3)), index=SITES, columns=["dim1", "dim2", "dim3"])


def test_results_of_each_ordination():
    x = np.random.default_rng(1).normal(size=(8, 3))
    dm = DistanceMatrix(pdist(x), list("pqrstuvw"))
    for res in (pcoa(dm), nmds(dm, starts=1, rng=0)):
        out = as_scores(res)
        pd.testing.assert_frame_equal(out, res.scores)
        assert out is not res.scores  # a copy
    table = pd.DataFrame(x, index=list("pqrstuvw"), columns=["pH", "Cu", "Zn"])
    res = pca(table, scaling="correlation")
    pd.testing.assert_frame_equal(as_scores(res), res.scores)


def test_any_object_with_a_scores_table_is_accepted():
    # Duck typing: the result's type is not checked, only that it carries a `scores` table,
    # so a result of another stage (or of the user's own code) is read the same way.
    class Imported:
        scores = _scores()

    pd.testing.assert_frame_equal(as_scores(Imported(), axes=["dim2"]), _scores()[["dim2"]])

    class NoTable:
        scores = (1.0, 2.0)

    with pytest.raises(InputError, match=r"an object with a `scores` DataFrame.*got NoTable"):
        as_scores(NoTable())
    # a DataFrame with a column named "scores" is a table of scores, not a result
    frame = pd.DataFrame({"scores": [0.5, -0.5]}, index=["a", "b"])
    assert list(as_scores(frame).columns) == ["scores"]


def test_dataframe_aligned_by_label():
    s = _scores()
    order = ["f", "a", "c", "b", "e", "d"]
    out = as_scores(s.loc[order], sites=SITES)
    pd.testing.assert_frame_equal(out, s)
    assert list(as_scores(s, sites=order).index) == order
    # integer scores and a Series become floats
    ints = pd.DataFrame({"x": [1, 2, 3]}, index=["a", "b", "c"])
    assert as_scores(ints)["x"].dtype == np.float64
    assert list(as_scores(pd.Series([0.1, 0.2], index=["a", "b"], name="ax")).columns) == ["ax"]


def test_missing_and_extra_sites_named():
    s = _scores()
    with pytest.raises(InputError, match=r"1 site.* in the sites asked for but not in the scores: "
                                         "'g'") as err:
        as_scores(s, sites=[*SITES, "g"])
    assert "g" in err.value.sites
    with pytest.raises(InputError, match="in the scores but not in the sites asked for: 'f'"):
        as_scores(s, sites=SITES[:5])
    with pytest.raises(InputError, match="repeats label"):
        as_scores(s, sites=["a", "a", "b", "c", "d", "e"])


def test_non_numeric_missing_and_duplicates_refused():
    s = _scores()
    with pytest.raises(InputError, match=r"'site'.* not numeric.*set_index") as err:
        as_scores(s.assign(site=SITES))
    assert err.value.columns == ("site",)
    with pytest.raises(InputError, match=r"'flag'.* not numeric"):
        as_scores(s.assign(flag=True))
    nan = s.copy()
    nan.loc["c", "dim2"] = np.nan
    with pytest.raises(InputError, match=r"\('c', 'dim2'\)"):
        as_scores(nan)
    dup = s.copy()
    dup.index = ["a", "a", "c", "d", "e", "f"]
    with pytest.raises(InputError, match=r"repeat site label.*'a'"):
        as_scores(dup)
    with pytest.raises(InputError, match="no columns"):
        as_scores(s.iloc[:, :0])
    with pytest.raises(InputError, match="got str"):
        as_scores("scores.csv")


def test_axes_selection():
    s = _scores()
    assert list(as_scores(s, axes=2).columns) == ["dim1", "dim2"]
    assert list(as_scores(s, axes=["dim3", "dim1"]).columns) == ["dim3", "dim1"]
    # columns not chosen are not checked
    assert list(as_scores(s.assign(note="x"), axes=["dim1"]).columns) == ["dim1"]
    with pytest.raises(InputError, match=r"`axes` names column\(s\) 'dim9' that the scores do "
                                         r"not have; they have 'dim1', 'dim2', 'dim3'\."):
        as_scores(s, axes=["dim9"])
    with pytest.raises(InputError, match="asks for 4 axes"):
        as_scores(s, axes=4)


def test_array_needs_sites():
    arr = np.arange(12.0).reshape(6, 2)
    with pytest.raises(InputError, match="no site labels"):
        as_scores(arr)
    out = as_scores(arr, sites=SITES)
    assert list(out.columns) == ["axis1", "axis2"] and list(out.index) == SITES
    with pytest.raises(InputError, match="do not match 5 sites"):
        as_scores(arr, sites=SITES[:5])


def test_input_unchanged():
    s = _scores()
    before = s.copy()
    out = as_scores(s.loc[SITES[::-1]], sites=SITES)
    out.iloc[0, 0] = 99.0
    pd.testing.assert_frame_equal(s, before)


def test_taxon_scores_weighted_averages():
    s = _scores()
    community = pd.DataFrame(
        {"only_a": [5, 0, 0, 0, 0, 0], "a_and_b": [2, 2, 0, 0, 0, 0],
         "mixed": [1, 0, 3, 0, 0, 6]}, index=SITES)
    out = taxon_scores(s, community.iloc[::-1])  # alignment by label
    # theory: a taxon at one site sits on that site; equal abundance at two sites, the midpoint
    np.testing.assert_allclose(out.loc["only_a"], s.loc["a"])
    np.testing.assert_allclose(out.loc["a_and_b"], (s.loc["a"] + s.loc["b"]) / 2)
    np.testing.assert_allclose(out.loc["mixed"],
                               (1 * s.loc["a"] + 3 * s.loc["c"] + 6 * s.loc["f"]) / 10)
    assert list(out.columns) == list(s.columns)
    # also offered on the results
    x = np.random.default_rng(2).normal(size=(6, 2))
    res = pcoa(DistanceMatrix(pdist(x), SITES))
    pd.testing.assert_frame_equal(res.taxon_scores(community), taxon_scores(res.scores, community))


def test_taxon_scores_errors():
    s = _scores()
    comm = pd.DataFrame({"t1": [1, 0, 0, 0, 0, 0], "t2": [0] * 6}, index=SITES)
    with pytest.raises(InputError, match="'t2' are absent from every site"):
        taxon_scores(s, comm)
    with pytest.raises(InputError, match=r"non-negative.*\('b', 't1'\)"):
        taxon_scores(s, comm.assign(t2=1).assign(t1=[1, -1, 0, 0, 0, 0]))
    with pytest.raises(InputError, match="not in the scores: 'z'"):
        taxon_scores(s, pd.DataFrame({"t1": [1] * 7}, index=[*SITES, "z"]))


def test_object_column_of_numbers_accepted():
    # spreadsheet readers can give object columns holding numbers; text stays refused
    s = pd.DataFrame({"axis1": [0.5, 1, -2.25]}, index=["a", "b", "c"], dtype=object)
    out = as_scores(s)
    assert out["axis1"].dtype == np.float64
    assert out["axis1"].tolist() == [0.5, 1.0, -2.25]
    mixed = pd.DataFrame({"axis1": [0.5, "1.0", 2.0]}, index=["a", "b", "c"], dtype=object)
    with pytest.raises(InputError, match="'axis1'"):
        as_scores(mixed)
