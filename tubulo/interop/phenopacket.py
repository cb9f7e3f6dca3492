"""A ranked case -> a GA4GH Phenopacket v2 document (`tubulo export phenopacket`).

`phenopacket_document` builds the document as plain JSON data (protobuf JSON field names) from a
`RankResult`; `check_phenopacket` parses it with the `phenopackets` package (the protobuf schema)
and returns the canonical JSON text, so nothing off-schema is ever written.  Only
`check_phenopacket` imports protobuf.

What goes in: the subject (id, sex, age as an ISO 8601 duration), phenotypic features (the case's
HPO features, excluded ones flagged, and every lab finding that carries an HPO term), measurements
(LOINC assay from knowledge/loinc.yaml, value in a UCUM unit), medical actions (medicines with an
ATC code), and interpretations: the top ranked candidates with their disease ids and genes, the
suggested gene panel, and the cautions.  What has no code to carry it is listed in `left_out`.
"""

from __future__ import annotations

import math
from datetime import datetime, timezone
from typing import Any, Mapping, NamedTuple

from .. import __version__
from ..rank import RankResult
from ..units import analyte_specs, convert
from .loinc import loinc_table, ucum_to_case_unit

__all__ = ["PhenopacketExport", "check_phenopacket", "iso_age", "phenopacket_document", "SCHEMA_VERSION"]

SCHEMA_VERSION = "2.0"
SEX = {"female": "FEMALE", "male": "MALE", "other": "OTHER_SEX", "unknown": "UNKNOWN_SEX"}
DISEASE_PREFIXES = ("OMIM:", "ORPHA:")

# Resource descriptions of the vocabularies a document uses (urls and IRI prefixes from memory,
# as the Phenopacket v2 documentation shows them for HP and OMIM).
_RESOURCES: dict[str, dict[str, str]] = {
    "HP": {"id": "hp", "name": "human phenotype ontology", "url": "http://purl.obolibrary.org/obo/hp.owl",
           "namespacePrefix": "HP", "iriPrefix": "http://purl.obolibrary.org/obo/HP_"},
    "OMIM": {"id": "omim", "name": "Online Mendelian Inheritance in Man", "url": "https://www.omim.org",
             "namespacePrefix": "OMIM", "iriPrefix": "https://www.omim.org/entry/"},
    "ORPHA": {"id": "ordo", "name": "Orphanet Rare Disease Ontology", "url": "http://www.orpha.net/ordo",
              "namespacePrefix": "ORPHA", "iriPrefix": "http://www.orpha.net/ORDO/Orphanet_"},
    "LOINC": {"id": "loinc", "name": "Logical Observation Identifiers Names and Codes", "url": "https://loinc.org",
              "namespacePrefix": "LOINC", "iriPrefix": "https://loinc.org/"},
    "UCUM": {"id": "ucum", "name": "Unified Code for Units of Measure", "url": "https://ucum.org",
             "namespacePrefix": "UCUM", "iriPrefix": "https://ucum.org/ucum#"},
    "ATC": {"id": "atc", "name": "Anatomical Therapeutic Chemical Classification",
            "url": "https://www.whocc.no/atc_ddd_index/", "namespacePrefix": "ATC",
            "iriPrefix": "https://www.whocc.no/atc_ddd_index/?code="},
    "hgnc.symbol": {"id": "hgnc.symbol", "name": "HGNC approved gene symbols", "url": "https://www.genenames.org",
                    "namespacePrefix": "hgnc.symbol", "iriPrefix": "https://identifiers.org/hgnc.symbol:"},
}


class PhenopacketExport(NamedTuple):
    document: Mapping[str, Any]
    left_out: tuple[str, ...]  # what the document could not carry, in plain words
    critical: tuple[str, ...]  # critical-value messages (also written into the document)


