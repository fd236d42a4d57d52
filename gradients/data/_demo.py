"""The bundled demo: an invented survey of the Corvanne Basin, with a planted truth.

Run ``python -m gradients.data._demo`` to write the bundled files again (into
``gradients/data/demo/``); a test checks that they equal what the generator makes with the
default seed. Randomness follows the suite's rule (``rng=``: an int, a ``numpy.random.Generator``
or None, SPEC 7); the former ``seed=`` keyword is accepted for one release with a
``DeprecationWarning``.
"""

from __future__ import annotations

import numbers
import os
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from .._errors import InputError
from .._validation import check_rng
from ._demo_zones import ZONES, plant_zones
from ._survey import Survey, read_survey

__all__ = ["DEFAULT_SEED", "DEMO_DIR", "DemoScenario", "demo_survey", "simulate_survey"]

DEFAULT_SEED = 20261202
DEMO_DIR = Path(__file__).parent / "demo"

#: Where the local kilometre grid is placed on the globe (an invented basin in a plausible
#: upland region; lon/lat of the local origin, EPSG:4326).
ORIGIN_LON, ORIGIN_LAT = 9.35, 61.05
_KM_PER_DEG = 111.32

#: Local coordinates (km east, km north) of the features of the scenario.
FENNICK_SOURCE = (0.0, 12.0)
ASHLOW_SOURCE = (12.0, 13.0)
CONFLUENCE = (6.0, 5.0)
FLOODPLAIN_END = (10.0, -3.0)
TELLMARK_WORKS = (1.5, 10.5)

REACHES = ("Fennick Brook", "Ashlow Water", "Corvanne floodplain")
HABITATS = ("margin", "pool", "riffle")
#: P(margin), P(pool), P(riffle) on the tributaries and on the floodplain.
_HABITAT_P = {"tributary": (0.2, 0.3, 0.5), "floodplain": (0.5, 0.4, 0.1)}
CENSOR_LIMIT_CD = 0.2
SPATIAL_RANGE_KM = 3.0
NB_SIZE = 1.5


class _NotGiven:
    """The default of a deprecated keyword: tells "not passed" apart from any value."""

    def __repr__(self) -> str:
        return "<deprecated>"


_NOT_GIVEN: Any = _NotGiven()


def _rng_from(rng: Any, seed: Any, stacklevel: int) -> Any:
    """The `rng` to use, taking the deprecated `seed` keyword for one release.

    `seed` given: a ``DeprecationWarning`` (pointing at the caller's line), an error if `rng`
    was given as well, and the old check of `seed` with its old message.
    """
    if seed is _NOT_GIVEN:
        return rng
    # `rng` is the default object itself unless the caller passed one: an int the caller wrote,
    # even one equal to the default, is another object (only `rng=DEFAULT_SEED` reads as unset)
    if rng is not DEFAULT_SEED:
        raise InputError("Pass `rng=` or the deprecated `seed=`, not both (use `rng=` alone).")
    warnings.warn(
        "`seed=` is deprecated and will be removed in the next release; pass `rng=` instead "
        "(an int gives the same survey as the same `seed`).",
        DeprecationWarning, stacklevel=stacklevel + 1,
    )
    if not isinstance(seed, int | np.integer) or seed < 0:
        raise InputError(f"`seed` must be a non-negative integer; got {seed!r}.")
    return int(seed)


def _generator(rng: Any) -> tuple[np.random.Generator, int | None]:
    """(generator, the int seed that makes it again, or None for a Generator or SeedSequence)."""
    if rng is None:  # fresh entropy from the operating system, kept so the survey can be remade
        seed = int(np.random.SeedSequence().entropy)  # type: ignore[arg-type]
        return check_rng(seed), seed
    if isinstance(rng, numbers.Integral) and not isinstance(rng, bool):
        generator = check_rng(int(rng))  # refuses negative ints with the suite's message
        return generator, int(rng)
    return check_rng(rng), None


