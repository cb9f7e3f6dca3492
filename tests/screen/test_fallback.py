"""The self-check and the single-case fallback: when the matrix path does not mirror the single-case
code, the run notices and scores every case on the single-case path, still equal to rank_case."""

from __future__ import annotations

import subprocess
import sys

from tubulo.screen.check import self_check
from tubulo.screen.run import ChunkReport, screen_table
from tubulo.screen.sample import sample_cases, to_long

from .conftest import assert_same, expected_row


def test_self_check_finds_the_paths_equal(sk):
    assert sk.unsupported == ()
    assert self_check(sk, n=120, seed=61) == []


def test_self_check_catches_a_matrix_path_that_drifted(sk):
    drifted = sk._replace(evidence_weight=sk.evidence_weight * 1.1)
    problems = self_check(drifted, n=60, seed=62)
    assert problems and "probability" in " ".join(problems)


def test_unsupported_knowledge_sends_every_case_to_the_single_path(sk, tables):
    cases = sample_cases(sk, 30, seed=63)
    fallback = sk._replace(unsupported=("a rule the matrix path does not read",))
    rep = ChunkReport()
    out = screen_table(to_long(cases), "long", fallback, report=rep).to_pylist()
    assert rep.matrix == 0 and rep.single + rep.errors == len(cases) and rep.single > 20
    assert all(r["route"] in ("single", None) for r in out)
    assert any("does not read" in why for why in rep.single_reasons)
    for case, row in zip(cases, out):
        assert_same(row, expected_row(sk, tables, case), case["case"])


def test_a_pregnancy_is_read_on_the_single_path(sk, tables):
    case = {"case": "p", "patient": {"age": 30.0, "sex": "female", "pregnant": "true"},
            "serum": {"creatinine": "50.0 umol/L", "sodium": "134.0 mmol/L"}}
    rep = ChunkReport()
    row = screen_table(to_long([case]), "long", sk, report=rep).to_pylist()[0]
    assert row["route"] == "single" and rep.single == 1
    assert_same(row, expected_row(sk, tables, {**case, "patient": {**case["patient"], "pregnant": True}}), "p")


def test_building_the_cli_does_not_load_numpy_or_pyarrow():
    code = ("import sys; from tubulo.cli import build_parser; build_parser(); "
            "print([m for m in ('numpy', 'pyarrow', 'pandas', 'dask') if m in sys.modules])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
