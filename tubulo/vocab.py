"""Vocabularies a case is checked against: HPO terms (bundled subset), drug names, exposures.

Matching is case-insensitive and folds British/American spellings (hypokalaemia = hypokalemia,
oedema = edema) so a clinician can type what they are used to.
"""

from __future__ import annotations

import difflib
import json
import re
from functools import cache
from typing import Mapping, NamedTuple

from .paths import knowledge_dir, read_knowledge_yaml

__all__ = [
    "DrugMatch",
    "HpoTerm",
    "fold",
    "hpo_release",
    "hpo_terms",
    "in_subset",
    "lookup_drug",
    "lookup_exposure",
    "lookup_hpo_id",
    "lookup_phrase",
    "suggest_drugs",
    "suggest_exposures",
    "suggest_phrases",
]

_HPO_ID = re.compile(r"^(HP:\d{7})\b\s*(.*)$")


class HpoTerm(NamedTuple):
    id: str
    label: str
    synonyms: tuple[str, ...]
    parents: tuple[str, ...]
    obsolete: bool = False


class DrugMatch(NamedTuple):
    """A medication name resolved to its INN and the drug class (ranking candidate) it belongs to."""

    inn: str
    class_id: str
    atc: str | None


def fold(text: str) -> str:
    """Lower-case, British-to-American spelling folds, punctuation to single spaces."""
    t = text.lower().strip()
    for a, b in (("ae", "e"), ("oe", "e"), ("-", " ")):
        t = t.replace(a, b)
    t = re.sub(r"[^a-z0-9+ ]+", " ", t)
    return " ".join(t.split())


@cache
def _subset() -> dict:
    from .cache import cached

    return cached("hpo", lambda: _read_terms("hpo_subset.json"))


@cache
def _extended() -> dict:
    """The rest of HPO's phenotypic-abnormality branch (hpo_extended.json), read only when a case
    names a term the subset lacks; {} when the file is not shipped."""
    from .cache import cached

    try:
        return cached("hpo_extended", lambda: _read_terms("hpo_extended.json"))["terms"]
    except FileNotFoundError:
        return {}


def _read_terms(name: str) -> dict:
    with open(knowledge_dir() / name, encoding="utf-8") as fh:
        return json.load(fh)


def in_subset(hid: str) -> bool:
    """Whether the term is one of the subset tubulo's knowledge is written in (hpo_subset.json)."""
    return hid in _subset()["terms"]


def hpo_release() -> str:
    """The HPO release the bundled subset was built from."""
    return str(_subset().get("hpo_release", "unknown"))


class _Terms(Mapping):
    """The bundled HPO terms: the subset tubulo reasons with, then (looked up on a miss, or when
    iterated) the rest of the phenotype branch.  HpoTerm objects are built only when asked for."""

    def __init__(self, raw: dict) -> None:
        self._raw = raw
        self._made: dict[str, HpoTerm] = {}

    def __getitem__(self, hid: str) -> HpoTerm:
        term = self._made.get(hid)
        if term is None:
            t = self._raw.get(hid)
            if t is None:
                t = _extended()[hid]
            term = HpoTerm(hid, t["label"], tuple(t.get("synonyms", ())), tuple(t.get("parents", ())),
                           bool(t.get("obsolete")))
            self._made[hid] = term
        return term

    def __contains__(self, hid: object) -> bool:
        return hid in self._raw or hid in _extended()

    def __iter__(self):  # the two files are disjoint (scripts/build_hpo_subset.py; checked by the tests)
        yield from self._raw
        yield from _extended()

    def __len__(self) -> int:
        return len(self._raw) + len(_extended())


@cache
def hpo_terms() -> Mapping[str, HpoTerm]:
    return _Terms(_subset()["terms"])


@cache
def _phrase_index() -> dict[str, str]:
    from .cache import cached

    return cached("phrases", _build_phrase_index)


