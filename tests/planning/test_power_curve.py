"""The power-curve figure: what it draws, checked against the table it is drawn from."""

from __future__ import annotations

import numpy as np
import pytest

from gradients import InputError, assumed_model, plot, survey_power


@pytest.fixture(scope="module")
def result():
    model = assumed_model({"copper": 0.4, "depth": 0.0}, n_taxa=10)
    return survey_power(model, n_sites=(8, 16), n_surveys=5, n_resamples=19,
                        tests=("partial_mantel", "mantel", "vectors"), rng=2)


def test_lines_follow_the_table(result):
    ax = plot.power_curve(result, test="mantel")
    lines = {ln.get_label(): ln for ln in ax.get_lines()}
    for h in ("copper", "depth"):
        rows = result.table[(result.table["hypothesis"] == h)
                            & (result.table["test"] == "mantel")].sort_values("n_sites")
        x, y = lines[f"_gr:power-{h}"].get_data()
        np.testing.assert_array_equal(x, rows["n_sites"].to_numpy())
        np.testing.assert_array_equal(y, rows["power"].to_numpy())
    assert lines["_gr:target"].get_ydata()[0] == 0.8
    assert lines["_gr:alpha"].get_ydata()[0] == 0.05
    assert {c.get_label() for c in ax.collections} >= {"_gr:band-copper", "_gr:band-depth"}


def test_one_figure_per_test(result):
    # the vector-fit test ran too (PCoA of each survey): its rows are drawn on their own
    ax = plot.power_curve(result, test="vectors")
    x, y = {ln.get_label(): ln for ln in ax.get_lines()}["_gr:power-copper"].get_data()
    rows = result.table[(result.table["test"] == "vectors")
                        & (result.table["hypothesis"] == "copper")].sort_values("n_sites")
    np.testing.assert_array_equal(x, rows["n_sites"].to_numpy())
    np.testing.assert_array_equal(y, rows["power"].to_numpy())


def test_unknown_test_is_refused(result):
    with pytest.raises(InputError, match="`test` must be one of the tests of the plan"):
        plot.power_curve(result, test="permanova")
    with pytest.raises(InputError, match="must be a pandas DataFrame"):
        plot.power_curve(object())
