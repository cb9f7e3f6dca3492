"""Cautions: critical values first, then data-quality flags, then the standing statement."""

from __future__ import annotations

from typing import Any, Mapping, NamedTuple

from .findings import Findings
from .output.check import fmt_number
from .paths import read_knowledge_yaml
from .reference import critical_limits
from .workup import Workup

__all__ = ["Caution", "cautions"]

LEVELS = {"critical": 0, "warning": 1, "info": 2}


class Caution(NamedTuple):
    level: str  # critical | warning | info
    message: str
    source: str = ""
    id: str = ""


def cautions(workup: Workup, findings: Findings) -> list[Caution]:
    """Every caution the case raises, critical ones first; the standing statement last."""
    conf = read_knowledge_yaml("cautions.yaml")
    case = workup.case
    out: list[Caution] = []
    for m in workup.measurements:
        lim = critical_limits(m.key, case.patient.age_years, case.patient.sex)
        if lim is None:
            continue
        side = None
        if lim.low is not None and m.value < lim.low:
            side, limit = "below", lim.low
        elif lim.high is not None and m.value > lim.high:
            side, limit = "above", lim.high
        if side:
            msg = conf["critical_message"].format(label=m.label, value=fmt_number(m.value), unit=m.unit,
                                                  side=side, limit=fmt_number(limit))
            out.append(Caution("critical", msg, f"{lim.source}; {conf['critical_source_note']}", f"critical:{m.key}"))
    for note in case.notes:
        if note.level == "warning" and note.path == "blood_gas":
            out.append(Caution("warning", note.message, "Henderson-Hasselbalch (knowledge/checks.yaml)", "blood_gas_mismatch"))
    drug_on_list = any(m.class_id for m in case.medications)
    classes_on_list = {m.class_id for m in case.medications if m.class_id}
    for rule in conf.get("quality") or []:
        when = rule.get("when")
        if when:
            f = findings.variables.get(when["variable"])
            if not f or f.state not in when["states"]:
                continue
        if rule.get("missing"):
            if any(case.value(k) is not None for k in rule["missing"]):
                continue
            if rule.get("needs_variable") and rule["needs_variable"] not in findings.variables:
                continue
        if rule.get("drug_kind_on_list") and not drug_on_list:
            continue
        if rule.get("drug_class_on_list") and not classes_on_list & set(rule["drug_class_on_list"]):
            continue
        out.append(Caution(rule["level"], " ".join(rule["message"].split()), rule.get("source", ""), rule["id"]))
    out.sort(key=lambda c: LEVELS[c.level])
    out.append(Caution("info", " ".join(conf["standing"].split()), "", "decision_support"))
    return out
