"""Findings: measurements and indices in their context become states of clinical variables.

The rules and thresholds are in `knowledge/findings.yaml`, the variables and their gates in
`knowledge/variables.yaml`.  A variable whose inputs are missing stays unobserved (absent from the
result): unobserved is never normal.  A case feature (HPO) whose term names a variable's state sets
that state when no measurement decided it.
"""

from __future__ import annotations

from types import MappingProxyType
from functools import cache
from typing import Any, Mapping, NamedTuple

from .paths import read_knowledge_yaml
from .reference import classify, reference_interval
from .workup import Workup

__all__ = ["Finding", "Findings", "derive_findings", "variables_spec", "feature_terms"]


class Finding(NamedTuple):
    """One observed variable: its state, what decided it, and the rule's source."""

    variable: str
    state: str
    label: str
    hpo: str | None
    basis: str  # plain words: which input and which threshold decided the state
    inputs: Mapping[str, float] = MappingProxyType({})
    source: str = ""
    origin: str = "measured"  # measured | feature | absent_feature | reported


class Findings(NamedTuple):
    """All findings of a case: variables, and the HPO features as present/absent."""

    variables: Mapping[str, Finding]
    features_present: tuple[str, ...]
    features_absent: tuple[str, ...]
    notes: tuple[str, ...] = ()

    def state(self, variable: str) -> str | None:
        f = self.variables.get(variable)
        return f.state if f else None


@cache
def variables_spec() -> dict[str, dict]:
    return read_knowledge_yaml("variables.yaml")["variables"]


@cache
def _rules() -> dict:
    return read_knowledge_yaml("findings.yaml")


def _input_value(workup: Workup, name: str) -> tuple[Any, str | None, Any]:
    """(value, flag, unit) of an input; value None when unavailable."""
    case = workup.case
    age, sex = case.patient.age_years, case.patient.sex
    if name == "bp_category":
        return workup.bp_category, None, None
    if name.startswith("category."):
        return case.categories.get(name[len("category."):]), None, None
    if name.startswith("derived."):
        d = workup.derived_by_id().get(name[len("derived."):])
        if d is None or d.value is None or not d.valid:
            return None, None, None
        iv = reference_interval(d.id, age, sex)
        return d.value, (classify(d.value, iv) if iv else None), d.unit
    for m in workup.measurements:
        if m.key == name:
            return m.value, m.flag, m.unit
    return None, None, None


def _matches(cond: Mapping[str, Any], value: Any, flag: str | None) -> bool:
    if "is" in cond:
        return value in cond["is"]
    if "flag" in cond and flag != cond["flag"]:
        return False
    if "below" in cond and not value < cond["below"]:
        return False
    if "at_most" in cond and not value <= cond["at_most"]:
        return False
    if "above" in cond and not value > cond["above"]:
        return False
    if "at_least" in cond and not value >= cond["at_least"]:
        return False
    return True


def _describe(name: str, value: Any, unit: Any, cond: Mapping[str, Any], flag: str | None) -> str:
    shown = name.split(".", 1)[1] if name.startswith(("derived.", "category.")) else name
    if isinstance(value, float):
        text = f"{shown} {value:.3g}" + (f" {unit}" if unit and unit not in ("1", "") else "")
    else:
        text = f"{shown} {value}"
    parts = []
    for key, word in (("below", "<"), ("at_most", "<="), ("above", ">"), ("at_least", ">=")):
        if key in cond:
            parts.append(f"{word} {cond[key]:g}")
    if "flag" in cond:
        parts.append(f"{flag} for age/sex")
    return text + (" " + ", ".join(parts) if parts else "")


def _from_rules(workup: Workup, variable: str, rule: Mapping[str, Any], spec: Mapping[str, Any]) -> Finding | None:
    for method in rule.get("methods", ()):
        name = method["input"]
        when = method.get("when") or {}
        if any(workup.case.categories.get(k) not in v for k, v in when.items()):
            continue
        value, flag, unit = _input_value(workup, name)
        if value is None:
            continue
        if method.get("interval") and isinstance(value, (int, float)):
            case = workup.case
            iv = reference_interval(method["interval"], case.patient.age_years, case.patient.sex)
            flag = classify(value, iv) if iv else None
        if flag is None and any("flag" in c for c in method["states"]):
            continue  # no reference interval for this age: unobserved, never read as normal
        for cond in method["states"]:
            if _matches(cond, value, flag):
                state = cond["state"]
                inputs = {name: value} if isinstance(value, (int, float)) else {}
                return Finding(variable, state, spec.get("label", variable), (spec.get("hpo") or {}).get(state),
                               _describe(name, value, unit, cond, flag), inputs, rule.get("source", ""))
    return None