def iso_age(years: float) -> str:
    """An age in years as an ISO 8601 duration: days under 3 months, months and days under 2 years,
    else years and months."""
    if not math.isfinite(years) or years < 0:
        raise ValueError(f"age {years!r} is not a non-negative number of years")
    days = round(years * 365.25)
    if days < 92:
        return f"P{days}D"
    if years < 2:
        month = 365.25 / 12
        months = math.floor(years * 12 + 1e-6)
        rest = round(years * 365.25 - months * month)
        if rest >= 30:
            months, rest = months + 1, 0
        return f"P{months}M" + (f"{rest}D" if rest > 0 else "")
    y = math.floor(years + 1e-9)
    m = round((years - y) * 12)
    if m == 12:
        y, m = y + 1, 0
    return f"P{y}Y" + (f"{m}M" if m else "")


def _percent(p: float) -> str:
    return "below 0.1 %" if p < 0.001 else f"{p * 100:.1f} %"


def _sig(x: float, digits: int = 6) -> float:
    return float(f"{x:.{digits}g}")


def _hpo_label(hid: str, r: RankResult) -> str:
    from ..vocab import hpo_terms

    term = hpo_terms().get(hid)
    if term is not None:
        return term.label
    return (r.tables.get("hpo_labels") or {}).get(hid, hid)


def _features(r: RankResult, left_out: list[str]) -> list[dict]:
    case = r.workup.case
    out: list[dict] = []
    present: set[str] = set()
    for f in case.features:
        if f.hpo in present:
            continue
        present.add(f.hpo)
        item: dict[str, Any] = {"type": {"id": f.hpo, "label": f.label}}
        if f.given.strip() != f"{f.hpo} {f.label}".strip() and f.given.strip() != f.hpo:
            item["description"] = f"written in the case as '{f.given}'"
        out.append(item)
    for finding in r.findings.variables.values():
        if not finding.hpo or finding.origin in ("feature", "absent_feature") or finding.hpo in present:
            continue
        present.add(finding.hpo)
        out.append({"type": {"id": finding.hpo, "label": _hpo_label(finding.hpo, r)},
                    "description": f"from the measurements: {finding.label} {finding.state.replace('_', ' ')}"
                                   + (f" ({finding.basis})" if finding.basis else "")})
    for f in case.absent_features:
        if f.hpo in present:
            left_out.append(f"absent feature {f.hpo} {f.label}: a measured finding says it is present; "
                            "exported as present only")
            continue
        out.append({"type": {"id": f.hpo, "label": f.label}, "excluded": True})
    return out


def _quantity(key: str, value: float, low: float | None, high: float | None, ucum: str) -> dict:
    spec = analyte_specs()[key]
    per_unit = convert(1.0, ucum_to_case_unit(ucum) or None, spec)  # internal units in one export unit
    unit = {"id": f"UCUM:{ucum}", "label": ucum}
    q: dict[str, Any] = {"unit": unit, "value": _sig(value / per_unit)}
    if low is not None and high is not None:
        q["referenceRange"] = {"unit": unit, "low": _sig(low / per_unit), "high": _sig(high / per_unit)}
    return q


def _measurements(r: RankResult, critical_by_key: Mapping[str, str], left_out: list[str]) -> list[dict]:
    table = loinc_table()
    case = r.workup.case
    rows: list[tuple[str, str, float, Any, str, str | None]] = []
    p = case.patient
    if p.weight_kg is not None:
        rows.append(("patient.weight", "Weight", p.weight_kg, None, "", None))
    if p.height_cm is not None:
        rows.append(("patient.height", "Height", p.height_cm, None, "", None))
    for m in r.workup.measurements:
        rows.append((m.key, m.label, m.value, m.interval, m.given, m.flag))
    out: list[dict] = []
    for key, label, value, interval, given, flag in rows:
        entry = table.assay(key)
        if entry is None:
            left_out.append(f"measurement {key} ({label}): no LOINC assay for it in knowledge/loinc.yaml")
            continue
        low = high = None
        if interval is not None and interval.unit == analyte_specs()[key].unit:
            low, high = interval.low, interval.high
        parts = [label]
        if given:
            parts.append(f"written as '{given}'")
        if flag in ("low", "high"):
            parts.append(f"{flag} for age and sex ({interval.source})" if interval is not None else flag)
        if key in critical_by_key:
            parts.insert(0, f"CRITICAL VALUE: {critical_by_key[key]}")
        out.append({"assay": {"id": f"LOINC:{entry.code}", "label": entry.long_name},
                    "value": {"quantity": _quantity(key, value, low, high, entry.export or "")},
                    "description": "; ".join(parts)})
    for key, value in sorted(case.categories.items()):
        if key in analyte_specs():
            left_out.append(f"measurement {key} = {value}: a qualitative result; no coded answer to carry it")
    return out


