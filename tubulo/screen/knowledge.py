"""The knowledge compiled once per screening run into the shapes the chunk scorer needs.

Nothing here is a clinical fact: every number is read from `knowledge/*.yaml` through the modules
of the single-case path (units, reference, indices, findings, scoring), and most tables are filled
by *calling* those modules, so that the matrix path and `tubulo rank` share one source of truth:

- unit factors: `units.unit_table()` (or `units.convert(1.0, ...)` for a spelling the table lacks);
- reference and critical limits: `reference.reference_interval` / `critical_limits`, called once per
  age segment and sex (the rows are half-open age bands, so an interval is constant between the
  band edges of the file);
- index constants and parameters: `indices.index_knowledge()`;
- findings rules and gates: `knowledge/findings.yaml` and `findings.variables_spec()`;
- log-likelihood ratios: `scoring.likelihood_table` for each (variable, state), one column per
  candidate; log priors: `scoring.priors` for each sex (a screening extract has no medications,
  exposures, onset or family, so nothing else moves a prior).

A rule, condition or index method the matrix path does not know is recorded in `unsupported`; the
run then scores every case on the single-case path and says why.
"""

from __future__ import annotations

import math
from typing import Any, Mapping, NamedTuple

import numpy as np

from ..case import CATEGORIES, SEXES, Case, Patient, section_keys as case_section_keys
from ..findings import variables_spec
from ..indices import IndexSpec, index_knowledge
from ..paths import read_knowledge_yaml
from ..reference import BP_CATEGORIES, critical_limits, reference_interval, reference_tables
from ..scoring import RESIDUAL_ID, likelihood_table, priors
from ..units import AnalyteSpec, analyte_specs, convert, normalise_unit, unit_table
from ..workup import measurement_order

__all__ = ["ScreenKnowledge", "IntervalTable", "RuleMethod", "RuleCondition", "compile_knowledge",
           "SEX_CODES", "FLAG_LOW", "FLAG_NORMAL", "FLAG_HIGH", "FLAG_NONE", "MEASUREMENT_SECTIONS",
           "PATIENT_FIELDS", "screen_knowledge"]

SEX_CODES = SEXES  # female, male, other, unknown: the code of a sex is its index here
FLAG_NONE, FLAG_LOW, FLAG_NORMAL, FLAG_HIGH = -1, 0, 1, 2
_FLAG_CODE = {"low": FLAG_LOW, "normal": FLAG_NORMAL, "high": FLAG_HIGH}
MEASUREMENT_SECTIONS = ("vitals", "serum", "blood_gas", "urine", "tests")  # the sections parse_case reads
PATIENT_FIELDS = ("age", "sex", "weight", "height", "pregnant")
_NUMERIC_CONDITIONS = ("below", "at_most", "above", "at_least")
_KNOWN_CONDITION_KEYS = {"state", "flag", "is", *_NUMERIC_CONDITIONS}
_KNOWN_INPUT_PREFIXES = ("derived.", "category.")
# The inputs of the acid-base reading, as tubulo/findings.py (_acid_base) names them.
ACID_BASE_INPUTS = ("blood_gas.ph", "blood_gas.bicarbonate", "serum.bicarbonate", "blood_gas.pco2")
ACID_BASE_INDICES = ("anion_gap_albumin_corrected", "anion_gap")
ACID_BASE_STATES = ("metabolic_alkalosis", "normal", "nag_acidosis", "hag_acidosis", "respiratory_acidosis",
                    "respiratory_alkalosis")
# Index methods with a vectorized form in tubulo/screen/vector.py.
VECTOR_METHODS = ("fractional_excretion", "reabsorbed_fraction", "tmp_gfr_payne", "creatinine_ratio", "ttkg",
                  "urine_anion_gap", "anion_gap", "albumin_corrected", "calculated_osmolality", "egfr",
                  "daily_excretion")


class IntervalTable(NamedTuple):
    """Limits of one analyte (or index) for every age segment and sex code.

    `has[seg, sex]` says whether an interval applies; `low`/`high` are NaN where that side has no limit."""

    analyte: str
    has: np.ndarray
    low: np.ndarray
    high: np.ndarray


class RuleCondition(NamedTuple):
    state: int  # code of the state in the variable's state list
    is_codes: tuple | None  # for categorical inputs: allowed codes; for numeric inputs: allowed numbers
    flag: int | None  # FLAG_LOW / FLAG_NORMAL / FLAG_HIGH
    bounds: tuple[tuple[str, float], ...]  # ((below|at_most|above|at_least, limit), ...)


