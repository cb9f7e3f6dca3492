"""Pydantic models of the knowledge files (strict: an unknown field is an error).

Used only when the knowledge is compiled or checked, never on the runtime path of a case.
Cross-file checks (does a manifest variable exist, does a target resolve) live in `loader.py`;
these models check what one entry can check by itself: field names, id formats, sources,
probabilities.
"""

from __future__ import annotations

import re
from typing import Annotated, Literal, Union

from pydantic import AfterValidator, BaseModel, ConfigDict, Field, field_validator, model_validator

__all__ = [
    "ID_RE",
    "OMIM_RE",
    "ORPHA_RE",
    "HGNC_RE",
    "ATC_SUBSTANCE_RE",
    "ATC_PREFIX_RE",
    "HPO_RE",
    "EFFECT_SIGN",
    "check_source",
    "Segment",
    "ExpressedIn",
    "Transporter",
    "Hormone",
    "Mechanism",
    "Edge",
    "ActsOn",
    "StateManifest",
    "FeatureManifest",
    "parse_manifest",
    "Disorder",
    "DrugMember",
    "DrugClass",
    "Exposure",
    "Gate",
    "Variable",
    "VariablesFile",
    "Checks",
    "Meta",
    "Scoring",
    "GeneDiseaseException",
    "ManifestException",
    "HpoExceptions",
    "ConsistencyException",
    "ConsistencyExceptions",
    "FILE_KEYS",
]

ID_RE = re.compile(r"^[a-z][a-z0-9_]*$")
OMIM_RE = re.compile(r"^OMIM:\d{6}$")
ORPHA_RE = re.compile(r"^ORPHA:\d+$")
HGNC_RE = re.compile(r"^[A-Z0-9][A-Z0-9-]*$")
ATC_SUBSTANCE_RE = re.compile(r"^[A-V]\d{2}[A-Z]{2}\d{2}$")
# An ATC prefix is any leading part of a substance code at a level boundary: A, A01, A01A, A01AB.
ATC_PREFIX_RE = re.compile(r"^[A-V](\d{2}([A-Z]([A-Z](\d{2})?)?)?)?$")
HPO_RE = re.compile(r"^HP:\d{7}$")
_YEAR_RE = re.compile(r"\b(1[89]\d{2}|20\d{2})\b")
_PMID_RE = re.compile(r"PMID:\s*(\S+)")
_DOI_RE = re.compile(r"doi:\s*(\S+)", re.IGNORECASE)

EFFECT_SIGN = {"loss": -1, "inhibit": -1, "decrease": -1, "gain": 1, "activate": 1, "increase": 1}


def check_source(text: str) -> str:
    """Accept a citation with a 4-digit year, `common practice` or `from memory` (see README)."""
    s = text.strip()
    if not s:
        raise ValueError("source is empty; expected 'Authors year journal', 'common practice' or 'from memory'")
    low = s.lower()
    for m in _PMID_RE.finditer(s):
        if not re.fullmatch(r"\d{1,9}[;,.)]?", m.group(1)):
            raise ValueError(f"malformed PMID {m.group(1)!r} in source {s!r}; expected PMID:digits")
    for m in _DOI_RE.finditer(s):
        if not m.group(1).startswith("10."):
            raise ValueError(f"malformed DOI {m.group(1)!r} in source {s!r}; expected doi:10.x/...")
    if low.startswith("common practice") or "from memory" in low or _YEAR_RE.search(s):
        return s
    raise ValueError(
        f"source {s!r} is not a citation with a 4-digit year, 'common practice' or 'from memory'"
    )


def _check_id(v: str) -> str:
    if not ID_RE.match(v):
        raise ValueError(f"id {v!r} is not lower-case snake_case")
    return v


def _check_gene(v: str) -> str:
    if not HGNC_RE.match(v):
        raise ValueError(f"gene {v!r} is not an HGNC symbol (upper-case letters, digits, '-')")
    return v


