"""Bad case files: each gives a clear, located error and exit code 2, never a traceback."""

from __future__ import annotations

import json

import pytest

from tubulo.cli import main

GOOD = """case: t1
patient: {age: 30 y, sex: female}
serum:
  sodium: 140 mmol/L
  potassium: 4.0 mmol/L
"""

# (name, file suffix, content, text that must appear in stderr)
BAD = [
    ("unknown top key", ".yaml", "case: a\nserun:\n  sodium: 140 mmol/L\n", "did you mean serum?"),
    ("unknown analyte typo", ".yaml", "case: a\nurine:\n  potasium: 40 mmol/L\n", "urine.potasium: unknown key 'potasium'; did you mean urine.potassium?"),
    ("analyte in wrong section", ".yaml", "case: a\nserum:\n  ph: 7.3\n", "blood_gas.ph"),
    ("missing case id", ".yaml", "serum:\n  sodium: 140 mmol/L\n", "case: missing"),
    ("unit typo", ".yaml", "case: a\nserum:\n  sodium: 140 mmol/LL\n", "serum.sodium"),
    ("unit of wrong dimension", ".yaml", "case: a\nserum:\n  potassium: 4 mmHg\n", "cannot be converted"),
    ("text instead of number", ".yaml", "case: a\nserum:\n  potassium: low\n", "is not a quantity"),
    ("boolean instead of quantity", ".yaml", "case: a\nserum:\n  potassium: true\n", "is not a quantity"),
    ("list instead of quantity", ".yaml", "case: a\nserum:\n  potassium: [4, 5]\n", "is not a quantity"),
    ("negative value", ".yaml", "case: a\nserum:\n  potassium: -4 mmol/L\n", "not a possible potassium"),
    ("impossible value", ".yaml", "case: a\nserum:\n  sodium: 1400 mmol/L\n", "not a possible sodium"),
    ("calcium unit confusion", ".yaml", "case: a\nserum:\n  calcium: 9.4 mmol/L\n", "did you mean 9.4 mg/dL"),
    ("creatinine unit confusion", ".yaml", "case: a\nserum:\n  creatinine: 0.9 umol/L\n", "0.9 mg/dL"),
    ("bad sex", ".yaml", "case: a\npatient:\n  sex: femal\n", "did you mean female?"),
    ("bad age text", ".yaml", "case: a\npatient:\n  age: old\n", "patient.age"),
    ("impossible age", ".yaml", "case: a\npatient:\n  age: 300\n", "not a possible age"),
    ("bad onset", ".yaml", "case: a\nonset: teenage\n", "onset"),
    ("section not a mapping", ".yaml", "case: a\nserum: 140\n", "expected a mapping"),
    ("unknown HPO id", ".yaml", "case: a\nfeatures: [HP:9999999]\n", "not an HPO term"),
    ("unknown phrase", ".yaml", "case: a\nfeatures: [nephrocalcinosiss]\n", "did you mean HP:0000121"),
    ("feature present and absent", ".yaml", "case: a\nfeatures: [nephrocalcinosis]\nabsent_features: [HP:0000121]\n", "both as present"),
    ("unknown exposure", ".yaml", "case: a\nexposures: [moonlight]\n", "not an exposure"),
    ("bad blood pressure", ".yaml", "case: a\nvitals:\n  blood_pressure: high\n", "SYSTOLIC/DIASTOLIC"),
    ("diastolic above systolic", ".yaml", "case: a\nvitals:\n  blood_pressure: 60/90 mmHg\n", "not below the systolic"),
    ("bad category value", ".yaml", "case: a\nurine:\n  sample: morning\n", "urine.sample"),
    ("bad boolean", ".yaml", "case: a\nfamily:\n  consanguinity: maybe\n", "not true or false"),
    ("empty file", ".yaml", "", "empty"),
    ("only whitespace", ".yaml", "   \n\n", "empty"),
    ("top level list", ".yaml", "- case: a\n", "expected a mapping"),
    ("malformed yaml", ".yaml", "case: a\nserum: {sodium: 140\n", "not valid YAML"),
    ("duplicate key", ".yaml", "case: a\nserum:\n  sodium: 140 mmol/L\n  sodium: 141 mmol/L\n", "duplicate key 'sodium'"),
    ("yaml alias bomb", ".yaml",
     "case: a\nx: &a [1,1,1,1,1,1,1,1,1]\ny: &b [*a,*a,*a,*a,*a,*a,*a,*a,*a]\nz: &c [*b,*b,*b,*b,*b,*b,*b,*b,*b]\n",
     "anchors and aliases"),
    ("yaml python tag", ".yaml", "case: !!python/object/apply:os.system ['echo hi']\n", "tags"),
    ("two documents", ".yaml", "case: a\n---\ncase: b\n", "one YAML document"),
    ("malformed json", ".json", '{"case": "a", "serum": {', "not valid JSON"),
    ("json duplicate key", ".json", '{"case": "a", "case": "b"}', "duplicate key"),
    ("same analyte twice via alias", ".yaml", "case: a\nserum:\n  bicarbonate: 24 mmol/L\n  total_co2: 25 mmol/L\n", "given twice"),
    ("pregnant male", ".yaml", "case: a\npatient: {sex: male, pregnant: true}\n", "patient.pregnant"),
    ("non-finite number", ".yaml", "case: a\nserum:\n  sodium: .nan\n", "finite"),
]


