"""Pure logic behind the workbench: the form catalogue, editing the raw case mapping, matching
problems to fields, HPO and drug look-up for the entry form, and one evaluation pass of the engine.

The workup the user edits is the raw case mapping (docs/case-format.md).  Every edit returns a new
mapping (the old one is never changed), so the application can compare, save and re-rank freely.
No Textual import here.
"""

from __future__ import annotations

import re
import time
from types import MappingProxyType
from functools import cache
from typing import Any, Mapping, NamedTuple, Sequence

from ..case import CATEGORIES, ONSETS, PATTERNS, SEXES, TOP_KEYS, parse_case
from ..errors import CaseError, Problem
from ..units import analyte_specs

__all__ = [
    "EXPLAIN_TOP",
    "GROUPS",
    "Evaluation",
    "FieldSpec",
    "HpoHit",
    "PathStep",
    "Prefetch",
    "candidate_rows",
    "compose_quantity",
    "drug_names",
    "evaluate",
    "exposure_names",
    "field_catalogue",
    "unknown_fields",
    "fields_by_group",
    "fmt_probability",
    "get_value",
    "list_items",
    "path_steps",
    "problems_by_field",
    "raw_key",
    "resolve_feature",
    "search_hpo",
    "split_quantity",
    "with_list",
    "with_value",
]

EXPLAIN_TOP = 25  # candidates whose evidence is worked out on each pass (the differential lists these)

# Display groups of the entry form, in screen order.  "Hormones" and "Other tests" are screen
# groupings only: hormones are stored under `serum`, other tests under `tests` (the case contract).
GROUPS = ("Patient", "Onset and family", "Features", "Medications and exposures", "Vitals", "Serum",
          "Blood gas", "Urine", "Hormones", "Other tests")
# common practice, no source (a screen grouping; calcidiol is the vitamin D store, listed with them)
_HORMONE_KEYS = ("renin_activity", "renin_concentration", "aldosterone", "pth", "calcidiol", "calcitriol",
                 "fgf23", "cortisol", "tsh")
_SECTION_GROUP = {"vitals": "Vitals", "serum": "Serum", "blood_gas": "Blood gas", "urine": "Urine",
                  "tests": "Other tests"}
