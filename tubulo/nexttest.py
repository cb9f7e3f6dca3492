"""Next tests: unobserved variables ranked by the expected reduction of posterior entropy (bits)."""

from __future__ import annotations

import math
from typing import Any, Mapping, NamedTuple, Sequence

from .findings import Findings, _gate_holds, feature_terms, variables_spec
from .scoring import (RESIDUAL_ID, Scored, _priors_conf, compiled_likelihoods, feature_background, per_tables,
                      state_probability)

__all__ = ["NextTest", "information_gain", "next_tests"]

COST_ORDER = {"bedside": 0, "routine": 1, "special": 2, "genetic": 3}


class NextTest(NamedTuple):
    variable: str
    label: str
    test: str
    cost: str
    expected_bits: float
    separates: tuple[str, ...]


def _entropy(ps: Sequence[float]) -> float:
    return -sum(p * math.log2(p) for p in ps if p > 0)


class _Dist(NamedTuple):
    probs: tuple[float, ...]  # P(state | candidate), in the variable's state order
    entropy: float  # bits
    mode: int  # index of the most likely state (first on ties)


def information_gain(pi: Sequence[float], dists: Sequence[Sequence[float]], entropies: Sequence[float]) -> float:
    """Expected entropy reduction (bits) of the candidate posterior `pi` from observing one variable.

    Mutual information is symmetric: H(C) - E[H(C|X)] = H(X) - sum_i pi_i H(X|c_i), with X's marginal
    P(x) = sum_i pi_i P(x|c_i); the right side needs no posterior per state (Cover & Thomas 2006,
    Elements of Information Theory, eq. 2.39-2.43).
    """
    n = len(dists[0])
    marginal = [sum(p * d[k] for p, d in zip(pi, dists)) for k in range(n)]
    return _entropy(marginal) - sum(p * h for p, h in zip(pi, entropies))


def _dist(tables, cid: str, var: str, memo: dict) -> _Dist:
    """P(state | candidate) over the variable's states (background when the candidate is silent); `memo`
    lives as long as the tables, since next tests asks this for every leader and every open variable."""
    key = (cid, var)
    hit = memo.get(key)
    if hit is None:
        probs = _compute_dist(tables, cid, var)
        if probs is None:  # silent on this variable: the background, shared by every silent candidate
            hit = memo.get((None, var))
            if hit is None:
                probs = _background_dist(tables, var)
                hit = memo[(None, var)] = _Dist(probs, _entropy(probs), max(range(len(probs)), key=lambda k: probs[k]))
        else:
            hit = _Dist(probs, _entropy(probs), max(range(len(probs)), key=lambda k: probs[k]))
        memo[key] = hit
    return hit


def _compute_dist(tables, cid: str, var: str) -> tuple[float, ...] | None:
    """The candidate's own distribution over the variable's states, or None when it is silent there."""
    spec = tables["variables"].get(var)
    if spec is not None:
        row = None if cid == RESIDUAL_ID else compiled_likelihoods(tables)[cid][0].get(var)
        return None if row is None else tuple(row[s][0] for s in spec["states"])
    m = None if cid == RESIDUAL_ID else (tables["candidates"][cid].get("manifests") or {}).get(var)
    if not m:
        return None
    leak = float(tables["scoring"]["leak"])
    p = (1 - leak) * float(m.get("present", feature_background(tables, var))) + leak / 2
    return (p, 1 - p)


def _background_dist(tables, var: str) -> tuple[float, ...]:
    spec = tables["variables"].get(var)
    if spec is not None:
        leak = float(tables["scoring"]["leak"])
        states = list(spec["states"])
        return tuple(state_probability(spec.get("background"), states, s, leak) for s in states)
    fb = feature_background(tables, var)
    return (fb, 1 - fb)


def next_tests(scored: Sequence[Scored], findings: Findings, tables: Mapping[str, Any], top: int = 8,
               pool: int = 25) -> list[NextTest]:
    """The unobserved variables (gate open) and HPO features of the leaders, by expected information gain."""
    lead = [s for s in scored[:pool] if s.probability > 1e-6]
    z = sum(s.probability for s in lead)
    pi = [s.probability / z for s in lead]
    variables = tables["variables"]
    candidates = []
    for var, spec in variables.items():
        if var in findings.variables:
            continue
        if _gate_holds(spec.get("gate"), findings.variables) is not True:
            continue
        test = (variables_spec().get(var) or {}).get("test") or spec.get("label", var)
        candidates.append((var, spec.get("label", var), test, spec.get("cost", "routine")))
    seen_features = set(findings.features_present) | set(findings.features_absent)
    costs = _priors_conf().get("hpo_test_cost") or {}
    hpo_labels = tables.get("hpo_labels") or {}
    feature_keys = set()
    for s in lead[:10]:
        if s.id == RESIDUAL_ID:
            continue
        for key in tables["candidates"][s.id].get("manifests") or {}:
            if key.startswith("HP:") and key not in seen_features and key not in feature_terms():
                feature_keys.add(key)
    for key in sorted(feature_keys):
        label = hpo_labels.get(key, key)
        candidates.append((key, label, f"look for: {label}", costs.get(key, "bedside")))
    out = []
    memo = per_tables(tables, "next_test_dists", dict)
    ids = [s.id for s in lead]
    for var, label, test, cost in candidates:
        rows = [memo.get((cid, var)) or _dist(tables, cid, var, memo) for cid in ids]
        if all(r is rows[0] for r in rows):
            continue  # every leader silent (one shared background): observing it separates nobody, gain 0
        gain = information_gain(pi, [r.probs for r in rows], [r.entropy for r in rows])
        if gain < 0.01:
            continue
        # the leaders whose most likely state differs from the top candidate's
        best = [r.mode for r in rows]
        sep = [lead[i].id for i in range(min(6, len(lead))) if best[i] != best[0]]
        if sep:
            sep = [lead[0].id] + sep
        out.append(NextTest(var, label, test, cost, round(gain, 4), tuple(sep[:5])))
    out.sort(key=lambda t: (-t.expected_bits, COST_ORDER.get(t.cost, 9), t.variable))
    return out[:top]
