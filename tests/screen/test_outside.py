"""The screen against outside references: molar masses (molmass, IUPAC atomic weights), a critical
potassium limit and the adult blood pressure categories of a guideline."""

from __future__ import annotations

import math

import pyarrow as pa
import pytest

from tubulo.screen.prepare import prepare
from tubulo.screen.run import screen_table

molmass = pytest.importorskip("molmass")


def _value(sk, table, key):
    prep = prepare(table, "wide", sk)
    assert not prep.problem.any()
    return float(prep.batch.values[sk.value_index[key], 0])


@pytest.mark.parametrize("column,key,number,formula,per_l", [
    # mg/dL -> mmol/L: x mg/dL = 10 x mg/L; / molar mass (g/mol) -> mmol/L
    ("serum.calcium [mg/dL]", "serum.calcium", 9.4, "Ca", 1.0),
    ("serum.magnesium [mg/dL]", "serum.magnesium", 1.9, "Mg", 1.0),
    ("serum.glucose [mg/dL]", "serum.glucose", 90.0, "C6H12O6", 1.0),
    # creatinine mg/dL -> umol/L: 10 mg/L / M g/mol = mmol/L, x 1000 umol/mmol
    ("serum.creatinine [mg/dL]", "serum.creatinine", 1.2, "C4H7N3O", 1000.0),
])
def test_mass_units_convert_with_the_molar_mass(sk, column, key, number, formula, per_l):
    # molar masses from the molmass package (IUPAC standard atomic weights)
    mass = molmass.Formula(formula).mass
    got = _value(sk, pa.table({"case": ["m"], column: [number]}), key)
    assert math.isclose(got, number * 10 / mass * per_l, rel_tol=2e-4)


def _row(sk, **cols):
    table = pa.table({"case": ["r"], **{k: [v] for k, v in cols.items()}})
    return screen_table(table, "wide", sk).to_pylist()[0]


def test_potassium_critical_limit(sk):
    # serum potassium < 2.5 or > 6.5 mmol/L is a critical value (Kost GJ 1990 JAMA; from memory)
    for value, critical in ((2.4, True), (2.6, False), (6.4, False), (6.6, True)):
        row = _row(sk, **{"age": 45.0, "serum.potassium [mmol/L]": value})
        assert (row["critical_keys"] == "serum.potassium") is critical, value


@pytest.mark.parametrize("bp,high", [("118/76", False), ("128/78", False), ("132/78", True), ("118/84", True),
                                     ("145/95", True)])
def test_adult_blood_pressure_categories(sk, bp, high):
    # adults: stage 1 hypertension from 130 systolic or 80 diastolic; 120-129 with < 80 is "elevated",
    # not hypertension (Whelton PK et al. 2017 ACC/AHA guideline, Hypertension; from memory)
    row = _row(sk, **{"age": 50.0, "sex": "female", "vitals.blood_pressure [mmHg]": bp})
    assert ("blood_pressure=high" in (row["flags"] or "")) is high


@pytest.mark.parametrize("ph,pco2,hco3,state", [(7.25, 70.0, 30.0, "respiratory_acidosis"),
                                                 (7.52, 26.0, 21.0, "respiratory_alkalosis")])
def test_respiratory_acid_base_disorders_are_flagged(sk, ph, pco2, hco3, state):
    # a primary respiratory disorder: pH and pCO2 move in opposite directions, bicarbonate compensates
    # only partly (Berend K, de Vries APJ, Gans ROB 2014 N Engl J Med; from memory)
    row = _row(sk, **{"age": 50.0, "sex": "male", "blood_gas.ph": ph, "blood_gas.pco2 [mmHg]": pco2,
                      "blood_gas.bicarbonate [mmol/L]": hco3, "serum.sodium [mmol/L]": 140.0,
                      "serum.chloride [mmol/L]": 102.0, "serum.bicarbonate [mmol/L]": hco3})
    assert row["error"] is None
    assert f"acid_base={state}" in (row["flags"] or "").split("; ")


def test_unremarkable_states_are_not_flagged(sk):
    # normal potassium and a normal blood gas: nothing to flag
    row = _row(sk, **{"age": 50.0, "sex": "male", "serum.potassium [mmol/L]": 4.2, "blood_gas.ph": 7.40,
                      "blood_gas.pco2 [mmHg]": 40.0, "blood_gas.bicarbonate [mmol/L]": 24.0,
                      "serum.sodium [mmol/L]": 140.0, "serum.chloride [mmol/L]": 104.0,
                      "serum.bicarbonate [mmol/L]": 24.0})
    assert row["error"] is None and row["flags"] is None
