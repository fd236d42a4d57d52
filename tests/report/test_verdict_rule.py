"""The verdict rule of the report, level by level, on the numbers alone.

The rule is this report's own and is stated in `gradients/report/steps/_rule.py`, in the
verdict section of every report and in docs/user-guide.md; these tests hold it to that
statement. Its outside ingredients: the negligible-effect threshold 0.1 is Cohen's (1988)
"small" correlation and 0.02 for a pure fraction his "small" f2 for a set of predictors in
multiple regression (both from memory), and the reason to ask for the spatially constrained p-value
when both matrices are spatially structured is Guillot & Rousset (2013, Methods Ecol. Evol.
4: 336-344): Mantel-type tests then reject a true null too often.
"""

from __future__ import annotations

import math
from dataclasses import replace

import pytest

from gradients.report.steps._rule import (
    NEGLIGIBLE,
    NEGLIGIBLE_EFFECT,
    NEGLIGIBLE_FRACTION,
    NOT_SEPARABLE,
    NOT_SUPPORTED,
    PARTLY,
    SUPPORTED,
    VERDICTS,
    Evidence,
    decide_verdict,
    fraction_counts,
)


def test_the_threshold_is_cohens_small_correlation() -> None:
    assert NEGLIGIBLE_EFFECT == 0.1  # Cohen (1988): r = 0.1 small (from memory)
    assert len(set(VERDICTS)) == 5


def test_supported_needs_both_tests_significant_and_not_negligible() -> None:
    e = Evidence(mantel_r=0.35, mantel_pvalue=0.003, regression_coefficient=0.31,
                 regression_pvalue=0.001)
    assert decide_verdict(e) == SUPPORTED
    # the level is inclusive (p <= level), and an effect of exactly 0.1 is not negligible
    e = Evidence(mantel_r=0.1, mantel_pvalue=0.05, regression_coefficient=0.1,
                 regression_pvalue=0.05)
    assert decide_verdict(e) == SUPPORTED
    assert decide_verdict(e, level=0.01) == NOT_SUPPORTED


def test_partly_supported_when_one_test_passes() -> None:
    mantel_only = Evidence(mantel_r=0.3, mantel_pvalue=0.01, regression_coefficient=0.2,
                           regression_pvalue=0.2)
    assert decide_verdict(mantel_only) == PARTLY
    regression_only = Evidence(mantel_r=0.3, mantel_pvalue=0.2, regression_coefficient=0.2,
                               regression_pvalue=0.01)
    assert decide_verdict(regression_only) == PARTLY
    # significant but negligible regression next to a clear Mantel effect
    small_coefficient = Evidence(mantel_r=0.3, mantel_pvalue=0.01,
                                 regression_coefficient=0.05, regression_pvalue=0.001)
    assert decide_verdict(small_coefficient) == PARTLY


def test_significant_but_negligible() -> None:
    e = Evidence(mantel_r=0.042, mantel_pvalue=0.003, regression_coefficient=0.029,
                 regression_pvalue=0.006)
    assert decide_verdict(e) == NEGLIGIBLE
    assert decide_verdict(Evidence(mantel_r=0.05, mantel_pvalue=0.01)) == NEGLIGIBLE
    assert decide_verdict(e, negligible=0.02) == SUPPORTED


def test_not_supported() -> None:
    assert decide_verdict(Evidence()) == NOT_SUPPORTED  # no test was run
    assert decide_verdict(Evidence(mantel_r=0.3, mantel_pvalue=0.2,
                                   regression_coefficient=0.2,
                                   regression_pvalue=0.3)) == NOT_SUPPORTED
    # a significant negative association is not support for the hypothesis
    assert decide_verdict(Evidence(mantel_r=-0.3, mantel_pvalue=0.001,
                                   regression_coefficient=-0.2,
                                   regression_pvalue=0.001)) == NOT_SUPPORTED


