"""Forward selection on constructed examples: it stops exactly where the double criterion of
Blanchet, Legendre & Borcard (2008) says, with adjusted R2 and partial F checked against
statsmodels OLS (one Euclidean response, McArdle & Anderson 2001)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy.spatial.distance import pdist

from gradients.distance import DistanceMatrix
from gradients.partition import STOP_REASONS, forward_select

N = 40
LAB = [f"q{i:02d}" for i in range(N)]


def _unit_orthogonal(rng, against, k):
    # k random directions exactly orthogonal to the columns of `against` (and to 1)
    basis = np.linalg.qr(np.column_stack([np.ones(N), against]))[0]
    out = []
    for _ in range(k):
        v = rng.normal(size=N)
        v -= basis @ (basis.T @ v)
        for w in out:
            v -= w * (w @ v)
        out.append(v / np.linalg.norm(v))
    return out


def _frame(cols):
    return pd.DataFrame(cols, index=LAB)


def _ols_adj(y, table, names):
    if not names:
        return 0.0
    return sm.OLS(y, sm.add_constant(table[list(names)].to_numpy())).fit().rsquared_adj


def _check_rows(res, y, table):
    # every row's adjusted R2 is the OLS one of the model after entry; every entered row
    # obeys both rules; the chosen variable at each step has the largest adjusted R2
    inside: list[str] = []
    for row in res.table.itertuples():
        assert row.r2_adjusted == pytest.approx(_ols_adj(y, table, [*inside, row.variable]),
                                                abs=1e-10)
        others = [c for c in table.columns if c not in inside]
        best = max(others, key=lambda c: _ols_adj(y, table, [*inside, c]))
        assert row.variable == best
        full = sm.OLS(y, sm.add_constant(table[[*inside, row.variable]].to_numpy())).fit()
        red = sm.OLS(y, sm.add_constant(table[inside].to_numpy()) if inside
                     else np.ones((N, 1))).fit()
        assert row.statistic == pytest.approx(full.compare_f_test(red)[0], rel=1e-9)
        if row.entered:
            assert row.pvalue <= res.alpha and row.r2_adjusted <= res.r2_adjusted + 1e-12
            inside.append(row.variable)
    assert tuple(inside) == res.selected
    global_adj = _ols_adj(y, table, list(table.columns))
    assert res.r2_adjusted == pytest.approx(global_adj, abs=1e-10)


def test_stops_on_the_adjusted_r2_rule():
    # x1 strong, x2 strong: both significant. Eight candidates exactly orthogonal to y, x1
    # and x2 add nothing but degrees of freedom, so the global adjusted R2 is below that of
    # {x1, x2}: x2 is significant but would take the adjusted R2 above the global one, so the
    # selection stops there with x1 alone (the second rule of the double criterion).
    rng = np.random.default_rng(1)
    x1, x2 = rng.normal(size=N), rng.normal(size=N)
    y = 2.0 * x1 + 1.2 * x2 + rng.normal(size=N)
    noise = _unit_orthogonal(rng, np.column_stack([x1, x2, y]), 8)
    table = _frame({"x1": x1, "x2": x2, **{f"n{i}": v for i, v in enumerate(noise)}})
    res = forward_select(DistanceMatrix(pdist(y[:, None]), LAB), table, n_resamples=499,
                         rng=3)
    assert res.pvalue <= 0.05
    assert res.selected == ("x1",)
    assert res.stop_reason == "r2"
    last = res.table.iloc[-1]
    assert last["variable"] == "x2" and not last["entered"] and last["pvalue"] <= 0.05
    assert last["r2_adjusted"] > res.r2_adjusted
    _check_rows(res, y, table)
    assert STOP_REASONS["r2"] in res.notes[1]


def test_stops_on_the_significance_rule():
    # x2's partial F given x1 is made exactly 2 (partial R2 c^2 with c^2 (n-3)/(1-c^2) = 2):
    # it raises the adjusted R2 (F > 1), which equals the global one, but its p-value
    # (about 0.16 on F(1, 37)) is above alpha: the first rule stops the selection.
    rng = np.random.default_rng(2)
    x1 = rng.normal(size=N)
    y = 3.0 * x1 + rng.normal(size=N)
    basis = np.linalg.qr(np.column_stack([np.ones(N), x1]))[0]
    r = y - basis @ (basis.T @ y)
    r /= np.linalg.norm(r)
    (w,) = _unit_orthogonal(rng, np.column_stack([x1, y]), 1)
    c2 = 2.0 / (N - 3 + 2.0)
    x2 = np.sqrt(c2) * r + np.sqrt(1 - c2) * w
    table = _frame({"x1": x1, "x2": x2})
    res = forward_select(DistanceMatrix(pdist(y[:, None]), LAB), table, n_resamples=999,
                         rng=4)
    assert res.table["statistic"].iloc[1] == pytest.approx(2.0, rel=1e-9)
    assert res.selected == ("x1",) and res.stop_reason == "pvalue"
    assert res.table["pvalue"].iloc[1] > 0.05
    assert res.table["r2_adjusted"].iloc[1] == pytest.approx(res.r2_adjusted, abs=1e-12)
    _check_rows(res, y, table)


def test_nothing_is_selected_when_the_global_model_fails():
    # every candidate exactly orthogonal to the response: the global F is 0 and p = 1
    rng = np.random.default_rng(3)
    y = rng.normal(size=N)
    noise = _unit_orthogonal(rng, y[:, None], 3)
    table = _frame({f"n{i}": v for i, v in enumerate(noise)})
    res = forward_select(DistanceMatrix(pdist(y[:, None]), LAB), table, n_resamples=199, rng=5)
    assert res.selected == () and res.stop_reason == "global" and res.table.empty
    assert res.pvalue == 1.0
    assert "global model is not significant" in res.notes[1]


def test_every_candidate_can_enter():
    # two strong variables and nothing else: the last model is the global model, whose
    # adjusted R2 it equals (not above it), so both enter
    rng = np.random.default_rng(4)
    x1, x2 = rng.normal(size=N), rng.normal(size=N)
    y = 2.0 * x1 - 1.5 * x2 + rng.normal(size=N)
    table = _frame({"x2": x2, "x1": x1})
    res = forward_select(DistanceMatrix(pdist(y[:, None]), LAB), table, n_resamples=199, rng=6)
    assert res.selected == ("x1", "x2") and res.stop_reason == "exhausted"
    assert res.table["entered"].all()
    _check_rows(res, y, table)
    assert list(res.subset(table).columns) == ["x1", "x2"]


def test_covariables_enter_every_model_and_test():
    # with a covariable the adjusted R2 of the selection is adj(S + Z) - adj(Z) (Peres-Neto
    # et al. 2006), here from statsmodels; the steps are partial tests given Z
    rng = np.random.default_rng(5)
    z, x1, x2 = (rng.normal(size=N) for _ in range(3))
    y = 2.0 * z + 1.5 * x1 + rng.normal(size=N)
    table = _frame({"x1": x1, "x2": x2})
    cov = _frame({"z": z})
    res = forward_select(DistanceMatrix(pdist(y[:, None]), LAB), table, covariables=cov,
                         n_resamples=199, rng=7)
    assert res.selected[0] == "x1"
    both = pd.concat([cov, table], axis=1)
    adj_z = _ols_adj(y, both, ["z"])
    assert res.table["r2_adjusted"].iloc[0] == pytest.approx(
        _ols_adj(y, both, ["z", "x1"]) - adj_z, abs=1e-10)
    assert res.r2_adjusted == pytest.approx(_ols_adj(y, both, ["z", "x1", "x2"]) - adj_z,
                                            abs=1e-10)


def test_selection_does_not_depend_on_n_jobs():
    rng = np.random.default_rng(6)
    table = _frame({f"v{i}": rng.normal(size=N) for i in range(6)})
    y = table.to_numpy()[:, :3] @ [1.0, 0.7, 0.4] + rng.normal(size=N)
    com = np.column_stack([y, 0.5 * y + rng.normal(size=N)])
    d = DistanceMatrix(pdist(com), LAB)
    one = forward_select(d, table, n_resamples=299, rng=8, n_jobs=1)
    two = forward_select(d, table, n_resamples=299, rng=8, n_jobs=2)
    pd.testing.assert_frame_equal(one.table, two.table)
    assert one.pvalue == two.pvalue