def _check_xref(v: str) -> str:
    if v.startswith("OMIM:"):
        if not OMIM_RE.match(v):
            raise ValueError(f"xref {v!r} is not a valid OMIM id (expected OMIM: and 6 digits)")
    elif v.startswith("ORPHA:"):
        if not ORPHA_RE.match(v):
            raise ValueError(f"xref {v!r} is not a valid Orphanet id (expected ORPHA: and digits)")
    else:
        raise ValueError(f"xref {v!r} has an unknown prefix (expected OMIM:nnnnnn or ORPHA:n)")
    return v


def _check_atc(v: str) -> str:
    if not ATC_SUBSTANCE_RE.match(v):
        raise ValueError(f"ATC code {v!r} is not a substance code (letter, 2 digits, 2 letters, 2 digits)")
    return v


def _check_atc_prefix(v: str) -> str:
    if not ATC_PREFIX_RE.match(v):
        raise ValueError(f"ATC prefix {v!r} is not a leading level of an ATC code (e.g. C03, C03C, C03CA)")
    return v


Id = Annotated[str, AfterValidator(_check_id)]
Gene = Annotated[str, AfterValidator(_check_gene)]
Xref = Annotated[str, AfterValidator(_check_xref)]
Source = Annotated[str, AfterValidator(check_source)]
Prob = Annotated[float, Field(ge=0.0, le=1.0)]
Atc = Annotated[str, AfterValidator(_check_atc)]
AtcPrefix = Annotated[str, AfterValidator(_check_atc_prefix)]

Effect = Literal["loss", "gain", "inhibit", "activate", "increase", "decrease"]
Side = Literal["apical", "basolateral", "intracellular", "paracellular"]
Onset = Literal["antenatal", "neonatal", "infancy", "childhood", "adolescence", "adulthood"]
Inheritance = Literal["AR", "AD", "XLR", "XLD", "mitochondrial", "sporadic", "digenic"]
TransporterType = Literal[
    "channel", "cotransporter", "exchanger", "pump", "enzyme", "receptor", "tight_junction",
    "signalling", "transcription_factor", "scaffold", "other",
]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class Segment(_Strict):
    id: Id
    name: str
    part_of: Id | None = None
    synonyms: list[str] = []
    notes: str | None = None
    source: Source


class ExpressedIn(_Strict):
    segment: Id
    side: Side
    source: Source
    note: str | None = None


class Transporter(_Strict):
    id: Id
    name: str
    type: TransporterType
    genes: list[Gene] = Field(min_length=1)
    synonyms: list[str] = []
    expressed_in: list[ExpressedIn] = []
    notes: str | None = None
    source: Source


class Hormone(_Strict):
    id: Id
    name: str
    genes: list[Gene] = []
    synonyms: list[str] = []
    notes: str | None = None
    source: Source


class Mechanism(_Strict):
    id: Id
    name: str
    segment: Id | None = None
    synonyms: list[str] = []
    notes: str | None = None
    source: Source


class Edge(_Strict):
    from_: str = Field(alias="from")
    to: str
    sign: Literal[1, -1]
    source: Source
    note: str | None = None


class ActsOn(_Strict):
    target: str
    effect: Effect
    source: Source
    note: str | None = None

    @property
    def sign(self) -> int:
        return EFFECT_SIGN[self.effect]


class StateManifest(_Strict):
    """A candidate's distribution over one variable's states (given the variable's gate)."""

    states: dict[str, Prob] = Field(min_length=1)
    source: Source
    note: str | None = None

    @model_validator(mode="after")
    def _sum_at_most_one(self) -> "StateManifest":
        total = sum(self.states.values())
        if total > 1.0 + 1e-6:
            raise ValueError(f"state probabilities sum to {total:.3f} > 1")
        return self


