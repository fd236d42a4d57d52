"""Units of environmental columns: hand values, pint itself, the units row, and clear errors.

Hand values (definitions of the SI prefixes, common practice): 1 mg/kg = 1 µg/g = 1000 µg/kg;
1 g/kg = 0.1 %; 1 mg/L = 1000 µg/L. Each is checked as the suite converts a column and against
pint's own conversion (the reference library).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pint
import pytest

import gradients
from gradients import InputError
from gradients.data._units import convert_column

COMMUNITY = pd.DataFrame({"site": ["a", "b", "c"], "T1": [1, 2, 3], "T2": [3, 0, 1]})


def _convert(values, unit, declared=None):
    out, target, quantity, _ = convert_column(np.asarray(values, dtype=float),
                                              [unit] * len(values), column="x", source="t",
                                              declared=declared, locate=lambda i: f"row {i}")
    return out, target, quantity


@pytest.mark.parametrize(("value", "unit", "expected", "target"), [
    (1.0, "µg/g", 1.0, "mg/kg"),       # 1 µg/g = 1 mg/kg (by hand: 1e-6 g / 1e-3 kg)
    (1000.0, "µg/kg", 1.0, "mg/kg"),   # 1000 µg/kg = 1 mg/kg
    (1.0, "g/kg", 1000.0, "mg/kg"),    # 1 g/kg = 1000 mg/kg
    (1000.0, "µg/L", 1.0, "mg/L"),     # 1 mg/L = 1000 µg/L
    (1.0, "g/m3", 1.0, "mg/L"),        # 1 g/m3 = 1 mg/L
    (1.0, "mS/cm", 1000.0, "µS/cm"),   # 1 mS/cm = 1000 µS/cm
    (1.0, "mS/m", 10.0, "µS/cm"),      # 1 mS/m = 10 µS/cm
])
def test_conversions_agree_with_hand_values_and_pint(value, unit, expected, target):
    out, got_target, _ = _convert([value], unit)
    assert got_target == target
    assert out[0] == pytest.approx(expected, rel=1e-12)  # by hand (SI prefixes)
    ureg = pint.UnitRegistry()  # the reference library, a registry of its own
    reference = ureg.Quantity(value, unit.replace("m3", "m**3")).to(target).magnitude
    assert out[0] == pytest.approx(reference, rel=1e-12)


def test_one_gram_per_kilogram_is_a_tenth_of_a_percent():
    # by hand: 1 g/kg = 1/1000 = 0.1 %; a column declared as percent converts g/kg to %
    out, target, quantity = _convert([1.0], "g/kg", declared="percent")
    assert (target, quantity) == ("%", "percent")
    assert out[0] == pytest.approx(0.1, rel=1e-12)
    assert pint.UnitRegistry().Quantity(1, "g/kg").to("percent").magnitude == pytest.approx(0.1)


def test_quantities_are_inferred_from_the_units():
    assert _convert([1.0], "mg/kg dw")[1:] == ("mg/kg", "mass fraction")  # dry basis dropped
    assert _convert([1.0], "%")[1:] == ("%", "percent")
    assert _convert([7.0], "pH units")[1:] == ("pH", "pH")
    assert _convert([10.0], "µS/cm")[1:] == ("µS/cm", "conductivity")
    assert _convert([1.0], "mg/l")[1:] == ("mg/L", "concentration in water")


def _env_file(tmp_path, text):
    (tmp_path / "c.csv").write_text(COMMUNITY.to_csv(index=False), encoding="utf-8")
    (tmp_path / "e.csv").write_text(text, encoding="utf-8")
    return tmp_path / "c.csv", tmp_path / "e.csv"


def test_a_units_row_is_read_and_values_converted(tmp_path):
    c, e = _env_file(tmp_path, "site,Cu,Zn,pH,habitat\n,µg/g,µg/kg,pH,\na,1,1000,7.1,pool\n"
                     "b,2,<500,7.2,riffle\nc,3,3000,6.9,pool\n")
    s = gradients.read_survey(c, e, censored="half-limit")
    assert s.units == {"Cu": "mg/kg", "Zn": "mg/kg", "pH": "pH"}
    assert s.quantities == {"Cu": "mass fraction", "Zn": "mass fraction", "pH": "pH"}
    assert s.environment["Zn"].tolist() == pytest.approx([1.0, 0.25, 3.0])  # <500 µg/kg: 0.5 mg/kg
    assert s.detection_limits.loc["b", "Zn"] == pytest.approx(0.5)
    actions = [d.action for d in s.log]
    assert "units-row" in actions and "units" in actions
    units = [d for d in s.log if d.action == "units"]
    assert any("Zn (mass fraction): 3 value(s) from µg/kg to mg/kg (1 µg/kg = 0.001 mg/kg)"
               in d.detail for d in units)


def test_a_units_row_may_say_unit_in_the_site_column(tmp_path):
    c, e = _env_file(tmp_path, "site,Cu,EC\nunit,mg/kg,mS/m\na,1,2\nb,2,3\nc,3,4\n")
    s = gradients.read_survey(c, e)
    assert s.units == {"Cu": "mg/kg", "EC": "µS/cm"}
    assert s.environment["EC"].tolist() == pytest.approx([20.0, 30.0, 40.0])


def test_a_row_of_numbers_is_not_a_units_row(tmp_path):
    c, e = _env_file(tmp_path, "site,Cu\n,5\na,1\nb,2\nc,3\n")
    with pytest.raises(InputError, match="site"):
        gradients.read_survey(c, e)


def test_units_given_as_a_mapping_and_in_a_project_file(tmp_path):
    env = pd.DataFrame({"site": ["a", "b", "c"], "Cu": [1.0, 2.0, 3.0]})
    s = gradients.Survey(COMMUNITY, env, units={"Cu": "g/kg"})
    assert s.environment["Cu"].tolist() == [1000.0, 2000.0, 3000.0]
    _env_file(tmp_path, "site,Cu\na,1\nb,2\nc,3\n")
    (tmp_path / "p.toml").write_text(
        'title = "t"\n[inputs]\ncommunity = "c.csv"\nenvironment = "e.csv"\n'
        '[environment.units]\nCu = "µg/kg"\n[environment.quantities]\nCu = "mass fraction"\n',
        encoding="utf-8")
    from gradients.report._run import read_project_survey

    survey = read_project_survey(gradients.load_project(tmp_path / "p.toml"))
    assert survey.environment["Cu"].tolist() == pytest.approx([0.001, 0.002, 0.003])
    assert survey.units == {"Cu": "mg/kg"}


def test_unknown_unit_names_column_rows_and_fix():
    env = pd.DataFrame({"site": ["a", "b", "c"], "Cu": [1.0, 2.0, 3.0]})
    with pytest.raises(InputError, match=r"column 'Cu' has the unit 'mgkg' .*site 'a'.* Write "
                       r"it as a unit such as mg/kg") as info:
        gradients.Survey(COMMUNITY, env, units={"Cu": "mgkg"})
    assert info.value.columns == ("Cu",)
    with pytest.raises(InputError, match=r"'ppm' .* Write 'mg/kg' or 'mg/L' instead"):
        gradients.Survey(COMMUNITY, env, units={"Cu": "ppm"})


def test_unconvertible_unit_names_column_rows_and_fix():
    env = pd.DataFrame({"site": ["a", "b", "c"], "Cu": [1.0, 2.0, 3.0]})
    with pytest.raises(InputError, match=r"column 'Cu' is declared as mass fraction \(in mg/kg\) "
                       r"but site 'a'.* are in 'mg/L', which cannot be converted to mg/kg\. "
                       r"Correct the unit"):
        gradients.Survey(COMMUNITY, env, units={"Cu": "mg/L"},
                         quantities={"Cu": "mass fraction"})


def test_mixed_quantities_in_one_column_name_the_rows():
    with pytest.raises(InputError, match=r"column 'x' mixes quantities .*'mg/kg' \(mass "
                       r"fraction\) in row 0, row 2; 'mg/L' \(concentration in water\) in row 1"):
        convert_column(np.array([1.0, 2.0, 3.0]), ["mg/kg", "mg/L", "mg/kg"], column="x",
                       source="t", locate=lambda i: f"row {i}")


def test_option_and_units_row_must_agree(tmp_path):
    c, e = _env_file(tmp_path, "site,Cu\n,mg/kg\na,1\nb,2\nc,3\n")
    with pytest.raises(InputError, match="units row but in 'µg/L' by `units`"):
        gradients.read_survey(c, e, units={"Cu": "µg/L"})
    with pytest.raises(InputError, match="unknown quantities 'mass'"):
        gradients.read_survey(c, e, quantities={"Cu": "mass"})
    with pytest.raises(InputError, match="not in the environment"):
        gradients.read_survey(c, e, units={"Zn": "mg/kg"})
