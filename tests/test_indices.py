"""Derived indices against their published formulas.

Each expected value is computed here by hand from the published formula (an independent
re-statement, not a call to tubulo's code) with the source named beside the check.  Molar masses
come from `molmass` and `periodictable` (IUPAC standard atomic weights), not from tubulo.
"""

from __future__ import annotations

import copy
import io
import math
import tokenize
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from molmass import Formula

import tubulo.indices as indices_module
from tubulo.errors import CaseError, KnowledgeError
from tubulo.indices import (
    IndexContext,
    compute_indices,
    index_knowledge,
    index_spec,
    parse_index_knowledge,
)
from tubulo.paths import read_knowledge_yaml

# Molar masses from molmass (IUPAC atomic weights), independent of tubulo's knowledge files.
M_CREATININE = Formula("C4H7N3O").mass  # g/mol
M_CALCIUM = Formula("Ca").mass


def umol_from_mg_dl_creatinine(mg_dl: float) -> float:
    """mg/dL -> umol/L for creatinine by molar mass: mg/dL x 10 (-> mg/L) / M x 1000."""
    return mg_dl * 10.0 / M_CREATININE * 1000.0


def mmol_from_mg_dl_creatinine(mg_dl: float) -> float:
    return mg_dl * 10.0 / M_CREATININE


def run(values: dict, **ctx) -> dict:
    return {ix.id: ix for ix in compute_indices(values, IndexContext(**ctx))}


REQUIRED_IDS = (
    "fe_na", "fe_k", "fe_cl", "fe_urea", "fe_mg", "fe_ca", "fe_phosphate", "trp", "tmp_gfr", "fe_urate",
    "ttkg", "urine_k_creatinine", "urine_ca_creatinine", "urine_mg_creatinine", "urine_anion_gap",
    "urine_osmolal_gap", "urine_ammonium_estimated", "anion_gap", "anion_gap_albumin_corrected",
    "delta_ratio", "expected_pco2", "corrected_calcium", "calculated_osmolality", "osmolal_gap", "egfr",
    "ca_cr_clearance_ratio", "urine_ca_24h_per_kg", "urine_k_24h", "urine_na_24h",
    "electrolyte_free_water_clearance",
)


# ---------------------------------------------------------------------------------------------
# Knowledge file and output shape
# ---------------------------------------------------------------------------------------------


def test_every_required_index_is_defined_with_text_and_source():
    specs = {s.id: s for s in index_knowledge().specs}
    missing = [i for i in REQUIRED_IDS if i not in specs]
    assert not missing, f"indices.yaml lacks {missing}"
    for s in specs.values():
        assert s.label and s.unit and s.formula and s.validity and s.source, s.id


def test_output_has_one_index_per_entry_in_file_order():
    out = compute_indices({}, IndexContext())
    assert [ix.id for ix in out] == [s.id for s in index_knowledge().specs]
    assert all(ix.value is None and not ix.valid and ix.reason for ix in out)


def test_python_holds_no_formula_constants():
    """Knowledge is data: the only numeric literals in tubulo/indices.py are 0 and 1."""
    src = Path(indices_module.__file__).read_text(encoding="utf-8")
    numbers = {tok.string for tok in tokenize.generate_tokens(io.StringIO(src).readline) if tok.type == tokenize.NUMBER}
    assert {float(n) for n in numbers} <= {0.0, 1.0}, numbers


def test_creatinine_factor_matches_molar_mass():
    # molmass: C4H7N3O 113.118 g/mol -> 1 mg/dL = 88.40 umol/L (Inker 2021 and Schwartz 2009 use 88.4)
    shared = index_knowledge().shared
    assert shared["creatinine_umol_per_mg_dl"] == pytest.approx(umol_from_mg_dl_creatinine(1.0), abs=0.01)


def test_calcium_mass_matches_periodictable():
    import periodictable

    assert index_knowledge().shared["calcium_mg_per_mmol"] == pytest.approx(periodictable.Ca.mass, abs=0.001)


