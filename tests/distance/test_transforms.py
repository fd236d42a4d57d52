"""Community and environmental transforms."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
import scipy.stats
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.distance import transform_community, transform_environment
from gradients.distance._transforms import ilr_basis


def _community():
    rng = np.random.default_rng(0)
    x = rng.poisson(2.0, size=(8, 5)).astype(float)
    x[3] = 0.0
    return pd.DataFrame(x, index=[f"s{i}" for i in range(8)], columns=list("abcde"))


def _soil():
    rng = np.random.default_rng(1)
    parts = rng.dirichlet([4, 3, 2], size=10) * 100
    return pd.DataFrame(parts, index=[f"s{i}" for i in range(10)],
                        columns=["sand", "silt", "clay"])


# ------------------------------------------------------------------ community
def test_community_transforms_by_definition():
    t = _community()
    x = t.to_numpy()
    tot = x.sum(axis=1, keepdims=True)
    rel = np.divide(x, tot, out=np.zeros_like(x), where=tot > 0)
    res = transform_community(t, "relative")
    assert res.table.index.equals(t.index) and res.table.columns.equals(t.columns)
    np.testing.assert_allclose(res.table.to_numpy(), rel)
    assert "s3" in res.notes[0]  # the empty site is named
    # Legendre & Gallagher 2001: Hellinger = sqrt of relative abundance
    np.testing.assert_allclose(transform_community(t, "hellinger").table, np.sqrt(rel))
    np.testing.assert_allclose(transform_community(t, "log1p").table, np.log(x + 1))
    np.testing.assert_array_equal(transform_community(t, "presence").table, (x > 0) * 1.0)


def test_wisconsin_by_definition():
    # Legendre & Legendre 2012, ch. 7: divide each species by its maximum, then each
    # site by its total; written out cell by cell
    t = _community()
    x = t.to_numpy()
    ref = np.zeros_like(x)
    for i in range(x.shape[0]):
        row = [x[i, j] / x[:, j].max() for j in range(x.shape[1])]
        s = sum(row)
        ref[i] = [v / s if s > 0 else 0.0 for v in row]
    res = transform_community(t, "wisconsin")
    np.testing.assert_allclose(res.table.to_numpy(), ref)
    assert "maximum" in res.description


def test_community_transform_errors():
    with pytest.raises(InputError, match="`method` must be one of"):
        transform_community(_community(), "sqrt")
    bad = _community()
    bad.iloc[0, 0] = -1
    with pytest.raises(InputError, match="site 's0', column 'a'"):
        transform_community(bad, "relative")


# ------------------------------------------------------------------ z-scores and logs
def test_zscore_mean_zero_sd_one():
    # definition: z = (x - mean) / sd; convention here ddof = 1 (sample sd)
    env = pd.DataFrame({"ph": [6.1, 6.8, 7.4, 5.9, 8.0], "cu": [3.0, 40.0, 12.0, 7.0, 90.0]},
                       index=list("abcde"))
    res = transform_environment(env, "zscore")
    z = res.table
    np.testing.assert_allclose(z.mean(), 0.0, atol=1e-12)
    np.testing.assert_allclose(z.std(ddof=1), 1.0, rtol=1e-12)
    assert z.index.equals(env.index)
    z0 = transform_environment(env, "zscore", ddof=0).table
    np.testing.assert_allclose(z0.std(ddof=0), 1.0, rtol=1e-12)
    assert "ddof=1" in res.description


def test_zscore_constant_column_named():
    env = pd.DataFrame({"ph": [7.0, 7.0, 7.0], "cu": [1.0, 2.0, 3.0]})
    with pytest.raises(InputError, match="Column 'ph' is constant"):
        transform_environment(env, "zscore")


def test_log10_skewness_report():
    env = pd.DataFrame({"zn": [12.0, 30.0, 45.0, 80.0, 150.0, 900.0, 2400.0],
                        "ph": [6.0, 6.5, 7.0, 7.1, 7.3, 7.9, 8.2]})
    res = transform_environment(env, {"zn": "log10"})
    np.testing.assert_allclose(res.table["zn"], np.log10(env["zn"]))
    pd.testing.assert_series_equal(res.table["ph"], env["ph"])  # passed through
    row = res.details.set_index("column").loc["zn"]
    # reference library: scipy.stats.skew with bias=False (adjusted Fisher-Pearson)
    assert row["skewness_before"] == pytest.approx(scipy.stats.skew(env["zn"], bias=False))
    assert row["skewness_after"] == pytest.approx(
        scipy.stats.skew(np.log10(env["zn"]), bias=False))
    assert row["skewness_after"] < row["skewness_before"]
    assert "left unchanged" in res.description


def test_log10_non_positive_suggests_offset():
    env = pd.DataFrame({"hg": [0.0, 0.1, 0.5]}, index=["x", "y", "z"])
    with pytest.raises(InputError, match=r"column 'hg'.*site 'x'.*offset=\{'hg': c\}"):
        transform_environment(env, "log10")
    res = transform_environment(env, "log10", offset={"hg": 0.01})
    np.testing.assert_allclose(res.table["hg"], np.log10(env["hg"] + 0.01))
    assert "log10(x + 0.01)" in res.details["detail"].iloc[0]
    with pytest.raises(InputError, match="too small"):
        transform_environment(env, "log10", offset=-1.0)


# ------------------------------------------------------------------ compositions
def test_clr_sums_to_zero_and_matches_definition():
    # Aitchison 1986: clr(x)_j = ln(x_j / g(x)); coordinates sum to zero per site
    soil = _soil()
    res = transform_environment(soil, {("sand", "silt", "clay"): "clr"})
    clr = res.table
    assert list(clr.columns) == ["clr_sand", "clr_silt", "clr_clay"]
    np.testing.assert_allclose(clr.sum(axis=1), 0.0, atol=1e-12)
    g = np.exp(np.log(soil).mean(axis=1))
    np.testing.assert_allclose(clr.to_numpy(), np.log(soil.to_numpy() / g.to_numpy()[:, None]))


def test_ilr_is_an_isometry():
    # Egozcue et al. 2003: Euclidean distance of ilr coordinates = Aitchison distance.
    # Aitchison distance written out (Aitchison 1986):
    # d^2 = 1/(2D) sum_i sum_j (ln(x_i / x_j) - ln(y_i / y_j))^2
    soil = _soil()
    ilr = transform_environment(soil, "ilr").table
    assert list(ilr.columns) == ["ilr_1", "ilr_2"]
    x = soil.to_numpy()
    d_parts = x.shape[1]

    def aitchison(a, b):
        la, lb = np.log(a), np.log(b)
        s = sum((la[i] - la[j] - lb[i] + lb[j]) ** 2
                for i in range(d_parts) for j in range(d_parts))
        return np.sqrt(s / (2 * d_parts))

    ref = np.array([aitchison(x[i], x[j]) for i, j in itertools.combinations(range(len(x)), 2)])
    np.testing.assert_allclose(pdist(ilr.to_numpy()), ref, rtol=1e-12)
    # first balance by its formula: sqrt(1/2) ln(sand / silt)
    np.testing.assert_allclose(ilr["ilr_1"], np.sqrt(0.5) * np.log(soil["sand"] / soil["silt"]))
    v = ilr_basis(4)
    np.testing.assert_allclose(v.T @ v, np.eye(3), atol=1e-15)  # orthonormal
    np.testing.assert_allclose(v.sum(axis=0), 0.0, atol=1e-15)  # contrasts


def test_multiplicative_zero_replacement_by_hand():
    # Martín-Fernández et al. 2003: zero -> delta = 0.65 x detection limit (as a proportion
    # of the row total); the other parts x (1 - sum delta). Row 60/40/0 with limit 1 (%):
    # delta = 0.0065, sand 0.6 x 0.9935, silt 0.4 x 0.9935.
    soil = pd.DataFrame({"sand": [60.0, 30.0], "silt": [40.0, 30.0], "clay": [0.0, 40.0]},
                        index=["p", "q"])
    res = transform_environment(soil, "clr", detection_limit={"clay": 1.0})
    expect = np.array([0.6 * 0.9935, 0.4 * 0.9935, 0.0065])
    ref = np.log(expect) - np.log(expect).mean()
    np.testing.assert_allclose(res.table.loc["p"].to_numpy(), ref, rtol=1e-12)
    assert "replaced" in res.notes[0] and "given" in res.notes[0]
    # ratio of the non-zero parts is unchanged (theory of multiplicative replacement)
    assert res.table.loc["p", "clr_sand"] - res.table.loc["p", "clr_silt"] == pytest.approx(
        np.log(60 / 40))
    # default limit: the smallest positive value of that part, reported
    res2 = transform_environment(soil, "clr")
    assert "smallest positive value" in res2.notes[0]


def test_composition_errors():
    soil = _soil()
    with pytest.raises(InputError, match="tuple key"):
        transform_environment(soil, {"sand": "clr"})
    with pytest.raises(InputError, match="'loam' named in `method` are not in"):
        transform_environment(soil, {("sand", "loam"): "ilr"})
    bad = soil.copy()
    bad.iloc[2] = 0.0
    with pytest.raises(InputError, match="zero at site\\(s\\) 's2'"):
        transform_environment(bad, "clr")


def test_mixed_plan_keeps_order_and_labels():
    env = _soil().assign(ph=np.linspace(5, 8, 10), cu=np.geomspace(1, 500, 10))
    res = transform_environment(env, {("sand", "silt", "clay"): "ilr", "cu": "log10",
                                      "ph": "zscore"})
    assert list(res.table.columns) == ["ilr_1", "ilr_2", "ph", "cu"]
    assert res.table.index.equals(env.index)
    assert res.method == "mixed"
    assert "Egozcue" in res.description and "log10" in res.description


def test_text_column_error_suggests_mapping():
    env = pd.DataFrame({"ph": [6.0, 7.0, 8.0], "habitat": ["pool", "riffle", "pool"]})
    with pytest.raises(InputError, match=r"'habitat' hold text.*as a mapping"):
        transform_environment(env, "zscore")
    res = transform_environment(env, {"ph": "zscore"})
    assert list(res.table["habitat"]) == ["pool", "riffle", "pool"]