@pytest.mark.parametrize("name,suffix,content,expected", BAD, ids=[b[0] for b in BAD])
def test_bad_case_exits_2_with_located_message(tmp_path, capsys, name, suffix, content, expected):
    path = tmp_path / f"case{suffix}"
    path.write_text(content, encoding="utf-8")
    rc = main(["check", str(path)])
    err = capsys.readouterr().err
    assert rc == 2, err
    assert expected in err, err
    assert "Traceback" not in err


def test_all_problems_reported_at_once(tmp_path, capsys):
    path = tmp_path / "many.yaml"
    path.write_text("case: a\nserum:\n  sodum: 140 mmol/L\n  potassium: 40 mmol/LL\nurine:\n  chlorid: 3\n", encoding="utf-8")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "3 problems" in err
    for piece in ("serum.sodum", "serum.potassium", "urine.chlorid"):
        assert piece in err


def test_binary_file(tmp_path, capsys):
    path = tmp_path / "blob.yaml"
    path.write_bytes(bytes(range(256)) * 8)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "not UTF-8" in err or "binary" in err


def test_huge_file(tmp_path, capsys):
    path = tmp_path / "huge.yaml"
    path.write_text("case: a\n" + "# padding\n" * 200_000, encoding="utf-8")
    assert main(["check", str(path)]) == 2
    assert "kB" in capsys.readouterr().err


def test_missing_file(tmp_path, capsys):
    assert main(["check", str(tmp_path / "nope.yaml")]) == 2
    assert "cannot read" in capsys.readouterr().err


def test_folder_instead_of_file(tmp_path, capsys):
    assert main(["check", str(tmp_path)]) == 2
    assert "folder" in capsys.readouterr().err


def test_good_case_passes_and_json_has_contract_keys(tmp_path, capsys):
    path = tmp_path / "good.yaml"
    path.write_text(GOOD, encoding="utf-8")
    assert main(["check", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert {"case", "measurements", "derived"} <= set(doc)
    for d in doc["derived"]:
        assert {"id", "label", "value", "unit", "formula", "inputs", "source", "valid"} <= set(d)


def test_bare_number_is_read_in_default_unit_and_said(tmp_path, capsys):
    path = tmp_path / "bare.yaml"
    path.write_text("case: a\nserum:\n  potassium: 3.1\n", encoding="utf-8")
    assert main(["check", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    notes = doc["case"]["notes"]
    assert any(n["path"] == "serum.potassium" and "assumed mmol/L" in n["message"] for n in notes)
    (k,) = [m for m in doc["measurements"] if m["key"] == "serum.potassium"]
    assert k["value"] == pytest.approx(3.1) and k["assumed_unit"] is True


def test_unknown_medication_is_a_warning_not_an_error(tmp_path, capsys):
    path = tmp_path / "med.yaml"
    path.write_text("case: a\nmedications: [zzqx-unlisted]\n", encoding="utf-8")
    assert main(["check", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert any(n["level"] == "warning" and "zzqx-unlisted" in n["message"] for n in doc["case"]["notes"])


def test_a_medication_known_only_as_an_exposure_points_there():
    from tubulo.case import parse_case

    case = parse_case({"case": "m", "medications": ["colecalciferol"]})
    (note,) = [n for n in case.notes if n.path == "medications[0]"]
    assert note.level == "warning" and "vitamin_d_high_dose" in note.message and "exposures" in note.message
    assert case.medications[0].class_id is None  # kept, not weighed, not moved to exposures silently
    assert case.exposures == ()