def _param_keys() -> set[str]:
    keys: set[str] = set()
    for spec in index_knowledge().specs:
        for v in spec.params.values():
            for k in ([v] if isinstance(v, str) else v if isinstance(v, list) else []):
                if isinstance(k, str) and "." in k:
                    keys.add(k)
    return keys


def test_index_inputs_are_measurements_of_the_case_contract():
    analytes = read_knowledge_yaml("analytes.yaml")["analytes"]
    assert _param_keys() <= set(analytes)


# ---------------------------------------------------------------------------------------------
# Fractional excretions
# ---------------------------------------------------------------------------------------------


def test_fe_na_espinel_formula_with_creatinine_units():
    # Espinel CH 1976 JAMA: FENa = (U_Na x P_Cr) / (P_Na x U_Cr) x 100, creatinine in the same unit.
    # Case written in mg/dL creatinine: U_Cr 100 mg/dL, S_Cr 1.0 mg/dL, U_Na 40, S_Na 140.
    expected = 100 * (40 * 1.0) / (140 * 100)  # 0.2857 %
    r = run({"urine.sodium": 40, "serum.sodium": 140,
             "urine.creatinine": mmol_from_mg_dl_creatinine(100), "serum.creatinine": umol_from_mg_dl_creatinine(1.0)})
    assert r["fe_na"].value == pytest.approx(expected, rel=1e-9)
    assert r["fe_na"].valid and r["fe_na"].reason is None
    assert set(r["fe_na"].inputs) == {"urine.sodium", "serum.sodium", "urine.creatinine", "serum.creatinine"}


@pytest.mark.parametrize("index_id,urine,serum,u,s", [
    ("fe_k", "urine.potassium", "serum.potassium", 30.0, 4.0),        # common practice, no source
    ("fe_cl", "urine.chloride", "serum.chloride", 80.0, 100.0),       # common practice, no source
    ("fe_urea", "urine.urea", "serum.urea", 150.0, 8.0),              # Carvounis CP et al. 2002 Kidney Int
    ("fe_ca", "urine.calcium", "serum.calcium", 2.0, 2.4),            # common practice, no source
    ("fe_phosphate", "urine.phosphate", "serum.phosphate", 12.0, 1.1),  # common practice, no source
    ("fe_urate", "urine.uric_acid", "serum.uric_acid", 3.0, 0.30),    # common practice, no source
])
def test_fractional_excretion_formula(index_id, urine, serum, u, s):
    ucr, scr = 9.0, 75.0  # mmol/L, umol/L
    expected = 100 * (u * scr / 1000) / (s * ucr)
    r = run({urine: u, serum: s, "urine.creatinine": ucr, "serum.creatinine": scr})
    assert r[index_id].value == pytest.approx(expected, rel=1e-9)
    assert r[index_id].unit == "%"


def test_fe_mg_elisaf_formula():
    # Elisaf M et al. 1997 Miner Electrolyte Metab: FEMg = (U_Mg x P_Cr) / (0.7 x P_Mg x U_Cr) x 100
    # U_Mg 3 mmol/L, S_Mg 0.5 mmol/L, U_Cr 6 mmol/L, S_Cr 70 umol/L (0.070 mmol/L) -> 10 %
    expected = 100 * (3 * 0.070) / (0.7 * 0.5 * 6)
    assert expected == pytest.approx(10.0)
    r = run({"urine.magnesium": 3, "serum.magnesium": 0.5, "urine.creatinine": 6, "serum.creatinine": 70})
    assert r["fe_mg"].value == pytest.approx(expected, rel=1e-9)


def test_ca_cr_clearance_ratio():
    # Christensen SE et al. 2008 Clin Endocrinol (Oxf): CCCR = (U_Ca x S_Cr) / (S_Ca x U_Cr), a ratio
    expected = (1.0 * 0.080) / (2.8 * 8.0)
    r = run({"urine.calcium": 1.0, "serum.calcium": 2.8, "urine.creatinine": 8.0, "serum.creatinine": 80})
    assert r["ca_cr_clearance_ratio"].value == pytest.approx(expected, rel=1e-9)
    assert r["ca_cr_clearance_ratio"].value == pytest.approx(r["fe_ca"].value / 100, rel=1e-9)


