"""`tubulo import fhir`: FHIR R4 bundles built with `fhir.resources` -> case files.

Round trips (case -> bundle -> case, values equal in internal units), skipped codes, the
most-recent rule, age and sex, medicines, UCUM units, and bad bundles (clear error, exit 2).
"""

from __future__ import annotations

import json
import math
from datetime import date, timedelta
from pathlib import Path

import pytest

from tubulo.case import load_case, parse_case
from tubulo.cli import main
from tubulo.errors import TubuloError
from tubulo.interop.fhir import bundle_to_case, validate_bundle
from tubulo.interop.loinc import loinc_table

from . import fhir_build as fb

ROOT = Path(__file__).resolve().parents[2]
DEMO = sorted((ROOT / "cases").glob("*.yaml")) + sorted((ROOT / "cases").glob("*.json"))

# UCUM codes of tubulo's internal units (UCUM specification, Regenstrief Institute; from memory).
UCUM_OF_INTERNAL = {"U/L": "U/L", "cm": "cm", "g/L": "g/L", "kg": "kg", "mIU/L": "m[IU]/L", "mOsm/kg": "mosm/kg",
                    "mg/mmol": "mg/mmol", "mmHg": "mm[Hg]", "mmol/L": "mmol/L", "ng/mL/h": "ng/mL/h",
                    "nmol/L": "nmol/L", "pH": "[pH]", "pmol/L": "pmol/L", "umol/L": "umol/L"}
WHEN = "2025-06-30T09:15:00+00:00"


def _code_for(key: str) -> str | None:
    t = loinc_table()
    entry = t.assay(key) or next((e for e in t.codes.values() if e.key == key and not e.qualitative), None)
    return entry.code if entry else None


def _bundle_of_case(case, when: str = WHEN, birth: str | None = None) -> tuple[dict, set[str]]:
    """A bundle carrying the case's measurements (internal units) and medicines; the keys it carries."""
    resources: list = [fb.patient("p1", birth, case.patient.sex if case.patient.sex != "unknown" else None)]
    carried: set[str] = set()
    values = {k: m for k, m in case.measurements.items()}
    if case.patient.weight_kg is not None:
        resources.append(fb.observation("w", "29463-7", case.patient.weight_kg, "kg", when=when))
        carried.add("patient.weight")
    if case.patient.height_cm is not None:
        resources.append(fb.observation("h", "8302-2", case.patient.height_cm, "cm", when=when))
        carried.add("patient.height")
    for i, (key, m) in enumerate(sorted(values.items())):
        code = _code_for(key)
        if code is None:
            continue
        resources.append(fb.observation(f"o{i}", code, m.value, UCUM_OF_INTERNAL[m.unit], when=when))
        carried.add(key)
    for i, med in enumerate(case.medications):
        if med.atc:
            resources.append(fb.statement(f"m{i}", atc=med.atc))
        else:
            resources.append(fb.statement(f"m{i}", text=f"{med.given} 5 mg tablet"))
    return fb.bundle(*resources), carried


@pytest.mark.parametrize("path", DEMO, ids=[p.name for p in DEMO])
def test_demo_case_round_trips_through_a_bundle(path):
    original = load_case(path)
    ref = date(2025, 6, 30)
    birth = None
    if original.patient.age_years is not None:
        birth = (ref - timedelta(days=round(original.patient.age_years * 365.25))).isoformat()
    data, carried = _bundle_of_case(original, birth=birth)
    validate_bundle(data)
    imp = bundle_to_case(data, case_id=original.id)
    back = parse_case(imp.case)
    assert carried, "the demo case should carry some coded measurement"
    assert set(back.measurements) | {k for k in ("patient.weight", "patient.height") if k in carried} == carried
    for key in carried:
        if key == "patient.weight":
            assert back.patient.weight_kg == pytest.approx(original.patient.weight_kg, rel=1e-9)
        elif key == "patient.height":
            assert back.patient.height_cm == pytest.approx(original.patient.height_cm, rel=1e-9)
        else:
            assert back.measurements[key].value == pytest.approx(original.measurements[key].value, rel=1e-9), key
    assert back.patient.sex == original.patient.sex
    if original.patient.age_years is not None:
        tol = 1.5 / 365.25 if original.patient.age_years < 2 else 0.11
        assert back.patient.age_years == pytest.approx(original.patient.age_years, abs=tol)
    assert [m.inn or m.given.lower() for m in back.medications] == [m.inn or m.given.lower() for m in original.medications]