def _acid_base(workup: Workup, spec: Mapping[str, Any]) -> Finding | None:
    """Primary acid-base state from pH, bicarbonate, pCO2 and the anion gap (constants in findings.yaml)."""
    conf = _rules()["acid_base"]
    ph, ph_flag, _ = _input_value(workup, "blood_gas.ph")
    hco3, hco3_flag, _ = _input_value(workup, "blood_gas.bicarbonate")
    src = "blood gas"
    if hco3 is None:
        hco3, hco3_flag, _ = _input_value(workup, "serum.bicarbonate")
        src = "serum"
    pco2, pco2_flag, _ = _input_value(workup, "blood_gas.pco2")
    ag, _, _ = _input_value(workup, "derived.anion_gap_albumin_corrected")
    ag_limit = conf["anion_gap_high"]
    if ag is None:
        ag, _, _ = _input_value(workup, "derived.anion_gap")
        ag_limit = conf["anion_gap_high_uncorrected"]
    inputs = {k: v for k, v in (("blood_gas.ph", ph), (f"{src}.bicarbonate", hco3), ("blood_gas.pco2", pco2),
                                ("anion_gap", ag)) if v is not None}
    if ph is None and hco3 is None:
        return None

    def acidosis() -> tuple[str, str]:
        if ag is not None and ag > ag_limit:
            return "hag_acidosis", f"anion gap {ag:.1f} > {ag_limit:g}"
        if ag is None:
            return "nag_acidosis", "anion gap not computable: read as normal-gap (give sodium, chloride, bicarbonate)"
        return "nag_acidosis", f"anion gap {ag:.1f} <= {ag_limit:g}"

    why = []
    if ph is not None and ph_flag == "low":
        if hco3_flag == "low":
            state, w = acidosis()
            why = [f"pH {ph:.2f} low", f"bicarbonate {hco3:.0f} low", w]
        elif pco2_flag == "high":
            state, why = "respiratory_acidosis", [f"pH {ph:.2f} low", f"pCO2 {pco2:.0f} high"]
        else:
            state, w = acidosis()
            why = [f"pH {ph:.2f} low", w]
    elif ph is not None and ph_flag == "high":
        if hco3_flag == "high":
            state, why = "metabolic_alkalosis", [f"pH {ph:.2f} high", f"bicarbonate {hco3:.0f} high"]
        elif pco2_flag == "low":
            state, why = "respiratory_alkalosis", [f"pH {ph:.2f} high", f"pCO2 {pco2:.0f} low"]
        else:
            state, why = "metabolic_alkalosis", [f"pH {ph:.2f} high"]
    elif hco3_flag == "high":
        state = "metabolic_alkalosis"
        why = [f"{src} bicarbonate {hco3:.0f} high" + ("" if ph is not None else " (no blood gas: read as metabolic)")]
    elif hco3_flag == "low":
        state, w = acidosis()
        why = [f"{src} bicarbonate {hco3:.0f} low" + ("" if ph is not None else " (no blood gas: read as metabolic)"), w]
    elif hco3_flag is None and ph is None:
        return None
    else:
        state, why = "normal", ["pH and bicarbonate within limits"]
    return Finding("acid_base", state, spec.get("label", "acid_base"), (spec.get("hpo") or {}).get(state),
                   "; ".join(why), inputs, conf.get("source", ""))


def _gate_holds(gate: Mapping[str, Any] | None, found: Mapping[str, Finding]) -> bool | None:
    """True/False when the gate's variables are observed, None when they are not."""
    if not gate:
        return True
    if "any" in gate:
        results = [_gate_holds(g, found) for g in gate["any"]]
        if any(r is True for r in results):
            return True
        return None if any(r is None for r in results) else False
    f = found.get(gate["variable"])
    if f is None:
        return None
    return f.state in gate["states"]


@cache
def feature_terms() -> dict[str, tuple[str, str]]:
    """{HPO id: (variable, state)} for the states that name an HPO term (first one wins)."""
    out: dict[str, tuple[str, str]] = {}
    for var, spec in variables_spec().items():
        for state, hid in (spec.get("hpo") or {}).items():
            out.setdefault(hid, (var, state))
    return out


def derive_findings(workup: Workup) -> Findings:
    """All variable states the workup supports, gated, plus the case's HPO features."""
    specs = variables_spec()
    rules = _rules()["variables"]
    found: dict[str, Finding] = {}
    for var, spec in specs.items():
        if var == "acid_base":
            f = _acid_base(workup, spec)
        elif var in rules:
            f = _from_rules(workup, var, rules[var], spec)
        else:
            f = None
        if f:
            found[var] = f
    case = workup.case
    present = tuple(sorted({f.hpo for f in case.features}))
    absent = tuple(sorted({f.hpo for f in case.absent_features}))
    terms = feature_terms()
    for hid in present:
        if hid in terms:
            var, state = terms[hid]
            if var not in found:
                spec = specs[var]
                found[var] = Finding(var, state, spec.get("label", var), hid, f"reported feature {hid}", {},
                                     "case features", "feature")
    for hid in absent:
        if hid in terms:
            var, state = terms[hid]
            spec = specs[var]
            normal = [s for s, d in (spec.get("direction") or {}).items() if d == 0]
            if var not in found and normal:
                found[var] = Finding(var, normal[0], spec.get("label", var), None, f"{hid} looked for and absent", {},
                                     "case absent_features", "absent_feature")
    # gates, in dependency order (a gate may name a gated variable, e.g. desmopressin on concentration)
    notes = []
    for _ in range(3):
        for var in list(found):
            holds = _gate_holds(specs[var].get("gate"), found)
            if holds is False or (holds is None and not (specs[var].get("gate") or {}).get("unobserved_ok")):
                if found[var].origin == "measured":
                    notes.append(f"{var} ({found[var].state}) is not read: it is defined only when "
                                 f"{_gate_text(specs[var]['gate'])}")
                del found[var]
    ordered = {v: found[v] for v in specs if v in found}
    return Findings(ordered, present, absent, tuple(dict.fromkeys(notes)))


def _gate_text(gate: Mapping[str, Any]) -> str:
    if "any" in gate:
        return " or ".join(_gate_text(g) for g in gate["any"])
    return f"{gate['variable']} is {'/'.join(gate['states'])}"
