"""Findings: thresholds against their published values, gating, unobserved-is-not-normal."""

from __future__ import annotations

import pytest

from tubulo.case import parse_case
from tubulo.findings import derive_findings
from tubulo.workup import assess


def findings(**sections):
    data = {"case": "f", "patient": {"age": "40 y", "sex": "female"}}
    data.update(sections)
    return derive_findings(assess(parse_case(data)))


def test_missing_inputs_leave_variables_unobserved():
    f = findings(serum={"sodium": "140 mmol/L"})
    assert set(f.variables) == {"serum_sodium"}
    assert f.state("serum_potassium") is None  # unobserved, not "normal"


def _femg_case(u_mg):
    # FEMg = U_Mg x S_Cr / (0.7 x S_Mg x U_Cr) x 100 (Elisaf et al. 1997 Miner Electrolyte Metab)
    return findings(serum={"magnesium": "0.5 mmol/L", "creatinine": "88.4 umol/L"},
                    urine={"magnesium": f"{u_mg} mmol/L", "creatinine": "8.84 mmol/L"})


def test_femg_above_2_percent_is_renal_wasting_elisaf_1997():
    # with S_Cr/U_Cr = 0.01 and 0.7 x 0.5 = 0.35: FEMg = U_Mg / 0.35 %
    assert _femg_case(0.35 * 2.2).state("renal_mg_handling") == "wasting"   # 2.2 %
    assert _femg_case(0.35 * 1.8).state("renal_mg_handling") == "conserving"  # 1.8 %


def test_renal_mg_handling_is_gated_on_hypomagnesaemia():
    f = findings(serum={"magnesium": "0.9 mmol/L", "creatinine": "88.4 umol/L"},
                 urine={"magnesium": "3 mmol/L", "creatinine": "8.84 mmol/L"})
    assert f.state("serum_magnesium") == "normal" and f.state("renal_mg_handling") is None


def test_ttkg_below_7_in_hyperkalaemia_is_low_secretion_ethier_1990():
    # TTKG = (U_K / S_K) / (U_osm / S_osm) (Ethier et al. 1990 Am J Kidney Dis); here U_osm/S_osm = 2
    def case(u_k):
        return findings(serum={"potassium": "6.0 mmol/L", "osmolality": "290 mOsm/kg"},
                        urine={"potassium": f"{u_k} mmol/L", "osmolality": "580 mOsm/kg", "sodium": "60 mmol/L"})
    assert case(6.0 * 2 * 6.5).state("renal_k_secretion") == "low"           # TTKG 6.5
    assert case(6.0 * 2 * 7.5).state("renal_k_secretion") == "appropriate"   # TTKG 7.5


def test_positive_urine_anion_gap_in_normal_gap_acidosis_is_impaired_acidification_batlle_1988():
    base = {"sodium": "140 mmol/L", "chloride": "115 mmol/L", "bicarbonate": "15 mmol/L", "potassium": "3.2 mmol/L",
            "albumin": "40 g/L"}
    impaired = findings(serum=base, blood_gas={"ph": 7.29, "pco2": "31 mmHg", "bicarbonate": "15 mmol/L"},
                        urine={"sodium": "50 mmol/L", "potassium": "30 mmol/L", "chloride": "60 mmol/L", "ph": 6.8})
    intact = findings(serum=base, blood_gas={"ph": 7.29, "pco2": "31 mmHg", "bicarbonate": "15 mmol/L"},
                      urine={"sodium": "50 mmol/L", "potassium": "30 mmol/L", "chloride": "110 mmol/L", "ph": 6.0})
    assert impaired.state("acid_base") == "nag_acidosis"
    assert impaired.state("urinary_acidification") == "impaired"  # UAG = 50 + 30 - 60 = +20
    assert intact.state("urinary_acidification") == "intact"  # UAG = -30


def test_high_anion_gap_acidosis():
    f = findings(serum={"sodium": "140 mmol/L", "chloride": "100 mmol/L", "bicarbonate": "12 mmol/L",
                        "albumin": "40 g/L"},
                 blood_gas={"ph": 7.25, "pco2": "27 mmHg", "bicarbonate": "12 mmol/L"})
    assert f.state("acid_base") == "hag_acidosis"  # AG = 140 - 100 - 12 = 28


@pytest.mark.parametrize("egfr_creatinine,category", [("60 umol/L", "normal"), ("400 umol/L", "severe")])
def test_egfr_categories_kdigo_2012(egfr_creatinine, category):
    # KDIGO 2012: G1 >= 90, G4-5 < 30 mL/min/1.73 m2 (CKD-EPI 2021 creatinine, 40-year-old woman)
    assert findings(serum={"creatinine": egfr_creatinine}).state("egfr_category") == category