def test_zero_creatinine_is_a_reason_not_a_crash():
    r = run({"urine.sodium": 40, "serum.sodium": 140, "urine.creatinine": 0, "serum.creatinine": 80})
    assert r["fe_na"].value is None and "urine.creatinine must be > 0" in r["fe_na"].reason


# ---------------------------------------------------------------------------------------------
# Phosphate: TRP and TmP/GFR
# ---------------------------------------------------------------------------------------------


def _payne_tmp_gfr(trp: float, sp: float) -> float:
    # Payne RB 1998 Ann Clin Biochem: TRP <= 0.86: TmP/GFR = TRP x Pp; else alpha x Pp,
    # alpha = 0.3 x TRP / (1 - 0.8 x TRP)
    return trp * sp if trp <= 0.86 else 0.3 * trp / (1 - 0.8 * trp) * sp


@pytest.mark.parametrize("up", [10.0, 4.0])  # TRP 0.854 (linear branch) and 0.942 (curved branch)
def test_trp_and_tmp_gfr_payne(up):
    sp, ucr, scr = 0.6, 8.0, 70.0
    trp = 1 - (up * scr / 1000) / (sp * ucr)
    r = run({"urine.phosphate": up, "serum.phosphate": sp, "urine.creatinine": ucr, "serum.creatinine": scr})
    assert r["trp"].value == pytest.approx(trp, rel=1e-9)
    assert r["tmp_gfr"].value == pytest.approx(_payne_tmp_gfr(trp, sp), rel=1e-9)
    assert r["tmp_gfr"].inputs["trp"] == pytest.approx(trp)


def test_tmp_gfr_branch_values_by_hand():
    # Payne 1998 relation worked by hand: TRP 0.941667, Pp 0.6 -> alpha = 0.2825/0.246667 = 1.14527
    r = run({"urine.phosphate": 4.0, "serum.phosphate": 0.6, "urine.creatinine": 8.0, "serum.creatinine": 70.0})
    assert r["tmp_gfr"].value == pytest.approx(1.14527 * 0.6, rel=1e-4)


def test_tmp_gfr_not_read_without_net_reabsorption():
    r = run({"urine.phosphate": 100.0, "serum.phosphate": 0.6, "urine.creatinine": 8.0, "serum.creatinine": 70.0})
    assert r["trp"].value < 0 and not r["trp"].valid
    assert r["tmp_gfr"].value is None and "TRP" in r["tmp_gfr"].reason


def test_tmp_gfr_missing_names_inputs():
    r = run({"serum.phosphate": 0.6})
    assert r["tmp_gfr"].value is None
    assert "urine.phosphate" in r["tmp_gfr"].reason and "trp" in r["tmp_gfr"].reason


# ---------------------------------------------------------------------------------------------
# Potassium: TTKG, urine K/creatinine
# ---------------------------------------------------------------------------------------------


TTKG_CASE = {"urine.potassium": 40, "serum.potassium": 2.8, "urine.osmolality": 600, "serum.osmolality": 290,
             "urine.sodium": 60}


def test_ttkg_ethier_formula():
    # Ethier JH et al. 1990 Am J Kidney Dis: TTKG = (U_K / P_K) / (U_osm / P_osm)
    expected = (40 / 2.8) / (600 / 290)
    r = run(TTKG_CASE)
    assert r["ttkg"].value == pytest.approx(expected, rel=1e-9)
    assert r["ttkg"].valid


@pytest.mark.parametrize("change,words", [
    ({"urine.osmolality": 250}, "osmolality"),  # urine osm <= serum osm (Ethier 1990 condition)
    ({"urine.osmolality": 290}, "osmolality"),  # equal is not above
    ({"urine.sodium": 25}, "sodium"),           # urine Na must be > 25 mmol/L
    ({"urine.sodium": 10}, "sodium"),
])
def test_ttkg_invalid_outside_conditions(change, words):
    r = run({**TTKG_CASE, **change})
    assert r["ttkg"].value is not None and not r["ttkg"].valid
    assert words in r["ttkg"].reason