def test_mass_units_convert_with_published_molar_masses():
    """Creatinine 1.0 mg/dL and BUN 14 mg/dL against molar masses from the `molmass` package
    (Gohlke C, molmass, IUPAC standard atomic weights); BUN counts the two nitrogen atoms of urea
    (common practice, no source)."""
    molmass = pytest.importorskip("molmass")
    data = fb.bundle(fb.patient(), fb.observation("cr", "2160-0", 1.0, "mg/dL", when=WHEN),
                     fb.observation("bun", "3094-0", 14.0, "mg/dL", when=WHEN))
    case = parse_case(bundle_to_case(data).case)
    creat = molmass.Formula("C4H7N3O").mass
    n2 = molmass.Formula("N2").mass
    assert case.value("serum.creatinine") == pytest.approx(1.0 * 10 / creat * 1000, rel=1e-3)
    assert case.value("serum.urea") == pytest.approx(14.0 * 10 / n2, rel=1e-3)


def test_unknown_codes_are_skipped_and_reported(tmp_path, capsys):
    data = fb.bundle(fb.patient(), fb.observation("k", "2823-3", 3.2, "mmol/L", when=WHEN),
                     fb.observation("a1c", "4548-4", 6.1, "%", when=WHEN))
    local = fb.observation("local", "2823-3", 3.0, "mmol/L", when=WHEN)
    data["entry"].append({"resource": json.loads(local.model_dump_json(exclude_none=True))})
    data["entry"][-1]["resource"]["code"] = {"coding": [{"system": "urn:local-lab", "code": "K+"}], "text": "Kalium"}
    imp = bundle_to_case(data)
    reasons = {s.resource: s.reason for s in imp.skipped}
    assert "LOINC 4548-4" in reasons["Observation/a1c"] and "not guessed" in reasons["Observation/a1c"]
    assert "no LOINC code" in reasons["Observation/local"] and "Kalium" in reasons["Observation/local"]
    assert imp.case["serum"] == {"potassium": "3.2 mmol/L"}
    bundle_path = tmp_path / "b.json"
    bundle_path.write_text(json.dumps(data), encoding="utf-8")
    assert main(["import", "fhir", str(bundle_path), "-o", str(tmp_path / "c.yaml")]) == 0
    err = capsys.readouterr().err
    assert "skipped 2" in err and "4548-4" in err and "Observation/local" in err


def test_most_recent_value_is_kept_and_the_others_are_named(tmp_path, capsys):
    data = fb.bundle(fb.patient(),
                     fb.observation("k1", "2823-3", 3.4, "mmol/L", when="2025-01-03T08:00:00+00:00"),
                     fb.observation("k3", "2823-3", 2.9, "mmol/L", when="2025-01-10T08:00:00+00:00"),
                     fb.observation("k2", "2823-3", 3.1, "mmol/L", when="2025-01-05T08:00:00+00:00"),
                     fb.observation("urea", "22664-7", 5.0, "mmol/L", when="2025-01-02T08:00:00+00:00"),
                     fb.observation("bun", "3094-0", 28.0, "mg/dL", when="2025-01-09T08:00:00+00:00"))
    imp = bundle_to_case(data)
    assert imp.case["serum"]["potassium"] == "2.9 mmol/L"
    k = next(v for v in imp.values if v.key == "serum.potassium")
    assert k.resource == "Observation/k3" and len(k.others) == 2
    assert "Observation/k2" in k.others[0] and "Observation/k1" in k.others[1]  # newest first
    # urea and urea nitrogen are one analyte: only the newer (BUN) is written
    assert "urea" not in imp.case["serum"] and imp.case["serum"]["bun"] == "28 mg/dL"
    case = parse_case(imp.case)
    assert case.value("serum.urea") == pytest.approx(28.0 * 10 / 28.014, rel=1e-3)
    path = tmp_path / "b.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    assert main(["import", "fhir", str(path), "-o", str(tmp_path / "c.yaml")]) == 0
    assert "newest of 3 values" in capsys.readouterr().err


