"""Reference intervals, urine and TmP/GFR limits for age, and blood pressure categories.

Guideline cut-offs are checked against the guideline text (source beside each check; values
marked `# from memory` where written from memory); unit equivalents in the knowledge file are
checked by molar mass from `molmass` (IUPAC atomic weights).
"""

from __future__ import annotations

import copy
import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from molmass import Formula

from tubulo.errors import CaseError, KnowledgeError
from tubulo.indices import index_knowledge
from tubulo.paths import read_knowledge_yaml
from tubulo.reference import (
    BP_CATEGORIES,
    bp_category,
    classify,
    critical_limits,
    interval_analytes,
    parse_reference_knowledge,
    reference_interval,
    reference_tables,
    tmp_gfr_interval,
    urine_calcium_24h_limit,
    urine_calcium_creatinine_limit,
)

DAY = 1 / 365.25

CORE_BLOOD = (
    "serum.sodium", "serum.potassium", "serum.chloride", "serum.bicarbonate", "serum.calcium",
    "serum.ionized_calcium", "serum.magnesium", "serum.phosphate", "serum.alkaline_phosphatase",
    "serum.creatinine", "serum.uric_acid", "serum.glucose", "serum.osmolality", "serum.albumin",
    "serum.urea", "blood_gas.ph", "blood_gas.pco2",
)
ADULT_ONLY_OK = (
    "serum.pth", "serum.renin_activity", "serum.aldosterone", "serum.cortisol", "serum.tsh",
    "serum.calcitriol", "serum.calcidiol", "serum.fgf23",
)


# ---------------------------------------------------------------------------------------------
# The file itself
# ---------------------------------------------------------------------------------------------


def test_file_parses_and_every_row_has_a_source_of_an_accepted_form():
    tables = reference_tables()
    citation = re.compile(r"\b(19|20)\d\d\b")
    for section, by_analyte in tables.sections.items():
        for analyte, rows in by_analyte.items():
            for row in rows:
                assert row.source.strip(), (section, analyte)
                assert "common practice" in row.source or citation.search(row.source), (section, analyte, row.source)


@pytest.mark.parametrize("analyte", CORE_BLOOD)
def test_core_analytes_cover_every_age_and_sex(analyte):
    ages = [0, 27 * DAY, 28 * DAY, 29 * DAY, 0.5, 0.99, 1, 5, 11.99, 12, 13, 15, 17, 17.99, 18, 19, 40, 70, 100]
    for age in ages:
        for sex in ("female", "male", "unknown"):
            iv = reference_interval(analyte, age, sex)
            assert iv is not None, (analyte, age, sex)
            assert iv.low is not None and iv.high is not None and iv.low < iv.high


@pytest.mark.parametrize("analyte", ADULT_ONLY_OK)
def test_hormones_have_an_adult_interval(analyte):
    assert reference_interval(analyte, 40, "female") is not None


def test_units_match_the_analyte_and_index_contracts():
    """Each row's unit is the internal unit of its measurement (analytes.yaml) or index (indices.yaml)."""
    analytes = read_knowledge_yaml("analytes.yaml")["analytes"]
    index_units = {s.id: s.unit for s in index_knowledge().specs}
    for section, by_analyte in reference_tables().sections.items():
        for analyte, rows in by_analyte.items():
            expected = analytes[analyte]["unit"] if analyte in analytes else index_units.get(analyte)
            assert expected is not None, f"{section}: {analyte} is neither a measurement nor an index"
            assert {r.unit for r in rows} == {expected}, (section, analyte, expected)


# Molar masses by formula, from molmass: creatinine C4H7N3O, calcium Ca, citrate C6H5O7.
_M = {name: Formula(f).mass for name, f in (("creatinine", "C4H7N3O"), ("calcium", "Ca"), ("citrate", "C6H5O7"))}
# (analyte, unit of the source) -> factor from the source unit to the internal unit
_ALT_FACTORS = {
    ("urine_ca_creatinine", "mg/mg"): _M["creatinine"] / _M["calcium"],   # mg Ca/mg Cr -> mmol/mmol
    ("urine_ca_24h_per_kg", "mmol/kg/d"): _M["calcium"],                  # mmol/kg/d -> mg/kg/d
    ("urine_ca_24h", "mg/d"): 1 / _M["calcium"],                          # mg/d -> mmol/d
    ("urine_citrate_24h", "mg/d"): 1 / _M["citrate"],                     # mg/d -> mmol/d
}


