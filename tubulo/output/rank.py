"""Text and JSON views of `tubulo rank` (JSON per the output contract in docs/)."""

from __future__ import annotations

import json
from typing import Any

from .. import __version__
from ..rank import RankResult
from ..scoring import RESIDUAL_ID
from .check import case_summary, derived_json, fmt_number, measurements_json

__all__ = ["RESIDUAL_META", "rank_json", "rank_text", "rank_document"]

RESIDUAL_META = {"id": RESIDUAL_ID, "name": "No listed cause fits", "kind": "residual", "xrefs": [], "genes": [],
             "segments": []}


def _feature_label(r: RankResult, hid: str) -> str:
    """The HPO label the case resolved the feature to (any HPO term), else the knowledge's."""
    case = r.workup.case
    for f in (*case.features, *case.absent_features):
        if f.hpo == hid:
            return f.label
    return (r.tables.get("hpo_labels") or {}).get(hid, hid)


def _candidate_meta(r: RankResult, cid: str) -> dict[str, Any]:
    if cid == RESIDUAL_ID:
        return dict(RESIDUAL_META)
    c = r.tables["candidates"][cid]
    name = c["name"]
    if c["kind"] == "drug":
        listed = sorted({m.inn for m in r.workup.case.medications if m.class_id == cid and m.inn})
        if listed:
            name = f"{name} ({', '.join(listed)})"
    return {"id": cid, "name": name, "kind": c["kind"], "xrefs": list(c.get("xrefs") or []),
            "genes": list(c.get("genes") or []), "segments": list(c.get("segments") or [])}


def _r(x: float, n: int = 6) -> float:
    return round(float(x), n)


def rank_document(r: RankResult, top: int | None = None) -> dict[str, Any]:
    meta = r.tables.get("meta") or {}
    cands = []
    for s in r.scored[: top or len(r.scored)]:
        d = _candidate_meta(r, s.id)
        d["probability"] = _r(s.probability)
        ex = r.explained.get(s.id)
        if ex is not None:
            d["support"] = [{"variable": e.variable, "label": e.label, "state": e.state, "log_lr": _r(e.log_lr, 4),
                             "from": e.basis, "path": [dict(step) for step in e.path]} for e in ex.support]
            d["against"] = [{"variable": e.variable, "label": e.label, "state": e.state, "log_lr": _r(e.log_lr, 4),
                             "from": e.basis, "path": [dict(step) for step in e.path]} for e in ex.against]
            d["unexplained"] = list(ex.unexplained)
        d["prior_notes"] = list(s.prior_notes)
        cands.append(d)
    return {
        "case": case_summary(r.workup.case),
        "versions": {"tool": __version__, "knowledge": meta.get("knowledge_version"),
                     "knowledge_release": meta.get("release_date"), "hpo_release": meta.get("hpo_release")},
        "measurements": measurements_json(r.workup),
        "derived": derived_json(r.workup),
        "findings": [{"variable": f.variable, "label": f.label, "state": f.state, "hpo": f.hpo, "from": f.basis,
                      "origin": f.origin, "source": f.source} for f in r.findings.variables.values()]
        + [{"variable": h, "label": _feature_label(r, h), "state": "present", "hpo": h,
            "from": "case features", "origin": "feature", "source": ""} for h in r.findings.features_present]
        + [{"variable": h, "label": _feature_label(r, h), "state": "absent", "hpo": h,
            "from": "case absent_features", "origin": "absent_feature", "source": ""} for h in r.findings.features_absent],
        "candidates": cands,
        "next_tests": [{"variable": t.variable, "label": t.label, "test": t.test, "cost": t.cost,
                        "expected_bits": t.expected_bits, "separates": list(t.separates)} for t in r.next_tests],
        "panel": {"genes": [{"gene": g, "mass": m} for g, m in r.panel.genes],
                  "cover": list(r.panel.cover), "coverage_target": r.panel.coverage,
                  "covered": r.panel.covered, "inherited_mass": _r(r.panel.inherited_mass)},
        "cautions": [{"level": c.level, "message": c.message, "source": c.source, "id": c.id} for c in r.cautions],
    }


def rank_json(r: RankResult, top: int | None = None) -> str:
    # no indent: the C encoder is several times faster; pipe through `python -m json.tool` to read it
    return json.dumps(rank_document(r, top), ensure_ascii=False, separators=(",", ":")) + "\n"


def _path_text(path) -> str:
    if not path:
        return ""
    parts = []
    for step in path:
        arrow = {1: "↑", -1: "↓"}.get(step.get("sign"), "")
        parts.append(f"{step.get('label') or step.get('node')}")
    return " → ".join(parts)


def rank_text(r: RankResult, top: int = 8) -> str:
    doc = rank_document(r, top)
    lines: list[str] = []
    crit = [c for c in doc["cautions"] if c["level"] == "critical"]
    if crit:
        lines.append("!!! CRITICAL VALUES !!!")
        for c in crit:
            lines.append(f"  !!! {c['message']}")
            lines.append(f"      ({c['source']})")
        lines.append("")
    others = [c for c in doc["cautions"] if c["level"] != "critical"]
    lines.append("cautions")
    for c in others:
        lines.append(f"  [{c['level']}] {c['message']}")
    lines.append("")
    case = r.workup.case
    lines.append(f"case {case.id}")
    lines.append("findings: " + "; ".join(f"{f['label']} {f['state'].replace('_', ' ')}"
                                          for f in doc["findings"] if f["origin"] == "measured"))
    feats = [f"{f['label']} ({f['state']})" for f in doc["findings"] if f["origin"] in ("feature", "absent_feature")]
    if feats:
        lines.append("features: " + "; ".join(feats))
    lines.append("")
    lines.append(f"differential (top {top} of {len(r.scored)})")
    for i, c in enumerate(doc["candidates"], 1):
        bar = "#" * max(1 if c["probability"] >= 0.005 else 0, round(c["probability"] * 30))
        genes = f"  genes {', '.join(c['genes'])}" if c["genes"] else ""
        lines.append(f"{i:>2}. {c['probability'] * 100:5.1f} % {bar:<30} {c['name']} [{c['kind']}]{genes}")
        for e in (c.get("support") or [])[:4]:
            lines.append(f"       + {e['label']}: {e['state'].replace('_', ' ')} (log LR {e['log_lr']:+.2f})")
            if e["path"]:
                lines.append(f"           via {_path_text(e['path'])}")
        for e in (c.get("against") or [])[:3]:
            lines.append(f"       - {e['label']}: {e['state'].replace('_', ' ')} (log LR {e['log_lr']:+.2f})")
        if c.get("unexplained"):
            lines.append("       not explained: " + "; ".join(c["unexplained"][:4]))
    lines.append("")
    if doc["next_tests"]:
        lines.append("next tests (expected information, bits)")
        for t in doc["next_tests"]:
            sep = f"  separates {', '.join(t['separates'][:4])}" if t["separates"] else ""
            lines.append(f"  {t['expected_bits']:.2f}  [{t['cost']}] {t['test']}{sep}")
        lines.append("")
    p = doc["panel"]
    if p["cover"]:
        lines.append(f"gene panel: inherited causes hold {p['inherited_mass'] * 100:.0f} % of the probability; "
                     f"{len(p['cover'])} genes cover {p['covered'] * 100:.0f} % of it:")
        lines.append("  " + ", ".join(p["cover"]))
        lines.append("")
    meta = doc["versions"]
    lines.append(f"tubulo {meta['tool']}, knowledge {meta['knowledge']} ({meta['knowledge_release']}), HPO {meta['hpo_release']}")
    return "\n".join(lines) + "\n"
