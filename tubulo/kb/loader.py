"""Read, validate and cross-check every knowledge-graph file; collect all problems before failing.

`load_knowledge(folder)` returns a `Knowledge` or raises `KnowledgeError` whose message lists every
problem as `file:line: entry 'id': field: what is wrong`.  `check_knowledge(folder)` returns the
problems (errors and warnings) without raising, for `tubulo knowledge check`.

Files read: `variables.yaml`, `meta.yaml`, `scoring.yaml`, `hpo_exceptions.yaml`,
`consistency_exceptions.yaml`, `cautions.yaml`, `priors.yaml`, `phrases.yaml`, `checks.yaml`,
and every other `*.yaml` whose top-level keys are graph keys
(`segments`, `transporters`, `hormones`, `mechanisms`, `edges`, `disorders`, `drug_classes`,
`exposures`).  Files of the measurement layer (analytes, reference intervals, indices, findings)
are validated by their own modules and skipped here.
"""

from __future__ import annotations

from types import MappingProxyType
from pathlib import Path
from typing import Any, NamedTuple

import yaml
from pydantic import BaseModel, ValidationError

from ..errors import KnowledgeError, Problem
from . import schema as S

__all__ = ["Knowledge", "EdgeRecord", "load_knowledge", "check_knowledge", "NODE_SECTIONS", "SKIPPED_FILES"]

SKIPPED_FILES = frozenset({"analytes.yaml", "reference_intervals.yaml", "indices.yaml", "findings.yaml"})
_SPECIAL = {
    "variables.yaml": S.VariablesFile,
    "meta.yaml": S.Meta,
    "scoring.yaml": S.Scoring,
    "hpo_exceptions.yaml": S.HpoExceptions,
    "consistency_exceptions.yaml": S.ConsistencyExceptions,
    "cautions.yaml": S.CautionsFile,
    "priors.yaml": S.PriorsFile,
    "phrases.yaml": S.PhrasesFile,
    "checks.yaml": S.ChecksFile,
}
_REQUIRED = ("variables.yaml", "meta.yaml", "scoring.yaml")
# sections whose entries are graph nodes with an `id`
NODE_SECTIONS = ("segments", "transporters", "hormones", "mechanisms", "disorders", "drug_classes", "exposures")
_TARGET_SECTIONS = ("transporters", "hormones", "mechanisms", "exposures")

_Loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


class EdgeRecord(NamedTuple):
    """A signed causal edge with the file and line it came from."""

    edge: S.Edge
    file: str
    line: int


class Knowledge(NamedTuple):
    """The validated knowledge: parsed entries by section, with where each came from."""

    folder: Path
    files: tuple[str, ...]
    variables: dict[str, S.Variable]
    segments: dict[str, S.Segment]
    transporters: dict[str, S.Transporter]
    hormones: dict[str, S.Hormone]
    mechanisms: dict[str, S.Mechanism]
    edges: tuple[EdgeRecord, ...]
    disorders: dict[str, S.Disorder]
    drug_classes: dict[str, S.DrugClass]
    exposures: dict[str, S.Exposure]
    manifests: dict[str, dict[str, S.StateManifest | S.FeatureManifest]]
    meta: S.Meta | None
    scoring: S.Scoring | None
    hpo_exceptions: S.HpoExceptions | None
    consistency_exceptions: S.ConsistencyExceptions | None
    origin: dict[str, tuple[str, int]] = MappingProxyType({})
    warnings: tuple[Problem, ...] = ()

    def candidates(self) -> dict[str, S.Disorder | S.DrugClass]:
        """Disorders (inherited, acquired) and drug classes, in file order."""
        return {**self.disorders, **self.drug_classes}

    def candidate_kind(self, cid: str) -> str:
        if cid in self.drug_classes:
            return "drug"
        return self.disorders[cid].kind

    def node_section(self, nid: str) -> str | None:
        for sec in NODE_SECTIONS:
            if nid in getattr(self, sec):
                return sec
        return None


# ---------------------------------------------------------------- reading with line numbers