def test_limits_stated_in_other_units_agree_by_molar_mass():
    raw = read_knowledge_yaml("reference_intervals.yaml")
    checked = 0
    for section in ("blood", "urine", "phosphate_handling"):
        for row in raw[section]:
            alt = row.get("alt")
            if not alt:
                continue
            factor = _ALT_FACTORS[(row["analyte"], alt["unit"])]
            assert row[alt["limit"]] == pytest.approx(alt["value"] * factor, rel=0.01), row
            checked += 1
    assert checked >= 8


# ---------------------------------------------------------------------------------------------
# Selection by age and sex
# ---------------------------------------------------------------------------------------------


def test_neonate_infant_boundary_at_28_days():
    a = reference_interval("serum.potassium", 27 * DAY, "male")
    b = reference_interval("serum.potassium", 29 * DAY, "male")
    assert a.group == "neonate" and b.group == "infant"
    assert reference_interval("serum.potassium", 28 * DAY, "male").group == "infant"  # half-open


def test_infant_child_boundary_at_1_year():
    assert reference_interval("serum.potassium", 0.99, "female").group == "infant"
    assert reference_interval("serum.potassium", 1.0, "female").group == "child"


def test_adolescent_adult_boundary_at_18_years():
    a = reference_interval("serum.creatinine", 17.99, "male")
    b = reference_interval("serum.creatinine", 18.0, "male")
    assert a.group == "adolescent" and b.group == "adult"
    assert (a.low, a.high) != (b.low, b.high)


def test_sex_specific_rows_and_union_when_sex_unknown():
    f = reference_interval("serum.creatinine", 40, "female")
    m = reference_interval("serum.creatinine", 40, "male")
    u = reference_interval("serum.creatinine", 40, "unknown")
    o = reference_interval("serum.creatinine", 40, "other")
    assert f.sex == "female" and m.sex == "male" and f.high < m.high
    assert (u.low, u.high) == (min(f.low, m.low), max(f.high, m.high)) == (o.low, o.high)
    assert "union" in u.note


def test_age_none_means_adult():
    iv = reference_interval("serum.phosphate", None, None)
    assert iv.group == "adult"
    assert reference_interval("no.such_analyte", 40, "male") is None


def test_classify_limits_are_inclusive():
    iv = reference_interval("serum.sodium", 40, "female")
    assert classify(iv.low, iv) == "normal" and classify(iv.high, iv) == "normal"
    assert classify(iv.low - 0.01, iv) == "low" and classify(iv.high + 0.01, iv) == "high"
    with pytest.raises(CaseError):
        classify(float("nan"), iv)


def test_bad_age_or_sex_is_a_case_error():
    with pytest.raises(CaseError) as err:
        reference_interval("serum.sodium", -2, "female")
    assert err.value.problems[0].path == "patient.age"
    with pytest.raises(CaseError) as err:
        reference_interval("serum.sodium", 4, "F")
    assert err.value.problems[0].path == "patient.sex"


# ---------------------------------------------------------------------------------------------
# Urine calcium, TmP/GFR, critical limits
# ---------------------------------------------------------------------------------------------


def test_urine_calcium_creatinine_limits_fall_with_age():
    ages = [0.1, 0.7, 1.5, 2.5, 4, 6, 9, 15, 30]
    highs = [urine_calcium_creatinine_limit(a, None).high for a in ages]
    assert highs == sorted(highs, reverse=True) and highs[0] > highs[-1]
    # Matos V et al. 1997 J Pediatr (from memory): 95th percentile 5-7 y about 0.8 mmol/mmol
    assert urine_calcium_creatinine_limit(6, "female").high == pytest.approx(0.8)  # from memory
    assert classify(1.0, urine_calcium_creatinine_limit(6, None)) == "high"
    assert classify(1.0, urine_calcium_creatinine_limit(1.5, None)) == "normal"


