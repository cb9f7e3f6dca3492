"""Builds the printable report's content from a ranking result: plain, typed, already-formatted data
that the HTML and Markdown renderers lay out the same way, section by section."""

from __future__ import annotations

from typing import Any, Mapping, NamedTuple

from ..errors import KnowledgeError
from ..output.check import fmt_number
from ..output.rank import rank_document
from ..rank import RankResult
from .nephron import Placement, place_segments

__all__ = [
    "SECTIONS", "Fact", "CautionItem", "MeasurementRow", "IndexRow", "FindingRow", "CandidateRow", "Step",
    "EvidenceItem", "CandidateEvidence", "NextTestRow", "PanelInfo", "NephronInfo", "Report", "build_report",
    "percent",
]

# (anchor, heading) in the order both renderers print them; cautions always come first.
SECTIONS: tuple[tuple[str, str], ...] = (
    ("cautions", "Cautions"),
    ("case", "Case"),
    ("measurements", "Measurements"),
    ("derived", "Derived indices"),
    ("findings", "Findings"),
    ("differential", "Differential"),
    ("evidence", "Evidence for the leading candidates"),
    ("nephron", "Nephron map"),
    ("next-tests", "Next tests"),
    ("panel", "Gene panel"),
    ("about", "About this report"),
)

_FLAG_WORDS = {"low": "LOW", "high": "HIGH", "normal": "in range"}
_KIND_WORDS = {"inherited": "inherited", "acquired": "acquired", "drug": "drug effect", "residual": "none listed"}


class Fact(NamedTuple):
    label: str
    value: str


class CautionItem(NamedTuple):
    level: str  # critical | warning | info
    message: str
    source: str
    id: str


class MeasurementRow(NamedTuple):
    label: str
    key: str
    given: str
    value: str
    unit: str
    reference: str
    reference_source: str
    flag: str  # "LOW", "HIGH", "in range" or "" when there is no reference
    critical: bool
    note: str


class IndexRow(NamedTuple):
    label: str
    id: str
    value: str
    unit: str
    formula: str
    inputs: tuple[Fact, ...]
    source: str
    valid: bool
    reason: str


class FindingRow(NamedTuple):
    label: str
    state: str
    code: str
    basis: str
    origin: str


class CandidateRow(NamedTuple):
    rank: int
    id: str
    name: str
    kind: str
    probability: float
    genes: tuple[str, ...]
    xrefs: tuple[str, ...]


class Step(NamedTuple):
    label: str
    node: str
    kind: str
    edge: str
    sign: int | None
    source: str
    note: str


class EvidenceItem(NamedTuple):
    label: str
    state: str
    log_lr: float
    basis: str
    path: tuple[Step, ...]


class CandidateEvidence(NamedTuple):
    rank: int
    id: str
    name: str
    kind: str
    probability: float
    support: tuple[EvidenceItem, ...]
    against: tuple[EvidenceItem, ...]
    unexplained: tuple[str, ...]
    prior_notes: tuple[str, ...]
    segments: tuple[str, ...]  # segment labels


class NextTestRow(NamedTuple):
    test: str
    cost: str
    bits: float
    separates: tuple[str, ...]


class PanelInfo(NamedTuple):
    cover: tuple[tuple[str, float], ...]  # (gene, share of the inherited probability)
    covered: float
    target: float
    inherited_mass: float
    listed: int


class NephronInfo(NamedTuple):
    placement: Placement
    part_labels: tuple[tuple[str, str], ...]  # drawn part id -> knowledge label, in drawing order
    outside: tuple[Fact, ...]  # label -> candidate ranks
    undrawn: tuple[Fact, ...]
    legend: tuple[Fact, ...]  # "1 name" -> its segments, or a statement that none are listed


