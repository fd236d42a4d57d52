"""Will a run fit in memory? An estimate of a project's peak, made before the run starts.

The run keeps every distance matrix it builds (the community, one per hypothesis, the
covariables and geography: one condensed float64 vector each), the results and figures that
hold every pair of sites until the report is written (``PAIR_RESULTS``) and, one step at a
time, the work arrays of the step that is running. The peak is the kept matrices plus the largest
step, plus the interpreter with the suite's libraries, kernels and figures (``BASELINE``).
The Mantel-family counts come from :mod:`gradients.matrix._memory`; the other steps hold a
few square ``n x n`` arrays (ordination, PERMANOVA, the spatial eigenvector maps), counted
here as ``SQUARE_ARRAYS``; the ranking step's turnover model holds a design of ``SPLINES``
columns per variable for every pair of sites.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import InputError
from ..matrix._memory import mantel_memory, partial_mantel_memory

__all__ = ["RunMemory", "available_memory", "check_memory", "run_memory"]

#: Resident size of a run before its matrices count: the interpreter with the libraries
#: loaded (260-330 MiB measured on Linux with the survey read), compiled kernels, figures and
#: tables; the demo's whole run (60 sites) peaked at 517 MiB.
BASELINE = 450 * 2**20
#: Bytes per pair of sites held from their step until the report is written: the NMDS
#: result's Shepard table and the figures drawn from every pair (the Shepard diagram, the
#: distance decay). Fitted to whole runs of the template project (`benchmarks/
#: bench_report.py`, partition, ranking and groups off): peaks of 722 MiB at 1,000 sites,
#: 1,667 MiB at 2,000 and 5,806 MiB at 5,000, which the estimate meets within 14 %
#: (docs/scaling.md, "Whole runs").
PAIR_RESULTS = 270
#: The NMDS step's work arrays per pair of sites beyond what it keeps (the pairs in
#: dissimilarity order, each running start's workspace, the final fit), and its fixed part:
#: measured peaks of 196 MiB at 1,000 sites and 616 MiB at 2,000 with the kept Shepard table
#: and figure, which ``PAIR_RESULTS`` counts.
NMDS_PER_PAIR = 180
NMDS_FIXED = 40 * 2**20
#: Square float64 arrays held at once by the steps other than the Mantel family.
SQUARE_ARRAYS = 8
#: I-spline columns per variable of the ranking step's turnover model (its default).
SPLINES = 3
#: Copies of the turnover model's pairs x columns design held at once while it is fitted.
DESIGN_COPIES = 3
#: Share of the available memory a run may plan to use (the rest is the system's margin).
HEADROOM = 0.9


@dataclass(frozen=True)
class RunMemory:
    """Estimated peak memory of a run, in bytes, and its parts."""

    total: int
    kept: int
    largest_step: str
    steps: dict[str, int]

    def describe(self) -> str:
        gib = 2.0**30
        step = self.steps[self.largest_step] / gib
        return (f"about {self.total / gib:.1f} GiB at its peak ({self.kept / gib:.1f} GiB of "
                "distance matrices and pairwise results kept through the run, "
                f"{step:.1f} GiB for the largest step, {self.largest_step})")


def run_memory(settings: dict[str, Any], n_sites: int, *,
               n_hypotheses: int | None = None, n_variables: int = 0) -> RunMemory:
    """Estimate the peak memory of a run of a project's ``settings`` on ``n_sites`` sites
    (``n_variables`` numeric environmental variables, for the ranking step)."""
    n = int(n_sites)
    m = n * (n - 1) // 2
    perms = int(settings.get("permutations.count", 999))
    hyp = n_hypotheses if n_hypotheses is not None else len(settings.get("hypotheses", {}) or {})
    geo = bool(settings.get("inputs.locations"))
    cov = bool(settings.get("design.covariables"))
    spatial = geo and not settings.get("design.strata")
    kept = (1 + hyp + int(geo) + int(cov)) * 8 * m + PAIR_RESULTS * m
    steps = {"ordination and the other steps": SQUARE_ARRAYS * 8 * n * n}
    if settings.get("analyses.ordination", "nmds") == "nmds":
        steps["ordination (NMDS)"] = NMDS_FIXED + NMDS_PER_PAIR * m
    dtype = np.float32 if settings.get("permutations.precision") == "float32" else np.float64
    if settings.get("analyses.mantel", True) and hyp + int(geo) + int(cov):
        steps["mantel"] = mantel_memory(n, n_resamples=perms, spatial=spatial, dtype=dtype)
    controls = hyp - 1 + int(geo) + int(cov)
    if settings.get("analyses.partial_mantel", True) and hyp and controls >= 1:
        steps["partial_mantel"] = partial_mantel_memory(n, controls, n_resamples=perms,
                                                        spatial=spatial, dtype=dtype)
    if settings.get("analyses.regression", True):
        p = hyp + int(geo) + int(cov)
        steps["regression"] = 3 * (p + 1) * 8 * m
    if settings.get("analyses.ranking", True) and n_variables:
        # the turnover model's design: SPLINES I-spline columns per variable (and geography)
        # for every pair of sites, held with its working copies
        columns = SPLINES * (n_variables + int(geo)) + 1
        steps["ranking"] = DESIGN_COPIES * columns * 8 * m
    largest = max(steps, key=lambda k: steps[k])
    return RunMemory(total=BASELINE + kept + steps[largest], kept=kept, largest_step=largest,
                     steps=steps)


def available_memory() -> int | None:
    """Bytes the system can give a new run now: ``MemAvailable`` of ``/proc/meminfo`` on Linux,
    else free physical pages from ``os.sysconf``; None when neither is known."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES")) * int(os.sysconf("SC_PAGE_SIZE"))
    except (AttributeError, OSError, ValueError):
        return None


def check_memory(project: Any, survey: Any, *, available: int | None = None) -> RunMemory:
    """Refuse a run that will not fit in memory, with what to change; return the estimate.

    ``available`` defaults to :func:`available_memory`; when that is unknown the estimate is
    returned unchecked.
    """
    n = int(survey.community.shape[0])
    numeric = survey.environment.select_dtypes("number").shape[1]
    estimate = run_memory(project.settings, n, n_hypotheses=len(project.hypotheses),
                          n_variables=numeric)
    free = available_memory() if available is None else available
    if free is None or estimate.total <= HEADROOM * free:
        return estimate
    single = run_memory({**project.settings, "permutations.precision": "float32"}, n,
                        n_hypotheses=len(project.hypotheses), n_variables=numeric)
    precision = (
        "store the Mantel tests' work arrays in float32 (`[permutations] precision = "
        f"\"float32\"`: about {single.total / 2.0**30:.1f} GiB; docs/scaling.md, 'Large "
        "surveys'); " if single.total < 0.95 * estimate.total else "")
    raise InputError(
        f"This run of {n} sites needs {estimate.describe()}, more than the "
        f"{free / 2.0**30:.1f} GiB this machine has free. Ways to fit: {precision}switch off "
        "the largest step in [analyses]; or "
        "a machine, or cluster workers ([permutations] cluster), with more memory "
        "(each worker holds the matrices of the test it runs; see docs/scaling.md). Fewer "
        "permutations ([permutations] count) shorten a long run but do not lower its peak, "
        "which is set by the number of sites.")