def _medical_actions(r: RankResult, left_out: list[str]) -> list[dict]:
    out = []
    for m in r.workup.case.medications:
        if m.atc and m.inn:
            out.append({"treatment": {"agent": {"id": f"ATC:{m.atc}", "label": m.inn}}})
        else:
            left_out.append(f"medication '{m.given}': not in tubulo's drug knowledge, so no ATC code to name it")
    return out


def _interpretations(r: RankResult, doc: Mapping[str, Any], top: int, critical: list[str],
                     standing: str, left_out: list[str]) -> tuple[list[dict], set[str]]:
    case = r.workup.case
    cands = doc["candidates"]
    cover = list(doc["panel"]["cover"])
    chosen: list[int] = list(range(min(top, len(cands))))
    for gene in cover:  # every panel gene appears as a GeneDescriptor: add the candidate that holds it
        holder = next((i for i, c in enumerate(cands) if gene in (c.get("genes") or [])), None)
        if holder is not None and holder not in chosen:
            chosen.append(holder)
    alert = "CRITICAL VALUES in this case: act on them first (see the cautions interpretation). " if critical else ""
    out: list[dict] = []
    used: set[str] = set()
    warnings = [c.message for c in r.cautions if c.level == "warning"]
    text = " ".join(["CRITICAL VALUES:"] + [f"{c}." for c in critical]) + " " if critical else ""
    text += " ".join(f"Caution: {w.rstrip('.')}." for w in warnings) + (" " if warnings else "")
    out.append({"id": f"{case.id}-cautions", "progressStatus": "IN_PROGRESS", "summary": text + standing})
    n = len(cands)
    for i in sorted(chosen):
        c = cands[i]
        rank = i + 1
        why = [e["label"] for e in (c.get("support") or [])[:3]]
        extra = " Listed because it holds a gene of the suggested panel." if i >= top else ""
        summary = (f"{alert}tubulo rank {rank} of {n}: {c['name']} ({c['kind']}), probability "
                   f"{_percent(c['probability'])}." + (f" Supported by: {', '.join(why)}." if why else "")
                   + extra + f" {standing}")
        item: dict[str, Any] = {"id": f"{case.id}-candidate-{rank}", "progressStatus": "IN_PROGRESS",
                                "summary": summary}
        disease = next((x for p in DISEASE_PREFIXES for x in c.get("xrefs") or [] if x.startswith(p)), None)
        genes = list(c.get("genes") or [])
        if disease:
            used.add(disease.split(":", 1)[0])
            item["diagnosis"] = {"disease": {"id": disease, "label": c["name"]}}
            if genes:
                used.add("hgnc.symbol")
                item["diagnosis"]["genomicInterpretations"] = [
                    {"subjectOrBiosampleId": case.id, "interpretationStatus": "CANDIDATE",
                     "gene": {"valueId": f"hgnc.symbol:{g}", "symbol": g,
                              "description": "in the suggested gene panel" if g in cover
                              else "gene of this candidate, outside the suggested panel"}}
                    for g in genes]
        elif genes:
            left_out.append(f"candidate {c['id']}: no OMIM or ORPHA id, so its genes "
                            f"({', '.join(genes)}) have no diagnosis to sit under")
        out.append(item)
    panel = doc["panel"]
    if cover:
        out.append({"id": f"{case.id}-gene-panel", "progressStatus": "IN_PROGRESS",
                    "summary": (f"{alert}Suggested gene panel: {', '.join(cover)}; inherited causes hold "
                                f"{panel['inherited_mass'] * 100:.0f} % of the probability and these genes cover "
                                f"{panel['covered'] * 100:.0f} % of it. {standing}")})
    return out, used


