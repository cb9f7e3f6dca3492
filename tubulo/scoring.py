"""Scoring: Bayesian evidence accumulation over every candidate plus an open-world residual.

posterior(c) is proportional to prior(c) x product over observed variables v of P(state_v | c) / P(state_v | background).
A candidate silent on a variable scores it with the background distribution (ratio 1, no effect);
a listed state gets its curated probability, states left out share the leak; each variable's log
ratio is capped.  Gates (findings layer) keep correlated physiology from being counted twice.
Pure functions over the compiled tables; deterministic (sorted iteration, no randomness).

>>> round(_llr(0.8, 0.2, cap=3.0), 4)
1.3863
"""

from __future__ import annotations

import math
from functools import cache
from typing import Any, Callable, Mapping, NamedTuple

from .case import Case
from .findings import Findings, feature_terms
from .paths import read_knowledge_yaml

__all__ = ["Evidence", "Scored", "RESIDUAL_ID", "score", "state_probability", "priors", "likelihood_table", "likelihood_tables",
           "observations"]

RESIDUAL_ID = "residual"


class Evidence(NamedTuple):
    variable: str  # a variable id or an HPO id
    state: str
    log_lr: float
    p_candidate: float
    p_background: float


class Scored(NamedTuple):
    id: str
    probability: float
    log_prior: float
    log_score: float
    evidence: tuple[Evidence, ...]
    prior_notes: tuple[str, ...]


@cache
def _priors_conf() -> dict:
    return read_knowledge_yaml("priors.yaml")


def _llr(p: float, q: float, cap: float) -> float:
    return max(-cap, min(cap, math.log(p) - math.log(q)))


def state_probability(manifest: Mapping[str, float] | None, states: list[str], state: str, leak: float) -> float:
    """P(state | candidate) from a sparse curated distribution, with the leak spread over all states."""
    n = len(states)
    if not manifest:
        return 1.0 / n
    listed = {s: max(0.0, float(p)) for s, p in manifest.items() if s in states}
    total = sum(listed.values())
    rest = [s for s in states if s not in listed]
    if total < 1.0 and rest:
        share = (1.0 - total) / len(rest)
        q = {s: listed.get(s, share) for s in states}
    else:
        q = {s: listed.get(s, 0.0) for s in states}
    z = sum(q.values()) or 1.0
    return (1.0 - leak) * q[state] / z + leak / n


def _background(var_spec: Mapping[str, Any], state: str, leak: float) -> float:
    states = list(var_spec["states"])
    return state_probability(var_spec.get("background"), states, state, leak)


def observations(findings: Findings, tables: Mapping[str, Any]) -> dict[str, str]:
    """{variable or HPO id: observed state} — HPO features that name a variable state are left to the variable."""
    obs = {v: f.state for v, f in findings.variables.items()}
    terms = feature_terms()
    for hid in findings.features_present:
        if hid not in terms:
            obs[hid] = "present"
    for hid in findings.features_absent:
        if hid not in terms:
            obs[hid] = "absent"
    return obs


@cache
def _hpo_ancestors(hid: str) -> frozenset[str]:
    from .vocab import hpo_terms

    terms = hpo_terms()
    out: set[str] = set()
    stack = [hid]
    while stack:
        t = terms.get(stack.pop())
        if not t:
            continue
        for p in t.parents:
            if p not in out:
                out.add(p)
                stack.append(p)
    return frozenset(out)


class _ObsContext(NamedTuple):
    """The observations in the shapes the scorer needs (built once per case)."""

    items: tuple[tuple[str, str], ...]  # sorted (variable, state), variables only
    present_closure: frozenset[str]  # present HPO features and all their ancestors
    absent: frozenset[str]  # HPO features looked for and absent
    direct: Mapping[str, str]  # HPO id -> state as given


