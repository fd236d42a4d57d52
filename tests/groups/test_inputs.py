"""Bad input to the group tests: each refused with an InputError that names the column, the
sites or classes involved and the fix (common practice: a design must be estimable, and every
class needs sites of its own to compare)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import DistanceMatrix, InputError, anosim, dispersion_test, mrpp, permanova

SITES = [f"s{i:02d}" for i in range(12)]
D = DistanceMatrix(pdist(np.random.default_rng(0).normal(size=(12, 2))), SITES)
BASE = pd.DataFrame({"zone": list("aaaabbbbcccc"), "period": list("xyxyxyxyxyxy"),
                     "depth": np.arange(12.0)}, index=SITES)


def _call(fn, *args, **kwargs):
    return fn(*args, n_resamples=9, rng=0, **kwargs)


def test_a_class_with_one_site_names_the_column_class_site_and_fix():
    design = BASE.assign(zone=list("aaaaabbbbbbc"))
    with pytest.raises(InputError, match=r"design column 'zone' with fewer than 2 sites: 'c' "
                                         r"\('s11'\).*Merge each with a similar class") as err:
        _call(permanova, D, design)
    assert err.value.sites == ("s11",) and err.value.columns == ("zone",)
    for fn in (anosim, mrpp, dispersion_test):
        with pytest.raises(InputError, match=r"fewer than 2 sites: 'c' \('s11'\)"):
            _call(fn, D, design["zone"])


def test_an_empty_class_names_it_and_says_how_to_drop_it():
    zone = pd.Categorical(list("aaaabbbbcccc"), categories=list("abcd"))
    with pytest.raises(InputError, match=r"'d' of design column 'zone' have no sites.*"
                                         r"remove_unused_categories") as err:
        _call(permanova, D, BASE.assign(zone=zone))
    assert err.value.columns == ("zone",)
    with pytest.raises(InputError, match=r"'d' of column 'zone' have no sites"):
        _call(mrpp, D, pd.Series(zone, index=SITES, name="zone"))


def test_missing_design_values_name_the_column_and_sites():
    design = BASE.assign(zone=["a", None, *list("aabbbbcccc")], depth=[np.nan] + [1.0] * 11)
    with pytest.raises(InputError, match=r"missing values: 'zone' at site\(s\) 's01'; 'depth' "
                                         r"at site\(s\) 's00'.*drop those sites") as err:
        _call(permanova, D, design)
    assert set(err.value.columns) == {"zone", "depth"}
    assert set(err.value.sites) == {"s00", "s01"}
    # a column not among the terms may have gaps
    _call(permanova, D, design.assign(zone=BASE["zone"]), terms=["zone"], pairwise=False)
    with pytest.raises(InputError, match=r"Column 'zone' has no class for site\(s\) 's01'"):
        _call(dispersion_test, D, design["zone"])


def test_more_terms_than_estimable_names_the_terms_and_their_df():
    design = BASE.assign(site=[str(i) for i in range(12)])
    with pytest.raises(InputError, match=r"More terms than the design can estimate: 12 sites "
                                         r"give 11 degrees of freedom.*zone:period \(2 df\).*"
                                         r"Drop terms \(an interaction first\)"):
        _call(permanova, D, design, terms=["zone*period", "depth", "site(zone:period)"])


@pytest.mark.parametrize(
    ("design", "kwargs", "message"),
    [
        (BASE, {"terms": ["zone", "habitat"]},
         r"names column\(s\) 'habitat', which the design table does not have; its columns are "
         r"'depth', 'period', 'zone'"),
        (BASE, {"terms": ["zone(("]}, r"Cannot read the term 'zone\(\('"),
        (BASE, {"terms": ["zone*zone"]}, r"names a column twice"),
        (BASE, {"terms": ["site(zone*period)"]}, r"cannot also use '\*'"),
        (BASE, {"terms": ["zone(zone)"]}, r"both inside and outside the parentheses"),
        (BASE, {"terms": []}, r"`terms` must be a list of term strings"),
        (BASE.assign(z2=list("ppppqqqqrrrr")), {"terms": ["zone", "z2"]},
         r"'z2' adds nothing given the terms before it \('zone'\).*nested"),
        (BASE.assign(period=list("xyxyxyxyxxxx")),
         {"terms": ["zone*period"], "sums_of_squares": "marginal"},
         r"Marginal sums of squares need every column.*sums_of_squares='sequential'"),
        (BASE.iloc[:11], {}, r"1 site\(s\) in the distance matrix but not in `design`: 's11'"),
        (BASE.assign(zone="a"), {"terms": ["zone"]},
         r"Design column 'zone' has one class only \('a'\)"),
        (BASE.assign(depth=1.0), {"terms": ["depth"]},
         r"Design column 'depth' has the same value at every site"),
        (BASE.assign(site=list("121212121212")),
         {"terms": ["zone", "site(zone)"], "strata": list("uvuvuvuvuvuv")},
         r"exchanging whole units of 'site\(zone\)', which cannot also be kept within `strata`"),
        (BASE.assign(site=list("112212221122")), {"terms": ["zone", "site(zone)"]},
         r"needs every unit to hold the same number of sites; sizes found: \[1, 2, 3\]"),
        (BASE, {"sums_of_squares": "type3"}, r"`sums_of_squares` must be one of"),
        (BASE, {"adjust": "bonferroni"}, r"`adjust` must be one of"),
        (BASE.set_axis([*SITES[:11], "s00"]), {}, r"Site labels in `design` are repeated"),
        ("zone", {}, r"`design` must be a pandas DataFrame"),
    ],
)
def test_design_problems_are_refused_with_the_fix(design, kwargs, message):
    with pytest.raises(InputError, match=message):
        _call(permanova, D, design, **kwargs)


def test_group_argument_problems():
    with pytest.raises(InputError, match="must be one column of class labels"):
        _call(anosim, D, BASE[["zone", "period"]])
    with pytest.raises(InputError, match="one class only"):
        _call(mrpp, D, ["a"] * 12)
    with pytest.raises(InputError, match="one label per site"):
        _call(anosim, D, ["a", "b"] * 5)
    with pytest.raises(InputError, match="at least 3 sites"):
        _call(mrpp, DistanceMatrix([1.0], ["a", "b"]), ["x", "y"])
    with pytest.raises(InputError, match="`n_resamples` must be a positive integer"):
        anosim(D, BASE["zone"], n_resamples=0)
    with pytest.raises(InputError, match="`n_jobs` must be"):
        mrpp(D, BASE["zone"], n_jobs=0)


def test_numbers_in_a_nested_term_are_classes_and_elsewhere_covariates():
    design = BASE.assign(site=[1, 2] * 6)
    res = _call(permanova, D, design, terms=["zone", "site(zone)"], pairwise=False)
    assert res.table.set_index("term").loc["site(zone)", "df"] == 3
    res = _call(permanova, D, BASE, terms=["depth"])
    assert res.table.loc[0, "df"] == 1 and res.pairwise.empty and not res.dispersion