def test_age_from_birth_date_and_newest_observation_or_today():
    data = fb.bundle(fb.patient(birth="2024-02-10", gender="male"),
                     fb.observation("na", "2951-2", 139, "mmol/L", when="2024-09-01T10:00:00+02:00"),
                     fb.observation("na2", "2951-2", 140, "mmol/L", when="2025-02-09T10:00:00+02:00"))
    imp = bundle_to_case(data)
    assert imp.case["patient"] == {"sex": "male", "age": "365 d"}
    assert any("newest observation (2025-02-09)" in n for n in imp.notes)
    undated = fb.bundle(fb.patient(birth="1990-03-01"), fb.observation("na", "2951-2", 139, "mmol/L"))
    imp = bundle_to_case(undated, today=date(2025, 3, 1))
    assert imp.case["patient"]["age"] == "35.0 y"
    assert any("today (2025-03-01" in n for n in imp.notes)
    given = bundle_to_case(undated, age_at=date(2000, 3, 1))
    assert given.case["patient"]["age"] == "10.0 y"
    partial = bundle_to_case(fb.bundle(fb.patient(birth="1990")), today=date(2025, 1, 1))
    assert any("partial" in n for n in partial.notes)
    assert parse_case(partial.case).patient.age_years == pytest.approx(34.5, abs=0.1)


def test_medicines_by_inn_from_text_atc_and_reference():
    data = fb.bundle(fb.patient(),
                     fb.statement("s1", text="Furosemide 40 mg oral tablet"),
                     fb.request("r1", atc="C03AA03"),
                     fb.statement("s2", text="Lithium carbonate 400 mg", status="stopped"),
                     fb.medication("med1", "Omeprazole 20 MG Delayed Release Oral Capsule"),
                     fb.statement("s3", reference="Medication/med1"),
                     fb.statement("s4", text="Amlodipine 5 mg tablet"))
    imp = bundle_to_case(data)
    assert imp.case["medications"] == ["furosemide", "hydrochlorothiazide", "omeprazole", "Amlodipine"]
    assert any(s.resource == "MedicationStatement/s2" and "stopped" in s.reason for s in imp.skipped)
    case = parse_case(imp.case)
    assert [m.atc for m in case.medications] == ["C03CA01", "C03AA03", "A02BC01", None]
    assert any("Amlodipine" in n.message for n in case.notes)  # kept, with the warning that it cannot be weighed