def test_ttkg_without_urine_sodium_cannot_be_validated():
    case = dict(TTKG_CASE)
    del case["urine.sodium"]
    r = run(case)
    assert r["ttkg"].value is not None and not r["ttkg"].valid and "urine.sodium" in r["ttkg"].reason


def test_ttkg_uses_calculated_osmolality_when_not_measured():
    case = {k: v for k, v in TTKG_CASE.items() if k != "serum.osmolality"}
    case.update({"serum.sodium": 140, "serum.urea": 5, "serum.glucose": 5})  # 2 x 140 + 5 + 5 = 290
    r = run(case)
    assert r["ttkg"].value == pytest.approx((40 / 2.8) / (600 / 290), rel=1e-9)
    assert r["ttkg"].inputs["calculated_osmolality"] == pytest.approx(290)


def test_urine_k_creatinine():
    # Lin SH et al. 2004 Arch Intern Med: U_K / U_Cr in mmol/mmol
    r = run({"urine.potassium": 30, "urine.creatinine": 10})
    assert r["urine_k_creatinine"].value == pytest.approx(3.0)


def test_urine_ca_and_mg_creatinine():
    r = run({"urine.calcium": 2.4, "urine.magnesium": 3.0, "urine.creatinine": 6.0})
    assert r["urine_ca_creatinine"].value == pytest.approx(0.4)
    assert r["urine_mg_creatinine"].value == pytest.approx(0.5)


# ---------------------------------------------------------------------------------------------
# Urine acidification
# ---------------------------------------------------------------------------------------------


def test_urine_anion_gap_batlle():
    # Batlle DC et al. 1988 N Engl J Med: UAG = U_Na + U_K - U_Cl
    r = run({"urine.sodium": 40, "urine.potassium": 30, "urine.chloride": 100, "urine.ph": 5.5})
    assert r["urine_anion_gap"].value == pytest.approx(40 + 30 - 100)
    assert r["urine_anion_gap"].valid


@pytest.mark.parametrize("change,words", [({"urine.ph": 7.0}, "pH"), ({"urine.sodium": 10}, "sodium")])
def test_urine_anion_gap_invalid(change, words):
    # common practice, from memory: not read with bicarbonaturia (pH > 6.5) or urine Na < 20 mmol/L
    r = run({"urine.sodium": 40, "urine.potassium": 30, "urine.chloride": 100, "urine.ph": 5.5, **change})
    assert not r["urine_anion_gap"].valid and words in r["urine_anion_gap"].reason


def test_urine_osmolal_gap_and_ammonium():
    # common practice, no source: UOG = U_osm - (2 (U_Na + U_K) + U_urea + U_glucose); NH4 ~ UOG / 2
    base = {"urine.osmolality": 600, "urine.sodium": 50, "urine.potassium": 40, "urine.urea": 250}
    r = run(base)
    assert r["urine_osmolal_gap"].value == pytest.approx(600 - (2 * 90 + 250))
    assert r["urine_ammonium_estimated"].value == pytest.approx((600 - 430) / 2)
    r = run({**base, "urine.glucose": 20})
    assert r["urine_osmolal_gap"].value == pytest.approx(600 - (2 * 90 + 250 + 20))
    r = run({**base, "urine.osmolality": 300})
    assert r["urine_osmolal_gap"].value < 0
    assert not r["urine_ammonium_estimated"].valid and "below" in r["urine_ammonium_estimated"].reason


# ---------------------------------------------------------------------------------------------
# Serum acid-base
# ---------------------------------------------------------------------------------------------


ACID = {"serum.sodium": 140, "serum.chloride": 104, "serum.bicarbonate": 14, "serum.albumin": 30}