class FeatureManifest(_Strict):
    """An HPO feature: the probability that it is present (absent = 1 - present unless given)."""

    present: Prob
    absent: Prob | None = None
    source: Source
    note: str | None = None

    @model_validator(mode="after")
    def _consistent(self) -> "FeatureManifest":
        if self.absent is not None and abs(self.present + self.absent - 1.0) > 1e-6:
            raise ValueError(f"present {self.present} + absent {self.absent} != 1")
        return self


Manifest = Union[StateManifest, FeatureManifest]


class _Candidate(_Strict):
    id: Id
    name: str
    synonyms: list[str] = []
    acts_on: list[ActsOn] = []
    segments: list[Id] = []
    manifests: dict[str, dict] = {}  # each value is checked by `parse_manifest` (errors name the key)
    notes: str | None = None
    source: Source


def parse_manifest(key: str, raw: object) -> StateManifest | FeatureManifest:
    """Validate one manifest value; an HPO key takes {present, absent?} or states present/absent."""
    if HPO_RE.match(key):
        if isinstance(raw, dict) and "states" in raw:
            m = StateManifest.model_validate(raw)
            bad = set(m.states) - {"present", "absent"}
            if bad:
                raise ValueError(f"an HPO feature takes states present/absent, not {sorted(bad)}")
            return FeatureManifest(present=m.states.get("present", 1.0 - m.states.get("absent", 0.0)),
                                   absent=m.states.get("absent"), source=m.source, note=m.note)
        return FeatureManifest.model_validate(raw)
    if ID_RE.match(key):
        return StateManifest.model_validate(raw)
    raise ValueError(f"manifest key {key!r} is neither a variable id nor an HPO id HP:nnnnnnn")


class Disorder(_Candidate):
    kind: Literal["inherited", "acquired"]
    xrefs: list[Xref] = []
    genes: list[Gene] = []
    inheritance: Inheritance
    onset: list[Onset] = []
    prevalence: Prob
    prevalence_source: Source
    exposures: list[Id] = []


class DrugMember(_Strict):
    inn: str
    atc: Atc | None = None
    synonyms: list[str] = []
    notes: str | None = None


class DrugClass(_Candidate):
    atc_prefix: AtcPrefix | list[AtcPrefix]
    members: list[DrugMember] = Field(min_length=1)
    prevalence: Prob | None = None
    prevalence_source: Source | None = None
    onset: list[Onset] = []

    @model_validator(mode="after")
    def _members_in_prefix(self) -> "DrugClass":
        prefixes = [self.atc_prefix] if isinstance(self.atc_prefix, str) else list(self.atc_prefix)
        for m in self.members:
            if m.atc and not any(m.atc.startswith(p) for p in prefixes):
                raise ValueError(f"member {m.inn!r} ATC {m.atc} does not start with the class prefix {prefixes}")
        return self


class Exposure(_Strict):
    id: Id
    name: str
    synonyms: list[str] = []
    acts_on: list[ActsOn] = []
    notes: str | None = None
    source: Source


class Gate(_Strict):
    variable: str | None = None
    states: list[str] = []
    unobserved_ok: bool = False
    any: list["Gate"] | None = None
    all: list["Gate"] | None = None

    @model_validator(mode="after")
    def _one_form(self) -> "Gate":
        forms = sum(x is not None for x in (self.variable, self.any, self.all))
        if forms != 1:
            raise ValueError("a gate is either {variable, states} or {any: [...]} or {all: [...]}")
        if self.variable is not None and not self.states:
            raise ValueError("a gate on a variable needs its states")
        return self