class Report(NamedTuple):
    case_id: str
    date: str
    critical: tuple[CautionItem, ...]
    cautions: tuple[CautionItem, ...]  # the rest, standing statement last
    case_facts: tuple[Fact, ...]
    measurements: tuple[MeasurementRow, ...]
    derived: tuple[IndexRow, ...]
    not_computed: tuple[Fact, ...]
    findings: tuple[FindingRow, ...]
    candidates: tuple[CandidateRow, ...]
    total_candidates: int
    rest_probability: float
    evidence: tuple[CandidateEvidence, ...]
    nephron: NephronInfo
    next_tests: tuple[NextTestRow, ...]
    panel: PanelInfo
    versions: tuple[Fact, ...]
    standing: str


def percent(p: float) -> str:
    """A probability as a percentage for print: one decimal, '<0.1 %' for the very small."""
    if p <= 0:
        return "0 %"
    if p < 0.001:
        return "<0.1 %"
    return f"{p * 100:.1f} %"


def _text(x: Any) -> str:
    return "" if x is None else " ".join(str(x).split())


def _age(age: float | None) -> str:
    if age is None:
        return "not given"
    if age < 28 / 365.25:
        return f"{age * 365.25:.0f} days"
    if age < 2:
        return f"{age * 12:.0f} months"
    return f"{age:.0f} years"


def _yes_no(x: bool | None) -> str:
    return "not stated" if x is None else ("yes" if x else "no")


def _case_facts(c: Mapping[str, Any]) -> tuple[Fact, ...]:
    p = c["patient"]
    facts = [Fact("Case id", _text(c["id"])), Fact("Case file", _text(c["source"]) or "-"),
             Fact("Age", _age(p["age_years"])), Fact("Sex", _text(p["sex"]))]
    if p.get("weight_kg"):
        facts.append(Fact("Weight", f"{fmt_number(p['weight_kg'])} kg"))
    if p.get("height_cm"):
        facts.append(Fact("Height", f"{fmt_number(p['height_cm'])} cm"))
    if p.get("pregnant") is not None:
        facts.append(Fact("Pregnant", _yes_no(p["pregnant"])))
    if c.get("onset"):
        facts.append(Fact("Onset", _text(c["onset"])))
    fam = c["family"]
    fam_bits = []
    if fam.get("consanguinity") is not None:
        fam_bits.append(f"consanguinity: {_yes_no(fam['consanguinity'])}")
    if fam.get("pattern"):
        fam_bits.append(f"pattern: {_text(fam['pattern'])}")
    if fam.get("affected_relatives"):
        fam_bits.append("affected: " + ", ".join(_text(r) for r in fam["affected_relatives"]))
    facts.append(Fact("Family", "; ".join(fam_bits) or "nothing stated"))

    def feats(rows: list[Mapping[str, Any]]) -> str:
        out = []
        for f in rows:
            label = _text(f.get("label")) or _text(f.get("given"))
            code = _text(f.get("hpo"))
            out.append(f"{label} ({code})" if code and code != label else label)
        return "; ".join(out) or "none"

    facts.append(Fact("Features present", feats(c["features"])))
    facts.append(Fact("Features looked for and absent", feats(c["absent_features"])))
    meds = []
    for m in c["medications"]:
        given = _text(m["given"])
        if m.get("inn"):
            extra = ", ".join(x for x in (_text(m["inn"]) if _text(m["inn"]).lower() != given.lower() else "",
                                          f"ATC {_text(m['atc'])}" if m.get("atc") else "") if x)
            meds.append(f"{given} ({extra})" if extra else given)
        else:
            meds.append(f"{given} (not in the drug knowledge)")
    facts.append(Fact("Medications", "; ".join(meds) or "none listed"))
    if c.get("exposures"):
        facts.append(Fact("Exposures", "; ".join(_text(e) for e in c["exposures"])))
    for key, value in c.get("categories", {}).items():
        facts.append(Fact(_text(key), _text(value)))
    for n in c.get("notes", []):
        facts.append(Fact(f"Input note ({_text(n['level'])})", f"{_text(n['path'])}: {_text(n['message'])}"))
    return tuple(facts)


