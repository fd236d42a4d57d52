"""Guideline quotients against a screening table: a small table worked by hand.

By hand (the definition of a quotient against a screening value, MacDonald, Ingersoll & Berger
2000, Arch. Environ. Contam. Toxicol. 39:20, mean probable-effect quotient): quotient =
concentration / screening value; mean quotient = mean of the quotients over the variables
compared at a site; an exceedance is a quotient above 1.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import gradients
from gradients import InputError
from gradients.data._demo import DEMO_DIR
from gradients.data._screening import CAUTION

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "examples" / "screening" / "freshwater_sediment_consensus.csv"

SCREEN = pd.DataFrame({
    "variable": ["Cu", "Zn", "Cu", "Zn", "Hg"],
    "value": [100.0, 400.0, 25.0, 100.0, 1.0],
    "unit": ["mg/kg", "mg/kg", "mg/kg", "mg/kg", "mg/kg"],
    "kind": ["probable effect", "probable effect", "threshold", "threshold", "probable effect"],
    "source": ["hand", "hand", "hand", "hand", "hand"],
})
ENV = pd.DataFrame({"Cu": [50.0, 150.0, 300.0, np.nan], "Zn": [200.0, 200.0, 800.0, 600.0],
                    "pH": [7.0, 7.1, 6.9, 7.3]}, index=pd.Index(list("abcd"), name="site"))


def test_mean_quotients_and_exceedances_equal_a_hand_computation():
    r = gradients.guideline_quotients(ENV, SCREEN, units={"Cu": "mg/kg", "Zn": "mg/kg"})
    # by hand: Cu/100 and Zn/400
    # a: 0.5, 0.5 -> mean 0.5, none above 1; b: 1.5, 0.5 -> 1.0, one; c: 3, 2 -> 2.5, two;
    # d: Cu missing, 1.5 -> 1.5 over one variable, one
    assert r.table["mean_quotient"].tolist() == pytest.approx([0.5, 1.0, 2.5, 1.5])
    assert r.table["n_exceeded"].tolist() == [0, 1, 2, 1]
    assert r.table["n_compared"].tolist() == [2, 2, 2, 1]
    assert r.table["max_quotient"].tolist() == pytest.approx([0.5, 1.5, 3.0, 1.5])
    assert r.table["exceedance"].tolist() == [r.exceedance_classes[i] for i in (0, 1, 2, 1)]
    assert r.exceeds.loc["b"].tolist() == [True, False]
    # per variable (by hand): Cu above 100 at b and c; Zn above 400 at c and d
    ex = r.exceedances
    assert ex["n_exceeded"].to_dict() == {"Cu": 2, "Zn": 2}
    assert ex["n_compared"].to_dict() == {"Cu": 3, "Zn": 4}
    assert r.notes[0] == CAUTION
    assert r.unmeasured == ("Hg",)
    assert any("Hg" in n and "not measured" in n for n in r.notes)


def test_one_kind_at_a_time():
    r = gradients.guideline_quotients(ENV, SCREEN, kind="threshold",
                                      units={"Cu": "mg/kg", "Zn": "mg/kg"})
    # by hand: Cu/25 and Zn/100 at a: 2 and 2 -> mean 2
    assert r.table.loc["a", "mean_quotient"] == pytest.approx(2.0)
    assert r.unmeasured == ()
    with pytest.raises(InputError, match=r"no values of kind 'lowest effect'.*'probable effect', "
                       r"'threshold'"):
        gradients.guideline_quotients(ENV, SCREEN, kind="lowest effect")


def test_screening_values_are_converted_to_the_column_unit():
    # by hand: 100 mg/kg = 100 µg/g (1 mg/kg = 1 µg/g) and 400 mg/kg = 0.4 g/kg
    r = gradients.guideline_quotients(ENV, SCREEN, units={"Cu": "µg/g", "Zn": "g/kg"})
    assert r.values.loc["Cu", "column_value"] == pytest.approx(100.0)
    assert r.values.loc["Zn", "column_value"] == pytest.approx(0.4)
    with pytest.raises(InputError, match=r"'Cu' is in 'mg/kg', which cannot be converted to "
                       r"'mg/L'"):
        gradients.guideline_quotients(ENV, SCREEN, units={"Cu": "mg/L"})


def test_a_survey_gives_its_own_units_and_censored_values():
    survey = gradients.demo_survey()
    r = gradients.guideline_quotients(survey, EXAMPLE)
    assert r.values["column_unit"].tolist() == ["mg/kg"] * 4  # the example's "mg/kg dw"
    assert set(r.unmeasured) == {"As", "Cr", "Hg", "Ni"}
    cu = survey.environment["Cu"] / 149.0  # by hand: PEC of copper
    assert r.quotients["Cu"].to_numpy() == pytest.approx(cu.to_numpy())
    assert any("below a detection limit" in n for n in r.notes)


def test_bad_screening_tables_are_clear_errors():
    with pytest.raises(InputError, match=r"has no column.*'source'"):
        gradients.guideline_quotients(ENV, SCREEN.drop(columns="source"))
    with pytest.raises(InputError, match="not a positive number"):
        gradients.guideline_quotients(ENV, SCREEN.assign(value=[100.0, -1, 25, 100, 1]))
    with pytest.raises(InputError, match="more than once"):
        gradients.guideline_quotients(ENV, pd.concat([SCREEN, SCREEN.iloc[:1]]))
    with pytest.raises(InputError, match="the source is empty"):
        gradients.guideline_quotients(ENV, SCREEN.assign(source=["hand", "", "x", "x", "x"]))
    with pytest.raises(InputError, match="None of the screening variables"):
        gradients.guideline_quotients(ENV[["pH"]], SCREEN)
    with pytest.raises(InputError, match="the unit 'parts'"):
        gradients.guideline_quotients(ENV, SCREEN.assign(unit="parts"))


def test_the_example_table_holds_the_consensus_values():
    # from memory: MacDonald, Ingersoll & Berger (2000), Arch. Environ. Contam. Toxicol. 39:20,
    # consensus TEC / PEC in mg/kg dry weight
    expected = {"As": (9.79, 33.0), "Cd": (0.99, 4.98), "Cr": (43.4, 111.0),
                "Cu": (31.6, 149.0), "Pb": (35.8, 128.0), "Hg": (0.18, 1.06),
                "Ni": (22.7, 48.6), "Zn": (121.0, 459.0)}
    table = pd.read_csv(EXAMPLE)
    got = {v: (float(table.query("variable == @v and kind == 'threshold'")["value"].iloc[0]),
               float(table.query("variable == @v and kind == 'probable effect'")["value"].iloc[0]))
           for v in expected}
    assert got == expected
    assert table["note"].eq("check against the publication before use").all()
    assert table["source"].str.contains("MacDonald, Ingersoll & Berger \\(2000\\)").all()
    # the demo's copy is the same file
    assert (DEMO_DIR / "screening.csv").read_bytes() == EXAMPLE.read_bytes()