def _line_map(node: yaml.Node, path: tuple = (), out: dict | None = None) -> dict[tuple, int]:
    out = {} if out is None else out
    out[path] = node.start_mark.line + 1
    if isinstance(node, yaml.MappingNode):
        for k, v in node.value:
            key = k.value if isinstance(k, yaml.ScalarNode) else str(k.value)
            out[path + (key,)] = k.start_mark.line + 1
            _line_map(v, path + (key,), out)
    elif isinstance(node, yaml.SequenceNode):
        for i, v in enumerate(node.value):
            _line_map(v, path + (i,), out)
    return out


class _File:
    def __init__(self, name: str, data: Any, lines: dict[tuple, int]):
        self.name, self.data, self.lines = name, data, lines

    def line(self, path: tuple) -> int:
        path = tuple(str(p) if not isinstance(p, int) else p for p in path)
        while path and path not in self.lines:
            path = path[:-1]
        return self.lines.get(path, 1)


def _read(path: Path, problems: list[Problem]) -> _File | None:
    try:
        text = path.read_text(encoding="utf-8")
        node = yaml.compose(text, Loader=_Loader)
        data = yaml.load(text, Loader=_Loader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f"{path.name}:{mark.line + 1}" if mark else path.name
        problems.append(Problem(where, f"not valid YAML: {getattr(exc, 'problem', exc)}"))
        return None
    except (OSError, UnicodeDecodeError) as exc:
        problems.append(Problem(path.name, f"cannot be read: {exc}"))
        return None
    return _File(path.name, data, _line_map(node) if node is not None else {})


# ---------------------------------------------------------------- pydantic errors -> problems


def _dotted(loc: tuple) -> str:
    out = ""
    for p in loc:
        out += f"[{p}]" if isinstance(p, int) else (f".{p}" if out else str(p))
    return out or "(entry)"


def _fields_at(model: type[BaseModel] | None, loc: tuple) -> list[str]:
    """The field names of the model found by walking `loc` through nested models (or [])."""
    for part in loc:
        if model is None or not isinstance(part, str) or part not in model.model_fields:
            return []
        ann = model.model_fields[part].annotation
        candidates = [a for a in (ann, *getattr(ann, "__args__", ())) if isinstance(a, type) and issubclass(a, BaseModel)]
        model = candidates[0] if candidates else None
    return list(model.model_fields) if model is not None else []


def _explain(err: dict, model: type[BaseModel] | None = None) -> str:
    kind, msg = err.get("type", ""), err.get("msg", "")
    loc = err.get("loc", ())
    if kind == "extra_forbidden":
        import difflib

        close = difflib.get_close_matches(str(loc[-1]) if loc else "", _fields_at(model, tuple(loc[:-1])), n=1)
        hint = f"; did you mean {close[0]}?" if close else "; see knowledge/README.md for the fields allowed"
        return f"unknown field (value {err.get('input')!r}){hint}"
    if kind == "missing":
        if loc and loc[-1] == "source":
            return "unsourced: a source is required ('Authors year journal', 'common practice' or 'from memory')"
        return "missing required field"
    msg = msg.removeprefix("Value error, ")
    got = err.get("input")
    if kind not in ("value_error",) and not isinstance(got, (dict, list)):
        msg += f" (got {got!r})"
    return msg


def _validate(model: type[BaseModel], raw: Any, f: _File, base: tuple, entry: str,
              problems: list[Problem], partial: list | None = None) -> Any:
    """The validated entry, or None after recording each error.  With `partial`, an entry whose
    faulty fields are all optional is re-validated without them and appended there, so its
    references can still be cross-checked (the entry itself stays an error)."""
    try:
        return model.model_validate(raw)
    except ValidationError as exc:
        bad_fields = set()
        for err in exc.errors():
            loc = tuple(p for p in err["loc"] if not (isinstance(p, str) and p.startswith(("function-", "list[", "str", "constrained"))))
            problems.append(Problem(f"{f.name}:{f.line(base + loc)}",
                                    f"{entry}field {_dotted(loc)}: {_explain(err, model)}"))
            if loc:
                bad_fields.add(loc[0])
        if partial is not None and isinstance(raw, dict) and bad_fields:
            try:
                partial.append(model.model_validate({k: v for k, v in raw.items() if k not in bad_fields}))
            except ValidationError:
                pass
        return None


def _entry_label(section: str, raw: Any, i: int) -> str:
    if isinstance(raw, dict):
        if raw.get("id"):
            return f"{section} entry {raw['id']!r}: "
        if section == "edges" and ("from" in raw or "to" in raw):
            return f"edge {raw.get('from')!r} -> {raw.get('to')!r}: "
    return f"{section}[{i}]: "


# ---------------------------------------------------------------- main entry points


def check_knowledge(folder: Path | str | None = None) -> tuple[Knowledge | None, list[Problem]]:
    """Validate the knowledge folder; return (knowledge or None when there are errors, all problems)."""
    from ..paths import knowledge_dir

    folder = Path(folder) if folder is not None else knowledge_dir()
    problems: list[Problem] = []
    if not folder.is_dir():
        return None, [Problem(str(folder), "knowledge folder not found")]
    sections: dict[str, dict] = {sec: {} for sec in NODE_SECTIONS}
    origin: dict[str, tuple[str, int]] = {}
    edges: list[EdgeRecord] = []
    raw_manifests: dict[str, tuple[_File, tuple, dict]] = {}
    special: dict[str, Any] = {}
    files: list[str] = []

    for path in sorted(folder.glob("*.yaml")):
        if path.name in SKIPPED_FILES:
            continue
        f = _read(path, problems)
        if f is None:
            continue
        files.append(path.name)
        if path.name == "variables.yaml":
            special[path.name] = _read_variables(f, problems)
            continue
        if path.name in _SPECIAL:
            special[path.name] = _validate(_SPECIAL[path.name], f.data, f, (), "", problems)
            continue
        if not isinstance(f.data, dict):
            problems.append(Problem(f"{f.name}:1", "expected a mapping of sections at the top level"))
            continue
        keys = set(f.data) - {"version"}
        graph_keys = keys & set(S.FILE_KEYS)
        if not graph_keys:
            problems.append(Problem(f.name, f"not read by the knowledge graph (top-level keys {sorted(keys)})", "info"))
            continue
        for key in sorted(keys - graph_keys):
            problems.append(Problem(f"{f.name}:{f.line((key,))}",
                                    f"unknown top-level section {key!r}; expected one of {sorted(S.FILE_KEYS)}"))
        for section in (k for k in f.data if k in graph_keys):
            entries = f.data[section]
            if entries is None:
                continue
            if not isinstance(entries, list):
                problems.append(Problem(f"{f.name}:{f.line((section,))}", f"section {section!r} must be a list of entries"))
                continue
            for i, raw in enumerate(entries):
                label = _entry_label(section, raw, i)
                if not isinstance(raw, dict):
                    problems.append(Problem(f"{f.name}:{f.line((section, i))}", f"{label}expected a mapping"))
                    continue
                partial: list = []
                obj = _validate(S.FILE_KEYS[section], raw, f, (section, i), label, problems, partial)
                if obj is None and not partial:
                    continue
                obj = obj if obj is not None else partial[0]
                line = f.line((section, i))
                if section == "edges":
                    edges.append(EdgeRecord(obj, f.name, line))
                    continue
                if obj.id in origin:
                    of, ol = origin[obj.id]
                    problems.append(Problem(f"{f.name}:{line}", f"{label}duplicate id; already defined at {of}:{ol}"))
                    continue
                origin[obj.id] = (f.name, line)
                sections[section][obj.id] = obj
                if section in ("disorders", "drug_classes"):
                    raw_manifests[obj.id] = (f, (section, i, "manifests"), raw.get("manifests") or {})

    for name in _REQUIRED:
        if name not in special:
            if not (folder / name).exists():
                problems.append(Problem(name, "required knowledge file is missing"))

    vf: S.VariablesFile | None = special.get("variables.yaml")
    variables = dict(vf.variables) if vf else {}
    manifests = _check_manifests(raw_manifests, variables, problems)
    _cross_check(sections, edges, variables, origin, special, problems)
    _check_cautions(special.get("cautions.yaml"), variables, sections["drug_classes"], folder, problems)
    _check_phrases(special.get("phrases.yaml"), folder, problems)

    errors = [p for p in problems if p.level == "error"]
    if errors:
        return None, problems
    kn = Knowledge(
        folder=folder, files=tuple(files), variables=variables,
        segments=sections["segments"], transporters=sections["transporters"], hormones=sections["hormones"],
        mechanisms=sections["mechanisms"], edges=tuple(edges), disorders=sections["disorders"],
        drug_classes=sections["drug_classes"], exposures=sections["exposures"], manifests=manifests,
        meta=special.get("meta.yaml"), scoring=special.get("scoring.yaml"),
        hpo_exceptions=special.get("hpo_exceptions.yaml"),
        consistency_exceptions=special.get("consistency_exceptions.yaml"),
        origin=origin, warnings=tuple(problems),
    )
    return kn, problems


def load_knowledge(folder: Path | str | None = None) -> Knowledge:
    """Validated knowledge, or `KnowledgeError` listing every error (file:line, entry, field)."""
    kn, problems = check_knowledge(folder)
    if kn is None:
        errors = [p for p in problems if p.level == "error"]
        err = KnowledgeError(f"{len(errors)} knowledge problem(s):\n" + "\n".join(f"  {p}" for p in errors))
        err.problems = tuple(errors)  # type: ignore[attr-defined]
        raise err
    return kn


def _read_variables(f: _File, problems: list[Problem]) -> S.VariablesFile | None:
    """Validate variable by variable, so one faulty variable does not hide the others from the
    cross-checks (a variable whose faulty fields are optional is kept for them; it stays an error)."""
    data = f.data
    if not isinstance(data, dict) or not isinstance(data.get("variables"), dict):
        problems.append(Problem(f"{f.name}:1", "expected `version` and a mapping `variables`"))
        return None
    for key in sorted(set(data) - {"version", "variables"}):
        problems.append(Problem(f"{f.name}:{f.line((key,))}", f"unknown top-level field {key!r}"))
    if not isinstance(data.get("version"), int):
        problems.append(Problem(f"{f.name}:1", f"field version: expected an integer, got {data.get('version')!r}"))
    variables: dict[str, S.Variable] = {}
    for vid, raw in data["variables"].items():
        partial: list = []
        v = _validate(S.Variable, raw, f, ("variables", vid), f"variable {vid!r}: ", problems, partial)
        v = v if v is not None else (partial[0] if partial else None)
        if v is not None:
            variables[str(vid)] = v
    return S.VariablesFile.model_construct(version=data.get("version") or 0, variables=variables)


# ---------------------------------------------------------------- cross-file checks


def _check_manifests(raw_manifests, variables, problems) -> dict[str, dict]:
    out: dict[str, dict] = {}
    for cid, (f, base, raw) in raw_manifests.items():
        parsed: dict[str, Any] = {}
        if not isinstance(raw, dict):
            continue
        for key, value in raw.items():
            key = str(key)
            where = f"{f.name}:{f.line(base + (key,))}"
            label = f"candidate {cid!r}: manifest {key!r}: "
            try:
                m = S.parse_manifest(key, value)
            except ValidationError as exc:
                for err in exc.errors():
                    problems.append(Problem(f"{f.name}:{f.line(base + (key,) + tuple(err['loc']))}",
                                            f"{label}field {_dotted(tuple(err['loc']))}: {_explain(err)}"))
                continue
            except ValueError as exc:
                problems.append(Problem(where, f"{label}{exc}"))
                continue
            if isinstance(m, S.StateManifest):
                var = variables.get(key)
                if var is None:
                    problems.append(Problem(where, f"{label}unknown variable; expected a variable of variables.yaml or an HPO id"))
                    continue
                bad = [s for s in m.states if s not in var.states]
                if bad:
                    problems.append(Problem(where, f"{label}unknown state(s) {bad}; {key} has states {var.states}"))
                    continue
            parsed[key] = m
        out[cid] = parsed
    return out


def _cross_check(sections, edges, variables, origin, special, problems) -> None:
    def where(nid: str) -> str:
        f, line = origin.get(nid, ("?", 0))
        return f"{f}:{line}"

    node_ids = set(origin)
    segs = sections["segments"]
    for nid in node_ids & set(variables):
        if nid not in sections["hormones"]:
            problems.append(Problem(where(nid), f"id {nid!r} is also a variable in variables.yaml; only a hormone "
                                                "may share its id with the variable that measures it"))
    for sid, seg in segs.items():
        if seg.part_of and seg.part_of not in segs:
            problems.append(Problem(where(sid), f"segments entry {sid!r}: field part_of: {seg.part_of!r} is not a segment"))
    for tid, t in sections["transporters"].items():
        for j, e in enumerate(t.expressed_in):
            if e.segment not in segs:
                problems.append(Problem(where(tid), f"transporters entry {tid!r}: field expressed_in[{j}].segment: "
                                                    f"{e.segment!r} is not a segment"))
    for mid, m in sections["mechanisms"].items():
        if m.segment and m.segment not in segs:
            problems.append(Problem(where(mid), f"mechanisms entry {mid!r}: field segment: {m.segment!r} is not a segment"))

    endpoints = (node_ids - set(sections["disorders"]) - set(sections["drug_classes"])) | set(variables)
    seen: dict[tuple[str, str], EdgeRecord] = {}
    for rec in edges:
        e = rec.edge
        label = f"{rec.file}:{rec.line}"
        for fld, nid in (("from", e.from_), ("to", e.to)):
            if nid not in endpoints:
                hint = " (a candidate cannot be an edge endpoint; use acts_on)" if nid in node_ids else ""
                problems.append(Problem(label, f"edge {e.from_!r} -> {e.to!r}: field {fld}: {nid!r} is not a node "
                                               f"or variable id{hint}"))
        if e.from_ == e.to:
            problems.append(Problem(label, f"edge {e.from_!r} -> {e.to!r}: an edge may not loop on one node"))
        key = (e.from_, e.to)
        if key in seen:
            prev = seen[key]
            level = "error" if prev.edge.sign != e.sign else "warning"
            problems.append(Problem(label, f"edge {e.from_!r} -> {e.to!r}: repeated (first at {prev.file}:{prev.line})"
                                           + (" with the opposite sign" if level == "error" else ""), level))
        else:
            seen[key] = rec

    targets = {nid for sec in _TARGET_SECTIONS for nid in sections[sec]} | set(variables)
    for sec in ("disorders", "drug_classes", "exposures"):
        for cid, c in sections[sec].items():
            for j, a in enumerate(c.acts_on):
                if a.target not in targets:
                    problems.append(Problem(where(cid), f"{sec} entry {cid!r}: field acts_on[{j}].target: {a.target!r} "
                                                        "is not a transporter, hormone, mechanism, exposure or variable"))
            for j, s in enumerate(getattr(c, "segments", [])):
                if s not in segs:
                    problems.append(Problem(where(cid), f"{sec} entry {cid!r}: field segments[{j}]: {s!r} is not a segment"))
            for j, x in enumerate(getattr(c, "exposures", [])):
                if x not in sections["exposures"]:
                    problems.append(Problem(where(cid), f"{sec} entry {cid!r}: field exposures[{j}]: {x!r} is not an exposure"))
            if sec != "exposures" and not c.acts_on and not getattr(c, "exposures", []):
                problems.append(Problem(where(cid), f"{sec} entry {cid!r}: no acts_on and no exposures, so no causal path "
                                                    "can be drawn", "warning"))
    for did, d in sections["disorders"].items():
        if d.kind == "inherited":
            if not d.genes:
                problems.append(Problem(where(did), f"disorders entry {did!r}: inherited but lists no genes", "warning"))
            if not d.xrefs:
                problems.append(Problem(where(did), f"disorders entry {did!r}: inherited but lists no OMIM/ORPHA xref", "warning"))
    for cid, dc in sections["drug_classes"].items():
        inns = [m.inn.lower() for m in dc.members]
        for inn in {i for i in inns if inns.count(i) > 1}:
            problems.append(Problem(where(cid), f"drug_classes entry {cid!r}: member {inn!r} listed twice"))

    for vid, v in variables.items():
        for g in _gate_leaves(v.gate):
            if g.variable not in variables:
                problems.append(Problem("variables.yaml", f"variable {vid!r}: field gate: {g.variable!r} is not a variable"))
            elif set(g.states) - set(variables[g.variable].states):
                problems.append(Problem("variables.yaml", f"variable {vid!r}: field gate: states "
                                                          f"{sorted(set(g.states) - set(variables[g.variable].states))} "
                                                          f"are not states of {g.variable}"))

    candidates = set(sections["disorders"]) | set(sections["drug_classes"])
    ce = special.get("consistency_exceptions.yaml")
    for j, x in enumerate(ce.exceptions if ce else []):
        if x.candidate not in candidates:
            problems.append(Problem("consistency_exceptions.yaml", f"exceptions[{j}]: field candidate: {x.candidate!r} is not a candidate"))
        if x.variable not in variables:
            problems.append(Problem("consistency_exceptions.yaml", f"exceptions[{j}]: field variable: {x.variable!r} is not a variable"))
    he = special.get("hpo_exceptions.yaml")
    for sec in ("gene_disease", "manifests"):
        for j, x in enumerate(getattr(he, sec, []) if he else []):
            if x.disorder not in sections["disorders"]:
                problems.append(Problem("hpo_exceptions.yaml", f"{sec}[{j}]: field disorder: {x.disorder!r} is not a disorder"))


def _check_cautions(cf: S.CautionsFile | None, variables, drug_classes, folder: Path, problems) -> None:
    """The findings, analytes and drug classes a caution names exist (else it would never be raised)."""
    if cf is None:
        return
    try:
        with open(folder / "analytes.yaml", encoding="utf-8") as fh:
            analytes = set((yaml.load(fh, Loader=_Loader) or {}).get("analytes") or {})
    except OSError:
        analytes = set()

    def bad(rule: S.CautionRule, field: str, what: str) -> None:
        problems.append(Problem("cautions.yaml", f"quality entry {rule.id!r}: field {field}: {what}"))

    for rule in cf.quality:
        if rule.when:
            v = variables.get(rule.when.variable)
            if v is None:
                bad(rule, "when", f"{rule.when.variable!r} is not a variable")
            elif set(rule.when.states) - set(v.states):
                bad(rule, "when", f"states {sorted(set(rule.when.states) - set(v.states))} are not states of "
                                  f"{rule.when.variable} ({v.states})")
        if rule.needs_variable and rule.needs_variable not in variables:
            bad(rule, "needs_variable", f"{rule.needs_variable!r} is not a variable")
        for key in rule.missing:
            if analytes and key not in analytes:
                bad(rule, "missing", f"{key!r} is not an analyte of analytes.yaml")
        for cid in rule.drug_class_on_list:
            if cid not in drug_classes:
                bad(rule, "drug_class_on_list", f"{cid!r} is not a drug class")


def _check_phrases(pf: S.PhrasesFile | None, folder: Path, problems) -> None:
    """Every term phrases.yaml names is in the folder's HPO subset (the terms a case is read against)."""
    subset = folder / "hpo_subset.json"
    if pf is None or not subset.is_file():
        return
    import json

    terms = set((json.loads(subset.read_text(encoding="utf-8")).get("terms") or {}))
    for phrase, hid in pf.phrases.items():
        if hid not in terms:
            problems.append(Problem("phrases.yaml", f"phrases entry {phrase!r}: {hid} is not in hpo_subset.json "
                                                    "(run scripts/build_hpo_subset.py)"))
    for hid in pf.shipped:
        if hid not in terms:
            problems.append(Problem("phrases.yaml", f"shipped entry {hid}: not in hpo_subset.json "
                                                    "(run scripts/build_hpo_subset.py)"))


def _gate_leaves(g: S.Gate | None):
    if g is None:
        return
    if g.variable is not None:
        yield g
    for sub in (g.any or []) + (g.all or []):
        yield from _gate_leaves(sub)