class RuleMethod(NamedTuple):
    kind: str  # measure | derived | category | bp | none
    name: str  # measurement key, index id or category key
    when: tuple[tuple[str, tuple[int, ...]], ...]  # (category key, allowed codes)
    conditions: tuple[RuleCondition, ...]
    interval: str | None = None  # read the flag against this key's reference interval
    uses_flag: bool = False  # some condition reads the flag: without an interval the method is skipped


class ScreenKnowledge(NamedTuple):
    """Everything the matrix path reads, compiled from the tables of one knowledge version."""

    tables: Mapping[str, Any]
    specs: Mapping[str, AnalyteSpec]
    section_keys: Mapping[str, Mapping[str, str]]  # section -> {name as written -> analyte/category key}
    value_keys: tuple[str, ...]  # stored measurement keys (column order of the value matrix), assess order
    value_index: Mapping[str, int]
    category_values: Mapping[str, tuple[str, ...]]  # category key -> allowed values (code = index)
    category_index: Mapping[str, int]
    breaks: np.ndarray  # age segment edges (years), ascending, breaks[0] == 0
    age_when_unknown: float
    intervals: Mapping[str, IntervalTable]  # measurement keys and index ids with reference rows
    criticals: Mapping[str, IntervalTable]
    critical_order: tuple[str, ...]  # measurement keys with critical rows, in assess order
    critical_message: str
    bp: Any  # reference_tables().bp
    index_specs: tuple[IndexSpec, ...]  # the indices the findings read, with what they use, file order
    index_shared: Mapping[str, float]
    variables: tuple[str, ...]  # variables.yaml order
    states: Mapping[str, tuple[str, ...]]
    methods: Mapping[str, tuple[RuleMethod, ...]]
    gates: Mapping[str, Any]
    acid_base: Mapping[str, Any]
    abnormal: Mapping[str, np.ndarray]  # variable -> bool per state code
    candidates: tuple[str, ...]  # sorted ids, residual included (the scorer's order)
    names: tuple[str, ...]
    llr: Mapping[str, np.ndarray]  # variable -> (n_states + 1, n_candidates); the last row is zeros
    score_order: tuple[str, ...]  # variables in the order the scorer adds their evidence
    log_prior: np.ndarray  # (n_sex_codes, n_candidates)
    evidence_weight: float
    unsupported: tuple[str, ...]
    fingerprint: str

    def factor(self, key: str, unit: str | None) -> float:
        """Factor from `unit` (None: the default unit) to the internal unit of `key`; UnitError if none."""
        return _factor(self.specs[key], unit)


_FACTORS: dict[tuple[str, str | None], float] = {}


def _factor(spec: AnalyteSpec, unit: str | None) -> float:
    hit = _FACTORS.get((spec.key, unit))
    if hit is not None:
        return hit
    norm = normalise_unit(spec.default_unit if unit is None else unit)
    row = unit_table().get(spec.key, {})
    factor = row[norm] if norm in row else convert(1.0, unit, spec)  # convert(1, u) is the factor exactly
    _FACTORS[(spec.key, unit)] = factor
    return factor


def _age_breaks() -> np.ndarray:
    edges = {0.0}
    for section in reference_tables().sections.values():
        for rows in section.values():
            for r in rows:
                edges.add(float(r.age_min))
                if r.age_max is not None:
                    edges.add(float(r.age_max))
    bp = reference_tables().bp
    for row in bp.hypotension:
        edges.add(float(row.age_min))
        if row.age_max is not None:
            edges.add(float(row.age_max))
    return np.array(sorted(edges), dtype=float)


def _interval_table(analyte: str, breaks: np.ndarray, lookup) -> IntervalTable:
    n = len(breaks)
    has = np.zeros((n, len(SEX_CODES)), dtype=bool)
    low = np.full((n, len(SEX_CODES)), np.nan)
    high = np.full((n, len(SEX_CODES)), np.nan)
    for i, age in enumerate(breaks):
        for j, sex in enumerate(SEX_CODES):
            iv = lookup(analyte, float(age), sex)
            if iv is None:
                continue
            has[i, j] = True
            if iv.low is not None:
                low[i, j] = iv.low
            if iv.high is not None:
                high[i, j] = iv.high
    return IntervalTable(analyte, has, low, high)