def _context(obs: Mapping[str, str]) -> _ObsContext:
    items = tuple(sorted((k, v) for k, v in obs.items() if not k.startswith("HP:")))
    present = {k for k, v in obs.items() if k.startswith("HP:") and v == "present"}
    closure = set(present)
    for h in present:
        closure |= _hpo_ancestors(h)
    absent = frozenset(k for k, v in obs.items() if k.startswith("HP:") and v == "absent")
    direct = {k: v for k, v in obs.items() if k.startswith("HP:")}
    return _ObsContext(items, frozenset(closure), absent, direct)


def _feature_state(key: str, ctx: _ObsContext) -> str | None:
    """Observed state of a candidate's HPO key: a present descendant counts as present (true-path rule),
    an absent ancestor as absent."""
    if key in ctx.direct:
        return ctx.direct[key]
    if key in ctx.present_closure:
        return "present"
    if ctx.absent and ctx.absent & _hpo_ancestors(key):
        return "absent"
    return None


_COMPILED: dict[int, tuple[Any, dict]] = {}
_LAYOUT = 2  # raise when the compiled likelihood layout changes, so that old caches are not read


def compiled_likelihoods(tables: Mapping[str, Any]) -> dict:
    """Per candidate: {variable: {state: (P(s|c), P(s|bg))}} and [(HPO key, P(present|c))], computed once per tables."""
    hit = _COMPILED.get(id(tables))
    if hit is not None and hit[0] is tables:
        return hit[1]
    meta = tables.get("meta") or {}
    if meta.get("knowledge_hash"):
        from .cache import cached

        out = cached("likelihoods", lambda: _compile_likelihoods(tables),
                     key=f"{meta['knowledge_hash']}-{tables['scoring']['leak']}-l{_LAYOUT}")
    else:  # a hand-made table (tests): compile in memory
        out = _compile_likelihoods(tables)
    _COMPILED.clear()
    _COMPILED[id(tables)] = (tables, out)
    return out


def _compile_likelihoods(tables: Mapping[str, Any]) -> dict:
    scoring = tables["scoring"]
    leak = float(scoring["leak"])
    variables = tables["variables"]
    terms = feature_terms()
    out: dict[str, Any] = {}
    for cid, cand in tables["candidates"].items():
        var_rows: dict[str, dict[str, tuple[float, float]]] = {}
        feats: list[tuple[str, float]] = []
        for key, m in (cand.get("manifests") or {}).items():
            if key.startswith("HP:"):
                if key not in terms:
                    present = float((m or {}).get("present", 0.0))
                    feats.append((key, (1.0 - leak) * present + leak / 2))
                continue
            spec = variables.get(key)
            if spec is None or not m:
                continue
            states = list(spec["states"])
            var_rows[key] = {st: (state_probability(m, states, st, leak), _background(spec, st, leak)) for st in states}
        out[cid] = (var_rows, sorted(feats))
    # A feature's background is the mean of P(present) over all candidates, a silent candidate counting
    # the floor `feature_background`: a complaint many causes share (fatigue, failure to thrive) then
    # weighs less than a specific one (deafness, polyhydramnios).
    floor = float(_priors_conf()["feature_background"])
    totals: dict[str, float] = {}
    for _, feats in out.values():
        for key, p in feats:
            totals[key] = totals.get(key, 0.0) + (p - floor)
    n = max(len(out), 1)
    out[_FEATURE_BG] = {key: max(floor, floor + t / n) for key, t in sorted(totals.items())}
    return out


_FEATURE_BG = "\x00feature_background"


def feature_background(tables: Mapping[str, Any], key: str) -> float:
    """P(HPO feature present | referred population) used as the denominator of its likelihood ratio."""
    return compiled_likelihoods(tables)[_FEATURE_BG].get(key, float(_priors_conf()["feature_background"]))


def per_tables(tables: Mapping[str, Any], name: str, build: Callable[[], Any]) -> Any:
    """`build()` memoized for the life of one tables object (identity-checked, newest tables only)."""
    slot = _PER_TABLES.get(name)
    if slot is not None and slot[0] is tables:
        return slot[1]
    value = build()
    _PER_TABLES[name] = (tables, value)
    return value


