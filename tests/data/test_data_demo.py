"""The demo scenario: bundled files match the generator, and the planted truth is there."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from scipy import stats

from gradients import InputError
from gradients.data import demo_survey, simulate_survey
from gradients.data._demo import DEMO_DIR, TELLMARK_WORKS


@pytest.fixture(scope="module")
def scenario():
    return simulate_survey()


def test_bundled_files_equal_regenerated(tmp_path, scenario):
    scenario.write(tmp_path)
    for name in ("community.csv", "environment.csv"):
        assert (tmp_path / name).read_bytes() == (DEMO_DIR / name).read_bytes(), name
    new = gpd.read_file(tmp_path / "locations.gpkg")
    bundled = gpd.read_file(DEMO_DIR / "locations.gpkg")
    pd.testing.assert_frame_equal(pd.DataFrame(new.drop(columns="geometry")),
                                  pd.DataFrame(bundled.drop(columns="geometry")))
    assert new.crs == bundled.crs and new.crs.to_epsg() == 4326
    assert new.geometry.geom_equals_exact(bundled.geometry, tolerance=0).all()
    streams = gpd.read_file(tmp_path / "streams.gpkg")
    bundled = gpd.read_file(DEMO_DIR / "streams.gpkg")
    pd.testing.assert_frame_equal(pd.DataFrame(streams.drop(columns="geometry")),
                                  pd.DataFrame(bundled.drop(columns="geometry")))
    assert streams.crs == bundled.crs
    assert streams.geometry.geom_equals_exact(bundled.geometry, tolerance=0).all()
    assert (DEMO_DIR / "README.md").exists()


def test_demo_survey_reads_bundled_files(scenario):
    s = demo_survey()
    assert s.equals(scenario.survey())
    assert (s.n_sites, s.n_taxa) == (60, 40)
    assert s.sources["locations"].endswith("locations.gpkg")
    assert [d.action for d in s.log] == ["censored"]
    assert s.log[0].columns == ("Cd",) and s.log[0].count == s.censored["Cd"].sum() > 0
    assert isinstance(s.environment["habitat"].dtype, pd.CategoricalDtype)


def test_seeded_and_deterministic():
    a, b = simulate_survey(n_sites=12, n_taxa=6, rng=3), simulate_survey(n_sites=12, n_taxa=6,
                                                                         rng=3)
    pd.testing.assert_frame_equal(a.community, b.community)
    pd.testing.assert_frame_equal(a.environment, b.environment)
    c = simulate_survey(n_sites=12, n_taxa=6, rng=4)
    assert not a.community.equals(c.community)
    assert demo_survey(rng=5, censored="half-limit").n_sites == 60


def test_bad_arguments():
    with pytest.raises(InputError, match="`n_sites` must be an integer of at least 9"):
        simulate_survey(n_sites=3)
    with pytest.raises(InputError, match="`rng` must be a non-negative integer seed"):
        simulate_survey(rng=-1)
    # the deprecated keyword keeps its own check and message for its last release
    with pytest.warns(DeprecationWarning), pytest.raises(
            InputError, match="`seed` must be a non-negative integer"):
        simulate_survey(seed=-1)


def test_planted_contamination_gradient(scenario):
    env = scenario.survey(censored="half-limit").environment
    truth = scenario.site_truth
    dx = truth["x_km"] - TELLMARK_WORKS[0]
    dy = truth["y_km"] - TELLMARK_WORKS[1]
    assert np.allclose(truth["distance_to_works_km"], np.hypot(dx, dy))
    for metal in ("Cu", "Zn", "Pb", "Cd"):
        rho = stats.spearmanr(env[metal], truth["distance_to_works_km"]).statistic
        assert rho < -0.6, metal
    logs = np.log(env[["Cu", "Zn", "Pb"]])
    assert np.corrcoef(logs.T.to_numpy()).min() > 0.6  # correlated metals
    censored = scenario.environment["Cd"].str.startswith("<")
    assert 2 <= censored.sum() <= 12
    assert (scenario.environment.loc[censored, "Cd"] == "<0.2").all()
    assert (truth.loc[censored.to_numpy(), "Cd_uncensored"] < 0.2).all()


def test_texture_sums_to_100_and_follows_valley(scenario):
    env = scenario.survey(censored="half-limit").environment
    np.testing.assert_allclose(env[["sand", "silt", "clay"]].sum(axis=1), 100.0, atol=1e-9)
    assert (env[["sand", "silt", "clay"]] > 0).all().all()
    valley = scenario.site_truth["valley_position"]
    assert stats.spearmanr(env["sand"], valley).statistic < -0.6
    assert stats.spearmanr(env["clay"], valley).statistic > 0.6


def test_spatial_fields_are_autocorrelated(scenario):
    truth = scenario.site_truth
    xy = truth[["x_km", "y_km"]].to_numpy()
    d = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    np.fill_diagonal(d, np.inf)
    nearest = d.argmin(axis=1)
    for field in ("spatial_1", "spatial_2"):
        v = truth[field].to_numpy()
        assert np.corrcoef(v, v[nearest])[0, 1] > 0.5, field


def test_community_recovers_planted_optima(scenario):
    # weighted averaging (abundance-weighted mean of the gradient over sites) estimates each
    # taxon's optimum of a Gaussian response (ter Braak & Looman 1986, from memory); common
    # taxa should recover the planted contamination optima.
    counts = scenario.community.to_numpy(dtype=float)
    truth = scenario.site_truth
    taxa = scenario.taxon_truth
    common = counts.sum(axis=0) >= 50
    wa = (counts.T @ truth["contamination"].to_numpy()) / counts.sum(axis=0)
    inside = (taxa["optimum_contamination"] > 0.05) & (taxa["optimum_contamination"] < 0.6)
    keep = common & inside.to_numpy()
    assert keep.sum() >= 8
    r = np.corrcoef(wa[keep], taxa["optimum_contamination"].to_numpy()[keep])[0, 1]
    assert r > 0.6
    assert scenario.taxon_truth["rare"].sum() == 6
    assert counts[:, scenario.taxon_truth["rare"].to_numpy()].sum(axis=0).max() < 50


def test_noise_variables_are_not_in_the_community_model(scenario):
    # pH and organic matter are drawn after, and independently of, the community terms: they
    # must be nearly uncorrelated with the planted gradients (a check that no term leaked).
    env = scenario.survey(censored="half-limit").environment
    truth = scenario.site_truth
    for var in ("pH", "organic_matter"):
        for gradient in ("contamination", "fines"):
            assert abs(stats.spearmanr(env[var], truth[gradient]).statistic) < 0.45


def test_documented_strengths(scenario):
    # the R^2 values quoted in the generator docstring, the demo README and docs/data.md:
    # share of the expected (Hellinger-transformed) community explained by each planted term
    from gradients.data._demo import HABITATS, ZONES

    t, tx = scenario.site_truth, scenario.taxon_truth
    c = t["contamination"].to_numpy()[:, None]
    f = t["fines"].to_numpy()[:, None]
    effects = tx[[f"effect_{h}" for h in HABITATS]].to_numpy().T
    zone_effects = tx[[f"effect_zone_{z}" for z in ZONES]].to_numpy().T
    log_mu = (np.log(tx["max_expected_count"].to_numpy())
              - (c - tx["optimum_contamination"].to_numpy()) ** 2
              / (2 * tx["tolerance_contamination"].to_numpy() ** 2)
              - (f - tx["optimum_fines"].to_numpy()) ** 2
              / (2 * tx["tolerance_fines"].to_numpy() ** 2)
              + t[["spatial_1", "spatial_2"]].to_numpy()
              @ tx[["loading_spatial_1", "loading_spatial_2"]].to_numpy().T
              + effects[[HABITATS.index(h) for h in t["habitat"]]]
              + zone_effects[[ZONES.index(z) for z in t["zone"]]])
    mu = np.exp(log_mu)
    hel = np.sqrt(mu / mu.sum(axis=1, keepdims=True))
    hel -= hel.mean(axis=0)

    def r2(x):
        x = np.column_stack([np.ones(len(x)), x])
        beta, *_ = np.linalg.lstsq(x, hel, rcond=None)
        return 1 - ((hel - x @ beta) ** 2).sum() / (hel ** 2).sum()

    env = scenario.survey(censored="half-limit").environment
    cv, fv = c[:, 0], f[:, 0]
    got = {
        "contamination": r2(np.column_stack([cv, cv ** 2])),
        "fines": r2(np.column_stack([fv, fv ** 2])),
        "space": r2(t[["spatial_1", "spatial_2"]].to_numpy()),
        "habitat": r2(pd.get_dummies(t["habitat"]).to_numpy(float)[:, 1:]),
        "zone": r2(pd.get_dummies(t["zone"]).to_numpy(float)[:, 1:]),
        "pH": r2(env[["pH"]].to_numpy()),
        "organic_matter": r2(env[["organic_matter"]].to_numpy()),
        "conductivity": r2(env[["conductivity"]].to_numpy()),
    }
    quoted = {"contamination": 0.48, "fines": 0.39, "space": 0.24, "habitat": 0.14,
              "zone": 0.15, "pH": 0.02, "organic_matter": 0.01, "conductivity": 0.32}
    for key, value in quoted.items():
        assert got[key] == pytest.approx(value, abs=0.006), key


def test_bundled_river_network_is_valid_and_carries_every_site(scenario):
    # Outside readers: geopandas (through pyogrio) and sqlite3 (an OGC GeoPackage is an SQLite
    # file with a gpkg_contents table); pyproj, through geopandas, puts the sites in its CRS.
    import sqlite3

    import shapely

    from gradients import geographic_distance

    streams = gpd.read_file(DEMO_DIR / "streams.gpkg")
    with sqlite3.connect(DEMO_DIR / "streams.gpkg") as con:
        assert con.execute("select table_name from gpkg_contents").fetchall() == [("streams",)]
    assert streams.crs.to_epsg() == 32632 and not streams.crs.is_geographic  # UTM zone 32N
    assert set(streams.geom_type) == {"LineString"}
    assert set(streams["kind"]) == {"tributary", "main stem", "side channel"}
    sites = demo_survey().locations.to_crs(streams.crs)
    gap = sites.geometry.distance(shapely.union_all(streams.geometry.to_numpy()))
    assert gap.max() < 1.0  # metres: every site lies on a line (the demo snaps within 50 m)
    # the network is connected and holds every site; by the triangle inequality no path along
    # it is shorter than the straight line between two sites (common practice: a check of
    # any graph distance), and sites on different tributaries are much farther apart by water
    river = geographic_distance(sites, method="network", network=streams, snap_tolerance=50)
    line = geographic_distance(sites, method="euclidean")
    assert np.all(river.condensed >= line.condensed - 1e-6)
    assert river["FB01", "AW01"] > 1.5 * line["FB01", "AW01"]
    # along one tributary, from its first site to its last, the water follows the sites
    fb = sites.loc[[f"FB{i:02d}" for i in range(1, 21)]].geometry
    along = sum(a.distance(b) for a, b in zip(fb.iloc[:-1], fb.iloc[1:], strict=True))
    assert river["FB01", "FB20"] == pytest.approx(along, rel=1e-9)
    assert scenario.network.geometry.geom_equals_exact(streams.geometry, tolerance=0).all()
def test_planted_zones(scenario):
    # every reach holds every zone, in three contiguous stretches (one zone each) down the reach
    from gradients.data._demo import ZONES

    truth = scenario.site_truth
    assert (scenario.environment["zone"].to_numpy() == truth["zone"].to_numpy()).all()
    for _, part in truth.groupby("reach"):
        zones = part.sort_values("valley_position")["zone"].tolist()
        runs = [z for i, z in enumerate(zones) if i == 0 or z != zones[i - 1]]
        assert sorted(runs) == sorted(ZONES)


def test_zone_effect_gives_poisson_counts_of_the_shifted_means():
    # Theory: binomial thinning of Poisson(lambda) with probability f is Poisson(f lambda), and
    # adding an independent Poisson((f - 1) lambda) gives Poisson(f lambda) too. With lambda = 4
    # at every site, the counts of each taxon in each zone must have mean and variance
    # 4 exp(effect) (within 5 standard errors of the mean; variance within 15 %).
    from gradients.data._demo import REACHES
    from gradients.data._demo_zones import plant_zones

    rng = np.random.default_rng(1)
    n, k = 3 * 4000, 4
    reach = np.repeat(np.array(REACHES, dtype=object), n // 3)
    valley = np.tile(np.linspace(0.0, 1.0, n // 3), 3)
    lam = np.full((n, k), 4.0)
    counts = rng.poisson(lam)
    zone, effect, new, mu = plant_zones(rng, reach, valley, counts, lam, lam.copy(),
                                     reaches=REACHES)
    for z in range(3):
        rows = new[zone == z]
        expected = 4.0 * np.exp(effect[z])
        se = np.sqrt(expected / rows.shape[0])
        assert np.all(np.abs(rows.mean(axis=0) - expected) < 5 * se)
        np.testing.assert_allclose(rows.var(axis=0), expected, rtol=0.15)
        np.testing.assert_allclose(mu[zone == z], np.broadcast_to(expected, rows.shape))