def test_anion_gap_and_albumin_correction():
    # Emmett M, Narins RG 1977 Medicine: AG = Na - (Cl + HCO3)
    # Figge J et al. 1998 Crit Care Med: AG rises 0.25 mmol/L per g/L albumin below 44 g/L (from memory)
    r = run(ACID)
    assert r["anion_gap"].value == pytest.approx(140 - (104 + 14))
    assert r["anion_gap_albumin_corrected"].value == pytest.approx(22 + 0.25 * (44 - 30))


def test_anion_gap_uses_blood_gas_bicarbonate_when_chemistry_missing():
    case = {k: v for k, v in ACID.items() if k != "serum.bicarbonate"}
    r = run({**case, "blood_gas.bicarbonate": 15})
    assert r["anion_gap"].value == pytest.approx(21)
    assert "blood_gas.bicarbonate" in r["anion_gap"].inputs


def test_delta_ratio():
    # Wrenn K 1990 Ann Emerg Med: (AG - 12) / (24 - HCO3); here with the albumin-corrected gap
    r = run(ACID)
    assert r["delta_ratio"].value == pytest.approx((25.5 - 12) / (24 - 14))
    assert "anion_gap_albumin_corrected" in r["delta_ratio"].inputs
    no_alb = {k: v for k, v in ACID.items() if k != "serum.albumin"}
    assert run(no_alb)["delta_ratio"].value == pytest.approx((22 - 12) / (24 - 14))


def test_delta_ratio_validity():
    r = run({**ACID, "serum.bicarbonate": 24})
    assert r["delta_ratio"].value is None and "not below 24" in r["delta_ratio"].reason
    r = run({"serum.sodium": 138, "serum.chloride": 112, "serum.bicarbonate": 16})  # AG 10, not raised
    assert r["delta_ratio"].value is not None and not r["delta_ratio"].valid


def test_expected_pco2_winter():
    # Albert MS, Dell RB, Winters RW 1967 Ann Intern Med: pCO2 = 1.5 x HCO3 + 8 (+/- 2)
    r = run({"blood_gas.bicarbonate": 14, "blood_gas.ph": 7.28, "blood_gas.pco2": 35})
    assert r["expected_pco2"].value == pytest.approx(1.5 * 14 + 8)
    assert r["expected_pco2"].valid and "Winter" in r["expected_pco2"].formula
    assert r["pco2_minus_expected"].value == pytest.approx(35 - 29)


def test_expected_pco2_alkalosis():
    # common practice, from memory: pCO2 = 0.7 x HCO3 + 20 (+/- 5)
    r = run({"blood_gas.bicarbonate": 34, "blood_gas.ph": 7.50})
    assert r["expected_pco2"].value == pytest.approx(0.7 * 34 + 20)
    assert r["expected_pco2"].valid and "0.7" in r["expected_pco2"].formula


@pytest.mark.parametrize("case,valid_value", [
    ({"blood_gas.bicarbonate": 24}, False),                        # no metabolic disturbance -> None
    ({"blood_gas.bicarbonate": 18, "blood_gas.ph": 7.50}, True),   # alkalaemic: respiratory primary
    ({"blood_gas.bicarbonate": 32, "blood_gas.ph": 7.30}, True),   # acidaemic: respiratory primary
])
def test_expected_pco2_validity(case, valid_value):
    ix = run(case)["expected_pco2"]
    assert not ix.valid and ix.reason
    assert (ix.value is not None) is valid_value


# ---------------------------------------------------------------------------------------------
# Calcium, osmolality
# ---------------------------------------------------------------------------------------------


def test_corrected_calcium_matches_payne_conventional_form():
    # Payne RB et al. 1973 Br Med J, conventional units: adjusted Ca (mg/dL) = Ca - albumin (g/dL) + 4.0
    ca_mg_dl, alb_g_dl = 8.0, 3.0
    expected_mmol = (ca_mg_dl - alb_g_dl + 4.0) * 10 / M_CALCIUM
    r = run({"serum.calcium": ca_mg_dl * 10 / M_CALCIUM, "serum.albumin": alb_g_dl * 10})
    # the SI coefficient 0.025 mmol/L per g/L is the rounded 1 mg/dL per g/dL (0.02495)
    assert r["corrected_calcium"].value == pytest.approx(expected_mmol, abs=0.002)
    assert r["corrected_calcium"].value == pytest.approx(8.0 * 10 / M_CALCIUM + 0.025 * (40 - 30))