_PER_TABLES: dict[str, tuple[Any, Any]] = {}


def likelihood_table(cid: str, obs: Mapping[str, str] | _ObsContext, tables: Mapping[str, Any]) -> list[Evidence]:
    """Per observed variable: P(state | candidate), P(state | background) and the capped log ratio.

    Each (candidate, variable, state) Evidence is made once per tables and then reused (it is immutable);
    only the states a case observes are ever built, so a cold start pays for one case, not for all.
    """
    ctx = obs if isinstance(obs, _ObsContext) else _context(obs)
    memo = per_tables(tables, "evidence", dict)
    compiled = compiled_likelihoods(tables)
    var_rows, feats = compiled[cid]
    cap = float(tables["scoring"]["llr_cap"])
    out: list[Evidence] = []
    for var, state in ctx.items:
        row = var_rows.get(var)
        if row is None or state not in row:
            continue  # silent: background on both sides, ratio 1
        out.append(_state_evidence(memo, cid, var, state, row, cap))
    if feats:
        out += _feature_evidence(cid, feats, ctx, tables, memo, cap)
    return out


def _state_evidence(memo: dict, cid: str, var: str, state: str, row: Mapping[str, tuple[float, float]],
                    cap: float) -> Evidence:
    """The Evidence of one candidate for one observed variable state, made once per tables."""
    key = (cid, var, state)
    e = memo.get(key)
    if e is None:
        p, q = row[state]
        e = memo[key] = Evidence(var, state, _llr(p, q, cap), p, q)
    return e


def _feature_evidence(cid: str, feats, ctx: _ObsContext, tables: Mapping[str, Any], memo: dict,
                      cap: float) -> list[Evidence]:
    bgs = compiled_likelihoods(tables)[_FEATURE_BG]
    out: list[Evidence] = []
    for hid, p_present in feats:
        state = _feature_state(hid, ctx)
        if state is None:
            continue
        key = (cid, hid, state)
        e = memo.get(key)
        if e is None:
            f = bgs.get(hid, float(_priors_conf()["feature_background"]))
            p = p_present if state == "present" else 1.0 - p_present
            q = f if state == "present" else 1.0 - f
            e = memo[key] = Evidence(hid, state, _llr(p, q, cap), p, q)
        out.append(e)
    return out


def likelihood_tables(ctx: _ObsContext, tables: Mapping[str, Any]) -> dict[str, list[Evidence]]:
    """`likelihood_table` of every candidate at once (the same lists, in the same order).

    Per observed (variable, state) the candidates that speak to it are listed once per tables, so a
    case visits only the candidates a finding concerns instead of every candidate for every finding."""
    compiled = compiled_likelihoods(tables)
    by_state = per_tables(tables, "evidence_by_state", dict)
    memo = per_tables(tables, "evidence", dict)
    cap = float(tables["scoring"]["llr_cap"])
    out: dict[str, list[Evidence]] = {cid: [] for cid in compiled if cid != _FEATURE_BG}
    for var, state in ctx.items:
        hits = by_state.get((var, state))
        if hits is None:
            found = []
            for cid, entry in compiled.items():
                if cid == _FEATURE_BG:
                    continue
                row = entry[0].get(var)
                if row is not None and state in row:
                    found.append((cid, _state_evidence(memo, cid, var, state, row, cap)))
            hits = by_state[(var, state)] = tuple(found)
        for cid, e in hits:
            out[cid].append(e)
    for cid, lst in out.items():
        feats = compiled[cid][1]
        if feats:
            lst += _feature_evidence(cid, feats, ctx, tables, memo, cap)
    return out