def _needed_indices(methods: Mapping[str, tuple[RuleMethod, ...]]) -> tuple[tuple[IndexSpec, ...], list[str]]:
    specs = index_knowledge().specs
    by_id = {s.id: s for s in specs}
    wanted = {m.name for ms in methods.values() for m in ms if m.kind == "derived"} | set(ACID_BASE_INDICES)
    stack = [w for w in wanted if w in by_id]
    need: set[str] = set()
    while stack:
        i = stack.pop()
        if i in need:
            continue
        need.add(i)
        stack.extend(u for u in by_id[i].uses if u in by_id)
    out = tuple(s for s in specs if s.id in need)
    problems = [f"index {s.id}: method '{s.method}' has no matrix form" for s in out if s.method not in VECTOR_METHODS]
    return out, problems


def _compile_rules(states: Mapping[str, tuple[str, ...]], category_values: Mapping[str, tuple[str, ...]],
                   value_index: Mapping[str, int], problems: list[str]) -> dict[str, tuple[RuleMethod, ...]]:
    rules = read_knowledge_yaml("findings.yaml").get("variables") or {}
    index_ids = {s.id for s in index_knowledge().specs}
    out: dict[str, tuple[RuleMethod, ...]] = {}
    for var, rule in rules.items():
        if var not in states:
            continue
        methods = []
        for method in rule.get("methods", ()):
            name = method["input"]
            if name == "bp_category":
                kind, key, values = "bp", name, BP_CATEGORIES
            elif name.startswith("category."):
                key = name[len("category."):]
                kind, values = ("category", category_values[key]) if key in category_values else ("none", ())
            elif name.startswith("derived."):
                key = name[len("derived."):]
                kind, values = ("derived", None) if key in index_ids else ("none", None)
            else:
                key = name
                kind, values = ("measure", None) if name in value_index else ("none", None)
            when = []
            for wkey, allowed in (method.get("when") or {}).items():
                vals = category_values.get(wkey, ())
                when.append((wkey, tuple(vals.index(v) for v in allowed if v in vals)))
            conds = []
            for cond in method["states"]:
                extra = set(cond) - _KNOWN_CONDITION_KEYS
                if extra:
                    problems.append(f"findings.yaml: {var}: condition keys {sorted(extra)} have no matrix form")
                st = cond["state"]
                if st not in states[var]:
                    problems.append(f"findings.yaml: {var}: state '{st}' is not a state of the variable")
                    continue
                is_codes = None
                if "is" in cond:
                    if values is None:
                        is_codes = tuple(float(v) for v in cond["is"] if isinstance(v, (int, float)))
                    else:
                        is_codes = tuple(values.index(v) for v in cond["is"] if v in values)
                flag = _FLAG_CODE[cond["flag"]] if "flag" in cond else None
                if "flag" in cond and cond["flag"] not in _FLAG_CODE:
                    problems.append(f"findings.yaml: {var}: flag '{cond['flag']}' is not low, normal or high")
                bounds = tuple((k, float(cond[k])) for k in _NUMERIC_CONDITIONS if k in cond)
                if kind in ("category", "bp") and (bounds or flag is not None):
                    problems.append(f"findings.yaml: {var}: numeric condition on a categorical input")
                conds.append(RuleCondition(states[var].index(st), is_codes, flag, bounds))
            extra = set(method) - {"input", "when", "states", "interval"}
            if extra:
                problems.append(f"findings.yaml: {var}: method keys {sorted(extra)} have no matrix form")
            interval = method.get("interval")
            if interval is not None and kind not in ("measure", "derived"):
                interval = None  # a categorical value has no flag (findings._from_rules reads numbers only)
            methods.append(RuleMethod(kind, key, tuple(when), tuple(conds), interval,
                                      any("flag" in c for c in method["states"])))
        out[var] = tuple(methods)
    return out


def _gate_problems(gate: Any, states: Mapping[str, tuple[str, ...]], var: str) -> list[str]:
    if not gate:
        return []
    if "any" in gate:
        return [p for g in gate["any"] for p in _gate_problems(g, states, var)]
    if gate.get("variable") not in states:
        return [f"variables.yaml: {var}: gate names an unknown variable {gate.get('variable')!r}"]
    return []


def _abnormal(spec: Mapping[str, Any]) -> np.ndarray:
    """Per state, whether it is a finding to explain (`abnormal` in variables.yaml)."""
    abnormal = set(spec.get("abnormal") or ())
    return np.array([s in abnormal for s in spec["states"]], dtype=bool)