@pytest.mark.parametrize("value,state", [("59 mmol/L", "normal"), ("60 mmol/L", "high")])
def test_sweat_chloride_60_farrell_2017(value, state):
    # Farrell PM et al. 2017 J Pediatr: sweat chloride >= 60 mmol/L is consistent with cystic fibrosis
    assert findings(tests={"sweat_chloride": value}).state("sweat_chloride") == state


def test_feature_sets_a_variable_only_when_no_measurement_does():
    f = findings(features=["HP:0002900 Hypokalemia"])
    assert f.state("serum_potassium") == "low" and f.variables["serum_potassium"].origin == "feature"
    g = findings(features=["HP:0002900 Hypokalemia"], serum={"potassium": "4.0 mmol/L"})
    assert g.state("serum_potassium") == "normal"


def test_urine_calcium_uses_age_specific_limit_matos_1997():
    # Matos et al. 1997 J Pediatr (reference_intervals.yaml): the upper Ca/creatinine limit falls with age;
    # 1.0 mmol/mmol is within limits at 2 y (limit 1.4) and high at 10 y (limit 0.7).
    def case(age):
        return derive_findings(assess(parse_case({"case": "c", "patient": {"age": age, "sex": "male"},
                                                  "urine": {"calcium": "1.0 mmol/L", "creatinine": "1.0 mmol/L"}})))
    assert case("2.5 y").state("urine_calcium") == "normal"
    assert case("10 y").state("urine_calcium") == "high"


def _cccr_case(u_ca, s_ca="2.75 mmol/L"):
    # CCCR = (U_Ca x S_Cr) / (S_Ca x U_Cr) (Christensen SE et al. 2008 Clin Endocrinol (Oxf)); with
    # S_Cr/U_Cr = 0.01 and S_Ca 2.75 mmol/L, CCCR = U_Ca / 275
    return findings(serum={"calcium": s_ca, "albumin": "42 g/L", "creatinine": "88.4 umol/L"},
                    urine={"calcium": f"{u_ca} mmol/L", "creatinine": "8.84 mmol/L"})


def test_calcium_clearance_ratio_below_0_01_and_above_0_02_christensen_2008():
    assert _cccr_case(275 * 0.008).state("calcium_clearance_ratio") == "low"
    assert _cccr_case(275 * 0.015).state("calcium_clearance_ratio") == "intermediate"
    assert _cccr_case(275 * 0.025).state("calcium_clearance_ratio") == "high"


def test_calcium_clearance_ratio_is_read_only_in_hypercalcaemia():
    f = _cccr_case(275 * 0.008, s_ca="2.35 mmol/L")
    assert f.state("serum_calcium") == "normal" and f.state("calcium_clearance_ratio") is None


def _renin_case(age, renin, aldosterone="400 pmol/L"):
    return derive_findings(assess(parse_case({"case": "r", "patient": {"age": age, "sex": "male"},
                                              "serum": {"renin_activity": renin, "aldosterone": aldosterone}})))


def test_renin_and_aldosterone_read_against_the_adult_interval():
    # adult intervals of knowledge/reference_intervals.yaml: renin activity 0.5-4.0 ng/mL/h,
    # aldosterone 100-830 pmol/L (common practice; from memory)
    f = _renin_case("40 y", "0.2 ng/mL/h", "60 pmol/L")
    assert f.state("renin") == "low" and f.state("aldosterone") == "low"
    assert _renin_case("40 y", "2 ng/mL/h").state("renin") == "normal"


def test_in_a_child_only_a_value_below_the_adult_lower_limit_is_read():
    # children run higher renin and aldosterone than adults (no paediatric interval is shipped):
    # a suppressed value is low at any age, any other value is left unobserved, never read as normal
    f = _renin_case("10 y", "0.1 ng/mL/h", "60 pmol/L")
    assert f.state("renin") == "low" and f.state("aldosterone") == "low"
    f = _renin_case("10 y", "2 ng/mL/h", "400 pmol/L")
    assert f.state("renin") is None and f.state("aldosterone") is None


@pytest.mark.parametrize("value,state", [("25 nmol/L", "deficient"), ("40 nmol/L", "insufficient"),
                                         ("80 nmol/L", "sufficient"), ("300 nmol/L", "toxic"),
                                         ("10 ng/mL", "deficient"), ("110 ng/mL", "toxic")])
def test_vitamin_d_status_munns_2016(value, state):
    # deficient < 30 nmol/L, insufficient 30-50, toxicity > 250 nmol/L (Munns CF et al. 2016 J Clin
    # Endocrinol Metab); 1 ng/mL = 2.496 nmol/L (molar mass 400.64 g/mol)
    assert findings(serum={"calcidiol": value}).state("serum_calcidiol") == state