def _measurements(rows: list[Mapping[str, Any]], critical_keys: set[str]) -> tuple[MeasurementRow, ...]:
    out = []
    for m in rows:
        ref = m.get("reference")
        ref_text, ref_src = "-", ""
        if ref:
            low = fmt_number(ref["low"]) if ref.get("low") is not None else ""
            high = fmt_number(ref["high"]) if ref.get("high") is not None else ""
            span = f"{low}-{high}" if low and high else (f">= {low}" if low else f"<= {high}")
            ref_text = f"{span} {_text(ref.get('unit'))}".strip()
            if ref.get("group"):
                ref_text += f" ({_text(ref['group'])})"
            ref_src = _text(ref.get("source"))
        out.append(MeasurementRow(
            label=_text(m["label"]), key=_text(m["key"]), given=_text(m["given"]), value=fmt_number(m["value"]),
            unit=_text(m["unit"]), reference=ref_text, reference_source=ref_src,
            flag=_FLAG_WORDS.get(m.get("flag") or "", ""), critical=m["key"] in critical_keys,
            note="unit assumed" if m.get("assumed_unit") else ""))
    return tuple(out)


def _derived(rows: list[Mapping[str, Any]]) -> tuple[tuple[IndexRow, ...], tuple[Fact, ...]]:
    shown, missing = [], []
    for d in rows:
        if d["value"] is None:
            missing.append(Fact(_text(d["label"]), _text(d.get("reason")) or "inputs missing"))
            continue
        shown.append(IndexRow(
            label=_text(d["label"]), id=_text(d["id"]), value=fmt_number(d["value"]),
            unit="" if _text(d["unit"]) == "1" else _text(d["unit"]),  # UCUM "1": a plain ratio
            formula=_text(d["formula"]),
            inputs=tuple(Fact(_text(k), fmt_number(v) if isinstance(v, (int, float)) else _text(v))
                         for k, v in (d.get("inputs") or {}).items()),
            source=_text(d["source"]), valid=bool(d["valid"]), reason=_text(d.get("reason"))))
    return tuple(shown), tuple(missing)


def _step(s: Mapping[str, Any]) -> Step:
    sign = s.get("sign")
    return Step(label=_text(s.get("label") or s.get("node")), node=_text(s.get("node")), kind=_text(s.get("kind")),
                edge=_text(s.get("edge")).replace("_", " "), sign=int(sign) if sign in (1, -1) else None,
                source=_text(s.get("source")), note=_text(s.get("note")))


def _evidence(rows: list[Mapping[str, Any]] | None) -> tuple[EvidenceItem, ...]:
    return tuple(EvidenceItem(label=_text(e["label"]), state=_text(e["state"]).replace("_", " "),
                              log_lr=float(e["log_lr"]), basis=_text(e["from"]),
                              path=tuple(_step(s) for s in e.get("path") or ()))
                 for e in rows or ())


def _part_of(tables: Mapping[str, Any]) -> dict[str, str | None]:
    from ..paths import read_knowledge_yaml

    try:
        entries = read_knowledge_yaml("segments.yaml")["segments"]
        return {str(e["id"]): (str(e["part_of"]) if e.get("part_of") else None) for e in entries}
    except (FileNotFoundError, KeyError, TypeError) as exc:
        raise KnowledgeError(f"segments.yaml: cannot read the segment tree for the nephron map ({exc!r}); "
                             "expected a list 'segments' of entries with id and part_of") from None


def _node_label(tables: Mapping[str, Any], node: str) -> str:
    return _text(((tables.get("nodes") or {}).get(node) or {}).get("label") or node)


def _nephron(top: list[Mapping[str, Any]], tables: Mapping[str, Any]) -> NephronInfo:
    from .nephron import PARTS

    part_of = _part_of(tables)
    placement = place_segments([(i, c.get("segments") or ()) for i, c in enumerate(top, 1)], part_of)
    legend = []
    for i, c in enumerate(top, 1):
        segs = [_node_label(tables, s) for s in c.get("segments") or ()]
        legend.append(Fact(f"{i}. {_text(c['name'])}",
                           "; ".join(segs) if segs else "no nephron segment listed in the knowledge"))
    ranks = lambda r: "candidate " + ", ".join(str(x) for x in r)  # noqa: E731
    return NephronInfo(
        placement=placement,
        part_labels=tuple((p.id, _node_label(tables, p.id)) for p in PARTS),
        outside=tuple(Fact(_node_label(tables, s), ranks(r)) for s, r in placement.outside),
        undrawn=tuple(Fact(_node_label(tables, s), ranks(r)) for s, r in placement.undrawn),
        legend=tuple(legend))


