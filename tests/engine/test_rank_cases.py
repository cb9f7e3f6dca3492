"""End-to-end ranking on the real knowledge: demo cases, determinism, units, critical thresholds."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

from tubulo.case import load_case, parse_case
from tubulo.cli import main
from tubulo.rank import rank_case
from tubulo.reference import critical_limits

ROOT = Path(__file__).resolve().parents[2]
CASES = sorted((ROOT / "cases").glob("*.yaml"))


@pytest.mark.parametrize("path", CASES, ids=[p.name for p in CASES])
def test_every_demo_case_ranks(path, capsys):
    assert main(["rank", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert {"case", "versions", "measurements", "derived", "findings", "candidates", "next_tests", "panel",
            "cautions"} <= set(doc)
    assert math.isclose(sum(c["probability"] for c in doc["candidates"]), 1.0, abs_tol=1e-4)
    assert doc["cautions"][-1]["id"] == "decision_support"
    kinds = {c["kind"] for c in doc["candidates"]}
    assert kinds <= {"inherited", "drug", "acquired", "residual"} and "residual" in kinds
    assert main(["rank", str(path)]) == 0
    assert "decision support" in capsys.readouterr().out.lower()


def test_same_case_gives_byte_identical_json(tmp_path):
    path = CASES[0]
    runs = [subprocess.run([sys.executable, "-m", "tubulo.cli", "rank", str(path), "--json"], capture_output=True,
                           check=True).stdout for _ in range(2)]
    assert runs[0] == runs[1]


def test_unit_written_does_not_change_the_ranking():
    base = {"case": "u", "patient": {"age": "30 y", "sex": "male"},
            "serum": {"potassium": "2.9 mmol/L", "magnesium": "0.5 mmol/L", "calcium": "2.3 mmol/L",
                      "creatinine": "80 umol/L", "bicarbonate": "31 mmol/L", "sodium": "138 mmol/L",
                      "chloride": "95 mmol/L"}}
    other = json.loads(json.dumps(base))
    # the same values in other units: Mg 0.5 mmol/L = 1.0 mEq/L; Ca 2.3 mmol/L = 9.218 mg/dL (40.078 g/mol);
    # creatinine 80 umol/L = 0.905 mg/dL (113.12 g/mol)
    other["serum"].update({"magnesium": "1.0 mEq/L", "calcium": f"{2.3 * 40.078 / 10!r} mg/dL",
                           "creatinine": f"{80 * 113.12 / 10000!r} mg/dL"})
    a = rank_case(parse_case(base))
    b = rank_case(parse_case(other))
    assert [s.id for s in a.scored] == [s.id for s in b.scored]
    for x, y in zip(a.scored, b.scored):
        assert x.probability == pytest.approx(y.probability, rel=1e-6, abs=1e-12)


CRITICAL = [("serum", "potassium", "mmol/L"), ("serum", "sodium", "mmol/L"), ("serum", "magnesium", "mmol/L"),
            ("serum", "ionized_calcium", "mmol/L"), ("serum", "phosphate", "mmol/L"), ("serum", "glucose", "mmol/L"),
            ("blood_gas", "ph", "pH")]


@pytest.mark.parametrize("section,analyte,unit", CRITICAL, ids=[c[1] for c in CRITICAL])
def test_every_critical_threshold_fires_just_past_it(section, analyte, unit):
    lim = critical_limits(f"{section}.{analyte}", 40, "female")
    assert lim is not None
    for limit, step in ((lim.low, -1), (lim.high, 1)):
        if limit is None:
            continue
        past = limit + step * max(abs(limit) * 0.005, 0.01)
        inside = limit - step * max(abs(limit) * 0.005, 0.01)
        for value, expect in ((past, True), (inside, False)):
            text = f"{value:.4f}" if unit == "pH" else f"{value:.4f} {unit}"
            case = parse_case({"case": "crit", "patient": {"age": "40 y", "sex": "female"}, section: {analyte: text}})
            crit = [c for c in rank_case(case).cautions if c.level == "critical"]
            assert bool(crit) is expect, (analyte, value, crit)


def test_predict_drug_exposure_disorder_and_unknown(capsys):
    assert main(["predict", "hydrochlorothiazide"]) == 0
    out = capsys.readouterr().out
    assert "NCC" in out or "ncc" in out
    assert main(["predict", "licorice"]) == 0
    assert "11" in capsys.readouterr().out  # 11-beta-HSD2 on the path
    assert main(["predict", "gitelman"]) == 0
    assert "SLC12A3" in capsys.readouterr().out
    assert main(["predict", "hydrochlorthiazid"]) == 2
    assert "did you mean" in capsys.readouterr().err


def test_demo_case_leading_candidate_is_explained():
    r = rank_case(load_case(CASES[0]))
    top = r.scored[0]
    ex = r.explained[top.id]
    assert ex.support and any(e.path for e in ex.support)


def _caution_ids(meds, serum):
    case = parse_case({"case": "c", "patient": {"age": "50 y"}, "medications": meds, "serum": serum})
    return {c.id for c in rank_case(case).cautions}


def test_drug_class_cautions_need_the_drug_and_the_finding():
    # conditions as written in knowledge/cautions.yaml: a class on the medication list, and a finding
    assert "methylxanthine_low_potassium" in _caution_ids(["theophylline"], {"potassium": "2.9 mmol/L"})
    assert "methylxanthine_low_potassium" not in _caution_ids(["theophylline"], {"potassium": "4.2 mmol/L"})
    assert "methylxanthine_low_potassium" not in _caution_ids(["furosemide"], {"potassium": "2.9 mmol/L"})
    assert "glucocorticoid_on_list" in _caution_ids(["Prednisolone"], {"potassium": "4.2 mmol/L"})
    assert "glucocorticoid_on_list" not in _caution_ids([], {"potassium": "4.2 mmol/L"})
    assert "lithium_high_sodium" in _caution_ids(["lithium carbonate"], {"sodium": "152 mmol/L"})