@dataclass(frozen=True, repr=False)
class DemoScenario:
    """A simulated survey with its planted truth.

    Attributes
    ----------
    community : DataFrame
        Sites x taxa counts (int64), as written to ``community.csv``.
    environment : DataFrame
        The environmental table as written to ``environment.csv``: text cells, with cadmium
        values below the detection limit written ``"<0.2"``.
    locations : GeoDataFrame
        Site points in EPSG:4326 with the reach of each site, as written to ``locations.gpkg``.
    network : GeoDataFrame
        The river network in EPSG:32632 (UTM zone 32N), as written to ``streams.gpkg``: the two
        tributaries and the main stem through the sites, and a side channel joining each
        floodplain site that lies off the main stem (see :func:`simulate_survey`).
    site_truth : DataFrame
        Per site: local coordinates (km), reach, valley position (0 at the sources, 1 at the
        foot of the floodplain), distance to the Tellmark works (km), the contamination
        gradient (0-1), the fine fraction (silt + clay, 0-1), the two spatial fields the
        community responds to, the habitat, the uncensored cadmium value and the zone.
    taxon_truth : DataFrame
        Per taxon: optimum and tolerance on the contamination gradient and on the fine
        fraction, maximum expected count, spatial loadings, habitat effects, whether the
        taxon was made rare, and the zone effects (``effect_zone_<zone>``).
    seed : int or None
        The int seed that makes this scenario again (``simulate_survey(n_sites, n_taxa,
        rng=seed)``): the int given as `rng`, or for ``rng=None`` the seed drawn from the
        operating system's entropy. None when `rng` was a ``numpy.random.Generator`` (or a
        ``SeedSequence``): the draws then depend on that object's state, which is the caller's
        to keep.
    """

    community: pd.DataFrame
    environment: pd.DataFrame
    locations: Any
    site_truth: pd.DataFrame
    taxon_truth: pd.DataFrame
    seed: int | None
    network: Any = None

    def __repr__(self) -> str:
        return (f"DemoScenario(seed={self.seed}, sites={self.community.shape[0]}, "
                f"taxa={self.community.shape[1]}, "
                f"environment={list(self.environment.columns[1:])})")

    def survey(self, *, censored: str = "ros") -> Survey:
        """The scenario as a validated :class:`Survey` (censored cadmium by `censored`)."""
        return Survey(self.community, self.environment, self.locations, censored=censored)

    def write(self, folder: str | os.PathLike[str]) -> list[Path]:
        """Write ``community.csv``, ``environment.csv``, ``locations.gpkg`` and (when the
        scenario has one) the river network ``streams.gpkg`` into `folder`."""
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        paths = [folder / "community.csv", folder / "environment.csv",
                 folder / "locations.gpkg"]
        self.community.to_csv(paths[0], lineterminator="\n")
        self.environment.to_csv(paths[1], index=False, lineterminator="\n")
        if paths[2].exists():
            paths[2].unlink()
        self.locations.reset_index().to_file(paths[2], driver="GPKG", layer="sites",
                                             engine="pyogrio")
        if self.network is not None:
            paths.append(folder / "streams.gpkg")
            if paths[3].exists():
                paths[3].unlink()
            self.network.to_file(paths[3], driver="GPKG", layer="streams", engine="pyogrio")
        return paths


def _points_along(rng: np.random.Generator, start: tuple[float, float],
                  end: tuple[float, float], n: int, lateral_sd: float
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """n points spread along a straight reach (sorted from start to end), jittered sideways."""
    t = np.sort(rng.uniform(0.03, 0.97, size=n))
    sx, sy = start
    dx, dy = end[0] - sx, end[1] - sy
    length = np.hypot(dx, dy)
    off = rng.normal(0.0, lateral_sd, size=n)
    x = sx + t * dx - off * dy / length
    y = sy + t * dy + off * dx / length
    return x, y, t


def _spatial_fields(rng: np.random.Generator, x: np.ndarray, y: np.ndarray, k: int
                    ) -> np.ndarray:
    """k independent Gaussian fields with exponential covariance exp(-d / range), unit variance."""
    d = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])
    cov = np.exp(-d / SPATIAL_RANGE_KM) + 1e-9 * np.eye(len(x))
    chol = np.linalg.cholesky(cov)
    return chol @ rng.standard_normal((len(x), k))


