"""Text and JSON views of `tubulo check`: measurements with reference flags, derived indices."""

from __future__ import annotations

import json
from typing import Any

from .. import __version__
from ..case import Case
from ..workup import Workup

__all__ = ["CAUTION", "check_json", "check_text", "case_summary", "fmt_number"]

CAUTION = ("tubulo is decision support, not a diagnosis: weigh every output with the patient in front of you, "
           "follow local protocols and the judgement of a licensed clinician.")


def fmt_number(x: float | None) -> str:
    if x is None:
        return "-"
    if x == 0:
        return "0"
    a = abs(x)
    if a >= 100:
        return f"{x:.0f}"
    if a >= 10:
        return f"{x:.1f}"
    if a >= 1:
        return f"{x:.2f}"
    return f"{x:.3g}"


def case_summary(case: Case) -> dict[str, Any]:
    p = case.patient
    return {
        "id": case.id,
        "source": case.source,
        "patient": {"age_years": p.age_years, "sex": p.sex, "weight_kg": p.weight_kg, "height_cm": p.height_cm,
                    "pregnant": p.pregnant},
        "onset": case.onset,
        "family": {"consanguinity": case.family.consanguinity,
                   "affected_relatives": list(case.family.affected_relatives), "pattern": case.family.pattern},
        "features": [{"hpo": f.hpo, "label": f.label, "given": f.given} for f in case.features],
        "absent_features": [{"hpo": f.hpo, "label": f.label, "given": f.given} for f in case.absent_features],
        "medications": [{"given": m.given, "inn": m.inn, "class": m.class_id, "atc": m.atc} for m in case.medications],
        "exposures": list(case.exposures),
        "categories": dict(sorted(case.categories.items())),
        "notes": [{"path": n.path, "level": n.level, "message": n.message} for n in case.notes],
    }


def measurements_json(w: Workup) -> list[dict[str, Any]]:
    out = []
    for m in w.measurements:
        iv = m.interval
        out.append({
            "key": m.key, "label": m.label, "given": m.given, "value": m.value, "unit": m.unit,
            "assumed_unit": m.assumed_unit, "flag": m.flag,
            "reference": None if iv is None else {"low": iv.low, "high": iv.high, "unit": iv.unit,
                                                  "group": iv.group, "source": iv.source},
        })
    return out


def derived_json(w: Workup) -> list[dict[str, Any]]:
    return [{"id": d.id, "label": d.label, "value": d.value, "unit": d.unit, "formula": d.formula,
             "inputs": dict(d.inputs), "source": d.source, "valid": d.valid, "reason": d.reason}
            for d in w.derived]


def check_json(w: Workup) -> str:
    doc = {
        "case": case_summary(w.case),
        "versions": {"tool": __version__},
        "measurements": measurements_json(w),
        "derived": derived_json(w),
        "blood_pressure": {"category": w.bp_category, "source": w.bp_source},
        "caution": CAUTION,
    }
    return json.dumps(doc, indent=2, sort_keys=False, ensure_ascii=False) + "\n"


def check_text(w: Workup, show_all: bool = False) -> str:
    c = w.case
    p = c.patient
    lines = [f"case {c.id}" + (f"  ({c.source})" if c.source else "")]
    who = []
    if p.age_years is not None:
        who.append(_age_text(p.age_years))
    who.append(p.sex)
    if p.weight_kg:
        who.append(f"{fmt_number(p.weight_kg)} kg")
    if p.height_cm:
        who.append(f"{fmt_number(p.height_cm)} cm")
    lines.append("patient: " + ", ".join(who))
    for n in c.notes:
        lines.append(f"  note [{n.level}] {n.path}: {n.message}")
    lines.append("")
    lines.append("measurements")
    lines.append(f"  {'analyte':<34} {'given':<18} {'value':>9} {'unit':<10} {'reference':<22} flag")
    for m in w.measurements:
        ref = "-"
        if m.interval:
            ref = f"{fmt_number(m.interval.low)}-{fmt_number(m.interval.high)}"
        mark = {"low": "LOW", "high": "HIGH", "normal": "", None: ""}[m.flag]
        lines.append(f"  {m.key:<34} {m.given:<18} {fmt_number(m.value):>9} {m.unit:<10} {ref:<22} {mark}")
    if w.bp_category:
        lines.append(f"  blood pressure for age: {w.bp_category}")
    for key, value in sorted(c.categories.items()):
        lines.append(f"  {key:<34} {value}")
    lines.append("")
    lines.append("derived indices")
    shown = 0
    for d in w.derived:
        if d.value is None and not show_all:
            continue
        shown += 1
        state = "" if d.valid else "  (not valid: " + (d.reason or "") + ")"
        unit = "" if d.unit == "1" else f" {d.unit}"  # UCUM "1": a plain ratio
        lines.append(f"  {d.label} [{d.id}] = {fmt_number(d.value)}{unit}{state}")
        lines.append(f"      {d.formula}")
        if d.inputs:
            lines.append("      inputs: " + ", ".join(f"{k} {fmt_number(v)}" for k, v in d.inputs.items()))
        lines.append(f"      source: {d.source}")
    missing = [d for d in w.derived if d.value is None]
    if missing and not show_all:
        lines.append(f"  ({len(missing)} more not computable from this case; --all lists them with the reason)")
    if not shown and not missing:
        lines.append("  (none)")
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines) + "\n"


def _age_text(age: float) -> str:
    if age < 28 / 365.25:
        return f"{age * 365.25:.0f} d"
    if age < 2:
        return f"{age * 12:.0f} mo"
    return f"{age:.0f} y"