def test_calculated_osmolality_and_gap():
    # common practice, no source: 2 Na + urea + glucose (mmol/L); gap = measured - calculated
    r = run({"serum.sodium": 140, "serum.urea": 5, "serum.glucose": 5, "serum.osmolality": 310})
    assert r["calculated_osmolality"].value == pytest.approx(290)
    assert r["osmolal_gap"].value == pytest.approx(20)
    assert "calculated_osmolality" in r["osmolal_gap"].inputs


# ---------------------------------------------------------------------------------------------
# eGFR
# ---------------------------------------------------------------------------------------------


def _ckd_epi_2021(scr_mg_dl: float, age: float, female: bool) -> float:
    # Inker LA et al. 2021 N Engl J Med, creatinine equation without race:
    # 142 x min(Scr/k,1)^a x max(Scr/k,1)^-1.200 x 0.9938^age x 1.012 [female];
    # k 0.7 (F) / 0.9 (M); a -0.241 (F) / -0.302 (M)
    k, a = (0.7, -0.241) if female else (0.9, -0.302)
    v = 142 * min(scr_mg_dl / k, 1) ** a * max(scr_mg_dl / k, 1) ** -1.200 * 0.9938 ** age
    return v * 1.012 if female else v


@pytest.mark.parametrize("scr_mg_dl,age,sex", [
    (0.6, 50, "female"), (1.3, 60, "male"), (0.9, 18, "male"), (2.5, 80, "female"), (0.5, 35, "male"),
])
def test_egfr_ckd_epi_2021(scr_mg_dl, age, sex):
    r = run({"serum.creatinine": umol_from_mg_dl_creatinine(scr_mg_dl)}, age_years=age, sex=sex)
    expected = _ckd_epi_2021(scr_mg_dl, age, sex == "female")
    # tubulo converts with 88.4 umol/L per mg/dL, the molar mass gives 88.404: allow that rounding
    assert r["egfr"].value == pytest.approx(expected, rel=2e-4)
    assert "CKD-EPI" in r["egfr"].formula and "Inker" in r["egfr"].source


def test_egfr_bedside_schwartz():
    # Schwartz GJ et al. 2009 J Am Soc Nephrol: eGFR = 0.413 x height (cm) / Scr (mg/dL)
    r = run({"serum.creatinine": 44.2}, age_years=8, height_cm=120)
    assert r["egfr"].value == pytest.approx(0.413 * 120 / (44.2 / 88.4))
    assert r["egfr"].valid and "Schwartz" in r["egfr"].source


def test_egfr_child_adult_switch_at_18():
    child = run({"serum.creatinine": 60}, age_years=17.99, sex="male", height_cm=175)["egfr"]
    adult = run({"serum.creatinine": 60}, age_years=18.0, sex="male", height_cm=175)["egfr"]
    assert "Schwartz" in child.source and "Inker" in adult.source
    assert child.value == pytest.approx(0.413 * 175 / (60 / 88.4))
    assert adult.value == pytest.approx(_ckd_epi_2021(60 / 88.4, 18.0, False))


def test_egfr_reasons():
    r = run({"serum.creatinine": 60}, age_years=10)
    assert r["egfr"].value is None and "height" in r["egfr"].reason
    r = run({"serum.creatinine": 30}, age_years=0.5, height_cm=68)
    assert r["egfr"].value is not None and not r["egfr"].valid and "infants" in r["egfr"].reason
    r = run({"serum.creatinine": 80}, sex="male")
    assert r["egfr"].value is None and "patient.age" in r["egfr"].reason
    r = run({"serum.creatinine": 80}, age_years=40, sex="unknown")
    assert r["egfr"].value is None and "female" in r["egfr"].reason and "male" in r["egfr"].reason
    r = run({"serum.creatinine": 60}, age_years=30, sex="female", pregnant=True)
    assert r["egfr"].value is not None and not r["egfr"].valid and "pregnancy" in r["egfr"].reason