def test_ucum_units_and_blood_pressure_panel():
    data = fb.bundle(fb.patient(),
                     fb.observation("tsh", "3016-3", 2.5, "m[IU]/L", when=WHEN),
                     fb.observation("ph", "2744-1", 7.31, "[pH]", when=WHEN),
                     fb.observation("pco2", "2019-8", 4.0, "kPa", when=WHEN),
                     fb.observation("acr", "9318-7", 30.0, "mg/g{creat}", when=WHEN),
                     fb.observation("bp", "85354-9", when=WHEN,
                                    components=[fb.component("8480-6", 128, "mm[Hg]"),
                                                fb.component("8462-4", 84, "mm[Hg]")]))
    imp = bundle_to_case(data)
    case = parse_case(imp.case)
    assert case.value("serum.tsh") == pytest.approx(2.5)
    assert case.value("blood_gas.ph") == pytest.approx(7.31)
    # 1 kPa = 7.50062 mmHg (1 mmHg = 133.322 Pa; BIPM SI Brochure 9th ed. 2019, non-SI units; from memory)
    assert case.value("blood_gas.pco2") == pytest.approx(4.0 * 1000 / 133.322, rel=1e-4)
    # 30 mg/g -> mg/mmol through creatinine 113.12 g/mol: 30 * 0.11312 = 3.39 mg/mmol
    assert case.value("urine.albumin_creatinine_ratio") == pytest.approx(30 * 113.12 / 1000, rel=1e-3)
    assert imp.case["vitals"]["blood_pressure"] == "128/84 mmHg"
    assert case.value("vitals.systolic_bp") == 128 and case.value("vitals.diastolic_bp") == 84


def test_values_that_cannot_be_read_are_skipped_with_the_reason():
    data = fb.bundle(fb.patient(), fb.specimen("sp1", "Urine specimen"),
                     fb.observation("k-urine", "2823-3", 40, "mmol/L", when=WHEN, specimen="Specimen/sp1"),
                     fb.observation("void", "2951-2", 140, "mmol/L", when=WHEN, status="entered-in-error"),
                     fb.observation("bound", "2160-0", 0.3, "mg/dL", when=WHEN, comparator="<"),
                     fb.observation("nounit", "2075-0", 101, None, when=WHEN),
                     fb.observation("absent", "1751-7", when=WHEN, absent="specimen hemolysed"),
                     fb.observation("other", "2951-2", 150, "mmol/L", when=WHEN, subject="Patient/someone-else"),
                     fb.observation("badunit", "2777-1", 3.1, "mg/kg", when=WHEN),
                     fb.observation("sys", "8480-6", 120, "mm[Hg]", when=WHEN))
    imp = bundle_to_case(data)
    reasons = {s.resource: s.reason for s in imp.skipped}
    assert "does not fit its specimen" in reasons["Observation/k-urine"]
    assert "entered-in-error" in reasons["Observation/void"]
    assert "bound" in reasons["Observation/bound"]
    assert "no unit" in reasons["Observation/nounit"]
    assert "dataAbsentReason" in reasons["Observation/absent"]
    assert "not the bundle's patient" in reasons["Observation/other"]
    assert "mg/kg" in reasons["Observation/badunit"]
    assert "systolic and diastolic" in reasons["Observation/sys"]
    assert "serum" not in imp.case and "vitals" not in imp.case


def test_qualitative_urine_glucose():
    data = fb.bundle(fb.patient(), fb.observation("glu", "25428-4", when=WHEN, text_value="Negative"))
    case = parse_case(bundle_to_case(data).case)
    assert case.categories["urine.glucose"] == "negative"


def _write(tmp_path, data, name="b.json") -> Path:
    p = tmp_path / name
    p.write_text(data if isinstance(data, str) else json.dumps(data), encoding="utf-8")
    return p


def test_cli_writes_a_case_file_atomically_and_refuses_to_overwrite(tmp_path, capsys):
    data = fb.bundle(fb.patient(birth="1999-05-05"), fb.observation("k", "2823-3", 2.8, "mmol/L", when=WHEN),
                     fb.observation("ucr", "14683-7", 6.0, "mmol/L", when=WHEN))
    bundle_path = _write(tmp_path, data)
    out = tmp_path / "case.yaml"
    assert main(["import", "fhir", str(bundle_path), "-o", str(out), "--id", "clinic-7"]) == 0
    case = load_case(out)
    assert case.id == "clinic-7" and case.value("serum.potassium") == pytest.approx(2.8)
    assert case.categories["urine.sample"] == "spot"
    assert "Observation/k" in out.read_text(encoding="utf-8")  # provenance comment
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b.json", "case.yaml"]  # no temp file left
    capsys.readouterr()
    assert main(["import", "fhir", str(bundle_path), "-o", str(out)]) == 2
    assert "already exists" in capsys.readouterr().err
    assert main(["import", "fhir", str(bundle_path), "-o", str(out), "--force"]) == 0


