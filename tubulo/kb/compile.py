"""Compile the validated knowledge into plain tables (dicts, lists, str, int, float, bool, None).

Runs only when the cache is cold (see `tables.load_tables`); it may import pydantic and networkx.
The layout of the tables is documented in `tubulo/kb/tables.py`.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any

from .consistency import consistency_report, curated_sign
from .graph import Prediction, build_graph, drug_node, propagate
from .loader import Knowledge, load_knowledge
from .schema import EFFECT_SIGN, FeatureManifest, StateManifest
from .tables import TABLES_VERSION

__all__ = ["build_tables", "compile_knowledge", "read_hpo_labels"]

_ADJ_SKIP = frozenset({"has_state"})


def read_hpo_labels(folder: Path) -> dict[str, str]:
    """HPO id -> label from `hpo_subset.json` when it exists (a mapping, or {"terms": ...})."""
    path = folder / "hpo_subset.json"
    if not path.is_file():
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    terms = data.get("terms", data) if isinstance(data, dict) else {}
    if isinstance(terms, list):
        terms = {t.get("id"): t for t in terms if isinstance(t, dict)}
    out: dict[str, str] = {}
    for tid, t in terms.items() if isinstance(terms, dict) else ():
        name = t if isinstance(t, str) else (t.get("name") or t.get("label")) if isinstance(t, dict) else None
        if isinstance(tid, str) and tid.startswith("HP:") and isinstance(name, str):
            out[tid] = name
    return out


def build_tables(folder: Path | str | None = None, key: str = "") -> dict:
    """Load, validate and compile the knowledge folder into tables."""
    return compile_knowledge(load_knowledge(folder), key=key)


def compile_knowledge(kn: Knowledge, key: str = "") -> dict:
    """Tables from validated knowledge (pure: the same knowledge gives the same tables)."""
    used = {t for v in kn.variables.values() for t in v.hpo.values()}
    used |= {k for ms in kn.manifests.values() for k in ms if k.startswith("HP:")}
    hpo_labels = {t: name for t, name in read_hpo_labels(kn.folder).items() if t in used}
    g = build_graph(kn, hpo_labels)
    reaches = {cid: propagate(g, cid) for cid in kn.candidates()}
    report = consistency_report(kn, g, reaches)

    candidates = {cid: _candidate(kn, cid) for cid in kn.candidates()}
    paths = {cid: _paths(kn, cid, reaches[cid]) for cid in kn.candidates()}

    drug_index: dict[str, list[dict]] = {}
    atc_index: dict[str, list[dict]] = {}
    for cid, dc in kn.drug_classes.items():
        for m in dc.members:
            hit = {"class": cid, "inn": m.inn}
            for name in {m.inn.lower(), *(s.lower() for s in m.synonyms)}:
                drug_index.setdefault(name, []).append(hit)
            if m.atc:
                atc_index.setdefault(m.atc, []).append(hit)
    exposure_index: dict[str, str] = {}
    for xid, x in kn.exposures.items():
        for name in {xid, x.name.lower(), *(s.lower() for s in x.synonyms)}:
            exposure_index.setdefault(name, xid)

    nodes: dict[str, dict] = {}
    for nid, attrs in g.nodes(data=True):
        nodes[nid] = {k: v for k, v in attrs.items() if v is not None}
    adjacency: dict[str, dict[str, list[dict]]] = {nid: {"out": [], "in": []} for nid in nodes}
    for u, v, data in g.edges(data=True):
        if data["kind"] in _ADJ_SKIP:
            continue
        edge = {"from": u, "to": v, **{k: val for k, val in data.items() if val is not None and k != "states"}}
        adjacency[u]["out"].append(edge)  # one dict shared by both ends
        adjacency[v]["in"].append(edge)

    lookup: dict[str, list[str]] = {}

    def add(name: str, nid: str) -> None:
        ids = lookup.setdefault(name.lower(), [])
        if nid not in ids:
            ids.append(nid)

    for nid, attrs in nodes.items():
        add(nid, nid)
        add(str(attrs.get("label", nid)), nid)
    for sec in ("segments", "transporters", "hormones", "mechanisms", "disorders", "drug_classes", "exposures"):
        for nid, e in getattr(kn, sec).items():
            for s in getattr(e, "synonyms", []):
                add(s, nid)
            for x in getattr(e, "xrefs", []):
                add(x, nid)
    for cid, dc in kn.drug_classes.items():
        for m in dc.members:
            for s in (m.inn, *m.synonyms):
                add(s, drug_node(m.inn))
            if m.atc:
                add(m.atc, drug_node(m.inn))
    for nid, attrs in nodes.items():
        if attrs.get("kind") == "gene":
            add(attrs["label"], nid)

    meta = kn.meta.model_dump() if kn.meta else {}
    return _share({
        "tables_version": TABLES_VERSION,
        "meta": {**meta, "knowledge_hash": key, "files": list(kn.files)},
        "scoring": kn.scoring.model_dump(exclude_none=True) if kn.scoring else {},
        "variables": {vid: _variable(v) for vid, v in kn.variables.items()},
        "hpo_labels": hpo_labels,
        "candidates": candidates,
        "exposures": {xid: {"id": xid, "name": x.name, "synonyms": list(x.synonyms),
                            "acts_on": [_acts(a) for a in x.acts_on], "source": x.source}
                      for xid, x in kn.exposures.items()},
        "drug_index": drug_index,
        "atc_index": atc_index,
        "exposure_index": exposure_index,
        "paths": paths,
        "nodes": nodes,
        "adjacency": adjacency,
        "lookup": lookup,
        "consistency": {
            "compared": report.compared, "agreed": report.agreed, "rate": report.rate,
            "strict_rate": report.strict_rate,
            "lean_agreements": report.lean_agreements, "bound_agreements": report.bound_agreements,
            "min_agreement": report.min_agreement,
            "disagreements": [{"candidate": c.candidate, "variable": c.variable, "predicted": list(c.predicted),
                               "curated": c.curated, "most_likely": c.most_likely, "reason": c.reason,
                               "note": c.note} for c in report.disagreements],
        },
    }, {})


def _share(obj: Any, memo: dict) -> Any:
    """Intern strings and let equal flat dicts be one object, so the pickle stores each once
    (a warm load then unpickles far fewer objects).  The tables are read-only, so sharing is safe."""
    if isinstance(obj, str):
        return sys.intern(obj)
    if isinstance(obj, list):
        return [_share(v, memo) for v in obj]
    if isinstance(obj, dict):
        if id(obj) in memo:
            return memo[id(obj)]
        new = {_share(k, memo): _share(v, memo) for k, v in obj.items()}
        if all(not isinstance(v, (dict, list)) for v in new.values()):
            new = memo.setdefault(tuple((k, type(v), v) for k, v in new.items()), new)
        memo[id(obj)] = new
        return new
    return obj


def _variable(v) -> dict:
    return {"label": v.label, "states": list(v.states), "abnormal": list(v.abnormal), "direction": dict(v.direction),
            "hpo": dict(v.hpo),
            "gate": v.gate.model_dump(exclude_none=True) if v.gate else None,
            "background": dict(v.background), "cost": v.cost}


def _acts(a) -> dict:
    return {"target": a.target, "effect": a.effect, "sign": EFFECT_SIGN[a.effect], "source": a.source,
            "note": a.note}


def _candidate(kn: Knowledge, cid: str) -> dict:
    c = kn.candidates()[cid]
    kind = kn.candidate_kind(cid)
    manifests: dict[str, dict[str, float]] = {}
    sources: dict[str, str] = {}
    for key, m in kn.manifests.get(cid, {}).items():
        if isinstance(m, FeatureManifest):
            absent = m.absent if m.absent is not None else 1.0 - m.present
            manifests[key] = {"present": m.present, "absent": round(absent, 12)}
        else:
            manifests[key] = dict(m.states)
        sources[key] = m.source
    file, line = kn.origin.get(cid, ("", 0))
    row = {
        "id": cid, "name": c.name, "kind": kind, "synonyms": list(c.synonyms),
        "xrefs": list(getattr(c, "xrefs", [])), "genes": list(getattr(c, "genes", [])),
        "segments": list(c.segments), "inheritance": getattr(c, "inheritance", None),
        "onset": list(getattr(c, "onset", [])), "prevalence": getattr(c, "prevalence", None),
        "prevalence_source": getattr(c, "prevalence_source", None),
        "exposures": list(getattr(c, "exposures", [])), "acts_on": [_acts(a) for a in c.acts_on],
        "members": [], "atc_prefix": [], "manifests": manifests, "manifest_sources": sources,
        "notes": c.notes, "source": c.source, "origin": f"{file}:{line}",
    }
    if kind == "drug":
        row["members"] = [{"inn": m.inn, "atc": m.atc, "synonyms": list(m.synonyms)} for m in c.members]
        row["atc_prefix"] = [c.atc_prefix] if isinstance(c.atc_prefix, str) else list(c.atc_prefix)
        row["xrefs"] = [f"ATC:{m.atc}" for m in c.members if m.atc]
    return row


def _paths(kn: Knowledge, cid: str, reach: dict[str, Prediction]) -> dict[str, dict]:
    out: dict[str, dict] = {}
    for vid, m in kn.manifests.get(cid, {}).items():
        if not isinstance(m, StateManifest) or vid not in reach:
            continue
        pred = reach[vid]
        cur = curated_sign(m, kn.variables[vid].direction)
        curated = cur[0] if cur else None
        chosen = pred.signs[0]
        if pred.ambiguous and curated in pred.signs:
            chosen = curated
        alt = [s for s in pred.signs if s != chosen]
        out[vid] = {
            "predicted": pred.sign, "ambiguous": pred.ambiguous, "distance": pred.distance,
            "curated": curated,
            "steps": [s.as_dict() for s in pred.paths[chosen]],
            "alternative": [s.as_dict() for s in pred.paths[alt[0]]] if alt else [],
        }
    return out