def compile_knowledge(tables: Mapping[str, Any]) -> ScreenKnowledge:
    """Compile the matrix-path knowledge from the scorer's tables (pure; call once per run)."""
    problems: list[str] = []
    specs = analyte_specs()
    section_keys = {s: dict(case_section_keys(s)) for s in MEASUREMENT_SECTIONS}
    stored = {spec.stored_as or key for key, spec in specs.items()}
    value_keys = tuple(sorted(stored, key=measurement_order))
    value_index = {k: i for i, k in enumerate(value_keys)}
    category_values: dict[str, tuple[str, ...]] = {k: tuple(v) for k, v in CATEGORIES.items()}
    for key, spec in specs.items():
        if spec.qualitative:
            category_values[key] = tuple(spec.qualitative)
    category_index = {k: i for i, k in enumerate(category_values)}

    breaks = _age_breaks()
    ref = reference_tables()
    intervals = {}
    for section in ("blood", "urine", "phosphate_handling"):
        for analyte in ref.sections[section]:
            intervals[analyte] = _interval_table(analyte, breaks, reference_interval)
    criticals = {a: _interval_table(a, breaks, critical_limits) for a in ref.sections["critical"]}
    critical_order = tuple(k for k in value_keys if k in criticals)

    vspec = variables_spec()
    variables = tuple(vspec)
    states = {v: tuple(s["states"]) for v, s in vspec.items()}
    methods = _compile_rules(states, category_values, value_index, problems)
    gates = {v: s.get("gate") for v, s in vspec.items()}
    for v, g in gates.items():
        problems += _gate_problems(g, states, v)
    abnormal = {v: _abnormal(s) for v, s in vspec.items()}
    conf = read_knowledge_yaml("findings.yaml")
    acid_base = dict(conf.get("acid_base") or {})
    if "acid_base" in states:
        missing = [s for s in ACID_BASE_STATES if s not in states["acid_base"]]
        if missing:
            problems.append(f"variables.yaml: acid_base lacks the states {missing} the acid-base reading produces")
    index_specs, index_problems = _needed_indices(methods)
    problems += index_problems

    # scoring: one log-likelihood-ratio row per (variable, state), one column per candidate
    pri = {sex: priors(Case(id="screen", patient=Patient(sex=sex)), tables) for sex in SEX_CODES}
    candidates = tuple(sorted(pri[SEX_CODES[0]]))
    col = {c: j for j, c in enumerate(candidates)}
    llr: dict[str, np.ndarray] = {}
    for var in variables:
        m = np.zeros((len(states[var]) + 1, len(candidates)))
        for i, st in enumerate(states[var]):
            for cid in candidates:
                if cid == RESIDUAL_ID:
                    continue
                for ev in likelihood_table(cid, {var: st}, tables):
                    if ev.variable == var:
                        m[i, col[cid]] += ev.log_lr
        llr[var] = m
    log_prior = np.array([[math.log(pri[sex][c][0]) for c in candidates] for sex in SEX_CODES])
    weight = float(tables["scoring"].get("evidence_weight",
                                         read_knowledge_yaml("priors.yaml").get("evidence_weight", 1.0)))
    from ..output.rank import RESIDUAL_META

    names = tuple(RESIDUAL_META["name"] if c == RESIDUAL_ID else tables["candidates"][c]["name"] for c in candidates)
    meta = tables.get("meta") or {}
    return ScreenKnowledge(
        tables=tables, specs=specs, section_keys=section_keys, value_keys=value_keys, value_index=value_index,
        category_values=category_values, category_index=category_index, breaks=breaks,
        age_when_unknown=float(ref.age_when_unknown), intervals=intervals, criticals=criticals,
        critical_order=critical_order,
        critical_message=read_knowledge_yaml("cautions.yaml")["critical_message"], bp=ref.bp,
        index_specs=index_specs, index_shared=dict(index_knowledge().shared), variables=variables, states=states,
        methods=methods, gates=gates, acid_base=acid_base, abnormal=abnormal, candidates=candidates, names=names,
        llr=llr, score_order=tuple(sorted(variables)), log_prior=log_prior, evidence_weight=weight,
        unsupported=tuple(dict.fromkeys(problems)), fingerprint=str(meta.get("knowledge_hash", "")))


_COMPILED: dict[int, tuple[Any, ScreenKnowledge]] = {}


def screen_knowledge(tables: Mapping[str, Any] | None = None) -> ScreenKnowledge:
    """The compiled knowledge of `tables` (default: the installed knowledge), built once per process."""
    if tables is None:
        from ..rank import load_tables

        tables = load_tables()
    hit = _COMPILED.get(id(tables))
    if hit is not None and hit[0] is tables:
        return hit[1]
    sk = compile_knowledge(tables)
    _COMPILED.clear()
    _COMPILED[id(tables)] = (tables, sk)
    return sk
