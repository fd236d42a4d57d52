"""The ranking stage's figures drawn from its result objects: heights are importances, the
steepest stretch is the model's, bars follow the ranking."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from matplotlib.figure import Figure
from scipy.spatial.distance import pdist

from gradients import plot
from gradients.distance import DistanceMatrix
from gradients.ranking import rank_variables, turnover_model


@pytest.fixture(scope="module")
def results():
    rng = np.random.default_rng(2)
    n = 40
    env = pd.DataFrame(rng.uniform(0, 10, size=(n, 4)), columns=["Cu", "sand", "pH", "om"])
    env["Cu_twin"] = env["Cu"] + rng.normal(0, 0.3, n)  # collinear with Cu
    eta = 0.1 + pdist(1.0 / (1 + np.exp(-1.5 * (env[["Cu"]].to_numpy() - 6)))) \
        + pdist(0.05 * env[["sand"]].to_numpy())
    d = DistanceMatrix(np.clip(-np.expm1(-eta) + rng.normal(0, 0.03, eta.size), 0, 1),
                       env.index)
    model = turnover_model(d, env, n_resamples=19, rng=1)
    ranked = rank_variables(d, env, n_resamples=19, turnover_resamples=9, rng=1)
    return model, ranked


def _tagged(ax, label):
    return [a for a in ax.get_lines() if a.get_label() == label]


def test_turnover_curves_heights_are_importances_and_mark_the_steepest_half(results):
    model, _ = results
    fig = plot.turnover_curves(model, top=3)
    assert isinstance(fig, Figure)
    panels = [ax for ax in fig.axes if ax.get_visible()]
    assert [ax.get_title(loc="left") for ax in panels] == list(model.table.index[:3])
    for ax in panels:
        name = ax.get_title(loc="left")
        row = model.table.loc[name]
        (curve,) = _tagged(ax, "_gr:curve")
        # the curve rises from 0 at the lowest value to its importance at the highest
        assert curve.get_ydata()[0] == pytest.approx(0.0, abs=1e-12)
        assert curve.get_ydata()[-1] == pytest.approx(row["importance"], rel=1e-12)
        (tick,) = _tagged(ax, "_gr:height")
        assert tick.get_ydata()[0] == pytest.approx(row["importance"], rel=1e-12)
        steep = _tagged(ax, "_gr:steepest")
        if row["importance"] > 0:
            (seg,) = steep
            assert seg.get_xdata()[0] == pytest.approx(row["low"])
            assert seg.get_xdata()[-1] == pytest.approx(row["high"])
            # it holds half the height (up to the curve's 101-point sampling)
            rise = seg.get_ydata()[-1] - seg.get_ydata()[0]
            assert rise == pytest.approx(row["importance"] / 2, rel=0.02)
        assert "height" in ax.get_title(loc="right") and "p = " in ax.get_title(loc="right")
    # all panels share one vertical scale, so heights compare
    assert len({ax.get_ylim() for ax in panels}) == 1


def test_turnover_curves_of_a_ranking_draw_its_model(results):
    _, ranked = results
    fig = plot.turnover_curves(ranked, top=None, ncols=2)
    names = [ax.get_title(loc="left") for ax in fig.axes if ax.get_visible()]
    assert names == list(ranked.turnover.table.index)


def test_ranking_bars_follow_the_ranking_and_mark_collinear_variables(results):
    _, ranked = results
    ax = plot.ranking(ranked)
    (bars,) = [c for c in ax.containers if c.get_label() == "_gr:bars"]
    ordered = sorted(bars.patches, key=lambda p: -p.get_y())
    np.testing.assert_allclose([p.get_width() for p in ordered], ranked.table["importance"])
    ticks = sorted(ax.get_yticklabels(), key=lambda t: -t.get_position()[1])
    labels = [t.get_text() for t in ticks]
    expected = [v + (" ≈" if c else "") for v, c in
                zip(ranked.table.index, ranked.table["collinear"], strict=True)]
    assert labels == expected and any(" ≈" in x for x in labels)
    legend = [t.get_text() for t in ax.figure.legends[0].get_texts()]
    assert "≈ collinear with another variable" in legend
    ax = plot.ranking(ranked, value="mantel", pvalue="mantel_pvalue", top=2)
    (bars,) = [c for c in ax.containers if c.get_label() == "_gr:bars"]
    assert len(bars) == 2
