"""Unit conversion: molar-mass factors against an outside reference library, and unit spellings."""

from __future__ import annotations

import math

import pytest
from molmass import Formula

from tubulo.case import parse_case
from tubulo.errors import CaseError
from tubulo.units import analyte_specs, convert, unit_table


def _with_formula():
    return [(k, s) for k, s in analyte_specs().items() if s.formula]


@pytest.mark.parametrize("key,spec", _with_formula(), ids=[k for k, _ in _with_formula()])
def test_molar_mass_matches_molmass(key, spec):
    # molmass (Gohlke, PyPI) computes average masses from IUPAC standard atomic weights.
    expected = Formula(spec.formula).mass
    assert spec.molar_mass == pytest.approx(expected, rel=2e-3), (key, spec.formula, expected)


def test_mass_to_molar_factors_follow_from_molmass():
    # mg/dL -> mmol/L is 10 / M (g/mol); molmass gives M independently of our table.
    table = unit_table()
    for key in ("serum.calcium", "serum.magnesium", "serum.glucose", "serum.uric_acid", "serum.creatinine"):
        spec = analyte_specs()[key]
        m = Formula(spec.formula).mass
        expected = 10 / m if spec.unit == "mmol/L" else 10_000 / m  # umol/L for creatinine
        assert table[key]["mg/dL"] == pytest.approx(expected, rel=2e-3), key


def test_periodictable_agrees_for_elements():
    import periodictable

    for key, symbol in (("serum.sodium", "Na"), ("serum.potassium", "K"), ("serum.magnesium", "Mg"),
                        ("serum.calcium", "Ca"), ("serum.phosphate", "P")):
        assert analyte_specs()[key].molar_mass == pytest.approx(getattr(periodictable, symbol).mass, rel=1e-3)


@pytest.mark.parametrize("key,text,expected", [
    # The worked figures below follow from the molar masses (checked above) and the definition of mEq.
    ("serum.magnesium", "1.9 mg/dL", 1.9 * 10 / 24.305),
    ("serum.magnesium", "1.6 mEq/L", 0.8),
    ("serum.creatinine", "0.7 mg/dL", 0.7 * 88.4),
    ("serum.aldosterone", "15 ng/dL", 15 * 10_000 / 360.45),
    ("serum.pth", "45 pg/mL", 45 / 9.425),
    ("blood_gas.pco2", "5.9 kPa", 5.9 * 760 / 101.325),  # 1 atm = 760 mmHg = 101.325 kPa (definition)
    ("serum.phosphate", "0.78 mmol/L", 0.78),
    ("serum.creatinine", "62 umol/L", 62.0),
    ("serum.creatinine", "62 µmol/L", 62.0),
    ("serum.urea", "14 mg/dL", 14 * 10 / 60.056),
])
def test_quantities_convert_to_internal_unit(key, text, expected):
    from tubulo.units import parse_number_unit

    q = parse_number_unit(text)
    assert convert(q.number, q.unit, analyte_specs()[key]) == pytest.approx(expected, rel=2e-3)


def test_bun_is_stored_as_urea():
    # BUN 14 mg/dL of urea nitrogen = 14 * 10 / 28.014 mmol/L urea (two N per urea)
    case = parse_case({"case": "x", "serum": {"bun": "14 mg/dL"}})
    assert case.value("serum.urea") == pytest.approx(14 * 10 / 28.014, rel=1e-3)


def test_spelling_outside_the_table_goes_through_pint():
    spec = analyte_specs()["serum.sodium"]
    assert convert(3220, "mg/L", spec) == pytest.approx(3220 / 22.99, rel=1e-3)


def test_unit_choice_does_not_change_the_value():
    a = parse_case({"case": "x", "serum": {"calcium": "2.35 mmol/L"}}).value("serum.calcium")
    b = parse_case({"case": "x", "serum": {"calcium": f"{2.35 * 40.078 / 10} mg/dL"}}).value("serum.calcium")
    c = parse_case({"case": "x", "serum": {"calcium": "4.7 mEq/L"}}).value("serum.calcium")
    assert math.isclose(a, b, rel_tol=1e-9) and math.isclose(a, c, rel_tol=1e-9)


def test_ages_in_clinic_units():
    for text, years in (("3 d", 3 / 365.25), ("6 wk", 42 / 365.25), ("14 mo", 14 / 12), ("24 y", 24.0)):
        assert parse_case({"case": "x", "patient": {"age": text}}).patient.age_years == pytest.approx(years, rel=1e-3)
    assert parse_case({"case": "x", "patient": {"age": 7}}).patient.age_years == 7


def _day(urine: dict) -> dict:
    return {"case": "d", "patient": {"age": "40 y", "weight": "70 kg"}, "urine": urine}


def test_a_24h_amount_is_read_as_the_concentration_in_the_days_volume():
    # 250 mg of calcium a day in 1.6 L: 250 / M(Ca) mmol a day (molmass) over 1.6 L
    ca = Formula("Ca").mass
    case = parse_case(_day({"sample": "24h", "volume": "1.6 L", "calcium": "250 mg/24h", "sodium": "160 mmol/d",
                            "creatinine": "12 mmol/24 h"}))
    assert case.measurements["urine.calcium"].value == pytest.approx(250 / ca / 1.6, rel=2e-3)
    assert case.measurements["urine.sodium"].value == pytest.approx(100.0)
    assert case.measurements["urine.creatinine"].value == pytest.approx(7.5)
    assert case.measurements["urine.calcium"].given == "250 mg/24h"  # what the user typed is kept
    assert any(n.path == "urine.calcium" and "1.6 L" in n.message for n in case.notes)


def test_the_volume_may_be_written_after_the_amount_and_in_millilitres():
    case = parse_case({"case": "d", "urine": {"potassium": "60 mmol/24h", "volume": "1500 mL", "sample": "24h"}})
    assert case.measurements["urine.potassium"].value == pytest.approx(40.0)


@pytest.mark.parametrize("urine", [
    {"sample": "spot", "calcium": "6 mmol/24h"},
    {"sample": "24h", "calcium": "6 mmol/24h"},  # no volume
    {"sample": "timed", "volume": "0.4 L", "calcium": "6 mmol/24h"},
    {"calcium": "6 mmol/24h", "volume": "1.5 L"},  # sample not said
], ids=["spot", "no-volume", "timed", "no-sample"])
def test_an_amount_per_day_needs_a_24h_sample_and_its_volume(urine):
    with pytest.raises(CaseError) as exc:
        parse_case(_day(urine))
    (problem,) = [p for p in exc.value.problems if p.path == "urine.calcium"]
    assert "amount per day" in problem.message and "urine.volume" in problem.message


def test_an_amount_per_day_is_no_serum_unit():
    with pytest.raises(CaseError) as exc:
        parse_case({"case": "d", "serum": {"calcium": "6 mmol/24h"}})
    assert exc.value.problems[0].path == "serum.calcium"