def test_the_constrained_pvalue_counts_wherever_computed() -> None:
    # Both matrices structured, plain test significant, constrained test not: not separable
    # from spatial structure, even though the regression (which has no spatial guard) passes.
    e = Evidence(mantel_r=0.3, mantel_pvalue=0.003, mantel_pvalue_spatial=0.2,
                 spatially_structured=True, regression_coefficient=0.3,
                 regression_pvalue=0.001)
    assert decide_verdict(e) == NOT_SEPARABLE
    # the constrained p-value decides wherever it was computed, whatever the spatial check
    # found: the check misses structure, and reading the constrained p-value only after it
    # found some rejected a true null 8 % of the time at 0.05 under strong autocorrelation
    # (validation/spatial.py, 'check first' rows; Guillot & Rousset 2013 for the inflation)
    assert decide_verdict(replace(e, spatially_structured=False)) \
        == NOT_SEPARABLE
    # significant against the constrained null as well: supported
    assert decide_verdict(replace(e, mantel_pvalue_spatial=0.03)) \
        == SUPPORTED
    # no constrained p-value (strata, or no locations): the plain one decides
    for missing in (None, math.nan):
        assert decide_verdict(replace(e, mantel_pvalue_spatial=missing)) \
            == SUPPORTED
    # a plain test that is not significant stays 'not supported' whatever the constrained one
    assert decide_verdict(Evidence(mantel_r=0.3, mantel_pvalue=0.2, mantel_pvalue_spatial=0.01,
                                   spatially_structured=True)) == NOT_SUPPORTED


def test_the_large_simulated_survey_is_not_called_supported() -> None:
    # simulate_survey(n_sites=1000, n_taxa=120, seed=3) in the template project, 999
    # permutations (measured with this suite): water_and_organic, planted with no effect, had
    # partial Mantel r = 0.0422, p = 0.002 (Holm 0.003), spatially constrained p = 0.535, both
    # matrices structured; regression coefficient 0.029, p = 0.006. The old rule called it
    # 'supported'.
    water = Evidence(mantel_r=0.0421659014758, mantel_pvalue=0.003,
                     mantel_pvalue_spatial=0.535, spatially_structured=True,
                     regression_coefficient=0.0290485409745, regression_pvalue=0.006)
    assert decide_verdict(water) == NOT_SEPARABLE
    # the planted effects of the same run stay supported
    contamination = Evidence(mantel_r=0.537659821572, mantel_pvalue=0.003,
                             mantel_pvalue_spatial=0.021, spatially_structured=True,
                             regression_coefficient=0.430706977386, regression_pvalue=0.001)
    texture = Evidence(mantel_r=0.174066651286, mantel_pvalue=0.003,
                       mantel_pvalue_spatial=0.001, spatially_structured=True,
                       regression_coefficient=0.165161880466, regression_pvalue=0.001)
    assert decide_verdict(contamination) == decide_verdict(texture) == SUPPORTED
    # the same survey with its own river network (in-stream distances, as the template project
    # now measures space) and the raw-data pure fractions (measured with this suite, 999
    # permutations): water_and_organic partial Mantel r = 0.0835, Holm 0.003, constrained
    # p = 0.408; regression 0.0580, p = 0.001; pure fraction 0.00063, Holm p = 0.014
    # (significant, but far below 0.02)
    water = Evidence(mantel_r=0.0835185421134, mantel_pvalue=0.003,
                     mantel_pvalue_spatial=0.408, spatially_structured=True,
                     regression_coefficient=0.0580179759289, regression_pvalue=0.001,
                     pure_fraction=0.000631558605644, pure_fraction_pvalue=0.014)
    assert decide_verdict(water) == NOT_SEPARABLE
    assert not fraction_counts(water)
    assert decide_verdict(replace(water, mantel_pvalue_spatial=None)) == NEGLIGIBLE