def priors(case: Case, tables: Mapping[str, Any]) -> dict[str, tuple[float, tuple[str, ...]]]:
    """{candidate id: (prior weight, notes on how context changed it)}, residual included."""
    conf = _priors_conf()
    scoring = tables["scoring"]
    alpha, floor = float(scoring["prior_exponent"]), float(scoring["min_prior"])
    on_list = {m.class_id for m in case.medications if m.class_id}
    unknown_meds = sum(1 for m in case.medications if not m.class_id)
    out: dict[str, tuple[float, tuple[str, ...]]] = {}
    for cid, cand in tables["candidates"].items():
        notes: list[str] = []
        kind = cand["kind"]
        if kind == "drug":
            if cid in on_list:
                w = float(conf["drug_on_list_weight"])
                names = sorted({m.inn for m in case.medications if m.class_id == cid and m.inn})
                notes.append("on the medication list: " + ", ".join(names))
            else:
                w = float(conf["drug_not_listed_weight"])
                notes.append("not on the medication list: only as unrecorded or surreptitious use")
        else:
            w = max(float(cand.get("prevalence") or 0.0), floor) ** alpha
        if kind == "acquired" and cand.get("exposures"):
            if set(cand["exposures"]) & set(case.exposures):
                w *= float(conf["exposure_present_factor"])
                notes.append("exposure reported")
            else:
                w *= float(conf["exposure_absent_factor"])
        onsets = cand.get("onset") or []
        if case.onset and onsets and case.onset not in onsets:
            w *= float(conf["onset_mismatch_factor"])
            notes.append(f"onset {case.onset} is atypical (typical: {', '.join(onsets)})")
        inh = cand.get("inheritance")
        if kind == "inherited" and inh:
            if inh == "XLR" and case.patient.sex == "female":
                w *= float(conf["xlr_female_factor"])
                notes.append("X-linked recessive in a female: less likely")
            fam = case.family
            if fam.consanguinity and inh in conf["consanguinity_factor"]:
                w *= float(conf["consanguinity_factor"][inh])
                notes.append("consanguinity fits recessive inheritance")
            if fam.pattern and fam.pattern != "unknown":
                f = float(conf["family_pattern_factor"][fam.pattern].get(inh, 1.0))
                if f != 1.0:
                    w *= f
                    notes.append(f"family pattern {fam.pattern} {'fits' if f > 1 else 'does not fit'} {inh}")
            elif fam.affected_relatives:
                w *= float(conf["affected_relatives_factor"].get(inh, 1.0))
                notes.append("affected relatives")
        elif kind in ("acquired", "drug") and case.family.affected_relatives and case.family.pattern not in (None, "unknown"):
            w *= float(conf["affected_relatives_factor"]["sporadic"])
            notes.append("a familial pattern argues against an acquired cause")
        out[cid] = (w, tuple(notes))
    out[RESIDUAL_ID] = (float(conf["residual_weight"]) * float(conf["unknown_medication_residual"]) ** unknown_meds,
                        ("open world: a cause the knowledge does not list",))
    return out


def score(case: Case, findings: Findings, tables: Mapping[str, Any]) -> list[Scored]:
    """Every candidate with its posterior probability, sorted (probability desc, id asc)."""
    obs = _context(observations(findings, tables))
    pri = priors(case, tables)
    # evidence weight < 1 tempers naive-Bayes over-confidence from correlated findings (calibration)
    weight = float(tables["scoring"].get("evidence_weight", _priors_conf().get("evidence_weight", 1.0)))
    lists = likelihood_tables(obs, tables)
    rows = []
    for cid in sorted(pri):
        w, notes = pri[cid]
        evidence = () if cid == RESIDUAL_ID else tuple(lists[cid])
        lp = math.log(w)
        rows.append((cid, lp, lp + weight * sum(e.log_lr for e in evidence), evidence, notes))
    top = max(r[2] for r in rows)
    z = sum(math.exp(r[2] - top) for r in rows)
    scored = [Scored(cid, math.exp(s - top) / z, lp, s, ev, notes) for cid, lp, s, ev, notes in rows]
    scored.sort(key=lambda s: (-s.probability, s.id))
    return scored