def _names(raw: Mapping[str, Mapping]) -> dict[str, str]:
    """Folded label and synonyms of each current term -> its id (the first term to claim a name keeps it)."""
    index: dict[str, str] = {}
    for hid, t in raw.items():
        if t.get("obsolete"):
            continue
        for name in (t["label"], *t.get("synonyms", ())):
            index.setdefault(fold(name), hid)
    return index


def _build_phrase_index() -> dict[str, str]:
    index = _names(_subset()["terms"])
    # our own extra phrases (knowledge/phrases.yaml), e.g. clinic words for HPO terms
    try:
        extra = read_knowledge_yaml("phrases.yaml") or {}
    except FileNotFoundError:
        extra = {}
    for phrase, hid in (extra.get("phrases") or {}).items():
        index[fold(phrase)] = hid
    return index


@cache
def _extended_phrase_index() -> dict[str, str]:
    from .cache import cached

    return cached("phrases_extended", lambda: _names(_extended()))


def lookup_hpo_id(text: str) -> tuple[HpoTerm | None, str, str]:
    """("HP:0001561 Polyhydramnios") -> (term or None, id, label text written after it)."""
    m = _HPO_ID.match(text.strip())
    if not m:
        return None, "", ""
    hid, label = m.groups()
    return hpo_terms().get(hid), hid, label.strip()


def lookup_phrase(text: str) -> HpoTerm | None:
    """A plain phrase ("nephrocalcinosis", "hypokalaemia", "myalgia") -> its HPO term, or None.

    The subset's names and the clinic phrases of phrases.yaml come first; then the rest of HPO's
    phenotype branch."""
    key = fold(text)
    hid = _phrase_index().get(key) or _extended_phrase_index().get(key)
    return hpo_terms().get(hid) if hid else None


def suggest_phrases(text: str, n: int = 3) -> list[str]:
    """Closest known phrases, each as 'HP:id label' (from the subset and the clinic phrases, the
    terms tubulo reasons with)."""
    index = _phrase_index()
    close = difflib.get_close_matches(fold(text), list(index), n=n, cutoff=0.6)
    out = []
    for c in close:
        term = hpo_terms()[index[c]]
        item = f"{term.id} {term.label}"
        if item not in out:
            out.append(item)
    return out


@cache
def _drug_index() -> dict[str, DrugMatch]:
    from .cache import cached

    return cached("drug_index", _build_drug_index)


def _build_drug_index() -> dict[str, DrugMatch]:
    try:
        raw = read_knowledge_yaml("drugs.yaml") or {}
    except FileNotFoundError:
        return {}
    index: dict[str, DrugMatch] = {}
    for cls in raw.get("drug_classes") or []:
        for member in cls.get("members") or []:
            match = DrugMatch(member["inn"], cls["id"], member.get("atc"))
            for name in (member["inn"], *(member.get("synonyms") or ())):
                index.setdefault(fold(name), match)
    return index


def lookup_drug(name: str) -> DrugMatch | None:
    """An INN or synonym (any case) -> its DrugMatch, or None when the knowledge does not cover it."""
    return _drug_index().get(fold(name))


def suggest_drugs(name: str, n: int = 3) -> list[str]:
    index = _drug_index()
    return sorted({index[c].inn for c in difflib.get_close_matches(fold(name), list(index), n=n, cutoff=0.75)})


@cache
def _exposure_index() -> dict[str, str]:
    from .cache import cached

    return cached("exposure_index", _build_exposure_index)


def _build_exposure_index() -> dict[str, str]:
    try:
        raw = read_knowledge_yaml("exposures.yaml") or {}
    except FileNotFoundError:
        return {}
    index: dict[str, str] = {}
    for entry in raw.get("exposures") or []:
        for name in (entry["id"], entry.get("name", ""), *(entry.get("synonyms") or ())):
            if name:
                index.setdefault(fold(name), entry["id"])
    return index


def lookup_exposure(name: str) -> str | None:
    """An exposure name or synonym -> its id, or None."""
    return _exposure_index().get(fold(name))


def suggest_exposures(name: str, n: int = 3) -> list[str]:
    index = _exposure_index()
    return sorted({index[c] for c in difflib.get_close_matches(fold(name), list(index), n=n, cutoff=0.6)})
