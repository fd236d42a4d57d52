"""Long-form laboratory files give the same Survey as the equivalent wide table.

Two ways: the same measurements written once as a wide table (one row per site, censored values
written '<0.2') and once as a laboratory would export them (one row per site and variable, with
a qualifier and a reporting limit) must read into equal surveys (common practice of laboratory
exports: '<' or 'ND' qualifiers with a reporting limit). Unit conversions by hand (1 mg/kg =
1000 µg/kg).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import gradients
from gradients import InputError

COMMUNITY = pd.DataFrame({"site": ["s1", "s2", "s3", "s4"], "T1": [1, 2, 3, 4],
                          "T2": [3, 0, 1, 2]})
WIDE = ("site,Cu,Cd,pH\n,mg/kg,mg/kg,pH\ns1,12.5,<0.2,7.1\ns2,30,0.45,6.8\ns3,8.25,<0.2,7.4\n"
        "s4,41,1.2,7.0\n")
LONG = """site,variable,value,unit,qualifier,reporting_limit
s1,Cu,12.5,mg/kg,,0.5
s1,Cd,,mg/kg,ND,0.2
s1,pH,7.1,pH,,
s2,Cu,30,mg/kg,,0.5
s2,Cd,0.45,mg/kg,,0.2
s2,pH,6.8,pH,,
s3,Cu,8250,µg/kg,,500
s3,Cd,0.2,mg/kg,<,
s3,pH,7.4,pH,,
s4,Cu,41,mg/kg,J,0.5
s4,Cd,1.2,mg/kg,,0.2
s4,pH,7.0,pH,,
"""


def _files(tmp_path, env_text, name="e.csv"):
    (tmp_path / "c.csv").write_text(COMMUNITY.to_csv(index=False), encoding="utf-8")
    (tmp_path / name).write_text(env_text, encoding="utf-8")
    return tmp_path / "c.csv", tmp_path / name


def test_long_form_gives_the_same_survey_as_the_wide_table(tmp_path):
    c, wide = _files(tmp_path, WIDE, "wide.csv")
    _, long = _files(tmp_path, LONG, "long.csv")
    for policy in ("half-limit", "zero", "limit"):
        a = gradients.read_survey(c, wide, censored=policy)
        b = gradients.read_survey(c, long, censored=policy)
        assert a.equals(b), policy  # community, environment, censored mask, units
        pd.testing.assert_frame_equal(a.environment, b.environment)
        pd.testing.assert_frame_equal(a.detection_limits, b.detection_limits)
    assert b.units == {"Cu": "mg/kg", "Cd": "mg/kg", "pH": "pH"}
    # by hand: 8250 µg/kg = 8.25 mg/kg, the wide table's value
    assert b.environment.loc["s3", "Cu"] == pytest.approx(8.25, rel=1e-15)
    details = [d.detail for d in b.log]
    assert any("long form (12 results" in d and "2 result(s) below the reporting limit" in d
               and "1 estimated result(s)" in d for d in details)
    assert any(d.startswith("Cu (mass fraction): 1 value(s) from µg/kg to mg/kg") for d in details)


def test_long_form_from_a_dataframe_and_an_xlsx_sheet(tmp_path):
    import io

    frame = pd.read_csv(io.StringIO(LONG), dtype=str, keep_default_na=False)
    a = gradients.Survey(COMMUNITY, frame, censored="half-limit")
    c, wide = _files(tmp_path, WIDE)
    b = gradients.read_survey(c, wide, censored="half-limit")
    assert a.equals(b)
    book = tmp_path / "lab.xlsx"
    with pd.ExcelWriter(book) as writer:  # openpyxl, the outside writer
        pd.DataFrame({"x": [1]}).to_excel(writer, sheet_name="cover", index=False)
        frame.to_excel(writer, sheet_name="results", index=False)
    d = gradients.read_survey(c, book, censored="half-limit", sheet={"environment": "results"})
    assert d.equals(b)


def test_nd_without_a_limit_asks_for_it(tmp_path):
    text = LONG.replace("s1,Cd,,mg/kg,ND,0.2", "s1,Cd,,mg/kg,ND,")
    c, e = _files(tmp_path, text)
    with pytest.raises(InputError, match=r"1 result\(s\) are marked as not detected but give no "
                       r"reporting limit \(line 3\)\. .*give the laboratory's reporting limit"):
        gradients.read_survey(c, e, censored="half-limit")


def test_mixed_quantities_in_a_long_form_column_name_the_lines(tmp_path):
    text = LONG.replace("s2,Cu,30,mg/kg,,0.5", "s2,Cu,30,mg/L,,0.5")
    c, e = _files(tmp_path, text)
    with pytest.raises(InputError, match=r"column 'Cu' mixes quantities .*'mg/L' \(concentration "
                       r"in water\) in line 5") as info:
        gradients.read_survey(c, e, censored="half-limit")
    assert info.value.columns == ("Cu",)
    text = LONG.replace("s2,Cu,30,mg/kg,,0.5", "s2,Cu,30,mg/m,,0.5")
    c, e = _files(tmp_path, text)
    with pytest.raises(InputError, match=r"mixes quantities"):
        gradients.read_survey(c, e, censored="half-limit")


def test_bad_long_form_rows_are_clear_errors(tmp_path):
    c, e = _files(tmp_path, LONG + "s1,Cu,13,mg/kg,,0.5\n")
    with pytest.raises(InputError, match=r"more than one value for the same site and variable: "
                       r"site 's1', 'Cu' \(line 2, line 14\)"):
        gradients.read_survey(c, e)
    c, e = _files(tmp_path, LONG.replace("s4,Cu,41,mg/kg,J,0.5", "s4,Cu,41,mg/kg,Q,0.5"))
    with pytest.raises(InputError, match=r"qualifier\(s\) 'Q' \(line 11\) are not understood"):
        gradients.read_survey(c, e)
    c, e = _files(tmp_path, LONG.replace("s4,Cu,41,", "s4,Cu,lots,"))
    with pytest.raises(InputError, match=r"the value is not a number in line 11"):
        gradients.read_survey(c, e)


def test_a_sheet_named_in_the_project_file(tmp_path):
    import io

    from gradients.report._run import read_project_survey

    frame = pd.read_csv(io.StringIO(LONG), dtype=str, keep_default_na=False)
    with pd.ExcelWriter(tmp_path / "lab.xlsx") as writer:
        pd.DataFrame({"x": [1]}).to_excel(writer, sheet_name="cover", index=False)
        frame.to_excel(writer, sheet_name="results", index=False)
    (tmp_path / "c.csv").write_text(COMMUNITY.to_csv(index=False), encoding="utf-8")
    (tmp_path / "p.toml").write_text(
        '[inputs]\ncommunity = "c.csv"\nenvironment = "lab.xlsx"\nbelow_detection = "zero"\n'
        '[inputs.sheets]\nenvironment = "results"\n', encoding="utf-8")
    survey = read_project_survey(gradients.load_project(tmp_path / "p.toml"))
    assert survey.environment["Cd"].tolist() == [0.0, 0.45, 0.0, 1.2]
    assert np.isclose(survey.environment.loc["s3", "Cu"], 8.25)
    (tmp_path / "q.toml").write_text(
        '[inputs]\ncommunity = "c.csv"\nenvironment = "lab.xlsx"\n'
        '[inputs.sheets]\nchemistry = "results"\n', encoding="utf-8")
    with pytest.raises(InputError, match=r"`inputs\.sheets` names 'chemistry'"):
        gradients.load_project(tmp_path / "q.toml")