# ---------------------------------------------------------------------------------------------
# 24-h collections and water
# ---------------------------------------------------------------------------------------------


def test_urine_calcium_per_kg_24h():
    import periodictable

    # common practice, no source: mg/kg/d = U_Ca (mmol/L) x V (L) x M_Ca (mg/mmol) / weight
    values = {"urine.calcium": 5.0, "urine.volume": 1.6, "urine.creatinine": 5.0, "urine.sodium": 100}
    r = run(values, urine_sample="24h", weight_kg=40)
    assert r["urine_ca_24h_per_kg"].value == pytest.approx(5.0 * 1.6 * periodictable.Ca.mass / 40, rel=1e-6)
    assert r["urine_ca_24h"].value == pytest.approx(8.0)
    assert r["urine_na_24h"].value == pytest.approx(160.0)
    assert r["urine_creatinine_24h_per_kg"].value == pytest.approx(5.0 * 1.6 / 40)
    assert r["urine_ca_24h_per_kg"].valid


def test_24h_indices_need_a_24h_sample():
    r = run({"urine.calcium": 5.0, "urine.volume": 1.6}, urine_sample="spot", weight_kg=40)
    assert r["urine_ca_24h_per_kg"].value is None and "24-h" in r["urine_ca_24h_per_kg"].reason
    r = run({"urine.calcium": 5.0, "urine.volume": 1.6}, urine_sample="24h")
    assert "patient.weight" in r["urine_ca_24h_per_kg"].reason
    assert r["urine_ca_24h"].value == pytest.approx(8.0)


def test_24h_collection_completeness_flag():
    # 12 mmol/L x 1.6 L / 40 kg = 0.48 mmol/kg/d creatinine: over the completeness limit
    r = run({"urine.calcium": 5.0, "urine.volume": 1.6, "urine.creatinine": 12.0}, urine_sample="24h", weight_kg=40)
    assert r["urine_ca_24h_per_kg"].value is not None and not r["urine_ca_24h_per_kg"].valid
    assert "collection" in r["urine_ca_24h_per_kg"].reason
    assert not r["urine_creatinine_24h_per_kg"].valid


def test_electrolyte_free_water_clearance_rose():
    # Rose BD 1986 Am J Med: EFWC = V x (1 - (U_Na + U_K) / P_Na)
    case = {"vitals.urine_output": 2.0, "urine.sodium": 40, "urine.potassium": 30, "serum.sodium": 150}
    r = run(case)
    assert r["electrolyte_free_water_clearance"].value == pytest.approx(2.0 * (1 - 70 / 150))
    # without urine output, the volume of a 24-h collection is used
    case24 = {k: v for k, v in case.items() if k != "vitals.urine_output"} | {"urine.volume": 3.0}
    assert run(case24, urine_sample="24h")["electrolyte_free_water_clearance"].value == pytest.approx(3.0 * (1 - 70 / 150))
    r = run({k: v for k, v in case24.items()}, urine_sample="spot")
    assert "vitals.urine_output" in r["electrolyte_free_water_clearance"].reason


def test_free_water_clearance():
    # common practice, no source: CH2O = V x (1 - U_osm / P_osm)
    r = run({"vitals.urine_output": 2.0, "urine.osmolality": 145, "serum.osmolality": 290})
    assert r["free_water_clearance"].value == pytest.approx(1.0)


# ---------------------------------------------------------------------------------------------
# Bad input and knowledge errors
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("values,ctx,field", [
    ({"serum.sodium": float("nan")}, {}, "serum.sodium"),
    ({"serum.sodium": "140"}, {}, "serum.sodium"),
    ({"sodium": 140}, {}, "sodium"),
    ({}, {"sex": "F"}, "patient.sex"),
    ({}, {"urine_sample": "morning"}, "urine.sample"),
    ({}, {"weight_kg": -3}, "patient.weight"),
    ({}, {"age_years": -1}, "patient.age"),
])
def test_bad_input_names_the_field(values, ctx, field):
    with pytest.raises(CaseError) as err:
        compute_indices(values, IndexContext(**ctx))
    assert any(p.path == field for p in err.value.problems), str(err.value)


