"""`tubulo knowledge check | list | show` through argparse, in-process."""

from __future__ import annotations

import argparse
import io
import json

import pytest

from tubulo.kb.cli import add_subparser

from .conftest import GOOD


def run(argv):
    parser = argparse.ArgumentParser(prog="tubulo")
    add_subparser(parser.add_subparsers(dest="command"))
    args = parser.parse_args(argv)
    out = io.StringIO()
    rc = args.func(args, out=out)
    return rc, out.getvalue()


def test_check_clean_fixture():
    rc, text = run(["knowledge", "check", "--dir", str(GOOD)])
    assert rc == 0, text
    assert "20/20 candidate-variable pairs agree (100.0 %" in text
    assert "result: clean" in text


def test_check_reports_faults_and_exits_1(good_copy):
    (good_copy / "mechanisms_bad.yaml").write_text(
        "edges:\n  - {from: ncc, to: nowhere, sign: 1, source: common practice}\n")
    rc, text = run(["knowledge", "check", "--dir", str(good_copy)])
    assert rc == 1
    assert "mechanisms_bad.yaml:2: edge 'ncc' -> 'nowhere': field to" in text


def test_check_unexplained_disagreement_exits_1(good_copy):
    p = good_copy / "disorders_fixture.yaml"
    p.write_text(p.read_text().replace("urine_calcium: {states: {low: 0.85, normal: 0.15}",
                                       "urine_calcium: {states: {high: 0.85, normal: 0.15}"))
    rc, text = run(["knowledge", "check", "--dir", str(good_copy)])
    assert rc == 1
    assert "gitelman / urine_calcium: graph predicts -, curated +1 (most likely high) - UNEXPLAINED" in text


def test_list_json_keys():
    rc, text = run(["knowledge", "list", "--json", "--dir", str(GOOD)])
    assert rc == 0
    rows = json.loads(text)
    assert [r["id"] for r in rows] == ["licorice_excess", "gitelman", "bartter_type1", "thiazide_diuretic",
                                       "loop_diuretic"]
    for r in rows:
        assert set(r) == {"id", "name", "kind", "xrefs", "genes", "segments"}
    rc, text = run(["knowledge", "list", "--json", "--kind", "drug", "--dir", str(GOOD)])
    assert {r["kind"] for r in json.loads(text)} == {"drug"}


def test_list_text():
    rc, text = run(["knowledge", "list", "--kind", "inherited", "--dir", str(GOOD)])
    assert rc == 0 and "gitelman" in text and "loop_diuretic" not in text and "2 candidates" in text


def test_show_candidate_and_gene():
    rc, text = run(["knowledge", "show", "gitelman", "--dir", str(GOOD)])
    assert rc == 0
    assert "-> acts_on:" in text and "ncc (NCC (Na-Cl cotransporter)) [sign -1, loss]" in text
    assert "urine_calcium: ncc(-) ->dct_nacl_reabsorption(-) ->urine_calcium(-)" in text
    assert "Decision support only" in text
    rc, text = run(["knowledge", "show", "SLC12A3", "--dir", str(GOOD)])
    assert rc == 0 and "<- encoded_by:" in text and "<- defect_of:" in text and "gitelman" in text


def test_show_json_and_unknown(capsys):
    rc, text = run(["knowledge", "show", "ncc", "--json", "--dir", str(GOOD)])
    data = json.loads(text)
    assert rc == 0 and data["node"]["kind"] == "transporter"
    assert {e["from"] for e in data["adjacency"]["in"] if e["kind"] == "acts_on"} == {"gitelman",
                                                                                     "thiazide_diuretic"}
    rc, _ = run(["knowledge", "show", "no_such_thing", "--dir", str(GOOD)])
    assert rc == 2
    assert "no node matches 'no_such_thing'" in capsys.readouterr().err


def test_subcommand_required():
    with pytest.raises(SystemExit):
        run(["knowledge"])


def test_list_on_invalid_knowledge_is_a_short_error(good_copy, capsys):
    (good_copy / "mechanisms_bad.yaml").write_text(
        "edges:\n  - {from: ncc, to: nowhere, sign: 1, source: common practice}\n")
    rc, text = run(["knowledge", "list", "--dir", str(good_copy)])
    assert rc == 2 and text == ""
    err = capsys.readouterr().err
    assert "1 problem(s)" in err and "mechanisms_bad.yaml:2" in err and "tubulo knowledge check" in err


def test_missing_folder(tmp_path, capsys):
    rc, text = run(["knowledge", "check", "--dir", str(tmp_path / "nowhere")])
    assert rc == 1 and "knowledge folder not found" in text
    rc, _ = run(["knowledge", "list", "--dir", str(tmp_path / "nowhere")])
    assert rc == 2 and "problem(s)" in capsys.readouterr().err