def simulate_survey(
    n_sites: int = 60,
    n_taxa: int = 40,
    *,
    rng: int | np.random.Generator | None = DEFAULT_SEED,
    seed: int = _NOT_GIVEN,
) -> DemoScenario:
    """Simulate the invented Corvanne Basin survey with a known, planted truth.

    Parameters
    ----------
    n_sites : int, default 60
        Number of sampling sites (at least 9), split into thirds: Fennick Brook, Ashlow Water,
        and the floodplain below their confluence (the floodplain takes the remainder).
    n_taxa : int, default 40
        Number of taxa (at least 5); the last 15% are made rare.
    rng : int, numpy.random.Generator or None, default 20261202
        Source of randomness, as everywhere in the suite [1]_: an int seeds a new
        ``numpy.random.Generator`` (PCG64), a Generator is used as it is (and advanced), None
        draws a fresh seed from the operating system (recorded in ``DemoScenario.seed``). The
        default gives the bundled demo files; the same int always gives the same survey.
    seed : int, optional
        Deprecated: the former name of `rng` (an int only), accepted for one release with a
        ``DeprecationWarning``; ``seed=s`` gives exactly the survey of ``rng=s``. Passing both
        is an error.

    Returns
    -------
    DemoScenario
        The tables as they are written to the bundled files, plus the per-site and per-taxon
        truth. ``.survey()`` gives the validated :class:`Survey`.

    Notes
    -----
    **Place (invented).** The Corvanne Basin: two tributaries, Fennick Brook (from the
    north-west) and Ashlow Water (from the north-east), meet and cross a floodplain to the
    south-east. The former Tellmark smelter works stand beside upper Fennick Brook. Local
    coordinates in km are placed at lon 9.35, lat 61.05 (EPSG:4326) by an equirectangular
    conversion; the place names are invented. Sites are spread along each reach (sideways
    jitter 0.15 km on the tributaries, 0.8 km on the floodplain) and named FB01..., AW01...,
    FP01....

    **Gradients.**

    - Contamination: ``C = exp(-d / 4 km)``, d the distance to the works (1 beside the works,
      about 0.02 at the foot of the floodplain). Metals (mg/kg dry weight) are log-normal
      around ``Cu = 18 exp(2.6 C)``, ``Zn = 70 exp(2.4 C)``, ``Pb = 22 exp(2.8 C)``,
      ``Cd = 0.25 exp(3.0 C)``, with a shared log-scale error (sd 0.25, which correlates them)
      and one of their own (sd 0.15; 0.2 for Cd). Cd values below 0.2 are written ``"<0.2"``.
    - Texture: valley position v runs 0 to 0.6 down each tributary and 0.6 to 1 down the
      floodplain. Sand falls (62 - 42 v) and clay rises (8 + 22 v), each plus spatial and
      independent noise; silt = 100 - sand - clay, so the three sum to 100 (rounded to 0.1).
      The fine fraction F = (silt + clay) / 100 is the texture gradient taxa respond to.
    - pH (6.8 + spatial noise), organic matter (% loss on ignition, log-normal around 4 with
      spatial noise): **pure noise**, no effect on the community.
    - Conductivity (uS/cm, 180 + 220 v + noise): **no direct effect**, but correlated with
      texture through the valley position: a nuisance variable.
    - Habitat ("margin", "pool", "riffle"; riffles commoner on the tributaries, margins on
      the floodplain): a **weak** effect (each taxon's log-abundance shifted by N(0, 0.3) per
      level).
    - Space: two Gaussian random fields with exponential covariance (range 3 km) enter every
      taxon with loadings N(0, 0.4) (a **weak** spatial structure); two more add spatially
      autocorrelated noise to texture, pH and organic matter.
    - Zones ("moorland", "plantation", "pasture": the land use on the banks), drawn after
      everything else so that the environmental and location values above do not depend on
      them: each reach is cut into three stretches (breaks a quarter to 40 % and 60 to 75 %
      of the way down it) and its stretches get the three zones in a random order, so every
      reach holds every zone. A **moderate** effect of their own: each taxon's log-abundance
      shifted by N(0, 0.5) per zone, applied to the counts already drawn by binomial thinning
      or added Poisson counts, which gives exactly the negative binomial counts of the shifted
      means. The zone is the last column of the environmental table.

    **Community.** Taxon k has a Gaussian (unimodal) response to contamination (optimum
    uniform in [-0.1, 1.1], tolerance in [0.15, 0.35]: **strong**) and to the fine fraction
    (optimum in [0.25, 0.85], tolerance in [0.12, 0.28]: **moderate**), a maximum expected
    count log-normal around 12 (the rare taxa: 0.3 to 1.5), and the spatial, habitat and zone
    terms above. Counts are negative binomial with size 1.5 (gamma-Poisson). A site left with no
    individuals gets one of its most expected taxon, and a taxon never drawn gets one at its
    most favourable site, so the tables pass validation; both are rare and deterministic.

    **River network.** ``network`` holds the streams the sites were sampled on, for in-stream
    distances: Fennick Brook and Ashlow Water run from their sources through their sites, in
    downstream order, to the confluence; the Corvanne main stem runs from the confluence to the
    foot of the floodplain through the floodplain sites within 0.25 km of the valley axis, and
    every other floodplain site lies on a side channel (backwater or drain) that joins the main
    stem at the foot of the perpendicular from the site. Every site is a vertex of its line, so
    it lies on the network. It is built from the site positions alone, after every random draw
    (it draws nothing), so it changes no table.

    **How strong.** On the expected community (Hellinger-transformed expected counts), a
    quadratic in the contamination gradient explains R^2 = 0.48, a quadratic in the fine
    fraction 0.39, the two spatial fields 0.24, habitat 0.14, zone 0.15 (the last three partly
    through their correlation with the gradients); pH 0.02 and organic matter 0.01 (noise);
    conductivity 0.32 and log Cu 0.31 (through their correlation with texture and
    contamination). Contamination and
    fine fraction correlate at r = -0.46 across sites (default seed).

    Only ``Generator`` methods (uniform, normal, standard_normal, gamma, poisson, random,
    binomial) and
    a Cholesky factor are used, so the result depends only on the seed and numpy's PCG64
    streams: ``rng=s`` and ``rng=numpy.random.default_rng(s)`` give the same survey.

    References
    ----------
    .. [1] Scientific Python Ecosystem Coordination. SPEC 7: Seeding pseudo-random number
       generation. https://scientific-python.org/specs/spec-0007/
    """
    if not isinstance(n_sites, int | np.integer) or n_sites < 9:
        raise InputError(f"`n_sites` must be an integer of at least 9; got {n_sites!r}.")
    if not isinstance(n_taxa, int | np.integer) or n_taxa < 5:
        raise InputError(f"`n_taxa` must be an integer of at least 5; got {n_taxa!r}.")
    rng, made_from = _generator(_rng_from(rng, seed, stacklevel=2))

    # -- sites ------------------------------------------------------------------------------
    n_fb = n_aw = n_sites // 3
    n_fp = n_sites - n_fb - n_aw
    fb = _points_along(rng, FENNICK_SOURCE, CONFLUENCE, n_fb, 0.15)
    aw = _points_along(rng, ASHLOW_SOURCE, CONFLUENCE, n_aw, 0.15)
    fp = _points_along(rng, CONFLUENCE, FLOODPLAIN_END, n_fp, 0.8)
    x = np.concatenate([fb[0], aw[0], fp[0]])
    y = np.concatenate([fb[1], aw[1], fp[1]])
    valley = np.concatenate([0.6 * fb[2], 0.6 * aw[2], 0.6 + 0.4 * fp[2]])
    reach = np.repeat(np.array(REACHES, dtype=object), [n_fb, n_aw, n_fp])
    sites = ([f"FB{i + 1:02d}" for i in range(n_fb)] + [f"AW{i + 1:02d}" for i in range(n_aw)]
             + [f"FP{i + 1:02d}" for i in range(n_fp)])
    n = n_sites

    distance = np.hypot(x - TELLMARK_WORKS[0], y - TELLMARK_WORKS[1])
    contamination = np.exp(-distance / 4.0)
    fields = _spatial_fields(rng, x, y, 4)  # 0, 1: community; 2: texture; 3: pH and OM

    # -- environment ------------------------------------------------------------------------
    shared = rng.normal(0.0, 0.25, size=n)
    cu = 18.0 * np.exp(2.6 * contamination + shared + rng.normal(0.0, 0.15, size=n))
    zn = 70.0 * np.exp(2.4 * contamination + shared + rng.normal(0.0, 0.15, size=n))
    pb = 22.0 * np.exp(2.8 * contamination + shared + rng.normal(0.0, 0.15, size=n))
    cd = 0.25 * np.exp(3.0 * contamination + shared + rng.normal(0.0, 0.2, size=n))

    clay = np.clip(8.0 + 22.0 * valley + 2.0 * fields[:, 2] + rng.normal(0.0, 2.0, size=n),
                   2.0, 60.0)
    sand = np.clip(62.0 - 42.0 * valley - 5.0 * fields[:, 2] + rng.normal(0.0, 3.0, size=n),
                   5.0, 95.0)
    sand = np.minimum(sand, 97.0 - clay)
    clay, sand = np.round(clay, 1), np.round(sand, 1)
    silt = np.round(100.0 - sand - clay, 1)
    fines = (silt + clay) / 100.0

    ph = 6.8 + 0.25 * fields[:, 3] + rng.normal(0.0, 0.15, size=n)
    organic = np.exp(np.log(4.0) - 0.2 * fields[:, 3] + rng.normal(0.0, 0.25, size=n))
    conductivity = 180.0 + 220.0 * valley + rng.normal(0.0, 25.0, size=n)

    u = rng.random(n)
    habitat = np.empty(n, dtype=object)
    for i in range(n):
        p = _HABITAT_P["floodplain" if reach[i] == REACHES[2] else "tributary"]
        habitat[i] = HABITATS[int(np.searchsorted(np.cumsum(p), u[i], side="right"))]
    habitat_code = np.array([HABITATS.index(h) for h in habitat])

    # -- taxa -------------------------------------------------------------------------------
    k = n_taxa
    n_rare = max(1, round(0.15 * k))
    opt_c = rng.uniform(-0.1, 1.1, size=k)
    tol_c = rng.uniform(0.15, 0.35, size=k)
    opt_f = rng.uniform(0.25, 0.85, size=k)
    tol_f = rng.uniform(0.12, 0.28, size=k)
    peak = np.exp(rng.normal(np.log(12.0), 0.8, size=k))
    peak[k - n_rare:] = rng.uniform(0.3, 1.5, size=n_rare)
    loadings = rng.normal(0.0, 0.4, size=(2, k))
    habitat_effect = rng.normal(0.0, 0.3, size=(len(HABITATS), k))

    log_mu = (np.log(peak)[None, :]
              - (contamination[:, None] - opt_c[None, :]) ** 2 / (2 * tol_c[None, :] ** 2)
              - (fines[:, None] - opt_f[None, :]) ** 2 / (2 * tol_f[None, :] ** 2)
              + fields[:, :2] @ loadings
              + habitat_effect[habitat_code, :])
    mu = np.exp(log_mu)
    lam = rng.gamma(NB_SIZE, mu / NB_SIZE)
    counts = rng.poisson(lam).astype(np.int64)
    # -- zones (drawn after every other draw, so the environment and locations keep their
    #    values whatever is planted here) ------------------------------------------------------
    zone_code, zone_effect, counts, mu = plant_zones(rng, reach, valley, counts, lam, mu,
                                                     reaches=REACHES)
    zone = np.array(ZONES, dtype=object)[zone_code]
    # -- end of zones --------------------------------------------------------------------------
    for i in np.flatnonzero(counts.sum(axis=1) == 0):
        counts[i, int(np.argmax(mu[i]))] = 1
    for j in np.flatnonzero(counts.sum(axis=0) == 0):
        counts[int(np.argmax(mu[:, j])), j] = 1

    # -- tables as written -------------------------------------------------------------------
    index = pd.Index(sites, name="site", dtype=object)
    taxa = [f"Taxon A{j + 1:02d}" for j in range(k)]
    community = pd.DataFrame(counts, index=index, columns=pd.Index(taxa, dtype=object))

    cd_text = [f"<{CENSOR_LIMIT_CD:g}" if v < CENSOR_LIMIT_CD else f"{v:.2f}" for v in cd]
    environment = pd.DataFrame({
        "site": sites,
        "Cu": [f"{v:.1f}" for v in cu],
        "Zn": [f"{v:.1f}" for v in zn],
        "Pb": [f"{v:.1f}" for v in pb],
        "Cd": cd_text,
        "sand": [f"{v:.1f}" for v in sand],
        "silt": [f"{v:.1f}" for v in silt],
        "clay": [f"{v:.1f}" for v in clay],
        "pH": [f"{v:.2f}" for v in ph],
        "organic_matter": [f"{v:.2f}" for v in organic],
        "conductivity": [f"{v:.0f}" for v in conductivity],
        "habitat": list(habitat),
        "zone": list(zone),
    }, dtype=object)

    import geopandas as gpd

    lon = np.round(ORIGIN_LON + x / (_KM_PER_DEG * np.cos(np.radians(ORIGIN_LAT))), 6)
    lat = np.round(ORIGIN_LAT + y / _KM_PER_DEG, 6)
    locations = gpd.GeoDataFrame({"reach": list(reach)}, index=index,
                                 geometry=gpd.points_from_xy(lon, lat), crs="EPSG:4326")

    site_truth = pd.DataFrame({
        "x_km": x, "y_km": y, "reach": list(reach), "valley_position": valley,
        "distance_to_works_km": distance, "contamination": contamination, "fines": fines,
        "spatial_1": fields[:, 0], "spatial_2": fields[:, 1], "habitat": list(habitat),
        "Cd_uncensored": cd, "zone": list(zone),
    }, index=index.copy())
    rare = np.zeros(k, dtype=bool)
    rare[k - n_rare:] = True
    taxon_truth = pd.DataFrame({
        "optimum_contamination": opt_c, "tolerance_contamination": tol_c,
        "optimum_fines": opt_f, "tolerance_fines": tol_f, "max_expected_count": peak,
        "loading_spatial_1": loadings[0], "loading_spatial_2": loadings[1],
        **{f"effect_{h}": habitat_effect[i] for i, h in enumerate(HABITATS)},
        "rare": rare,
        **{f"effect_zone_{z}": zone_effect[i] for i, z in enumerate(ZONES)},
    }, index=pd.Index(taxa, name="taxon", dtype=object))
    from ._demo_network import stream_network

    network = stream_network(  # after every draw; it draws nothing
        x, y, reach, tributaries={REACHES[0]: FENNICK_SOURCE, REACHES[1]: ASHLOW_SOURCE},
        floodplain=REACHES[2], confluence=CONFLUENCE, end=FLOODPLAIN_END,
        origin=(ORIGIN_LON, ORIGIN_LAT), km_per_degree=_KM_PER_DEG)
    return DemoScenario(community, environment, locations, site_truth, taxon_truth, made_from,
                        network)


