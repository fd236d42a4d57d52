"""The generating model: fitted to a pilot drawn from a known model it recovers that model;
rare taxa get no response; the stated-assumptions model is the Gaussian response it says."""

from __future__ import annotations

import numpy as np
import pytest

from gradients import InputError, Survey, assumed_model, fit_generating_model, survey_power


def test_fit_recovers_a_known_model(pilot_from):
    # Maximum likelihood is consistent (common practice): on a 200-site pilot drawn from
    # Gaussian responses (ter Braak & Looman 1986) the fitted coefficients of a gradient with
    # an effect are close to the truth, and those of a gradient with none are shrunk to (near)
    # zero by the heuristic factor max(0, 1 - k/W) (Van Houwelingen & le Cessie 1990), whose
    # expected value under no effect is small: W is about chi-square with k = 2 df.
    truth = assumed_model({"g": 0.8, "h": 0.0}, n_taxa=8, abundance=30.0, dispersion=0.3)
    pilot = pilot_from(truth, 200, 5)
    fit = fit_generating_model(pilot, {"g": ["g"], "h": ["h"]}, rng=0)
    assert fit.fitted.all()
    # the pilot's g is standardised by its own mean and spread: undo that for the comparison
    sd = fit.scale[0]
    np.testing.assert_allclose(fit.quadratic[:, 0] / sd**2, truth.quadratic[:, 0], atol=0.12)
    np.testing.assert_allclose(fit.linear[:, 0] / sd, truth.linear[:, 0], atol=0.25)
    assert np.median(fit.shrinkage[:, 1]) < 0.35
    assert np.all(fit.shrinkage[:, 0] > 0.8)
    # overdispersion near the truth (Cameron & Trivedi's estimator is consistent)
    assert 0.15 < float(np.median(fit.dispersion)) < 0.5
    table = fit.table
    assert set(table.columns) >= {"taxon", "group", "predictor", "linear", "quadratic",
                                  "shrinkage"}
    assert len(table) == 8 * 2


def test_rare_taxa_get_no_response(pilot_from):
    model = assumed_model({"g": 0.5}, n_taxa=4)
    pilot = pilot_from(model, 30, 1)
    community = pilot.community.copy()
    community["rare"] = 0
    community.iloc[:3, community.columns.get_loc("rare")] = [2, 1, 4]
    survey = Survey(community, pilot.environment, pilot.locations)
    fit = fit_generating_model(survey, {"g": ["g"]}, rng=0)
    k = fit.taxa.index("rare")
    assert not fit.fitted[k] and fit.linear[k, 0] == 0 and fit.quadratic[k, 0] == 0
    np.testing.assert_allclose(np.exp(fit.intercept[k]), 7 / 30)  # its mean count
    assert any("too rare" in n for n in fit.notes)


def test_site_order_does_not_matter(pilot_from):
    # The suite's rule (DEVELOPERS.md): random draws over sites are made over label-sorted
    # sites, so the same pilot in another row order gives the same model and the same power.
    model = assumed_model({"g": 0.5}, n_taxa=5)
    pilot = pilot_from(model, 24, 4)
    rev = Survey(pilot.community.iloc[::-1], pilot.environment.iloc[::-1],
                 pilot.locations.iloc[::-1])
    a = fit_generating_model(pilot, {"g": ["g"]}, rng=3)
    b = fit_generating_model(rev, {"g": ["g"]}, rng=3)
    np.testing.assert_allclose(a.linear, b.linear, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(a.shrinkage, b.shrinkage, rtol=1e-9, atol=1e-12)
    kw = {"n_sites": (10,), "n_surveys": 4, "n_resamples": 19, "tests": ("mantel",), "rng": 2}
    ta = survey_power(pilot, {"g": ["g"]}, **kw).table
    tb = survey_power(rev, {"g": ["g"]}, **kw).table
    assert ta.equals(tb)


def test_assumed_model_is_the_stated_gaussian_response():
    # log mu = log A - (s z - u)^2 / (2 t^2) (ter Braak & Looman 1986), expanded by hand
    m = assumed_model({"g": 0.7}, n_taxa=3, niche_width=1.5, abundance=9.0,
                      optima=np.array([[-1.0], [0.0], [2.0]]))
    z = np.linspace(-2, 2, 9)[:, None]
    u = np.array([-1.0, 0.0, 2.0])
    expected = np.log(9.0) - (0.7 * z - u) ** 2 / (2 * 1.5**2)
    np.testing.assert_allclose(m.log_mean(z), expected)
    np.testing.assert_allclose(m.log_mean(z, null=("g",)), np.log(9.0) - u**2 / (2 * 1.5**2)
                               + 0 * z)


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"strengths": {}}, "`strengths` must be a mapping"),
    ({"strengths": {"g": -1}}, "must be a non-negative number"),
    ({"strengths": {"g": 1}, "n_taxa": 0}, "`n_taxa` must be a positive integer"),
    ({"strengths": {"g": 1}, "optima": np.zeros((2, 2))}, "`optima` must be a finite array"),
])
def test_assumed_model_errors(kwargs, message):
    with pytest.raises(InputError, match=message):
        assumed_model(**kwargs)


def test_bootstrap_spread(pilot_from):
    model = assumed_model({"g": 0.5}, n_taxa=6)
    pilot = pilot_from(model, 20, 3)
    res = survey_power(pilot, {"g": ["g"]}, n_sites=(12,), n_surveys=4, n_resamples=19,
                       tests=("mantel",), n_bootstrap=3, rng=1)
    sim = res.table[res.table["method"] == "simulation"].iloc[0]
    boot = res.bootstrap["power"]
    assert len(res.bootstrap) == 3
    assert sim["bootstrap_low"] == pytest.approx(np.quantile(boot, 0.1))
    assert sim["bootstrap_high"] == pytest.approx(np.quantile(boot, 0.9))
    sub = res.table[res.table["method"] == "subsample"]
    assert sub["bootstrap_low"].isna().all()