def _raw():
    return copy.deepcopy(read_knowledge_yaml("indices.yaml"))


def _entry(data, index_id):
    return next(e for e in data["indices"] if e["id"] == index_id)


@pytest.mark.parametrize("mutate,words", [
    (lambda d: _entry(d, "fe_na").pop("source"), ["fe_na", "source"]),
    (lambda d: _entry(d, "fe_na").update(method="no_such_method"), ["fe_na", "method"]),
    (lambda d: _entry(d, "fe_mg").update(params={"urine": "urine.magnesium", "scale": 100}), ["fe_mg", "params.serum"]),
    (lambda d: _entry(d, "tmp_gfr").update(constants={"trp_breakpoint": 0.86}), ["tmp_gfr", "constants.alpha_numerator"]),
    (lambda d: _entry(d, "trp").update(uses=["egfr"]), ["trp", "uses"]),
    (lambda d: _entry(d, "egfr")["constants"].update(schwartz_k="0.413"), ["egfr", "constants.schwartz_k"]),
    (lambda d: _entry(d, "egfr")["branches"].pop("bedside_schwartz"), ["egfr", "branches.bedside_schwartz"]),
    (lambda d: d["indices"].append(copy.deepcopy(_entry(d, "fe_na"))), ["fe_na", "duplicate"]),
    (lambda d: d["shared_constants"].pop("creatinine_umol_per_mg_dl"), ["creatinine_umol_per_mg_dl"]),
])
def test_knowledge_errors_name_file_entry_and_field(mutate, words):
    data = _raw()
    mutate(data)
    with pytest.raises(KnowledgeError) as err:
        parse_index_knowledge(data)
    msg = str(err.value)
    assert msg.startswith("indices.yaml")
    for w in words:
        assert w in msg, msg


def test_index_spec_lookup():
    assert index_spec("fe_mg").constants["ultrafilterable_fraction"] == pytest.approx(0.7)
    with pytest.raises(KeyError):
        index_spec("no_such_index")


# ---------------------------------------------------------------------------------------------
# Property: random positive inputs never raise; every index has a finite value or a reason
# ---------------------------------------------------------------------------------------------


def _all_keys() -> list[str]:
    return sorted(_param_keys() | {"urine.creatinine", "serum.creatinine", "urine.volume", "vitals.urine_output"})


ALL_KEYS = _all_keys()
positive = st.floats(min_value=1e-3, max_value=1e4, allow_nan=False, allow_infinity=False)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    values=st.dictionaries(st.sampled_from(ALL_KEYS), positive, max_size=len(ALL_KEYS)),
    age=st.one_of(st.none(), st.floats(min_value=0, max_value=110)),
    sex=st.sampled_from(["female", "male", "other", "unknown"]),
    weight=st.one_of(st.none(), st.floats(min_value=0.5, max_value=250)),
    height=st.one_of(st.none(), st.floats(min_value=30, max_value=220)),
    sample=st.sampled_from([None, "spot", "24h", "timed"]),
    pregnant=st.sampled_from([None, True, False]),
)
def test_random_positive_inputs_never_raise(values, age, sex, weight, height, sample, pregnant):
    ctx = IndexContext(age_years=age, sex=sex, weight_kg=weight, height_cm=height, urine_sample=sample, pregnant=pregnant)
    out = compute_indices(values, ctx)
    assert len(out) == len(index_knowledge().specs)
    for ix in out:
        if ix.value is None:
            assert not ix.valid and ix.reason, ix
        else:
            assert math.isfinite(ix.value), ix
            assert ix.valid == (ix.reason is None), ix
        assert all(math.isfinite(v) for v in ix.inputs.values())