def test_adult_hypocalciuria_cut_off():
    # Blanchard A et al. 2017 Kidney Int: hypocalciuria, spot Ca/Cr < 0.2 mmol/mmol in adults (from memory)
    iv = urine_calcium_creatinine_limit(35, "male")
    assert iv.low == pytest.approx(0.2)  # from memory
    assert classify(0.1, iv) == "low"
    assert urine_calcium_creatinine_limit(8, "male").low is None  # no sourced lower limit in children


def test_hypercalciuria_per_kg():
    # common practice, no source: > 4 mg/kg/d (0.1 mmol/kg/d) is hypercalciuria
    iv = urine_calcium_24h_limit(10, None)
    assert iv.high == pytest.approx(4.0)
    assert classify(4.5, iv) == "high" and classify(3.9, iv) == "normal"


def test_tmp_gfr_limits_by_age():
    # Payne RB 1998 Ann Clin Biochem table (from memory): children 2-15 y 1.15-2.44 mmol/L;
    # adults 25-35 y men 1.00-1.35, women 0.96-1.44 mmol/L
    child = tmp_gfr_interval(8, "male")
    assert (child.low, child.high) == (pytest.approx(1.15), pytest.approx(2.44))  # from memory
    man = tmp_gfr_interval(30, "male")
    assert (man.low, man.high) == (pytest.approx(1.00), pytest.approx(1.35))  # from memory
    assert tmp_gfr_interval(0.5, None).low > tmp_gfr_interval(30, None).low
    assert classify(0.7, tmp_gfr_interval(8, None)) == "low"


def test_critical_limits():
    iv = critical_limits("serum.potassium", 50, "male")
    assert classify(7.0, iv) == "high" and classify(4.0, iv) == "normal"
    assert critical_limits("serum.renin_activity", 50, "male") is None
    # critical limits are wider than the reference interval
    ref = reference_interval("serum.potassium", 50, "male")
    assert iv.low < ref.low and iv.high > ref.high


# ---------------------------------------------------------------------------------------------
# Blood pressure
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("sbp,dbp,category", [
    # Whelton PK et al. 2017 ACC/AHA: normal < 120/< 80; elevated 120-129/< 80;
    # stage 1 130-139 or 80-89; stage 2 >= 140 or >= 90 (the higher category counts)
    (119, 79, "normal"),
    (120, 79, "elevated"),
    (129, 79, "elevated"),
    (130, 79, "stage1"),
    (119, 80, "stage1"),
    (139, 89, "stage1"),
    (140, 89, "stage2"),
    (139, 90, "stage2"),
    (160, 70, "stage2"),
    (89, 60, "low"),     # common practice, no source: adult systolic < 90 mmHg
    (90, 60, "normal"),
])
def test_adult_bp_edges(sbp, dbp, category):
    assert bp_category(sbp, dbp, 45, "female").category == category
    assert bp_category(sbp, dbp, None, None).category == category


def test_adolescents_from_13_use_adult_cut_offs():
    # Flynn JT et al. 2017 Pediatrics: >= 13 y the adult thresholds apply
    assert bp_category(120, 70, 13, "male").category == "elevated"
    assert "Whelton" in bp_category(120, 70, 13, "male").source
    assert "screening" in bp_category(120, 70, 12.99, "male").threshold_text


@pytest.mark.parametrize("sbp,dbp,sex,category", [
    # Flynn JT et al. 2017 Pediatrics simplified screening table, age 5 (from memory):
    # boys 103/63, girls 104/64; >= 130/80 at least stage 1; >= 140/90 at least stage 2
    (102, 62, "male", "normal"),
    (103, 62, "male", "elevated"),
    (102, 63, "male", "elevated"),
    (103, 63, "female", "normal"),
    (104, 63, "female", "elevated"),
    (103, 62, "unknown", "elevated"),   # sex not given: the lower of the two values
    (129, 79, "male", "elevated"),
    (130, 70, "male", "stage1"),
    (110, 80, "female", "stage1"),
    (140, 70, "male", "stage2"),
    (120, 90, "female", "stage2"),
])
def test_child_bp_screening_edges(sbp, dbp, sex, category):
    result = bp_category(sbp, dbp, 5.5, sex)
    assert result.category == category
    assert "Flynn" in result.source