def demo_survey(
    rng: int | np.random.Generator | None = DEFAULT_SEED,
    *,
    censored: str = "ros",
    seed: int = _NOT_GIVEN,
) -> Survey:
    """The demo survey of the invented Corvanne Basin (see :func:`simulate_survey`).

    Parameters
    ----------
    rng : int, numpy.random.Generator or None, default 20261202
        With the default seed the bundled files in ``gradients/data/demo/`` are read (through
        :func:`read_survey`, so the demo also exercises the CSV and GeoPackage readers); any
        other int, a Generator or None simulates a new survey of 60 sites and 40 taxa (see
        `rng` of :func:`simulate_survey`).
    censored : str, default "ros"
        Policy for the cadmium values below the detection limit (see :class:`Survey`).
    seed : int, optional
        Deprecated: the former name of `rng`, accepted for one release with a
        ``DeprecationWarning`` (as a keyword; a first positional argument is `rng`, which
        means the same). Passing both is an error.

    Returns
    -------
    Survey

    Examples
    --------
    >>> from gradients.data import demo_survey
    >>> demo_survey().n_sites
    60
    """
    rng = _rng_from(rng, seed, stacklevel=2)
    bundled = (isinstance(rng, numbers.Integral) and not isinstance(rng, bool)
               and int(rng) == DEFAULT_SEED)
    if bundled:
        return read_survey(DEMO_DIR / "community.csv", DEMO_DIR / "environment.csv",
                           DEMO_DIR / "locations.gpkg", censored=censored)
    return simulate_survey(rng=rng).survey(censored=censored)


if __name__ == "__main__":  # pragma: no cover - writes the bundled files
    for path in simulate_survey().write(DEMO_DIR):
        print(path)
