"""Where the sites of a simulated survey come from: resampled pilot sites, with a small jitter.

A new site is a pilot site drawn at random (with replacement), its numeric variables jittered
(multiplicatively for positive variables, so concentrations stay positive; the parts of a
composition rescaled to their total again) and its location moved by a small random step,
then put back on the river network when distances are in-stream. Sites so drawn stay within
the pilot's survey area (or along its network) and keep the pilot's joint distribution of the
environment and its spatial arrangement.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import SimpleNamespace
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["PilotSites", "analysis_context", "site_labels"]


def site_labels(n: int) -> list[str]:
    """Labels ``sim001``, ``sim002``, ... of the sites of a simulated survey."""
    width = max(3, len(str(n)))
    return [f"sim{i + 1:0{width}d}" for i in range(n)]


def analysis_context(community: pd.DataFrame, environment: pd.DataFrame, locations: Any,
                     settings: dict[str, Any], hypotheses: dict[str, tuple[str, ...]], *,
                     seed: int = 0, n_resamples: int = 199) -> Any:
    """A report context for one survey with its environmental step run (analysis units)."""
    from ..report._pipeline import Context
    from ..report.steps.community import environment_step

    survey = SimpleNamespace(community=community, environment=environment, locations=locations,
                             log=())
    ctx = Context(settings=settings, hypotheses=hypotheses, survey=survey, seed=seed,
                  n_resamples=n_resamples)
    environment_step(ctx)
    return ctx


def _composition_parts(settings: dict[str, Any]) -> list[tuple[str, ...]]:
    groups = [tuple(g) for g in settings["environment.compositions"]]
    texture = tuple(settings["environment.texture"])
    if texture and texture not in groups:
        groups.append(texture)
    return groups


@dataclass(frozen=True)
class PilotSites:
    """Draws the environment and locations of new sites by resampling pilot sites."""

    environment: pd.DataFrame
    points: Any  # GeoDataFrame in a projected CRS (the network's for in-stream distances)
    lines: Any  # the river network as one geometry, or None
    jitter: float
    step: float  # standard deviation of the location jitter, in CRS units
    log_sd: dict[str, float]
    sd: dict[str, float]
    compositions: tuple[tuple[str, ...], ...]
    crs: Any = None  # the CRS new locations are given in (the pilot's, or the network's)

    @classmethod
    def from_pilot(cls, environment: pd.DataFrame, ctx: Any, settings: dict[str, Any], *,
                   jitter: float) -> PilotSites:
        from ..permutation import site_ranks

        points, lines = None, None
        locations = ctx.survey.locations
        # sites in label order, so that draws do not depend on the row order of the pilot
        order = np.argsort(site_ranks(environment.index))
        environment = environment.iloc[order]
        if locations is not None:
            locations = locations.loc[environment.index]
        step = 0.0
        if locations is not None:
            points, lines = _projected(locations, settings)
            xy = np.column_stack([points.geometry.x, points.geometry.y])
            step = jitter * _median_nearest(xy)
        log_sd, sd = {}, {}
        for c in environment.columns:
            col = environment[c]
            if not pd.api.types.is_numeric_dtype(col) or pd.api.types.is_bool_dtype(col):
                continue
            v = col.to_numpy(dtype=float)
            if np.all(v > 0):
                log_sd[str(c)] = float(np.std(np.log(v)))
            else:
                sd[str(c)] = float(np.std(v))
        comps = tuple(g for g in _composition_parts(settings)
                      if all(p in environment.columns for p in g))
        crs = None if locations is None else (points.crs if lines is not None else locations.crs)
        return cls(environment, points, lines, jitter, step, log_sd, sd, comps, crs)

    @property
    def n(self) -> int:
        return len(self.environment)

    @property
    def description(self) -> str:
        where = ("" if self.points is None else
                 " and its location moved by a random step (standard deviation "
                 f"{self.jitter:g} times the median distance to the nearest pilot site)"
                 + (", then put back on the nearest line of the river network"
                    if self.lines is not None else ""))
        return ("New sites were pilot sites drawn at random with replacement, each numeric "
                f"variable jittered by {self.jitter:g} of its spread (on the log scale for "
                "positive variables; the parts of a composition rescaled to their total)"
                f"{where}.")

    def draw(self, n: int, labels: list[str], rng: np.random.Generator) -> tuple[pd.DataFrame,
                                                                                  Any]:
        """Environment and locations of ``n`` new sites: pilot sites drawn with replacement."""
        return self.take(rng.integers(0, self.n, size=n), labels, rng)

    def take(self, index: np.ndarray, labels: list[str], rng: np.random.Generator, *,
             jitter: bool = True) -> tuple[pd.DataFrame, Any]:
        """Environment and locations of pilot sites ``index`` (jittered unless told not to)."""
        env = self.environment.iloc[index].copy()
        env.index = pd.Index(labels, name=self.environment.index.name or "site")
        if jitter and self.jitter > 0:
            n = len(index)
            for c, s in self.log_sd.items():
                env[c] = env[c].to_numpy(dtype=float) * np.exp(rng.normal(0, self.jitter * s, n))
            for c, s in self.sd.items():
                env[c] = env[c].to_numpy(dtype=float) + rng.normal(0, self.jitter * s, n)
            for parts in self.compositions:
                before = self.environment[list(parts)].iloc[index].to_numpy(dtype=float).sum(1)
                after = env[list(parts)].to_numpy(dtype=float).sum(1)
                ratio = np.divide(before, after, out=np.ones_like(before), where=after > 0)
                for p in parts:
                    env[p] = env[p].to_numpy(dtype=float) * ratio
        if self.points is None:
            return env, None
        return env, self._locations(index, labels, rng, jitter=jitter)

    def _locations(self, index: np.ndarray, labels: list[str], rng: np.random.Generator, *,
                   jitter: bool) -> Any:
        import geopandas as gpd
        import shapely

        pts = self.points.geometry.to_numpy()[index]
        x, y = shapely.get_x(pts), shapely.get_y(pts)
        if jitter and self.step > 0:
            x = x + rng.normal(0, self.step, len(x))
            y = y + rng.normal(0, self.step, len(y))
        geom = shapely.points(x, y)
        if self.lines is not None and jitter:
            geom = shapely.get_point(shapely.shortest_line(geom, self.lines), 1)
        out = gpd.GeoDataFrame(geometry=geom, index=pd.Index(labels, name="site"),
                               crs=self.points.crs)
        return out if self.crs is None or out.crs == self.crs else out.to_crs(self.crs)


def _projected(locations: Any, settings: dict[str, Any]) -> tuple[Any, Any]:
    """The pilot points in metres: the network's CRS, or the local UTM zone for lon/lat."""
    path = settings.get("geography.network")
    if path is not None and settings.get("geography.method") in ("auto", "network"):
        import shapely

        from ..report._geography import read_network

        network = read_network(path)
        points = locations.to_crs(network.crs) if locations.crs is not None else locations
        return points, shapely.union_all(network.geometry.to_numpy())
    if locations.crs is not None and locations.crs.is_geographic:
        return locations.to_crs(locations.estimate_utm_crs()), None
    return locations, None


def _median_nearest(xy: np.ndarray) -> float:
    from scipy.spatial import cKDTree

    if len(xy) < 2:
        return 0.0
    d, _ = cKDTree(xy).query(xy, k=2)
    near = d[:, 1]
    near = near[near > 0]
    return float(np.median(near)) if len(near) else 0.0