@pytest.mark.parametrize("age,sbp,category", [
    # common practice, from memory: systolic < 60 (neonate), < 70 (infant), < 70 + 2 x age (1-10 y)
    (10 * DAY, 59, "low"),
    (0.5, 69, "low"),
    (5, 79, "low"),
    (5, 80, "normal"),
    (10, 89, "low"),
])
def test_hypotension_for_age(age, sbp, category):
    assert bp_category(sbp, 30, age, "female").category == category


def test_infants_are_unclassified_above_the_hypotension_limit():
    result = bp_category(95, 55, 0.5, "male")
    assert result.category == "unclassified" and "infant" in result.threshold_text


@pytest.mark.parametrize("sbp,dbp,field", [(80, 90, "vitals.systolic_bp"), (-1, 50, "vitals.systolic_bp"),
                                           (120, float("nan"), "vitals.diastolic_bp")])
def test_bad_bp_is_a_case_error(sbp, dbp, field):
    with pytest.raises(CaseError) as err:
        bp_category(sbp, dbp, 30, "male")
    assert err.value.problems[0].path == field


@settings(max_examples=300, deadline=None)
@given(sbp=st.floats(min_value=40, max_value=260), gap=st.floats(min_value=5, max_value=150),
       age=st.one_of(st.none(), st.floats(min_value=0, max_value=110)),
       sex=st.sampled_from(["female", "male", "other", "unknown", None]))
def test_bp_category_property(sbp, gap, age, sex):
    result = bp_category(sbp, max(sbp - gap, 1.0), age, sex)
    assert result.category in BP_CATEGORIES and result.threshold_text and result.source


@settings(max_examples=200, deadline=None)
@given(age=st.floats(min_value=0, max_value=110), sex=st.sampled_from(["female", "male", "other", "unknown"]),
       analyte=st.sampled_from(CORE_BLOOD))
def test_core_lookup_property(age, sex, analyte):
    iv = reference_interval(analyte, age, sex)
    assert iv is not None and iv.age_min <= age and (iv.age_max is None or age < iv.age_max)


# ---------------------------------------------------------------------------------------------
# Knowledge errors
# ---------------------------------------------------------------------------------------------


def _raw():
    return copy.deepcopy(read_knowledge_yaml("reference_intervals.yaml"))


def _row(data, section, analyte, n=0):
    return [r for r in data[section] if r["analyte"] == analyte][n]


@pytest.mark.parametrize("mutate,words", [
    (lambda d: _row(d, "blood", "serum.sodium").pop("source"), ["row 1", "serum.sodium", "'source'"]),
    (lambda d: _row(d, "blood", "serum.sodium").update(low=150), ["serum.sodium", "'low'", "above high"]),
    (lambda d: _row(d, "blood", "serum.alkaline_phosphatase", 1).update(age_min="10d"), ["serum.alkaline_phosphatase", "overlap"]),
    (lambda d: _row(d, "blood", "serum.creatinine", 8).update(sex="any"), ["serum.creatinine", "overlap"]),
    (lambda d: _row(d, "blood", "serum.sodium").update(group="toddler"), ["serum.sodium", "'group'"]),
    (lambda d: _row(d, "blood", "serum.sodium").update(group="adult"), ["serum.sodium", "not within group"]),
    (lambda d: _row(d, "blood", "serum.sodium", 2).update(unit="mEq/L"), ["serum.sodium", "'unit'"]),
    (lambda d: _row(d, "blood", "serum.sodium").update(sex="f"), ["serum.sodium", "'sex'"]),
    (lambda d: _row(d, "blood", "serum.sodium").update(age_max="3 weeks"), ["serum.sodium", "'age_max'"]),
    (lambda d: d["urine"].append(copy.deepcopy(_row(d, "blood", "serum.sodium"))), ["serum.sodium", "already"]),
    (lambda d: d["blood_pressure"]["child_screening"]["rows"].pop(3), ["child_screening", "rows"]),
    (lambda d: d["blood_pressure"]["adult"].pop("stage2_diastolic"), ["blood_pressure.adult", "stage2_diastolic"]),
])
def test_knowledge_errors_name_file_row_and_field(mutate, words):
    data = _raw()
    mutate(data)
    with pytest.raises(KnowledgeError) as err:
        parse_reference_knowledge(data)
    msg = str(err.value)
    assert msg.startswith("reference_intervals.yaml"), msg
    for w in words:
        assert w in msg, msg