@pytest.mark.parametrize(("name", "numbers", "verdict"), [
    # the demo (999 permutations, seed 1, in-stream distances): partial Mantel r, Holm p,
    # constrained p, regression coefficient and p, pure fraction and its Holm p; all matrices
    # spatially structured
    ("contamination", (0.3507, 0.003, 0.021, 0.3050, 0.001, 0.0003, 0.746), SUPPORTED),
    ("texture", (0.2286, 0.003, 0.001, 0.2038, 0.001, 0.0020, 0.746), SUPPORTED),
    ("water_and_organic", (0.0633, 0.109, 0.332, 0.0491, 0.171, 0.0063, 0.609), NOT_SUPPORTED),
])
def test_the_demo_numbers(name: str, numbers: tuple[float, ...], verdict: str) -> None:
    r, p, p_spatial, b, p_b, f, p_f = numbers
    e = Evidence(mantel_r=r, mantel_pvalue=p, mantel_pvalue_spatial=p_spatial,
                 spatially_structured=True, regression_coefficient=b, regression_pvalue=p_b,
                 pure_fraction=f, pure_fraction_pvalue=p_f)
    assert decide_verdict(e) == verdict

def test_the_fraction_threshold_is_cohens_small_f2() -> None:
    assert NEGLIGIBLE_FRACTION == 0.02  # Cohen (1988): f2 = 0.02 small (from memory)


def test_a_pure_fraction_only_adds_support() -> None:
    # rule 6: 'not supported' or 'significant but negligible' become 'partly supported' when
    # the pure fraction counts (positive, significant, at least 0.02)
    nothing = Evidence(mantel_r=0.05, mantel_pvalue=0.3, regression_coefficient=0.02,
                       regression_pvalue=0.4)
    assert decide_verdict(nothing) == NOT_SUPPORTED
    assert decide_verdict(replace(nothing, pure_fraction=0.05, pure_fraction_pvalue=0.01)) \
        == PARTLY
    negligible = Evidence(mantel_r=0.05, mantel_pvalue=0.01)
    assert decide_verdict(negligible) == NEGLIGIBLE
    assert decide_verdict(replace(negligible, pure_fraction=0.05,
                                  pure_fraction_pvalue=0.01)) == PARTLY
    # the threshold and the level are inclusive, as for the matrix tests
    edge = replace(nothing, pure_fraction=0.02, pure_fraction_pvalue=0.05)
    assert fraction_counts(edge) and decide_verdict(edge) == PARTLY
    for bad in ({"pure_fraction": 0.019, "pure_fraction_pvalue": 0.001},  # negligible
                {"pure_fraction": 0.3, "pure_fraction_pvalue": 0.051},    # not significant
                {"pure_fraction": -0.03, "pure_fraction_pvalue": 0.001},  # negative
                {"pure_fraction": 0.3, "pure_fraction_pvalue": None},     # not tested
                {"pure_fraction": math.nan, "pure_fraction_pvalue": 0.01}):
        assert not fraction_counts(replace(nothing, **bad)), bad
        assert decide_verdict(replace(nothing, **bad)) == NOT_SUPPORTED, bad
    assert decide_verdict(replace(nothing, pure_fraction=0.05, pure_fraction_pvalue=0.01),
                          negligible_fraction=0.1) == NOT_SUPPORTED


def test_a_pure_fraction_never_lowers_a_verdict_nor_lifts_not_separable() -> None:
    # rule 7: spatial eigenvectors selected on the same community can absorb a spatially
    # structured driver, so a pure fraction that does not count lowers nothing
    supported = Evidence(mantel_r=0.35, mantel_pvalue=0.003, regression_coefficient=0.31,
                         regression_pvalue=0.001, pure_fraction=0.0003,
                         pure_fraction_pvalue=0.9)
    assert decide_verdict(supported) == SUPPORTED
    partly = replace(supported, regression_pvalue=0.2)
    assert decide_verdict(partly) == PARTLY
    assert decide_verdict(replace(partly, pure_fraction=0.1, pure_fraction_pvalue=0.001)) \
        == PARTLY
    # its permutation test assumes exchangeable sites, like the plain Mantel test
    separable = Evidence(mantel_r=0.3, mantel_pvalue=0.003, mantel_pvalue_spatial=0.2,
                         spatially_structured=True, pure_fraction=0.1,
                         pure_fraction_pvalue=0.001)
    assert decide_verdict(separable) == NOT_SEPARABLE
