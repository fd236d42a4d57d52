"""The demo's bank land-use zones: drawn after every other draw of the simulated survey.

Kept apart from :mod:`._demo` so that the zones, added after the survey's other draws, cannot
change anything drawn before them (the environment and location tables keep their values).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

__all__ = ["ZONES", "ZONE_SD", "plant_zones"]

#: Bank land-use zones, planted in stretches along every reach.
ZONES = ("moorland", "plantation", "pasture")
#: Standard deviation of each taxon's log-abundance shift per zone (a moderate effect).
ZONE_SD = 0.5


def plant_zones(rng: np.random.Generator, reach: np.ndarray, valley: np.ndarray,
                counts: np.ndarray, lam: np.ndarray, mu: np.ndarray, *,
                reaches: Sequence[str]
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Bank land-use zones and their effect on the counts, drawn after all other draws.

    Each reach is cut into three stretches at two break points (the first a quarter to 40 %
    of the way down the reach, the second 60 to 75 %), and the three zones are given to its
    stretches in a random order, so every reach holds every zone. Each taxon's expected count
    is multiplied by ``exp(e)`` in each zone, ``e ~ N(0, ZONE_SD)`` per taxon and zone. The
    counts already drawn are Poisson given their gamma means ``lam``; multiplying by a factor
    ``f`` below 1 is binomial thinning with probability ``f``, above 1 adding Poisson counts of
    mean ``(f - 1) lam``: either way the new counts are Poisson with mean ``f lam`` and so
    negative binomial with mean ``f mu`` and the same size, as if drawn with the zone effect in
    the first place. Returns the zone of every site, the effects (zones x taxa), the new counts
    and the new expected counts.
    """
    n, k = counts.shape
    zone_code = np.empty(n, dtype=np.intp)
    for name in reaches:
        members = np.flatnonzero(reach == name)
        lo, hi = valley[members].min(), valley[members].max()
        t = (valley[members] - lo) / max(hi - lo, 1e-12)  # 0..1 down this reach
        breaks = np.array([rng.uniform(0.25, 0.4), rng.uniform(0.6, 0.75)])
        order = np.argsort(rng.random(len(ZONES)))
        zone_code[members] = order[np.searchsorted(breaks, t, side="right")]
    effect = rng.normal(0.0, ZONE_SD, size=(len(ZONES), k))
    factor = np.exp(effect[zone_code, :])
    kept = rng.binomial(counts, np.minimum(factor, 1.0))
    extra = rng.poisson(lam * np.maximum(factor - 1.0, 0.0))
    return zone_code, effect, (kept + extra).astype(np.int64), mu * factor
