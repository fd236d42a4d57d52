"""survey_power: calibration under the null, power against theory and a plain numpy Monte
Carlo, subsamples against simulation, reproducibility, and its input errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from gradients import InputError, assumed_model, survey_power
from gradients.planning._simulate import early_stop_for


def test_null_model_detects_at_the_nominal_level():
    # Theory (common practice, Phipson & Smyth 2010): with no effect and sites exchangeable,
    # a permutation p-value (b + 1)/(P + 1) with alpha (P + 1) whole is at most alpha with
    # probability exactly alpha; permuting the residuals of the reduced model, as the partial
    # Mantel test does, holds the level closely (Legendre 2000). 39 permutations, alpha 0.05:
    # the detections of 120 surveys and of their 120 null twins are Binomial(240, 0.05); the
    # count must lie in its central 99.9 % interval (scipy).
    model = assumed_model({"g": 0.0, "h": 0.0}, n_taxa=12, spatial_range=0.0)
    res = survey_power(model, n_sites=(12,), n_surveys=120, n_resamples=39,
                       tests=("partial_mantel",), rng=11)
    row = res.table[res.table["hypothesis"] == "g"].iloc[0]
    hits = round(row["power"] * 120) + round(row["false_detection"] * 120)
    lo, hi = stats.binom.interval(0.999, 240, 0.05)
    assert lo <= hits <= hi
    # and alpha lies inside the Wilson interval the table gives (statsmodels' formula)
    assert row["power_low"] <= 0.05 <= row["power_high"]


def test_power_rises_with_sites_and_strength():
    # Theory (common practice): a consistent test's power rises with sample size and effect.
    # Each rise must be clear of Monte Carlo error: the 95 % Wilson intervals do not overlap.
    kw = {"n_surveys": 40, "n_resamples": 39, "tests": ("mantel",), "rng": 5}
    by_n = survey_power(assumed_model({"g": 0.25}, n_taxa=20), n_sites=(8, 40),
                        **kw).table.set_index("n_sites")
    assert by_n.loc[40, "power_low"] > by_n.loc[8, "power_high"]
    weak = survey_power(assumed_model({"g": 0.15}, n_taxa=20), n_sites=(15,), **kw).table
    strong = survey_power(assumed_model({"g": 0.5}, n_taxa=20), n_sites=(15,), **kw).table
    assert strong["power_low"].iloc[0] > weak["power_high"].iloc[0]


def _numpy_mantel_power(s: float, u: float, abundance: float, dispersion: float, n: int,
                        n_surveys: int, n_resamples: int, seed: int) -> float:
    """Power of a Pearson Mantel test of |dy| on |dz| for one Gaussian response, plain numpy."""
    gen = np.random.default_rng(seed)
    iu = np.triu_indices(n, 1)
    hits = 0
    for _ in range(n_surveys):
        z = gen.standard_normal(n)
        mu = abundance * np.exp(-((s * z - u) ** 2) / 2.0)  # niche width 1
        shape = 1.0 / dispersion
        y = gen.poisson(gen.gamma(shape, mu / shape))
        for _ in range(50):  # a survey records no empty site: such a site is drawn again
            empty = y == 0
            if not empty.any():
                break
            y[empty] = gen.poisson(gen.gamma(shape, mu[empty] / shape))
        y[y == 0] = 1
        dz = np.abs(z[:, None] - z[None, :])[iu]
        dz = (dz - dz.mean()) / np.linalg.norm(dz - dz.mean())
        r0 = None
        b = 0
        for p in range(n_resamples + 1):
            o = np.arange(n) if p == 0 else gen.permutation(n)
            dy = np.abs(y[o][:, None] - y[o][None, :])[iu].astype(float)
            r = float(dz @ ((dy - dy.mean()) / np.linalg.norm(dy - dy.mean())))
            if p == 0:
                r0 = r
            elif r >= r0 - 1e-10 * abs(r0):
                b += 1
        hits += (b + 1) / (n_resamples + 1) <= 0.05
    return hits / n_surveys


def test_mantel_power_agrees_with_plain_numpy_monte_carlo():
    # Two computations that must agree: the planner's power for one taxon with a Gaussian
    # response and Euclidean distances, against power computed here by plain numpy (the same
    # model, the Mantel test written out, Mantel 1967). The difference must be within 3.3
    # standard errors of a difference of two binomial shares (normal approximation).
    s, u, a, disp, n, m = 1.0, 1.2, 12.0, 0.3, 14, 150
    model = assumed_model({"g": s}, n_taxa=1, optima=np.array([[u]]), abundance=a,
                          dispersion=disp,
                          settings={"community.dissimilarity": "euclidean"})
    res = survey_power(model, n_sites=(n,), n_surveys=m, n_resamples=59, tests=("mantel",),
                       rng=3)
    ours = float(res.table["power"].iloc[0])
    plain = _numpy_mantel_power(s, u, a, disp, n, m, 59, seed=4)
    se = np.sqrt(ours * (1 - ours) / m + plain * (1 - plain) / m)
    assert 0.15 < plain < 0.95  # a case where power is neither trivial nor certain
    assert abs(ours - plain) <= 3.3 * max(se, 0.02)


def test_subsamples_agree_with_simulation_when_the_model_is_right(pilot_from):
    # Where the pilot is drawn from a model of the fitted family (Gaussian responses, NB
    # counts; ter Braak & Looman 1986), power from subsamples of the pilot and from surveys
    # simulated from the model refitted to it estimate the same thing: they must agree within
    # 3.3 standard errors of the difference of two binomial shares.
    truth = assumed_model({"g": 0.35}, n_taxa=15, abundance=15.0)
    pilot = pilot_from(truth, 70, 21)
    res = survey_power(pilot, {"g": ["g"]}, n_sites=(20,), n_surveys=60, n_resamples=39,
                       tests=("mantel",), settings={"analyses.ordination": "pcoa"}, rng=8)
    t = res.table.set_index("method")["power"]
    se = np.sqrt(sum(p * (1 - p) / 60 for p in t))
    assert 0.1 < t["subsample"] < 0.95
    assert abs(t["simulation"] - t["subsample"]) <= 3.3 * max(se, 0.03)


def test_same_rng_same_table_whatever_n_jobs(pilot_from):
    # The engine's rule (docs/permutation.md): batch i from SeedSequence child i, so results
    # do not depend on n_jobs; each survey draws from its own child of the root as well.
    model = assumed_model({"g": 0.4, "h": 0.1}, n_taxa=8)
    kw = {"n_sites": (10, 14), "n_surveys": 6, "n_resamples": 29,
          "tests": ("partial_mantel", "mantel"), "rng": 99}
    one = survey_power(model, n_jobs=1, **kw).table
    two = survey_power(model, n_jobs=2, **kw).table
    pd.testing.assert_frame_equal(one, two)
    pilot = pilot_from(model, 16, 2)
    a = survey_power(pilot, {"g": ["g"], "h": ["h"]}, n_jobs=1, **kw).table
    b = survey_power(pilot, {"g": ["g"], "h": ["h"]}, n_jobs=2, **kw).table
    pd.testing.assert_frame_equal(a, b)
    assert set(a["method"]) == {"simulation", "subsample"}


def test_early_stop_never_changes_a_detection():
    # Besag & Clifford (1991): stopped after h extremes in L <= P draws, p = h / L; with
    # h = floor(alpha P) + 1 both that p and the full run's (h + 1)/(P + 1) exceed alpha.
    for alpha in (0.01, 0.05, 0.1):
        for p in (19, 39, 99, 199, 999):
            h = early_stop_for(alpha, p)
            assert h / p > alpha and (h + 1) / (p + 1) > alpha
            # and it is the smallest such count: with h - 1 extremes a full run may detect
            assert h == 1 or h / (p + 1) <= alpha


def test_smallest_number_of_sites():
    model = assumed_model({"g": 0.5}, n_taxa=15)
    res = survey_power(model, n_sites=(6, 30), n_surveys=20, n_resamples=39,
                       tests=("mantel",), rng=1, target_power=0.8)
    table = res.table.set_index("n_sites")["power"]
    needed = res.smallest_n.loc[("g", "mantel"), "n_sites"]
    reached = [n for n in (6, 30) if table[n] >= 0.8]
    assert (needed == min(reached)) if reached else np.isnan(needed)
    assert res.sites_needed(0.01).loc[("g", "mantel"), "n_sites"] == 6 or table[6] < 0.01


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"n_sites": (4, 20)}, "below 5"),
    ({"n_sites": ()}, "list of site counts"),
    ({"tests": ("permanova",)}, "`tests` must name"),
    ({"alpha": 1.5}, "`alpha` must be a number between 0 and 1"),
    ({"n_surveys": 0}, "`n_surveys` must be a positive integer"),
    ({"n_bootstrap": 2}, "resamples a pilot survey"),
])
def test_bad_arguments(kwargs, message):
    model = assumed_model({"g": 0.5}, n_taxa=5)
    with pytest.raises(InputError, match=message):
        survey_power(model, **kwargs)


def test_bad_pilot(pilot_from):
    model = assumed_model({"g": 0.5}, n_taxa=6)
    with pytest.raises(InputError, match="does not have"):
        survey_power(pilot_from(model, 20, 1), {"g": ["g", "copper"]})
    with pytest.raises(InputError, match="at least 8"):
        survey_power(pilot_from(model, 7, 1), {"g": ["g"]})
    with pytest.raises(InputError, match="`hypotheses` is required"):
        survey_power(pilot_from(model, 20, 1))
