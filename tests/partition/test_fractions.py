"""Variation partitioning against separate fits combined with the published formulas."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.partition import dbrda, partition_variation

N = 36
LAB = [f"r{i:02d}" for i in range(N)]


def _tables(seed=0):
    rng = np.random.default_rng(seed)
    common = rng.normal(size=N)
    env = pd.DataFrame({"temp": common + rng.normal(size=N), "ph": rng.normal(size=N)},
                       index=LAB)
    space = pd.DataFrame({"east": common + rng.normal(size=N), "north": rng.normal(size=N)},
                         index=LAB)
    hab = pd.DataFrame({"habitat": rng.choice(["bank", "bed", "pool"], size=N)}, index=LAB)
    return rng, env, space, hab


def _adj_rda(y, *tables):
    # adjusted R2 of the redundancy model computed directly (numpy least squares of the
    # centred responses; Ezekiel's adjustment, Peres-Neto et al. 2006)
    x = pd.get_dummies(pd.concat(tables, axis=1), drop_first=True, dtype=float).to_numpy()
    yc = y - y.mean(axis=0)
    xc = x - x.mean(axis=0)
    fitted = xc @ np.linalg.lstsq(xc, yc, rcond=None)[0]
    r2 = np.sum(fitted**2) / np.sum(yc**2)
    return 1 - (1 - r2) * (N - 1) / (N - x.shape[1] - 1)


def test_two_tables_equal_three_separate_fits_with_borcard_formulas():
    # Borcard, Legendre & Drapeau (1992): [a+b] = R2adj(X), [b+c] = R2adj(W),
    # [a+b+c] = R2adj(X, W); [a] = [abc] - [bc], [c] = [abc] - [ab], [b] = [ab] + [bc] - [abc],
    # [d] = 1 - [abc]. The three fits here are statsmodels OLS on one Euclidean response.
    rng, env, space, _ = _tables(1)
    y = env["temp"].to_numpy() + 0.8 * space["east"].to_numpy() + rng.normal(size=N)
    res = partition_variation(DistanceMatrix(pdist(y[:, None]), LAB), env, space,
                              names=["environment", "space"], n_resamples=0)
    fit = lambda *t: sm.OLS(y, sm.add_constant(pd.concat(t, axis=1))).fit()  # noqa: E731
    ab, bc, abc = fit(env).rsquared_adj, fit(space).rsquared_adj, fit(env, space).rsquared_adj
    assert res.fraction("environment") == pytest.approx(abc - bc, abs=1e-12)
    assert res.fraction("space") == pytest.approx(abc - ab, abs=1e-12)
    assert res.fraction("environment", "space") == pytest.approx(ab + bc - abc, abs=1e-12)
    t = res.table.set_index("fraction")
    assert t.loc["unexplained", "r2_adjusted"] == pytest.approx(1 - abc, abs=1e-12)
    assert t.loc["environment + space", "r2"] == pytest.approx(fit(env, space).rsquared,
                                                               abs=1e-12)
    assert t.loc["environment (whole table)", "r2_adjusted"] == pytest.approx(ab, abs=1e-12)
    individual = res.table[res.table["kind"] != "combined"]["r2_adjusted"]
    assert individual.sum() == pytest.approx(1.0, abs=1e-12)


def test_three_tables_follow_the_inclusion_exclusion_formulas():
    # Legendre & Legendre (2012, sect. 10.3.5; formulas written out from memory): with X, W,
    # Z, X only = R(XWZ) - R(WZ); X & W only = R(XZ) + R(WZ) - R(Z) - R(XWZ); all three =
    # R(X) + R(W) + R(Z) - R(XW) - R(XZ) - R(WZ) + R(XWZ). Several responses, RDA by numpy.
    rng, env, space, hab = _tables(2)
    h = (hab["habitat"] == "pool").to_numpy(float)
    y = np.column_stack([env["temp"] + space["east"], h + env["ph"], space["north"] - h])
    y = y + rng.normal(size=y.shape)
    res = partition_variation(DistanceMatrix(pdist(y), LAB), env, space, hab,
                              names=["X", "W", "Z"], n_resamples=0)
    r = {"X": _adj_rda(y, env), "W": _adj_rda(y, space), "Z": _adj_rda(y, hab),
         "XW": _adj_rda(y, env, space), "XZ": _adj_rda(y, env, hab),
         "WZ": _adj_rda(y, space, hab), "XWZ": _adj_rda(y, env, space, hab)}
    assert res.fraction("X") == pytest.approx(r["XWZ"] - r["WZ"], abs=1e-10)
    assert res.fraction("Z") == pytest.approx(r["XWZ"] - r["XW"], abs=1e-10)
    assert res.fraction("X", "W") == pytest.approx(r["XZ"] + r["WZ"] - r["Z"] - r["XWZ"],
                                                   abs=1e-10)
    assert res.fraction("W", "Z") == pytest.approx(r["XW"] + r["XZ"] - r["X"] - r["XWZ"],
                                                   abs=1e-10)
    assert res.fraction("X", "W", "Z") == pytest.approx(
        r["X"] + r["W"] + r["Z"] - r["XW"] - r["XZ"] - r["WZ"] + r["XWZ"], abs=1e-10)
    assert len(res.table) == 7 + 1 + 7
    assert res.table[res.table["kind"] != "combined"]["r2_adjusted"].sum() == \
        pytest.approx(1.0, abs=1e-12)


def test_four_tables_sum_to_one():
    rng, env, space, hab = _tables(3)
    extra = pd.DataFrame({"depth": rng.normal(size=N)}, index=LAB)
    y = rng.normal(size=(N, 3)) + env[["temp"]].to_numpy()
    res = partition_variation(DistanceMatrix(pdist(y), LAB), env, space, hab, extra,
                              n_resamples=0)
    assert res.names == ("table1", "table2", "table3", "table4")
    assert (res.table["kind"] == "individual").sum() == 15
    assert res.table[res.table["kind"] != "combined"]["r2_adjusted"].sum() == \
        pytest.approx(1.0, abs=1e-12)


def test_testable_fractions_equal_the_corresponding_dbrda_tests():
    # two ways that must agree: a table alone given the other is the partial dbRDA, a whole
    # table the plain dbRDA; the same rng gives the same rearrangements
    rng, env, space, _ = _tables(4)
    y = np.column_stack([env["temp"] + space["east"], space["north"]]) + rng.normal(size=(N, 2))
    d = DistanceMatrix(pdist(y), LAB)
    res = partition_variation(d, env, space, names=["env", "space"], n_resamples=199, rng=9)
    t = res.table.set_index("fraction")
    alone = dbrda(d, env, covariables=space, n_resamples=199, rng=9)
    assert t.loc["env only", "statistic"] == pytest.approx(alone.statistic, rel=1e-10)
    assert t.loc["env only", "pvalue"] == alone.pvalue
    assert t.loc["env only", "r2_adjusted"] == pytest.approx(alone.r2_adjusted, abs=1e-12)
    whole = dbrda(d, space, n_resamples=199, rng=9)
    assert t.loc["space (whole table)", "pvalue"] == whole.pvalue
    assert np.isnan(t.loc["shared by env & space", "pvalue"])
    assert not t.loc["shared by env & space", "testable"]
    assert any("cannot be attributed to either table" in s for s in res.notes)
    assert any("conditional on that selection" in s for s in res.notes)


def test_negative_fraction_is_reported_with_its_reading():
    # a table exactly orthogonal to the response and to the other table explains nothing but
    # costs degrees of freedom: its adjusted fraction is below zero
    rng, env, _, _ = _tables(5)
    y = env["temp"].to_numpy() + rng.normal(size=N)
    basis = np.linalg.qr(np.column_stack([np.ones(N), env.to_numpy(), y]))[0]
    v = rng.normal(size=N)
    v -= basis @ (basis.T @ v)
    res = partition_variation(DistanceMatrix(pdist(y[:, None]), LAB), env,
                              pd.DataFrame({"noise": v}, index=LAB), names=["env", "noise"],
                              n_resamples=0)
    assert res.fraction("noise") < 0
    note = next(s for s in res.notes if s.startswith("Negative fraction"))
    assert "noise only" in note and "read as zero" in note
