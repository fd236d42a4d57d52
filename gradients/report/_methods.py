"""The methods paragraph, written from what was actually run."""

from __future__ import annotations

from typing import Any

__all__ = ["CAUTIONS", "methods_paragraph"]

#: Cautions every report carries, in the words of the methods paragraph.
CAUTIONS = (
    "Permutation p-values are not corrected for multiple testing unless a table says so "
    "(the verdict table gives Holm-adjusted values across hypotheses).",
    "Simple and partial Mantel tests on spatially autocorrelated data can give p-values that "
    "are too small (Guillot & Rousset 2013); treat them as screening evidence.",
    "Screening guideline values are not site-specific criteria, and decisions about "
    "contaminated land or water rest with the local regulator and licensed professionals.",
)


def methods_paragraph(*, version: str, sentences: list[str], decisions: list[str],
                      n_resamples: int, seed: int, n_sites: int, n_taxa: int,
                      groups: dict[str, dict[str, int]] | None = None,
                      strata: str | None = None,
                      extra: dict[str, Any] | None = None) -> str:
    """Methods text in plain prose, one paragraph of analysis and one of cautions.

    ``sentences`` come from the analysis steps in the order they ran; ``decisions`` are the
    records of :attr:`Survey.log`; ``groups`` maps each grouping variable (strata, factors) to
    the number of sites per class.
    """
    first = [
        f"Analyses were run with gradients {version} on {n_sites} sites and {n_taxa} taxa."
    ]
    if decisions:
        first.append("Input decisions: " + " ".join(d.rstrip(".") + "." for d in decisions))
    for name, counts in (groups or {}).items():
        parts = ", ".join(f"{k} ({v})" for k, v in counts.items())
        first.append(f"Sites per {name}: {parts}.")
    first += sentences
    perm = (f"Permutation tests used {n_resamples} permutations unless stated otherwise "
            f"(p = (b + 1)/(P + 1), Phipson & Smyth 2010) with random seed {seed}")
    perm += f", permuting sites within {strata}." if strata else "."
    first.append(perm)
    return " ".join(first) + "\n\n" + " ".join(CAUTIONS) + "\n"
