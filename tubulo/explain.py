"""Explanation: evidence for and against each candidate, its causal paths, what it leaves unexplained."""

from __future__ import annotations

from typing import Any, Mapping, NamedTuple

from .findings import Findings
from .scoring import RESIDUAL_ID, Evidence, Scored, per_tables, state_probability

__all__ = ["Explained", "EvidenceItem", "explain"]

_MIN_LLR = 0.05  # below this a variable neither supports nor argues against


class EvidenceItem(NamedTuple):
    variable: str
    label: str
    state: str
    log_lr: float
    basis: str
    path: tuple[Mapping[str, Any], ...]


class Explained(NamedTuple):
    support: tuple[EvidenceItem, ...]
    against: tuple[EvidenceItem, ...]
    unexplained: tuple[str, ...]


def _abnormal(var: str, state: str, tables: Mapping[str, Any]) -> bool:
    """Whether the state is a finding to explain (`abnormal` in variables.yaml)."""
    return state in ((tables["variables"].get(var) or {}).get("abnormal") or ())


def _path(tables: Mapping[str, Any], cid: str, var: str) -> tuple[Mapping[str, Any], ...]:
    memo = per_tables(tables, "explain_paths", dict)
    key = (cid, var)
    hit = memo.get(key)
    if hit is None:
        entry = (tables.get("paths") or {}).get(cid, {}).get(var)
        hit = memo[key] = () if not entry else tuple(
            {k: step.get(k) for k in _STEP_KEYS if step.get(k) is not None} for step in entry.get("steps") or ())
    return hit


_STEP_KEYS = ("node", "label", "kind", "edge", "sign", "source", "note")


def _label(tables: Mapping[str, Any], var: str) -> str:
    if var.startswith("HP:"):
        return (tables.get("hpo_labels") or {}).get(var) or var
    return (tables["variables"].get(var) or {}).get("label", var)


def explain(s: Scored, findings: Findings, tables: Mapping[str, Any]) -> Explained:
    def item(e: Evidence) -> EvidenceItem:
        f = findings.variables.get(e.variable)
        basis = f.basis if f else ("reported" if e.state == "present" else "looked for and absent")
        return EvidenceItem(e.variable, _label(tables, e.variable), e.state, e.log_lr, basis,
                            _path(tables, s.id, e.variable) if e.log_lr > 0 else ())

    support = tuple(item(e) for e in sorted(s.evidence, key=lambda e: (-e.log_lr, e.variable)) if e.log_lr >= _MIN_LLR)
    against = tuple(item(e) for e in sorted(s.evidence, key=lambda e: (e.log_lr, e.variable)) if e.log_lr <= -_MIN_LLR)
    unexplained: list[str] = []
    if s.id != RESIDUAL_ID:
        from .scoring import _priors_conf

        below = float(_priors_conf()["unexplained_below"])
        leak = float(tables["scoring"]["leak"])
        manifests = tables["candidates"][s.id].get("manifests") or {}
        for var, f in findings.variables.items():
            if not _abnormal(var, f.state, tables):
                continue
            m = manifests.get(var)
            states = list(tables["variables"][var]["states"])
            if not m or state_probability(m, states, f.state, leak) < below:
                unexplained.append(f"{_label(tables, var)}: {f.state.replace('_', ' ')}")
        scored_features = {e.variable for e in s.evidence}
        for hid in findings.features_present:
            if hid not in scored_features and hid not in findings.variables:
                from .findings import feature_terms

                if hid not in feature_terms():
                    unexplained.append(f"{_label(tables, hid)} ({hid})")
    return Explained(support, against, tuple(unexplained))
