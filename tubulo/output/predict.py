"""`tubulo predict NAME`: the findings a drug, exposure or disorder is expected to produce, and why."""

from __future__ import annotations

import difflib
import json
from typing import Any, Mapping

from ..errors import TubuloError
from ..vocab import fold
from ..scoring import feature_background, state_probability
from .check import CAUTION

__all__ = ["resolve_candidate", "predict_document", "predict_text"]


def resolve_candidate(tables: Mapping[str, Any], name: str) -> str:
    """A candidate id from an id, INN or synonym, exposure, or name; TubuloError with suggestions if none."""
    cands = tables["candidates"]
    if name in cands:
        return name
    key = fold(name)
    hits = (tables.get("drug_index") or {}).get(name.lower()) or (tables.get("drug_index") or {}).get(key)
    if hits:
        return hits[0]["class"]
    exp = (tables.get("exposure_index") or {}).get(name.lower()) or (tables.get("exposure_index") or {}).get(key)
    if exp:
        for cid, c in cands.items():
            if exp in (c.get("exposures") or []):
                return cid
    names: dict[str, str] = {}
    for cid, c in cands.items():
        for n in (c["name"], *(c.get("synonyms") or []), cid):
            names.setdefault(fold(n), cid)
        for x in c.get("xrefs") or []:
            names.setdefault(fold(x), cid)
    for drug_name, hits in (tables.get("drug_index") or {}).items():
        names.setdefault(fold(drug_name), hits[0]["class"])
    if key in names:
        return names[key]
    close = difflib.get_close_matches(key, list(names), n=3, cutoff=0.6)
    hint = ("; did you mean " + " or ".join(f"'{c}' ({cands[names[c]]['name']})" for c in close) + "?") if close else ""
    raise TubuloError(f"'{name}' is not a drug, exposure or disorder in the knowledge{hint} (see: tubulo knowledge list)")


def predict_document(tables: Mapping[str, Any], cid: str) -> dict[str, Any]:
    c = tables["candidates"][cid]
    variables = tables["variables"]
    paths = (tables.get("paths") or {}).get(cid, {})
    hpo_labels = tables.get("hpo_labels") or {}
    expected = []
    for var, dist in (c.get("manifests") or {}).items():
        if var.startswith("HP:"):
            p = float(dist.get("present", 0))
            expected.append({"variable": var, "label": hpo_labels.get(var, var), "state": "present", "probability": p,
                             "likelihood_ratio": round(p / feature_background(tables, var), 3),
                             "distribution": dict(dist), "path": [], "source": (c.get("manifest_sources") or {}).get(var, "")})
            continue
        spec = variables.get(var, {})
        states = list(spec.get("states") or dist)
        leak = float(tables["scoring"]["leak"])

        def ratio(s: str) -> float:
            bg = state_probability(spec.get("background"), states, s, leak)
            return state_probability(dist, states, s, leak) / bg

        state = max(states, key=lambda s: (ratio(s), s))
        p = state_probability(dist, states, state, leak)
        entry = paths.get(var) or {}
        expected.append({"variable": var, "label": spec.get("label", var), "state": state, "probability": round(p, 4),
                         "likelihood_ratio": round(ratio(state), 3),
                         "distribution": dict(dist), "path": [{k: s.get(k) for k in ("node", "label", "sign", "source")}
                                                              for s in entry.get("steps") or []],
                         "predicted_direction": entry.get("predicted"),
                         "source": (c.get("manifest_sources") or {}).get(var, "")})
    expected.sort(key=lambda e: (-e["likelihood_ratio"], e["variable"]))
    return {"id": cid, "name": c["name"], "kind": c["kind"], "xrefs": list(c.get("xrefs") or []),
            "genes": list(c.get("genes") or []), "segments": list(c.get("segments") or []),
            "members": [m.get("inn") for m in c.get("members") or []],
            "acts_on": [{k: a.get(k) for k in ("target", "effect", "source")} for a in c.get("acts_on") or []],
            "expected": expected, "source": c.get("source", ""), "caution": CAUTION}


def predict_text(tables: Mapping[str, Any], cid: str, as_json: bool = False) -> str:
    doc = predict_document(tables, cid)
    if as_json:
        return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"
    lines = [f"{doc['name']} [{doc['kind']}] ({doc['id']})"]
    if doc["xrefs"]:
        lines.append("  " + ", ".join(doc["xrefs"]))
    if doc["members"]:
        lines.append("  members: " + ", ".join(m for m in doc["members"] if m))
    for a in doc["acts_on"]:
        lines.append(f"  acts on {a['target']}: {a['effect']}  ({a['source']})")
    lines.append("")
    lines.append("expected findings, most telling first (state, probability, likelihood ratio against the referred population)")
    for e in doc["expected"]:
        lines.append(f"  {e['label']}: {e['state'].replace('_', ' ')} (p {e['probability']:.2f}, LR {e['likelihood_ratio']:.1f})")
        if e["path"]:
            lines.append("      via " + " → ".join(str(s.get("label") or s.get("node")) for s in e["path"]))
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines) + "\n"