class Variable(_Strict):
    label: str
    states: list[str] = Field(min_length=2)
    abnormal: list[str] = Field(min_length=1)  # the states that are a finding to explain
    direction: dict[str, Literal[-1, 0, 1]] = {}
    hpo: dict[str, str] = {}
    gate: Gate | None = None
    background: dict[str, Prob]
    cost: Literal["bedside", "routine", "special", "genetic"]
    test: str | None = None  # what to order or do to observe the variable (shown with next tests)
    notes: str | None = None

    @model_validator(mode="after")
    def _states_known(self) -> "Variable":
        known = set(self.states)
        for field in ("abnormal", "direction", "hpo", "background"):
            extra = set(getattr(self, field)) - known
            if extra:
                raise ValueError(f"{field} names unknown states {sorted(extra)}; states are {self.states}")
        if set(self.abnormal) == known:
            raise ValueError(f"abnormal lists every state {self.states}; at least one state must be unremarkable")
        zero = sorted(st for st in self.abnormal if self.direction.get(st) == 0)
        if zero:
            raise ValueError(f"abnormal lists {zero}, of direction 0 (the normal point of the quantity)")
        unmarked = sorted(set(self.hpo) - set(self.abnormal))
        if unmarked:
            raise ValueError(f"hpo names states {unmarked} that abnormal does not list; a state an HPO "
                             f"phenotype names is abnormal")
        for state, term in self.hpo.items():
            if not HPO_RE.match(term):
                raise ValueError(f"hpo.{state}: {term!r} is not an HPO id HP:nnnnnnn")
        total = sum(self.background.values())
        if abs(total - 1.0) > 0.011:
            raise ValueError(f"background sums to {total:.3f}, expected 1")
        return self


class VariablesFile(_Strict):
    version: int
    variables: dict[str, Variable]


class Checks(_Strict):
    """Thresholds of the knowledge checks (quality targets of the project, not clinical facts)."""

    consistency_min_agreement: Prob
    hpo_min_agreement: Prob
    hpo_present_min: Prob   # curated p at or above this = the curation says the feature is present
    hpo_absent_max: Prob    # curated p below this for an HPO-annotated term = a disagreement


class Meta(_Strict):
    knowledge_version: str
    release_date: str = Field(pattern=r"^\d{4}-\d{2}-\d{2}$")
    hpo_release: str | None = None
    description: str | None = None
    caution: str
    checks: Checks


class Scoring(_Strict):
    leak: Prob
    llr_cap: float = Field(gt=0)
    prior_exponent: float = Field(ge=0, le=1)
    min_prior: Prob | None = None
    notes: str | None = None
    source: Source


class GeneDiseaseException(_Strict):
    disorder: Id
    xref: str | None = None
    gene: str | None = None
    reason: str = Field(min_length=10)


class ManifestException(_Strict):
    disorder: Id
    hpo: str = Field(pattern=r"^HP:\d{7}$")
    reason: str = Field(min_length=10)


class HpoExceptions(_Strict):
    hpo_release: str
    gene_disease: list[GeneDiseaseException] = []
    manifests: list[ManifestException] = []


ConsistencyReason = Literal[
    "compensation", "opposing_pathways", "extrarenal", "gate", "timing", "indication", "model_gap", "curation",
]


class ConsistencyException(_Strict):
    candidate: Id
    variable: Id
    reason: ConsistencyReason
    note: str = Field(min_length=10)


class ConsistencyExceptions(_Strict):
    exceptions: list[ConsistencyException] = []


class CautionWhen(_Strict):
    variable: Id
    states: list[str] = Field(min_length=1)


class CautionRule(_Strict):
    """A data-quality or context caution (cautions.yaml `quality`), raised when every condition it
    names holds: a finding, missing measurements, a drug on the medication list."""

    id: Id
    level: Literal["critical", "warning", "info"]
    message: str = Field(min_length=1)
    source: str = Field(min_length=1)
    when: CautionWhen | None = None  # a finding: the variable is observed in one of these states
    missing: list[str] = []  # analyte keys: none of them is measured ...
    needs_variable: Id | None = None  # ... while this variable is observed
    drug_kind_on_list: bool = False  # a drug the knowledge covers is on the medication list
    drug_class_on_list: list[Id] = []  # a member of one of these drug classes is on the list

    @model_validator(mode="after")
    def _has_condition(self) -> "CautionRule":
        if not (self.when or self.missing or self.drug_kind_on_list or self.drug_class_on_list):
            raise ValueError("names no condition (when, missing, drug_kind_on_list or drug_class_on_list): "
                             "it would be raised on every case")
        if self.needs_variable and not self.missing:
            raise ValueError("needs_variable qualifies missing, which is not given")
        return self


