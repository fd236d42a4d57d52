"""Write the invented data of the before/after-control/impact (BACI) example.

The scenario is invented: a treated mine-water outfall was commissioned on Brennock Water in
early 2025. Four sites below the outfall (BW1-BW4, "impact") and four on the neighbouring
Lintwell Burn (LB1-LB4, "control") were sampled three times before (May, July and September
2024) and three times after (the same months of 2025). The generator plants:

- a difference between the two streams that was there before the outfall (each taxon's
  log-abundance shifted by N(0, 0.3) on Brennock Water);
- differences among sites (N(0, 0.4) per site and taxon) and among campaigns, shared by both
  streams (N(0, 0.3) per campaign and taxon: a wet or a dry summer affects both);
- the impact: after the outfall, at the impact sites only, eight sensitive taxa fall
  (log-abundance -1.6) and four tolerant taxa rise (+1.0).

Counts are negative binomial (size 2). Run ``python examples/baci/make_data.py`` to write
``community.csv`` and ``environment.csv`` again beside this file; a test checks that the files
equal what this script makes.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).parent
SEED = 20250301
CONTROL = ("LB1", "LB2", "LB3", "LB4")
IMPACT = ("BW1", "BW2", "BW3", "BW4")
CAMPAIGNS = ("2024-05", "2024-07", "2024-09", "2025-05", "2025-07", "2025-09")
N_TAXA = 24
SENSITIVE = range(0, 8)  # fall after the outfall, at the impact sites
TOLERANT = range(8, 12)  # rise after the outfall, at the impact sites


def make_tables(seed: int = SEED) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The community and environmental tables of the example, as written to the CSV files."""
    rng = np.random.default_rng(seed)
    sites = CONTROL + IMPACT
    base = rng.normal(np.log(6.0), 0.7, size=N_TAXA)
    stream = rng.normal(0.0, 0.3, size=N_TAXA)  # Brennock Water differs before the outfall
    site_effect = rng.normal(0.0, 0.4, size=(len(sites), N_TAXA))
    campaign_effect = rng.normal(0.0, 0.3, size=(len(CAMPAIGNS), N_TAXA))
    impact = np.zeros(N_TAXA)
    impact[list(SENSITIVE)] = -1.6
    impact[list(TOLERANT)] = 1.0
    rows, env = [], []
    for s, site in enumerate(sites):
        treated = site in IMPACT
        for c, campaign in enumerate(CAMPAIGNS):
            after = campaign.startswith("2025")
            log_mu = (base + site_effect[s] + campaign_effect[c] + (stream if treated else 0.0)
                      + (impact if treated and after else 0.0))
            mu = np.exp(log_mu)
            rows.append(rng.poisson(rng.gamma(2.0, mu / 2.0)))
            env.append({"sample": f"{site}-{campaign}", "site": site,
                        "treatment": "impact" if treated else "control",
                        "period": "after" if after else "before", "campaign": campaign})
    environment = pd.DataFrame(env)
    community = pd.DataFrame(np.array(rows, dtype=np.int64),
                             index=pd.Index(environment["sample"], name="sample"),
                             columns=[f"Taxon B{j + 1:02d}" for j in range(N_TAXA)])
    return community, environment


def main() -> None:
    community, environment = make_tables()
    community.to_csv(HERE / "community.csv", lineterminator="\n")
    environment.to_csv(HERE / "environment.csv", index=False, lineterminator="\n")


if __name__ == "__main__":
    main()
