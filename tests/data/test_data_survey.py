"""Survey built from DataFrames: validation rules, their messages, alignment and the log."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from gradients import InputError
from gradients.data import Decision, Survey


def test_valid_survey_types_and_alignment(community, environment):
    # environment given in another order: rows are put in the community's order, and logged
    env = environment.iloc[[2, 0, 3, 1]]
    s = Survey(community, env)
    assert list(s.sites) == ["S1", "S2", "S3", "S4"]
    assert s.sites.equals(s.environment.index) and s.sites.equals(s.community.index)
    assert s.community.dtypes.eq(np.int64).all()
    assert s.environment["Cu"].dtype == np.float64
    assert isinstance(s.environment["habitat"].dtype, pd.CategoricalDtype)
    assert list(s.environment["habitat"].cat.categories) == ["margin", "pool", "riffle"]
    assert s.environment.loc["S3", "Cu"] == 7.25  # value followed its site through the reorder
    assert s.environment.loc["S2", "habitat"] == "riffle"
    assert list(s.numeric_environment().columns) == ["Cu", "pH"]
    assert list(s.factors().columns) == ["habitat"]
    assert (s.n_sites, s.n_taxa) == (4, 3)
    assert [d.action for d in s.log] == ["reorder"]
    assert not s.censored.to_numpy().any()
    assert s.censored.shape == s.environment.shape


def test_inputs_not_modified(community, environment):
    before_c, before_e = community.copy(), environment.copy()
    Survey(community, environment)
    pd.testing.assert_frame_equal(community, before_c)
    pd.testing.assert_frame_equal(environment, before_e)


def test_site_ids_from_index_and_float_ids(community):
    s = Survey(community.set_index("site"))
    assert list(s.sites) == ["S1", "S2", "S3", "S4"]
    # whole numbers stored as floats (as spreadsheets do) become "1", "2", ... not "1.0"
    c = community.assign(site=[1.0, 2.0, 3.0, 4.0])
    e = pd.DataFrame({"site": ["1", "2", "3", "4"], "Cu": [1.0, 2.0, 3.0, 4.0]})
    assert list(Survey(c, e).sites) == ["1", "2", "3", "4"]


def test_float_abundances_stay_float(community):
    s = Survey(community.assign(Alpha=[0.5, 0.0, 1.0, 2.0]))
    assert s.community["Alpha"].dtype == np.float64


def test_read_only(community):
    s = Survey(community)
    with pytest.raises(AttributeError, match="read-only"):
        s.community = None  # type: ignore[misc]


def test_sites_differ_lists_both_ways(community, environment):
    env = environment.assign(site=["S1", "S2", "S3", "S9"])
    with pytest.raises(InputError, match=r"in the community DataFrame but not in the environment "
                       r"DataFrame: 'S4'.*in the environment DataFrame but not in the community "
                       r"DataFrame: 'S9'.*shared_sites_only=True") as info:
        Survey(community, env)
    assert set(info.value.sites) == {"S4", "S9"}


def test_shared_sites_only_logs_drops(community, environment):
    env = environment.assign(site=["S1", "S2", "S3", "S9"])
    s = Survey(community, env, shared_sites_only=True)
    assert list(s.sites) == ["S1", "S2", "S3"]
    drops = [d for d in s.log if d.action == "drop-sites"]
    assert {d.sites for d in drops} == {("S4",), ("S9",)}
    assert all(d.count == 1 for d in drops)


def test_leading_zero_hint(community, environment):
    env = environment.assign(site=["S01", "S02", "S03", "S04"])
    with pytest.raises(InputError, match="leading zeros"):
        Survey(community, env)


def test_duplicate_sites(community):
    c = community.assign(site=["S1", "S2", "S1", "S4"])
    with pytest.raises(InputError, match=r"repeats site ID\(s\): 'S1' \(row 1, row 3\)"):
        Survey(c)


def test_blank_site_id(community):
    c = community.assign(site=["S1", " ", "S3", "S4"])
    with pytest.raises(InputError, match=r"1 row\(s\) with no site ID \(row 2\)"):
        Survey(c)


def test_missing_site_column_lists_columns(community):
    c = community.rename(columns={"site": "station"})
    with pytest.raises(InputError, match=r"no site column 'site'; columns found: 'station', "
                       r"'Alpha', 'Beta', 'Gamma'.*site_column='station'"):
        Survey(c)


def test_site_column_other_name_suggested_from_other_table(community, environment):
    env = environment.rename(columns={"site": "code"})
    with pytest.raises(InputError, match=r"Column 'code' holds the site IDs.*site_column='code'"):
        Survey(community, env)
    assert list(Survey(community.rename(columns={"site": "code"}), env,
                       site_column="code").sites) == ["S1", "S2", "S3", "S4"]


def test_site_column_case_insensitive_is_logged(community):
    s = Survey(community.rename(columns={"site": " Site"}))
    assert s.log[0].action == "site-column"


def test_transposed_community(community, environment):
    transposed = community.set_index("site").T.rename_axis("taxon").reset_index()
    with pytest.raises(InputError, match="looks transposed"):
        Survey(transposed, environment)


def test_non_numeric_abundance_names_cell(community):
    c = community.assign(Beta=["0", "5", "two", "1"])
    with pytest.raises(InputError, match=r"site 'S3', taxon 'Beta': 'two'") as info:
        Survey(c)
    assert info.value.sites == ("S3",) and info.value.columns == ("Beta",)


def test_negative_abundance(community):
    c = community.assign(Gamma=[1, -9, 0, 0])
    with pytest.raises(InputError, match=r"negative: site 'S2', taxon 'Gamma': '-9'.*-999"):
        Survey(c)


def test_missing_abundance(community):
    c = community.assign(Gamma=[1, np.nan, 0, 0])
    with pytest.raises(InputError, match=r"empty: site 'S2', taxon 'Gamma'.*Write 0"):
        Survey(c)


def test_censored_abundance_refused(community):
    c = community.assign(Gamma=["1", "<1", "0", "0"])
    with pytest.raises(InputError, match=r"Abundances cannot be censored"):
        Survey(c)


def test_no_taxon_columns(community):
    with pytest.raises(InputError, match="only the site column"):
        Survey(community[["site"]])


def test_empty_site_error_and_drop(community):
    c = community.assign(Alpha=[3, 0, 1, 7], Beta=[0, 0, 2, 1], Gamma=[1, 0, 0, 0])
    with pytest.raises(InputError, match=r"1 site\(s\) have no taxa at all.*'S2'.*"
                       r"empty_sites='drop'"):
        Survey(c)
    s = Survey(c, empty_sites="drop")
    assert list(s.sites) == ["S1", "S3", "S4"]
    assert s.log[-1] == Decision("drop-sites", s.log[-1].detail, 1, ("S2",), ())


def test_empty_taxon_dropped_and_logged(community):
    c = community.assign(Delta=[0, 0, 0, 0])
    s = Survey(c)
    assert "Delta" not in s.taxa
    assert s.log[-1].action == "drop-taxa" and s.log[-1].columns == ("Delta",)
    assert "Delta" in Survey(c, empty_taxa="keep").taxa
    with pytest.raises(InputError, match=r"'Delta'"):
        Survey(c, empty_taxa="error")


def test_missing_environment_error_and_policies(community, environment):
    env = environment.assign(pH=[6.1, np.nan, 6.8, 5.9])
    with pytest.raises(InputError, match=r"1 empty environmental cell\(s\): site 'S2', column "
                       r"'pH'.*missing='drop-sites'.*missing='drop-variables'"):
        Survey(community, env)
    s = Survey(community, env, missing="drop-sites")
    assert list(s.sites) == ["S1", "S3", "S4"] and list(s.community.index) == list(s.sites)
    assert s.log[-1].action == "drop-sites" and s.log[-1].sites == ("S2",)
    s = Survey(community, env, missing="drop-variables")
    assert "pH" not in s.environment.columns and s.n_sites == 4
    assert s.log[-1].action == "drop-variables" and s.log[-1].columns == ("pH",)


def test_missing_categorical_cell(community, environment):
    env = environment.assign(habitat=["pool", "NA", "pool", "margin"])
    with pytest.raises(InputError, match=r"site 'S2', column 'habitat'"):
        Survey(community, env)


def test_column_entirely_empty_with_drop_sites(community, environment):
    env = environment.assign(Zn=np.nan)
    with pytest.raises(InputError, match=r"'Zn' are empty for every site"):
        Survey(community, env, missing="drop-sites")


def test_constant_column(community, environment):
    env = environment.assign(Cd=[0.3, 0.3, 0.3, 0.3])
    with pytest.raises(InputError, match=r"'Cd' \(every site = 0.3\).*constant='drop'"):
        Survey(community, env)
    s = Survey(community, env, constant="drop")
    assert "Cd" not in s.environment and s.log[-1].columns == ("Cd",)
    with pytest.raises(InputError, match=r"'zone' \(every site = 'A'\)"):
        Survey(community, environment.assign(zone="A"))


def test_text_in_numeric_column(community, environment):
    env = environment.assign(Cu=["12.5", "40", "n.d.", "19"])
    with pytest.raises(InputError, match=r"column 'Cu' holds numbers but 1 cell\(s\) are not "
                       r"numbers: site 'S3', column 'Cu': 'n.d.'.*'<0.5'"):
        Survey(community, env)


def test_factors_option(community, environment):
    env = environment.assign(zone=[1, 2, 1, 2])
    s = Survey(community, env, factors=["zone"])
    assert isinstance(s.environment["zone"].dtype, pd.CategoricalDtype)
    assert list(s.environment["zone"].cat.categories) == ["1", "2"]
    with pytest.raises(InputError, match=r"`factors` names column\(s\) 'nope'"):
        Survey(community, env, factors=["nope"])


def test_bad_option_values(community):
    with pytest.raises(InputError, match=r"`missing` must be one of 'error', 'drop-sites', "
                       r"'drop-variables'; got 'drop'"):
        Survey(community, missing="drop")
    with pytest.raises(InputError, match=r"`censored` must be one of"):
        Survey(community, censored="half")
    with pytest.raises(InputError, match="takes DataFrames"):
        Survey("community.csv")  # type: ignore[arg-type]
    with pytest.raises(InputError, match="must be a pandas DataFrame"):
        Survey([[1, 2]])  # type: ignore[arg-type]


def test_empty_frame():
    with pytest.raises(InputError, match="community DataFrame is empty"):
        Survey(pd.DataFrame({"site": [], "A": []}))


def test_subset_and_describe(community, environment, lonlat):
    s = Survey(community, environment, lonlat)
    sub = s.subset(["S4", "S2"])
    assert list(sub.sites) == ["S4", "S2"]
    assert list(sub.locations.index) == ["S4", "S2"]
    assert sub.environment.loc["S4", "Cu"] == 19.0
    assert sub.log[-1].action == "subset" and set(sub.log[-1].sites) == {"S1", "S3"}
    with pytest.raises(InputError, match=r"'S7' are not in the survey"):
        s.subset(["S1", "S7"])
    table = s.describe()
    assert list(table.index) == ["community", "environment", "locations"]
    assert table.loc["environment", "categorical"] == 1
    assert table.loc["community", "columns"] == 3
    text = repr(s)
    assert "4 sites x 3 taxa" in text and "EPSG:4326" in text


def test_survey_repr_shows_decisions(community):
    s = Survey(community.assign(Delta=0))
    assert "[1]" in repr(s) and "Delta" in repr(s)


def test_pickle_and_copy_round_trip(community, environment, lonlat):
    import copy
    import pickle

    s = Survey(community, environment, lonlat, empty_taxa="drop")
    for other in (pickle.loads(pickle.dumps(s)), copy.deepcopy(s), copy.copy(s)):
        assert other.equals(s) and other.log == s.log and other.sources == s.sources
        with pytest.raises(AttributeError):
            other.log = ()  # type: ignore[misc]