BAD = {
    "not json": ("{ not json", "not valid JSON"),
    "not a bundle": (json.dumps({"resourceType": "Patient", "id": "p1"}), "expected 'Bundle'"),
    "a list": ("[1, 2]", "expected a JSON object"),
}


@pytest.mark.parametrize("name", sorted(BAD))
def test_unreadable_files_exit_2_with_a_clear_message(tmp_path, capsys, name):
    text, expected = BAD[name]
    out = tmp_path / "c.yaml"
    assert main(["import", "fhir", str(_write(tmp_path, text)), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert expected in err and "Traceback" not in err
    assert not out.exists()


def test_invalid_resource_names_the_field_and_the_resource(tmp_path, capsys):
    data = fb.bundle(fb.patient(), fb.observation("o1", "2823-3", 3.0, "mmol/L", when=WHEN))
    data["entry"][1]["resource"]["valueQuantity"]["value"] = "abc"
    out = tmp_path / "c.yaml"
    assert main(["import", "fhir", str(_write(tmp_path, data)), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "entry[1].resource.valueQuantity.value" in err and "Observation/o1" in err and "'abc'" in err
    assert not out.exists()


def test_two_patients_and_impossible_values_are_errors(tmp_path, capsys):
    two = fb.bundle(fb.patient("p1"), fb.patient("p2"))
    with pytest.raises(TubuloError, match="2 patients"):
        bundle_to_case(two)
    impossible = fb.bundle(fb.patient(), fb.observation("kk", "2823-3", 45.0, "mmol/L", when=WHEN))
    out = tmp_path / "c.yaml"
    assert main(["import", "fhir", str(_write(tmp_path, impossible)), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "serum.potassium" in err and "Observation/kk" in err
    assert not out.exists()
    future = fb.bundle(fb.patient(birth="2030-01-01"), fb.observation("na", "2951-2", 140, "mmol/L", when=WHEN))
    with pytest.raises(TubuloError, match="after"):
        bundle_to_case(future)


def test_import_without_format_prints_help_and_exits_2(capsys):
    assert main(["import"]) == 2
    assert "fhir" in capsys.readouterr().err


def test_same_bundle_gives_the_same_case_text(tmp_path):
    data = fb.bundle(fb.patient(), fb.observation("k", "2823-3", 2.8, "mmol/L", when=WHEN),
                     fb.statement("s1", text="Furosemide 40 mg"))
    p = _write(tmp_path, data)
    assert main(["import", "fhir", str(p), "-o", str(tmp_path / "a.yaml")]) == 0
    assert main(["import", "fhir", str(p), "-o", str(tmp_path / "b.yaml")]) == 0
    assert (tmp_path / "a.yaml").read_text() == (tmp_path / "b.yaml").read_text()
    assert math.isclose(load_case(tmp_path / "a.yaml").value("serum.potassium"), 2.8)


@pytest.mark.parametrize("resource, expected", [
    ({"resourceType": "Labresult", "id": "x"}, "entry[1].resource.resourceType: 'Labresult'"),
    ({"resourceType": "Observation", "id": "o9", "status": "final"}, "entry[1].resource.code (Observation/o9): Field required"),
])
def test_resources_the_fhir_models_refuse_are_named(tmp_path, capsys, resource, expected):
    data = fb.bundle(fb.patient())
    data["entry"].append({"resource": resource})
    assert main(["import", "fhir", str(_write(tmp_path, data)), "-o", str(tmp_path / "c.yaml")]) == 2
    err = capsys.readouterr().err
    assert expected in err and "Traceback" not in err