def build_report(result: RankResult, *, date: str, top: int = 10, detail: int = 3) -> Report:
    """The report content for one ranked case: `top` candidates listed, the first `detail` explained."""
    doc = rank_document(result)
    tables = result.tables
    cands = doc["candidates"]
    top = max(1, min(top, len(cands)))
    detail = max(0, min(detail, top))
    names = {c["id"]: _text(c["name"]) for c in cands}

    all_cautions = [CautionItem(_text(c["level"]), _text(c["message"]), _text(c["source"]), _text(c["id"]))
                    for c in doc["cautions"]]
    critical = tuple(c for c in all_cautions if c.level == "critical")
    others = tuple(c for c in all_cautions if c.level != "critical")
    standing = next((c.message for c in all_cautions if c.id == "decision_support"), "")
    if not standing:
        raise KnowledgeError("cautions.yaml: the standing decision-support statement is missing from the cautions; "
                             "expected an entry 'standing'")
    critical_keys = {c.id.split(":", 1)[1] for c in critical if c.id.startswith("critical:")}

    derived, not_computed = _derived(doc["derived"])
    rows = tuple(CandidateRow(i, c["id"], _text(c["name"]), _KIND_WORDS.get(c["kind"], _text(c["kind"])),
                              float(c["probability"]), tuple(c.get("genes") or ()), tuple(c.get("xrefs") or ()))
                 for i, c in enumerate(cands[:top], 1))
    evidence = tuple(
        CandidateEvidence(
            rank=i, id=c["id"], name=_text(c["name"]), kind=_KIND_WORDS.get(c["kind"], _text(c["kind"])),
            probability=float(c["probability"]), support=_evidence(c.get("support")),
            against=_evidence(c.get("against")), unexplained=tuple(_text(u) for u in c.get("unexplained") or ()),
            prior_notes=tuple(_text(n) for n in c.get("prior_notes") or ()),
            segments=tuple(_node_label(tables, s) for s in c.get("segments") or ()))
        for i, c in enumerate(cands[:detail], 1))
    p = doc["panel"]
    gene_share = {g["gene"]: g["mass"] for g in p["genes"]}
    v = doc["versions"]
    return Report(
        case_id=_text(doc["case"]["id"]),
        date=date,
        critical=critical,
        cautions=others,
        case_facts=_case_facts(doc["case"]),
        measurements=_measurements(doc["measurements"], critical_keys),
        derived=derived,
        not_computed=not_computed,
        findings=tuple(FindingRow(_text(f["label"]), _text(f["state"]).replace("_", " "), _text(f.get("hpo")),
                                  _text(f["from"]), _text(f["origin"])) for f in doc["findings"]),
        candidates=rows,
        total_candidates=len(cands),
        rest_probability=max(0.0, 1.0 - sum(r.probability for r in rows)),
        evidence=evidence,
        nephron=_nephron(cands[:detail], tables),
        next_tests=tuple(NextTestRow(_text(t["test"]), _text(t["cost"]), float(t["expected_bits"]),
                                     tuple(names.get(s, _text(s)) for s in t.get("separates") or ()))
                         for t in doc["next_tests"]),
        panel=PanelInfo(cover=tuple((g, float(gene_share.get(g, 0.0))) for g in p["cover"]),
                        covered=float(p["covered"]), target=float(p["coverage_target"]),
                        inherited_mass=float(p["inherited_mass"]), listed=len(p["genes"])),
        versions=(Fact("tubulo", _text(v.get("tool"))), Fact("Knowledge", _text(v.get("knowledge"))),
                  Fact("Knowledge release", _text(v.get("knowledge_release"))),
                  Fact("HPO release", _text(v.get("hpo_release")))),
        standing=standing,
    )