_CHOICE_LABELS = {
    "vitals.volume": "Clinical volume status",
    "urine.sample": "Sample",
    "urine.amino_acids": "Amino acids (chromatography)",
    "tests.desmopressin_response": "Desmopressin response",
    "tests.urine_diuretic_screen": "Urine diuretic screen",
    "tests.monoclonal_protein": "Monoclonal protein",
}
_NUMBER_PART = re.compile(r"^\s*([-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


class FieldSpec(NamedTuple):
    """One field of the entry form and where its value lives in the raw case mapping."""

    id: str  # canonical "section.key" ("case" and "onset" are top-level)
    section: str  # raw section ("" for a top-level key)
    key: str  # canonical key inside the section
    label: str
    kind: str  # quantity | choice | bool | bp | text | relatives
    group: str
    units: tuple[str, ...] = ()
    default_unit: str = ""
    choices: tuple[str, ...] = ()
    aliases: tuple[str, ...] = ()
    qualitative: tuple[str, ...] = ()
    measure_key: str = ""  # key of the measurement this field produces (flags, units)

    @property
    def dimensionless(self) -> bool:
        return self.default_unit in ("", "pH")


@cache
def field_catalogue() -> tuple[FieldSpec, ...]:
    """Every field of the entry form, in screen order (built from analytes.yaml and the case contract)."""
    specs = analyte_specs()
    out: list[FieldSpec] = [FieldSpec("case", "", "case", "Case id", "text", "Patient")]

    def qty(key: str, group: str, label: str | None = None) -> FieldSpec:
        s = specs[key]
        sec, name = key.split(".", 1)
        default = s.default_unit
        if key == "patient.age" and "y" in s.units:
            default = "y"  # a bare number is read as years; "y" is the clinic spelling
        return FieldSpec(key, sec, name, label or s.label, "quantity", group, s.units, default,
                         aliases=s.aliases, qualitative=s.qualitative, measure_key=s.stored_as or key)

    out.append(qty("patient.age", "Patient"))
    out.append(FieldSpec("patient.sex", "patient", "sex", "Sex", "choice", "Patient", choices=SEXES))
    out.append(qty("patient.weight", "Patient"))
    out.append(qty("patient.height", "Patient"))
    out.append(FieldSpec("patient.pregnant", "patient", "pregnant", "Pregnant", "bool", "Patient"))
    out.append(FieldSpec("onset", "", "onset", "Onset", "choice", "Onset and family", choices=ONSETS))
    out.append(FieldSpec("family.consanguinity", "family", "consanguinity", "Consanguinity", "bool",
                         "Onset and family"))
    out.append(FieldSpec("family.affected_relatives", "family", "affected_relatives",
                         "Affected relatives", "relatives", "Onset and family"))
    out.append(FieldSpec("family.pattern", "family", "pattern", "Inheritance pattern", "choice",
                         "Onset and family", choices=PATTERNS))
    bp = specs["vitals.systolic_bp"]
    out.append(FieldSpec("vitals.blood_pressure", "vitals", "blood_pressure", "Blood pressure", "bp", "Vitals",
                         bp.units, bp.default_unit, measure_key="vitals.systolic_bp"))
    choices_done: set[str] = set()

    def choice(key: str) -> FieldSpec:
        sec, name = key.split(".", 1)
        choices_done.add(key)
        return FieldSpec(key, sec, name, _CHOICE_LABELS.get(key, name.replace("_", " ").capitalize()), "choice",
                         "Hormones" if name in _HORMONE_KEYS else _SECTION_GROUP[sec], choices=CATEGORIES[key])

    out.append(choice("vitals.volume"))
    out.append(choice("urine.sample"))
    for key in specs:
        sec, name = key.split(".", 1)
        if sec not in _SECTION_GROUP or key in ("vitals.systolic_bp", "vitals.diastolic_bp"):
            continue
        group = "Hormones" if sec == "serum" and name in _HORMONE_KEYS else _SECTION_GROUP[sec]
        out.append(qty(key, group))
    for key in CATEGORIES:
        if key not in choices_done:
            out.append(choice(key))
    order = {g: i for i, g in enumerate(GROUPS)}
    return tuple(sorted(out, key=lambda f: order[f.group]))  # stable: file order inside a group


def unknown_fields(raw: Mapping[str, Any]) -> tuple[FieldSpec, ...]:
    """Keys of the raw mapping that no form field reads (typos, keys of another version), as editable
    text fields, so that the user can see them next to their problem and remove them."""
    known_top = set(TOP_KEYS)
    read: dict[str, set[str]] = {}
    for f in field_catalogue():
        if f.section:
            read.setdefault(f.section, set()).update((f.key, *f.aliases))
    out: list[FieldSpec] = []
    for key, value in raw.items():
        if not isinstance(key, str):
            continue
        if key not in known_top:
            out.append(FieldSpec(f"extra:{key}", "", key, key, "text", "Not recognised"))
        elif key in read and isinstance(value, Mapping):
            for sub in value:
                if isinstance(sub, str) and sub not in read[key]:
                    out.append(FieldSpec(f"extra:{key}.{sub}", key, sub, f"{key}.{sub}", "text", "Not recognised"))
    return tuple(out)


def fields_by_group() -> dict[str, tuple[FieldSpec, ...]]:
    groups: dict[str, list[FieldSpec]] = {g: [] for g in GROUPS}
    for f in field_catalogue():
        groups[f.group].append(f)
    return {g: tuple(fs) for g, fs in groups.items()}


# --- reading and writing the raw mapping ------------------------------------------------


def _section(raw: Mapping[str, Any], name: str) -> Mapping[str, Any]:
    sec = raw.get(name)
    return sec if isinstance(sec, Mapping) else {}


def raw_key(raw: Mapping[str, Any], f: FieldSpec) -> str:
    """The key this field has in the raw mapping: an alias when the file used one, else the canonical key."""
    if not f.section:
        return f.key
    sec = _section(raw, f.section)
    for k in (f.key, *f.aliases):
        if k in sec:
            return k
    return f.key


def get_value(raw: Mapping[str, Any], f: FieldSpec) -> Any:
    """The raw value of a field (None when absent)."""
    if not f.section:
        return raw.get(f.key)
    return _section(raw, f.section).get(raw_key(raw, f))


def _insert_ordered(raw: Mapping[str, Any], key: str, value: Any) -> dict[str, Any]:
    """A copy of `raw` with a new top-level key placed where the case contract orders it."""
    out: dict[str, Any] = {}
    rank = {k: i for i, k in enumerate(TOP_KEYS)}
    mine = rank.get(key, len(TOP_KEYS))
    placed = False
    for k, v in raw.items():
        if not placed and rank.get(k, len(TOP_KEYS)) > mine:
            out[key] = value
            placed = True
        out[k] = v
    if not placed:
        out[key] = value
    return out


def with_value(raw: Mapping[str, Any], f: FieldSpec, value: Any) -> dict[str, Any]:
    """A new mapping with the field set to `value` (None or "" removes it; an emptied section goes)."""
    empty = value is None or (isinstance(value, str) and not value.strip())
    if not f.section:
        out = dict(raw)
        if empty:
            out.pop(f.key, None)
            return out
        if f.key in out:
            out[f.key] = value
            return out
        return _insert_ordered(out, f.key, value)
    key = raw_key(raw, f)
    sec = dict(_section(raw, f.section))
    if empty:
        sec.pop(key, None)
    else:
        sec[key] = value
    if f.section in raw:
        out = dict(raw)
        if sec:
            out[f.section] = sec
        else:
            out.pop(f.section)
        return out
    return dict(raw) if not sec else _insert_ordered(raw, f.section, sec)


def list_items(raw: Mapping[str, Any], name: str) -> list[str]:
    """A list section (features, absent_features, medications, exposures) as a list of texts."""
    value = raw.get(name)
    if value is None:
        return []
    if isinstance(value, str):
        return [value]
    if isinstance(value, list):
        return [str(v) for v in value]
    return []


def with_list(raw: Mapping[str, Any], name: str, items: Sequence[str]) -> dict[str, Any]:
    """A new mapping with a list section replaced (an emptied list stays only if the file had it)."""
    items = [str(i) for i in items]
    if name in raw:
        out = dict(raw)
        out[name] = items
        return out
    if not items:
        return dict(raw)
    return _insert_ordered(raw, name, items)


def split_quantity(value: Any) -> tuple[str, str | None]:
    """A raw quantity as (number text, unit or None): "2.7 mmol/L" -> ("2.7", "mmol/L"); 3.1 -> ("3.1", None)."""
    if value is None:
        return "", None
    if isinstance(value, bool):
        return str(value), None
    if isinstance(value, (int, float)):
        return repr(value) if isinstance(value, float) else str(value), None
    text = str(value)
    m = _NUMBER_PART.match(text)
    if not m:
        return text.strip(), None
    number, unit = m.groups()
    return number, (unit or None)


def compose_quantity(f: FieldSpec, text: str, unit: str | None) -> Any:
    """What to store for a quantity typed as `text` with `unit` chosen (None: remove the value).

    A text that already carries a unit ("3.1 mg/dL") or is a qualitative word ("negative") is kept
    as typed; a dimensionless number (pH) is stored as a number; otherwise "NUMBER UNIT"."""
    text = text.strip()
    if not text:
        return None
    if text.lower() in f.qualitative:
        return text.lower()
    m = _NUMBER_PART.match(text)
    if m and m.group(2):
        return text  # the unit was typed with the number
    if m and (f.dimensionless and (unit or f.default_unit) in ("", "pH")):
        try:
            return float(m.group(1).replace(",", ".")) if ("," not in m.group(1)) else text
        except ValueError:
            return text
    return f"{text} {unit or f.default_unit}".strip()


# --- problems -> fields ---------------------------------------------------------------------

_LIST_PATH = re.compile(r"^(features|absent_features|medications|exposures)\[(\d+)\]$")


def problems_by_field(problems: Sequence[Problem], raw: Mapping[str, Any]) -> tuple[dict[str, list[Problem]], list[Problem]]:
    """Problems keyed by form field id (or "features[2]" for a list item), and those tied to no field."""
    where: dict[str, str] = {}
    for f in (*unknown_fields(raw), *field_catalogue()):
        where[f"{f.section}.{raw_key(raw, f)}" if f.section else f.key] = f.id
    by: dict[str, list[Problem]] = {}
    general: list[Problem] = []
    for p in problems:
        path = p.path
        target = where.get(path)
        if target is None and path.startswith("family.affected_relatives["):
            target = "family.affected_relatives"
        if target is None and _LIST_PATH.match(path):
            target = path
        if target is None:
            general.append(p)
        else:
            by.setdefault(target, []).append(p)
    return by, general


# --- vocabularies for the entry form --------------------------------------------------------


class HpoHit(NamedTuple):
    id: str
    label: str
    matched: str  # the name that matched (label or synonym)


@cache
def _hpo_names() -> tuple[tuple[str, str, str], ...]:
    """(folded name, HPO id, name) for every label, synonym and clinic phrase of the bundled subset."""
    from ..paths import read_knowledge_yaml
    from ..vocab import fold, hpo_terms

    rows: list[tuple[str, str, str]] = []
    terms = hpo_terms()
    for t in terms.values():
        if t.obsolete:
            continue
        for name in (t.label, *t.synonyms):
            rows.append((fold(name), t.id, name))
    try:
        extra = (read_knowledge_yaml("phrases.yaml") or {}).get("phrases") or {}
    except FileNotFoundError:
        extra = {}
    for phrase, hid in extra.items():
        if hid in terms:
            rows.append((fold(phrase), hid, phrase))
    return tuple(rows)


def search_hpo(query: str, limit: int = 8) -> list[HpoHit]:
    """Terms whose label, synonym or clinic phrase contains every word of `query` (an HP id matches itself).

    Order: a name starting with the query, then a word starting with it, then any match; labels
    before synonyms; shorter names first."""
    from ..vocab import fold, hpo_terms

    q = query.strip()
    if not q:
        return []
    terms = hpo_terms()
    m = re.match(r"^(?:HP:)?(\d{7})$", q, re.IGNORECASE)
    if m:
        t = terms.get(f"HP:{m.group(1)}")
        return [HpoHit(t.id, t.label, t.label)] if t and not t.obsolete else []
    fq = fold(q)
    words = fq.split()
    if not words:
        return []
    best: dict[str, tuple[tuple, HpoHit]] = {}
    for folded, hid, name in _hpo_names():
        if not all(w in folded for w in words):
            continue
        if folded.startswith(fq):
            tier = 0
        elif f" {words[0]}" in f" {folded}":
            tier = 1
        else:
            tier = 2
        is_label = name == terms[hid].label
        key = (tier, 0 if is_label else 1, len(name), name)
        if hid not in best or key < best[hid][0]:
            best[hid] = (key, HpoHit(hid, terms[hid].label, name))
    return [hit for _, hit in sorted(best.values(), key=lambda kv: kv[0])[:limit]]


def resolve_feature(text: str) -> tuple[str, str] | None:
    """A feature as written in a case ("HP:0003394 Muscle spasm", "salt craving") -> (HPO id, label), or None."""
    from ..vocab import lookup_hpo_id, lookup_phrase

    term, hid, _ = lookup_hpo_id(text)
    if hid:
        return (term.id, term.label) if term is not None and not term.obsolete else None
    term = lookup_phrase(text)
    return (term.id, term.label) if term is not None else None


def drug_names(tables: Mapping[str, Any]) -> list[str]:
    """Every INN and synonym the drug knowledge knows (for completion), INNs first."""
    inns: list[str] = []
    others: list[str] = []
    for name, hits in (tables.get("drug_index") or {}).items():
        (inns if any(h.get("inn", "").lower() == name for h in hits) else others).append(name)
    return sorted(set(inns)) + sorted(set(others) - set(inns))


def exposure_names(tables: Mapping[str, Any]) -> list[str]:
    return sorted((tables.get("exposure_index") or {}).keys())


# --- one evaluation pass ----------------------------------------------------------------------


class Evaluation(NamedTuple):
    """The engine's answer for one version of the workup."""

    valid: bool
    problems: tuple[Problem, ...] = ()
    notes: tuple[Problem, ...] = ()
    document: Mapping[str, Any] | None = None  # rank_document of the result (None when invalid)
    result: Any = None  # the RankResult (for the exported report), None when invalid
    seconds: float = 0.0
    generation: int = 0
    extra: Mapping[str, Any] = MappingProxyType({})


def evaluate(raw: Mapping[str, Any], tables: Mapping[str, Any], source: str = "", generation: int = 0,
             explain_top: int = EXPLAIN_TOP) -> Evaluation:
    """Validate the raw workup and, when valid, rank it: the same path as `tubulo rank`."""
    from ..output.rank import rank_document
    from ..rank import rank_case

    t0 = time.perf_counter()
    try:
        case = parse_case(raw, source)
    except CaseError as exc:
        return Evaluation(False, exc.problems, (), None, None, time.perf_counter() - t0, generation)
    result = rank_case(case, tables, explain_top=explain_top)
    doc = rank_document(result)
    return Evaluation(True, (), case.notes, doc, result, time.perf_counter() - t0, generation)


def fmt_probability(p: float) -> str:
    """"99.3 %", "<0.1 %" for a small value, "≈0 %" for one that rounds to nothing."""
    pct = p * 100
    if pct <= 0:
        return "≈0 %"
    if pct < 0.1:
        return "<0.1 %"
    return f"{pct:.1f} %"


def candidate_rows(document: Mapping[str, Any], top: int = EXPLAIN_TOP) -> list[Mapping[str, Any]]:
    """The candidates the differential lists: the leading `top`, plus the residual when it ranks lower."""
    cands = list(document.get("candidates") or [])
    rows = cands[:top]
    if not any(c["kind"] == "residual" for c in rows):
        rows += [c for c in cands if c["kind"] == "residual"][:1]
    return rows


# --- the causal path of one piece of evidence --------------------------------------------------


class PathStep(NamedTuple):
    """One step of a causal path as the evidence walk shows it."""

    node: str
    label: str
    kind: str
    edge: str  # kind of the edge that led here ("" for the first step)
    sign: int | None  # that edge's sign
    direction: int | None  # cumulative: +1 raised, -1 lowered, None unknown
    source: str
    note: str = ""
    where: tuple[str, ...] = ()  # labels of the segments the node sits in


def _sites(node: str, nodes: Mapping[str, Any], adjacency: Mapping[str, Any] | None) -> tuple[str, ...]:
    if not adjacency:
        return ()
    out = []
    for e in (adjacency.get(node) or {}).get("out") or []:
        if e.get("kind") in ("expressed_in", "located_in"):
            target = e.get("to")
            out.append((nodes.get(target) or {}).get("label", target))
    return tuple(dict.fromkeys(out))


def path_steps(candidate: Mapping[str, Any], item: Mapping[str, Any], tables: Mapping[str, Any],
               adjacency: Mapping[str, Any] | None = None) -> tuple[PathStep, ...]:
    """The candidate itself, then each step of the evidence item's path, with the cumulative direction."""
    nodes = tables.get("nodes") or {}
    steps: list[PathStep] = []
    cid = candidate.get("id", "")
    cand = (tables.get("candidates") or {}).get(cid) or {}
    if cid in nodes:
        steps.append(PathStep(cid, candidate.get("name") or nodes[cid].get("label", cid), nodes[cid].get("kind", ""),
                              "", None, None, cand.get("source", ""), "", _sites(cid, nodes, adjacency)))
    direction: int | None = 1
    for s in item.get("path") or []:
        sign = s.get("sign")
        if direction is not None and sign in (1, -1):
            direction = direction * sign
        else:
            direction = None
        node = s.get("node", "")
        steps.append(PathStep(node, s.get("label") or node, s.get("kind") or (nodes.get(node) or {}).get("kind", ""),
                              s.get("edge", ""), sign, direction, s.get("source", ""), s.get("note") or "",
                              _sites(node, nodes, adjacency)))
    return tuple(steps)


class Prefetch:
    """Load the knowledge and evaluate the opening workup in a thread while the screen is being built.

    `result()` waits and returns (tables, graph view, evaluation or None, error text or None)."""

    def __init__(self, raw: Mapping[str, Any] | None, source: str = ""):
        import threading

        self._raw = raw
        self._source = source
        self._out: tuple[Any, Any, Evaluation | None, str | None] | None = None
        self._thread = threading.Thread(target=self._run, name="tubulo-prefetch", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        from ..errors import TubuloError
        from ..kb.tables import load_graph_view, load_tables

        try:
            tables = load_tables()
            graph = load_graph_view()
        except TubuloError as exc:
            self._out = (None, None, None, str(exc))
            return
        ev = None
        if self._raw is not None:
            try:
                ev = evaluate(self._raw, tables, self._source, generation=1)
            except TubuloError:
                ev = None  # the application evaluates again and shows the problem
        self._out = (tables, graph, ev, None)

    def result(self) -> tuple[Any, Any, Evaluation | None, str | None]:
        self._thread.join()
        assert self._out is not None
        return self._out