def phenopacket_document(r: RankResult, top: int = 5, created: datetime | None = None) -> PhenopacketExport:
    """The Phenopacket v2 document of a ranked case (protobuf JSON field names)."""
    from ..output.rank import rank_document

    if top < 1:
        raise ValueError("top must be at least 1")
    doc = rank_document(r)
    case = r.workup.case
    left_out: list[str] = []
    crit = [c for c in r.cautions if c.level == "critical"]
    critical = [c.message for c in crit]
    critical_by_key = {c.id.split(":", 1)[1]: c.message for c in crit if c.id.startswith("critical:")}
    standing = next((c.message for c in r.cautions if c.id == "decision_support"), "")

    subject: dict[str, Any] = {"id": case.id, "sex": SEX.get(case.patient.sex, "UNKNOWN_SEX")}
    if case.patient.age_years is not None:
        subject["timeAtLastEncounter"] = {"age": {"iso8601duration": iso_age(case.patient.age_years)}}
    features = _features(r, left_out)
    measurements = _measurements(r, critical_by_key, left_out)
    actions = _medical_actions(r, left_out)
    interpretations, used = _interpretations(r, doc, top, critical, standing, left_out)

    versions = doc["versions"]
    hpo_release = versions.get("hpo_release") or ""
    used |= {"HP", "OMIM", "LOINC", "UCUM"}
    if actions:
        used.add("ATC")
    kver = f"as curated in tubulo knowledge {versions.get('knowledge')}"
    resource_version = {"HP": hpo_release, "OMIM": f"ids as annotated in HPO {hpo_release}",
                        "ORPHA": f"ids as annotated in HPO {hpo_release}",
                        "LOINC": loinc_table().source or "not pinned", "UCUM": "not pinned",
                        "ATC": kver, "hgnc.symbol": kver}
    resources = [dict(_RESOURCES[k], version=resource_version[k])
                 for k in ("HP", "OMIM", "ORPHA", "LOINC", "UCUM", "ATC", "hgnc.symbol") if k in used]
    when = (created or datetime.now(timezone.utc)).astimezone(timezone.utc).replace(microsecond=0)
    meta = {
        "created": when.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "createdBy": f"tubulo {__version__}",
        "resources": resources,
        "phenopacketSchemaVersion": SCHEMA_VERSION,
        "externalReferences": [{
            "description": (f"tubulo {versions.get('tool')}, knowledge {versions.get('knowledge')} "
                            f"(release {versions.get('knowledge_release')}), HPO {hpo_release}. "
                            "The interpretations are a ranked differential from decision support, not a diagnosis."),
        }],
    }
    document: dict[str, Any] = {"id": case.id, "subject": subject}
    if features:
        document["phenotypicFeatures"] = features
    if measurements:
        document["measurements"] = measurements
    if actions:
        document["medicalActions"] = actions
    if interpretations:
        document["interpretations"] = interpretations
    document["metaData"] = meta
    return PhenopacketExport(document, tuple(left_out), tuple(critical))


def check_phenopacket(document: Mapping[str, Any]) -> str:
    """Parse the document with the Phenopacket v2 protobuf schema; the canonical JSON text.

    ValueError naming the field when the document does not fit the schema."""
    import json

    from google.protobuf import json_format
    from phenopackets import Phenopacket

    try:
        message = json_format.ParseDict(dict(document), Phenopacket())
    except json_format.ParseError as exc:
        raise ValueError(f"the document does not fit the Phenopacket v2 schema: {exc}") from None
    data = json_format.MessageToDict(message)
    return json.dumps(data, indent=2, ensure_ascii=False) + "\n"