CRITICAL_MESSAGE_FIELDS = frozenset({"label", "value", "unit", "side", "limit"})


class CautionsFile(_Strict):
    version: int = 1
    standing: str = Field(min_length=1)
    critical_message: str = Field(min_length=1)
    critical_source_note: str = Field(min_length=1)
    quality: list[CautionRule] = []

    @field_validator("critical_message")
    @classmethod
    def _fields(cls, text: str) -> str:
        import string

        used = {name for _, name, _, _ in string.Formatter().parse(text) if name}
        if used - CRITICAL_MESSAGE_FIELDS:
            raise ValueError(f"names {sorted(used - CRITICAL_MESSAGE_FIELDS)}; the fields are "
                             f"{sorted(CRITICAL_MESSAGE_FIELDS)}")
        return text

    @model_validator(mode="after")
    def _unique(self) -> "CautionsFile":
        ids = [r.id for r in self.quality]
        twice = sorted({i for i in ids if ids.count(i) > 1})
        if twice:
            raise ValueError(f"quality ids listed twice: {twice}")
        return self


Positive = Annotated[float, Field(gt=0)]
Share = Annotated[float, Field(gt=0, le=1)]
FamilyPattern = Literal["dominant", "recessive", "x-linked"]
Cost = Literal["bedside", "routine", "special", "genetic"]


def _hpo_id(text: str) -> str:
    if not HPO_RE.match(text):
        raise ValueError(f"{text!r} is not an HPO id HP:nnnnnnn")
    return text


HpoKey = Annotated[str, AfterValidator(_hpo_id)]


class PriorsFile(_Strict):
    """priors.yaml: prior weights and context factors of the scorer (project settings)."""

    version: int = 1
    evidence_weight: Positive
    residual_weight: Positive
    unknown_medication_residual: Positive
    drug_on_list_weight: Positive
    drug_not_listed_weight: Positive
    exposure_present_factor: Positive
    exposure_absent_factor: Positive
    onset_mismatch_factor: Positive
    xlr_female_factor: Positive
    consanguinity_factor: dict[Inheritance, Positive] = {}
    family_pattern_factor: dict[FamilyPattern, dict[Inheritance, Positive]] = {}
    affected_relatives_factor: dict[Inheritance, Positive]
    feature_background: Share
    hpo_test_cost: dict[HpoKey, Cost] = {}
    unexplained_below: Share
    panel_coverage: Share

    @model_validator(mode="after")
    def _sporadic(self) -> "PriorsFile":
        if "sporadic" not in self.affected_relatives_factor:
            raise ValueError("affected_relatives_factor needs 'sporadic' (applied to a candidate whose inheritance "
                             "the pedigree contradicts)")
        return self


class PhrasesFile(_Strict):
    """phrases.yaml: clinic words mapped to the HPO term they mean, and terms shipped for users to type."""

    version: int = 1
    phrases: dict[str, HpoKey] = {}
    shipped: list[HpoKey] = []


class HendersonHasselbalch(_Strict):
    pka: Positive
    co2_solubility: Positive
    tolerance_fraction: Share
    min_abs: Annotated[float, Field(ge=0)]
    source: str = Field(min_length=1)


class ChecksFile(_Strict):
    """checks.yaml: data-quality checks on a case's values."""

    version: int = 1
    henderson_hasselbalch: HendersonHasselbalch


Gate.model_rebuild()

# top-level key of a graph file -> model of each entry
FILE_KEYS: dict[str, type[_Strict]] = {
    "segments": Segment,
    "transporters": Transporter,
    "hormones": Hormone,
    "mechanisms": Mechanism,
    "edges": Edge,
    "disorders": Disorder,
    "drug_classes": DrugClass,
    "exposures": Exposure,
}
