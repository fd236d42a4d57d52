"""Values below a detection limit: parsing, the substitution policies and robust ROS."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from gradients import InputError
from gradients.data import Survey, read_survey
from gradients.data._censored import ros_impute, ros_plotting_positions


@pytest.fixture
def tables():
    community = pd.DataFrame({"site": list("abcdef"), "A": [1, 2, 3, 0, 1, 2],
                              "B": [0, 1, 1, 4, 2, 2]})
    environment = pd.DataFrame({"site": list("abcdef"),
                                "Cd": ["<0.2", "0.35", "< 0.2", "0.9", "<0.5", "1.4"],
                                "Zn": [110.0, 230.0, 95.0, 400.0, 80.0, 510.0]})
    return community, environment


def test_default_is_error_listing_cells_and_options(tables):
    community, environment = tables
    with pytest.raises(InputError, match=r"3 value\(s\) below a detection limit.*site 'a', "
                       r"column 'Cd'; site 'c', column 'Cd'; site 'e', column 'Cd'.*"
                       r"censored='half-limit'.*censored='ros'") as info:
        Survey(community, environment)
    assert info.value.columns == ("Cd",) and set(info.value.sites) == {"a", "c", "e"}


def test_error_names_file_lines(tmp_path, tables):
    community, environment = tables
    environment.to_csv(tmp_path / "env.csv", index=False)
    with pytest.raises(InputError, match=r"env.csv' has 3 value.*site 'c', column 'Cd', line 4"):
        read_survey(community, tmp_path / "env.csv")


@pytest.mark.parametrize("policy,expected", [
    # common practice: half the limit (Helsel 2012 describes it, and its bias)
    ("half-limit", [0.1, 0.35, 0.1, 0.9, 0.25, 1.4]),
    ("limit", [0.2, 0.35, 0.2, 0.9, 0.5, 1.4]),
    ("zero", [0.0, 0.35, 0.0, 0.9, 0.0, 1.4]),
])
def test_substitution_policies(tables, policy, expected):
    community, environment = tables
    s = Survey(community, environment, censored=policy)
    np.testing.assert_allclose(s.environment["Cd"], expected)
    assert s.censored["Cd"].tolist() == [True, False, True, False, True, False]
    assert not s.censored["Zn"].any()
    np.testing.assert_allclose(s.detection_limits["Cd"], [0.2, np.nan, 0.2, np.nan, 0.5, np.nan])
    record = s.log[-1]
    assert record.action == "censored" and record.count == 3 and record.columns == ("Cd",)
    assert record.sites == ("a", "c", "e")
    assert "3 of 6 values" in record.detail and "<0.2, <0.5" in record.detail


def test_half_limit_log_says_biased(tables):
    community, environment = tables
    s = Survey(community, environment, censored="half-limit")
    assert "biased" in s.log[-1].detail and "Helsel 2012" in s.log[-1].detail


def test_decimal_comma_censored(tmp_path):
    (tmp_path / "c.csv").write_text("site;A\na;1\nb;2\nc;3\n")
    (tmp_path / "e.csv").write_text("site;Cd\na;<0,2\nb;0,5\nc;1,25\n")
    s = read_survey(tmp_path / "c.csv", tmp_path / "e.csv", censored="half-limit")
    np.testing.assert_allclose(s.environment["Cd"], [0.1, 0.5, 1.25])


def test_ros_plotting_positions_single_limit():
    # Hand computation with the Hirsch-Stedinger / Helsel (2012, ch. 6) formulas: one limit
    # DL = 1, A = 7 detects above it, B = 3 below it, so PE = 7/10; detects get
    # 0.3 + 0.7 r / 8 and the non-detects 0.3 r / 4.
    values = np.array([1.0, 2.0, 1.0, 3.1, 4.4, 1.2, 1.0, 5.0, 6.3, 7.7])
    censored = np.array([True, False, True, False, False, False, True, False, False, False])
    pp = ros_plotting_positions(values, censored)
    np.testing.assert_allclose(pp[censored], [0.075, 0.15, 0.225])
    detected_sorted = np.argsort(values[~censored])
    np.testing.assert_allclose(pp[~censored][detected_sorted], 0.3 + 0.7 * np.arange(1, 8) / 8)


def test_ros_plotting_positions_two_limits():
    # Hand computation, two limits (1 and 3) and a detect below the lowest limit:
    # PE(3) = 3/10 = 0.3; PE(1) = 0.3 + 2/5 * 0.7 = 0.58.
    values = np.array([1.0, 1.0, 0.5, 1.5, 2.0, 3.0, 3.5, 4.0, 6.0, 3.0])
    censored = np.array([True, True, False, False, False, True, False, False, False, True])
    pp = ros_plotting_positions(values, censored)
    expected = [0.42 / 3, 0.84 / 3,        # <1: (1 - 0.58) r / 3
                0.42 / 2,                  # 0.5: 0 + (1 - 0.58) * 1 / 2
                0.42 + 0.28 / 3, 0.42 + 0.56 / 3,  # 1.5, 2.0: 0.42 + 0.28 r / 3
                0.7 / 3,                   # <3: 0.7 r / 3
                0.775, 0.85, 0.925,        # 3.5, 4, 6: 0.7 + 0.3 r / 4
                1.4 / 3]
    np.testing.assert_allclose(pp, expected)


def test_ros_imputation_matches_regression_by_hand():
    values = np.array([1.0, 2.0, 1.0, 3.1, 4.4, 1.2, 1.0, 5.0, 6.3, 7.7])
    censored = values == 1.0
    out, capped = ros_impute(values, censored)
    # detected values are used as measured (the "robust" part)
    np.testing.assert_array_equal(out[~censored], values[~censored])
    pp_det = 0.3 + 0.7 * np.arange(1, 8) / 8
    fit = stats.linregress(stats.norm.ppf(pp_det), np.log(np.sort(values[~censored])))
    expected = np.exp(fit.intercept + fit.slope * stats.norm.ppf([0.075, 0.15, 0.225]))
    np.testing.assert_allclose(out[censored], np.minimum(expected, 1.0))
    assert capped == int(np.sum(expected > 1.0))
    assert np.all(out[censored] <= 1.0)


def test_ros_less_biased_than_half_limit():
    # Theory (Helsel 2012, ch. 6): substitution puts every non-detect at one value and shrinks
    # the spread; ROS spreads them along the fitted log-normal. Log-normal(0, 1), 200 values,
    # censored below the median: the sd of the logs is recovered far better by ROS.
    rng = np.random.default_rng(7)
    x = rng.lognormal(0.0, 1.0, size=200)
    limit = 1.0
    censored = x < limit
    values = np.where(censored, limit, x)
    ros, _ = ros_impute(values, censored)
    half = np.where(censored, limit / 2, x)
    truth = np.log(x).std()
    assert abs(np.log(ros).std() - truth) < 0.5 * abs(np.log(half).std() - truth)
    assert np.all(ros[censored] <= limit) and np.all(ros[censored] > 0)


def test_ros_through_survey(tables):
    community, environment = tables
    s = Survey(community, environment, censored="ros")
    cd = s.environment["Cd"].to_numpy()
    np.testing.assert_array_equal(cd[[1, 3, 5]], [0.35, 0.9, 1.4])
    assert np.all(cd[[0, 2]] <= 0.2) and cd[4] <= 0.5 and np.all(cd > 0)
    assert "robust regression on order statistics" in s.log[-1].detail


def test_ros_needs_three_detects(tables):
    community, environment = tables
    env = environment.assign(Cd=["<0.2", "0.35", "<0.2", "0.9", "<0.5", "<0.5"])
    with pytest.raises(InputError, match=r"column 'Cd' has only 2 detected value\(s\).*"
                       r"censored='half-limit'"):
        Survey(community, env, censored="ros")


def test_ros_refuses_non_positive(tables):
    community, environment = tables
    env = environment.assign(Cd=["<0.2", "0.35", "<0.2", "0", "0.5", "1.4"])
    with pytest.raises(InputError, match=r"column 'Cd' holds zero or negative values"):
        Survey(community, env, censored="ros")


def test_all_censored_same_limit_is_constant(tables):
    community, environment = tables
    env = environment.assign(Cd="<0.2")
    with pytest.raises(InputError, match=r"'Cd' \(every site = 0.1\)"):
        Survey(community, env, censored="half-limit")


def test_limit_without_number_is_explained(tables):
    community, environment = tables
    env = environment.assign(Cd=["<LOD", "0.35", "0.4", "0.9", "0.5", "1.4"])
    with pytest.raises(InputError, match=r"'<LOD'.*must carry the limit, written like '<0.5'"):
        Survey(community, env)


def test_censored_after_missing_policy(tables):
    community, environment = tables
    env = environment.assign(Zn=[110.0, np.nan, 95.0, 400.0, 80.0, 510.0])
    s = Survey(community, env, censored="limit", missing="drop-sites")
    assert [d.action for d in s.log] == ["drop-sites", "censored"]
    assert "3 of 5 values" in s.log[-1].detail


def test_censored_policy_sees_only_the_sites_kept(tables):
    community, environment = tables
    c = community.assign(A=[0, 2, 3, 0, 1, 2], B=[0, 1, 1, 4, 2, 2])  # site a is empty
    s = Survey(c, environment, censored="ros", empty_sites="drop")
    assert [d.action for d in s.log] == ["drop-sites", "censored"]
    assert "2 of 5 values" in s.log[-1].detail and "3 detected" in s.log[-1].detail
    assert s.log[-1].sites == ("c", "e")


@pytest.mark.parametrize("seed", [0, 1, 3, 4])
def test_ros_agrees_with_statsmodels(seed):
    # Reference library: statsmodels.imputation.ros.impute_ros, an independent implementation
    # of robust ROS with multiple detection limits. Its output is sorted, so the multisets of
    # final values are compared (these seeds need no capping at the limit).
    from statsmodels.imputation import ros

    rng = np.random.default_rng(seed)
    x = rng.lognormal(0.0, 1.0, size=40)
    limits = np.where(rng.random(40) < 0.5, 0.5, 1.0)
    censored = x < limits
    values = np.where(censored, limits, x)
    ours, capped = ros_impute(values, censored)
    assert capped == 0
    reference = ros.impute_ros(values, censored, as_array=False)["final"].to_numpy()
    np.testing.assert_allclose(np.sort(ours), np.sort(reference), rtol=1e-12)
