"""Reference intervals for age and sex, urine and TmP/GFR limits, critical limits, BP categories.

All numbers come from `knowledge/reference_intervals.yaml`; this module selects the row for a
patient's age and sex and compares values with it.  Ages are years (float); rows are half-open
[age_min, age_max).  When age is not given an adult is assumed (the file's `age_when_unknown`).

Decision support only: the local laboratory's intervals and critical-value list, and local
protocols, take precedence over these tables.
"""

from __future__ import annotations

import math
import re
from functools import cache
from types import MappingProxyType
from typing import Any, Mapping, NamedTuple

from .errors import CaseError, KnowledgeError, Problem
from .paths import require_knowledge_yaml

__all__ = [
    "BP_CATEGORIES",
    "BPCategory",
    "Interval",
    "ReferenceTables",
    "bp_category",
    "classify",
    "critical_limits",
    "interval_analytes",
    "parse_reference_knowledge",
    "reference_interval",
    "reference_tables",
    "tmp_gfr_interval",
    "urine_calcium_24h_limit",
    "urine_calcium_creatinine_limit",
]

KNOWLEDGE_FILE = "reference_intervals.yaml"
REFERENCE_SECTIONS = ("blood", "urine", "phosphate_handling")
CRITICAL_SECTION = "critical"
ROW_SEXES = ("any", "female", "male")
BP_CATEGORIES = ("low", "normal", "elevated", "stage1", "stage2", "unclassified")
_BP_ORDER = {"normal": 0, "elevated": 1, "stage1": 2, "stage2": 3}
_AGE_TEXT = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*(d|mo)\s*$")
_ROW_FIELDS = ("analyte", "sex", "age_min", "age_max", "low", "high", "unit", "group", "source")


class Interval(NamedTuple):
    """One reference (or limit) row as it applies to a patient."""

    analyte: str
    low: float | None
    high: float | None
    unit: str
    group: str
    source: str
    note: str = ""
    sex: str = "any"
    age_min: float = 0.0
    age_max: float | None = None


class BPCategory(NamedTuple):
    """Blood pressure category for age: low | normal | elevated | stage1 | stage2 | unclassified."""

    category: str
    threshold_text: str
    source: str


class _HypotensionRow(NamedTuple):
    age_min: float
    age_max: float | None
    systolic_below: float | None
    base: float | None
    per_year: float | None


class _BPTables(NamedTuple):
    adult: Mapping[str, float]
    adult_source: str
    child: Mapping[str, float]
    child_source: str
    child_rows: Mapping[int, Mapping[str, tuple[float, float]]]
    hypotension: tuple[_HypotensionRow, ...]
    hypotension_source: str


class ReferenceTables(NamedTuple):
    """The parsed file: rows by section and analyte, groups, blood pressure tables."""

    sections: Mapping[str, Mapping[str, tuple[Interval, ...]]]
    groups: Mapping[str, tuple[float, float | None]]
    age_when_unknown: float
    bp: _BPTables


# --------------------------------------------------------------------------------------------
# Parsing and checking
# --------------------------------------------------------------------------------------------


def _is_number(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _fail(file: str, where: str, fld: str, what: str) -> KnowledgeError:
    return KnowledgeError(f"{file}: {where}: field '{fld}': {what}")


def _age(value: Any, days_per_year: float, file: str, where: str, fld: str, allow_none: bool) -> float | None:
    if value is None:
        if allow_none:
            return None
        raise _fail(file, where, fld, "required (years, or a text like '28d' or '6mo')")
    if _is_number(value) and value >= 0:
        return float(value)
    if isinstance(value, str):
        m = _AGE_TEXT.match(value)
        if m:
            n = float(m.group(1))
            return n / days_per_year if m.group(2) == "d" else n / 12.0
    raise _fail(file, where, fld, f"expected years >= 0 or a text like '28d' or '6mo', got {value!r}")


def _overlaps(a: Interval, b: Interval) -> bool:
    a_hi = math.inf if a.age_max is None else a.age_max
    b_hi = math.inf if b.age_max is None else b.age_max
    return a.age_min < b_hi and b.age_min < a_hi


def _parse_rows(rows: Any, section: str, groups: Mapping[str, tuple[float, float | None]],
                days_per_year: float, file: str) -> dict[str, tuple[Interval, ...]]:
    if not isinstance(rows, list):
        raise _fail(file, f"section '{section}'", section, "missing or not a list of rows")
    by_analyte: dict[str, list[Interval]] = {}
    for n, row in enumerate(rows, start=1):
        where = f"section '{section}' row {n}"
        if not isinstance(row, Mapping):
            raise KnowledgeError(f"{file}: {where}: not a mapping")
        if isinstance(row.get("analyte"), str):
            where += f" ({row['analyte']})"
        for fld in _ROW_FIELDS:
            if fld not in row:
                raise _fail(file, where, fld, "missing")
        for fld in ("analyte", "unit", "group", "source"):
            if not isinstance(row[fld], str) or not row[fld].strip():
                raise _fail(file, where, fld, "missing or empty text")
        if row["sex"] not in ROW_SEXES:
            raise _fail(file, where, "sex", f"expected one of {', '.join(ROW_SEXES)}, got {row['sex']!r}")
        if row["group"] not in groups:
            raise _fail(file, where, "group", f"unknown group {row['group']!r} (known: {', '.join(groups)})")
        age_min = _age(row["age_min"], days_per_year, file, where, "age_min", allow_none=False)
        age_max = _age(row["age_max"], days_per_year, file, where, "age_max", allow_none=True)
        if age_max is not None and age_max <= age_min:
            raise _fail(file, where, "age_max", f"must be above age_min ({row['age_min']!r})")
        g_lo, g_hi = groups[row["group"]]
        if age_min < g_lo - 1e-12 or (g_hi is not None and (age_max is None or age_max > g_hi + 1e-12)):
            raise _fail(file, where, "group", f"the row's ages are not within group '{row['group']}'")
        for fld in ("low", "high"):
            if row[fld] is not None and not _is_number(row[fld]):
                raise _fail(file, where, fld, f"expected a number or null, got {row[fld]!r}")
        low, high = row["low"], row["high"]
        if low is None and high is None:
            raise _fail(file, where, "low", "low and high are both null")
        if low is not None and high is not None and low > high:
            raise _fail(file, where, "low", f"low {low} is above high {high}")
        note = row.get("note", "")
        if not isinstance(note, str):
            raise _fail(file, where, "note", "expected text")
        alt = row.get("alt")
        if alt is not None:
            if (not isinstance(alt, Mapping) or alt.get("limit") not in ("low", "high")
                    or not _is_number(alt.get("value")) or not isinstance(alt.get("unit"), str)):
                raise _fail(file, where, "alt", "expected {limit: low|high, value: number, unit: text}")
            if row[alt["limit"]] is None:
                raise _fail(file, where, "alt", f"gives a {alt['limit']} limit the row does not have")
        interval = Interval(
            analyte=row["analyte"], low=None if low is None else float(low),
            high=None if high is None else float(high), unit=row["unit"], group=row["group"],
            source=row["source"], note=note, sex=row["sex"], age_min=age_min, age_max=age_max)
        earlier = by_analyte.setdefault(interval.analyte, [])
        for other in earlier:
            if other.unit != interval.unit:
                raise _fail(file, where, "unit", f"{interval.unit!r} differs from an earlier row of {interval.analyte} ({other.unit!r})")
            same_sex = other.sex == interval.sex or "any" in (other.sex, interval.sex)
            if same_sex and _overlaps(other, interval):
                raise _fail(file, where, "age_min", f"ages overlap an earlier {other.sex} row of {interval.analyte} "
                            f"[{other.age_min:.4g}, {'inf' if other.age_max is None else f'{other.age_max:.4g}'})")
        earlier.append(interval)
    return {k: tuple(v) for k, v in by_analyte.items()}


def _parse_bp(bp: Any, days_per_year: float, file: str) -> _BPTables:
    if not isinstance(bp, Mapping):
        raise _fail(file, "top level", "blood_pressure", "missing or not a mapping")
    parts = {}
    needed = {
        "adult": ("from_age", "elevated_systolic", "stage1_systolic", "stage1_diastolic", "stage2_systolic", "stage2_diastolic"),
        "child_screening": ("from_age", "stage1_systolic", "stage1_diastolic", "stage2_systolic", "stage2_diastolic"),
    }
    for part, fields in needed.items():
        block = bp.get(part)
        if not isinstance(block, Mapping):
            raise _fail(file, "blood_pressure", part, "missing or not a mapping")
        for fld in fields:
            if not _is_number(block.get(fld)):
                raise _fail(file, f"blood_pressure.{part}", fld, "missing or not a number")
        if not isinstance(block.get("source"), str) or not block["source"].strip():
            raise _fail(file, f"blood_pressure.{part}", "source", "missing")
        parts[part] = block
    rows: dict[int, dict[str, tuple[float, float]]] = {}
    for n, row in enumerate(parts["child_screening"].get("rows") or [], start=1):
        where = f"blood_pressure.child_screening row {n}"
        if not isinstance(row, Mapping) or not isinstance(row.get("age"), int) or isinstance(row.get("age"), bool):
            raise _fail(file, where, "age", "expected completed years (an integer)")
        if row["age"] in rows:
            raise _fail(file, where, "age", f"age {row['age']} appears twice")
        pair: dict[str, tuple[float, float]] = {}
        for sex in ("female", "male"):
            v = row.get(sex)
            if not (isinstance(v, list) and len(v) == 2 and all(_is_number(x) for x in v) and v[0] > v[1]):
                raise _fail(file, where, sex, "expected [systolic, diastolic] with systolic above diastolic")
            pair[sex] = (float(v[0]), float(v[1]))
        rows[row["age"]] = pair
    lo, hi = int(parts["child_screening"]["from_age"]), int(parts["adult"]["from_age"])
    if sorted(rows) != list(range(lo, hi)):
        raise _fail(file, "blood_pressure.child_screening", "rows",
                    f"need one row for each age {lo}..{hi - 1} (completed years), got {sorted(rows)}")
    hypo_block = bp.get("hypotension")
    if not isinstance(hypo_block, Mapping) or not isinstance(hypo_block.get("source"), str):
        raise _fail(file, "blood_pressure", "hypotension", "missing, or without a source")
    hypo: list[_HypotensionRow] = []
    expected_start = 0.0
    for n, row in enumerate(hypo_block.get("rows") or [], start=1):
        where = f"blood_pressure.hypotension row {n}"
        if not isinstance(row, Mapping):
            raise KnowledgeError(f"{file}: {where}: not a mapping")
        a0 = _age(row.get("age_min"), days_per_year, file, where, "age_min", allow_none=False)
        a1 = _age(row.get("age_max"), days_per_year, file, where, "age_max", allow_none=True)
        if abs(a0 - expected_start) > 1e-12:
            raise _fail(file, where, "age_min", "rows must follow each other from age 0 without gaps or overlaps")
        fixed, base, per = row.get("systolic_below"), row.get("base"), row.get("per_year")
        if not (_is_number(fixed) and base is None and per is None) and not (fixed is None and _is_number(base) and _is_number(per)):
            raise _fail(file, where, "systolic_below", "give either systolic_below, or base and per_year")
        hypo.append(_HypotensionRow(a0, a1, fixed, base, per))
        if a1 is None:
            break
        expected_start = a1
    if not hypo or hypo[-1].age_max is not None:
        raise _fail(file, "blood_pressure.hypotension", "rows", "the last row must have age_max null")
    keys = ("elevated_systolic", "stage1_systolic", "stage1_diastolic", "stage2_systolic", "stage2_diastolic", "from_age")
    return _BPTables(
        adult=MappingProxyType({k: float(parts["adult"][k]) for k in keys}),
        adult_source=parts["adult"]["source"],
        child=MappingProxyType({k: float(parts["child_screening"][k]) for k in keys if k in parts["child_screening"]}),
        child_source=parts["child_screening"]["source"],
        child_rows=MappingProxyType({k: MappingProxyType(v) for k, v in rows.items()}),
        hypotension=tuple(hypo), hypotension_source=hypo_block["source"])


def parse_reference_knowledge(data: Any, file: str = KNOWLEDGE_FILE) -> ReferenceTables:
    """Check and parse the reference file; a KnowledgeError names file, row and field."""
    if not isinstance(data, Mapping):
        raise KnowledgeError(f"{file}: top level must be a mapping")
    dpy = data.get("days_per_year")
    if not _is_number(dpy) or dpy <= 0:
        raise _fail(file, "top level", "days_per_year", "missing or not a positive number")
    raw_groups = data.get("groups")
    if not isinstance(raw_groups, Mapping) or not raw_groups:
        raise _fail(file, "top level", "groups", "missing or not a mapping")
    groups: dict[str, tuple[float, float | None]] = {}
    for name, span in raw_groups.items():
        if not isinstance(span, list) or len(span) != 2:
            raise _fail(file, f"group '{name}'", "groups", "expected [age_min, age_max]")
        groups[name] = (_age(span[0], dpy, file, f"group '{name}'", "age_min", False),
                        _age(span[1], dpy, file, f"group '{name}'", "age_max", True))
    unknown_age = data.get("age_when_unknown")
    if not _is_number(unknown_age) or unknown_age < 0:
        raise _fail(file, "top level", "age_when_unknown", "missing or not an age in years")
    sections: dict[str, Mapping[str, tuple[Interval, ...]]] = {}
    owner: dict[str, str] = {}
    for section in REFERENCE_SECTIONS + (CRITICAL_SECTION,):
        parsed = _parse_rows(data.get(section), section, groups, dpy, file)
        if section != CRITICAL_SECTION:
            for analyte in parsed:
                if analyte in owner:
                    raise _fail(file, f"section '{section}'", "analyte",
                                f"{analyte} already has rows in section '{owner[analyte]}'")
                owner[analyte] = section
        sections[section] = MappingProxyType(parsed)
    return ReferenceTables(sections=MappingProxyType(sections), groups=MappingProxyType(groups),
                           age_when_unknown=float(unknown_age), bp=_parse_bp(data.get("blood_pressure"), dpy, file))


@cache
def reference_tables() -> ReferenceTables:
    """The parsed `knowledge/reference_intervals.yaml` (cached per process)."""
    return parse_reference_knowledge(require_knowledge_yaml(KNOWLEDGE_FILE))


# --------------------------------------------------------------------------------------------
# Lookup
# --------------------------------------------------------------------------------------------


def _check_age_sex(age_years: float | None, sex: str | None) -> str:
    problems = []
    if age_years is not None and (not _is_number(age_years) or age_years < 0):
        problems.append(Problem("patient.age", f"got {age_years!r}, expected a finite number of years >= 0"))
    if sex is not None and sex not in ("female", "male", "other", "unknown"):
        problems.append(Problem("patient.sex", f"got {sex!r}, expected female, male, other or unknown"))
    if problems:
        raise CaseError(problems)
    return sex or "unknown"


def _contains(row: Interval, age: float) -> bool:
    return row.age_min <= age and (row.age_max is None or age < row.age_max)


def _select(rows: tuple[Interval, ...], age: float, sex: str) -> Interval | None:
    at_age = [r for r in rows if _contains(r, age)]
    if sex in ("female", "male"):
        for r in at_age:
            if r.sex == sex:
                return r
    for r in at_age:
        if r.sex == "any":
            return r
    by_sex = {r.sex: r for r in at_age}
    if sex not in ("female", "male") and "female" in by_sex and "male" in by_sex:
        f, m = by_sex["female"], by_sex["male"]
        low = None if f.low is None or m.low is None else min(f.low, m.low)
        high = None if f.high is None or m.high is None else max(f.high, m.high)
        source = f.source if f.source == m.source else f"{f.source}; {m.source}"
        note = "sex not given: union of the female and male intervals" + (f"; {f.note}" if f.note else "")
        return f._replace(low=low, high=high, source=source, note=note, sex="any",
                       age_min=max(f.age_min, m.age_min), age_max=_min_age_max(f.age_max, m.age_max))
    return None


def _min_age_max(a: float | None, b: float | None) -> float | None:
    if a is None:
        return b
    return a if b is None else min(a, b)


def _lookup(sections: tuple[str, ...], analyte: str, age_years: float | None, sex: str | None) -> Interval | None:
    sex_ = _check_age_sex(age_years, sex)
    tables = reference_tables()
    age = tables.age_when_unknown if age_years is None else float(age_years)
    for section in sections:
        rows = tables.sections[section].get(analyte)
        if rows:
            return _select(rows, age, sex_)
    return None


def reference_interval(analyte: str, age_years: float | None, sex: str | None) -> Interval | None:
    """The reference interval (or age limit) of a measurement key or index id for age and sex.

    Adult rows when age is None; None when the file has no row for that analyte, age and sex."""
    return _lookup(REFERENCE_SECTIONS, analyte, age_years, sex)


def critical_limits(analyte: str, age_years: float | None, sex: str | None) -> Interval | None:
    """Critical limits (values to raise loudly at once) for age and sex, if the file has them."""
    return _lookup((CRITICAL_SECTION,), analyte, age_years, sex)


def urine_calcium_creatinine_limit(age_years: float | None, sex: str | None) -> Interval | None:
    """Spot urine calcium/creatinine limits (mmol/mmol) for age; high = upper limit of normal."""
    return reference_interval("urine_ca_creatinine", age_years, sex)


def urine_calcium_24h_limit(age_years: float | None, sex: str | None) -> Interval | None:
    """24-h urine calcium per kg limit (mg/kg/d) for age; above `high` is hypercalciuria."""
    return reference_interval("urine_ca_24h_per_kg", age_years, sex)


def tmp_gfr_interval(age_years: float | None, sex: str | None) -> Interval | None:
    """TmP/GFR limits (mmol/L) for age and sex; below `low` is renal phosphate wasting."""
    return reference_interval("tmp_gfr", age_years, sex)


def interval_analytes() -> tuple[str, ...]:
    """Every measurement key or index id that has reference rows."""
    tables = reference_tables()
    return tuple(a for s in REFERENCE_SECTIONS for a in tables.sections[s])


def classify(value: float, interval: Interval) -> str:
    """'low' below the lower limit, 'high' above the upper limit, else 'normal' (limits inclusive)."""
    if not _is_number(value):
        raise CaseError([Problem(interval.analyte, f"got {value!r}, expected a finite number in {interval.unit}")])
    if interval.low is not None and value < interval.low:
        return "low"
    if interval.high is not None and value > interval.high:
        return "high"
    return "normal"


# --------------------------------------------------------------------------------------------
# Blood pressure
# --------------------------------------------------------------------------------------------


def _hypotension_limit(bp: _BPTables, age: float) -> float:
    for row in bp.hypotension:
        if row.age_min <= age and (row.age_max is None or age < row.age_max):
            return row.systolic_below if row.systolic_below is not None else row.base + row.per_year * age
    raise KnowledgeError(f"{KNOWLEDGE_FILE}: blood_pressure.hypotension: no row for age {age}")  # parse forbids


def _grade(value: float, cuts: list[tuple[float, str]]) -> str:
    """The highest category whose cut-off `value` reaches (cuts ascending)."""
    grade = "normal"
    for cut, name in cuts:
        if value >= cut:
            grade = name
    return grade


def bp_category(systolic: float, diastolic: float, age_years: float | None, sex: str | None) -> BPCategory:
    """Blood pressure category for age and sex (adult cut-offs when age is None).

    1 to < 13 y uses the guideline's screening values: 'elevated' there means at or above the
    lowest 90th percentile for age and needs the full percentile tables with height."""
    problems = []
    for name, v in (("vitals.systolic_bp", systolic), ("vitals.diastolic_bp", diastolic)):
        if not _is_number(v) or v <= 0:
            problems.append(Problem(name, f"got {v!r}, expected a positive number in mmHg"))
    if not problems and systolic <= diastolic:
        problems.append(Problem("vitals.systolic_bp", f"systolic {systolic:g} mmHg must be above diastolic {diastolic:g} mmHg"))
    if problems:
        raise CaseError(problems)
    sex_ = _check_age_sex(age_years, sex)
    bp = reference_tables().bp
    age_note = "" if age_years is not None else " (age not given: adult cut-offs)"
    age = reference_tables().age_when_unknown if age_years is None else float(age_years)

    low_limit = _hypotension_limit(bp, age)
    if systolic < low_limit:
        return BPCategory("low", f"systolic {systolic:g} < {low_limit:g} mmHg for age{age_note}", bp.hypotension_source)

    a, c = bp.adult, bp.child
    if age >= a["from_age"]:
        s = _grade(systolic, [(a["elevated_systolic"], "elevated"), (a["stage1_systolic"], "stage1"), (a["stage2_systolic"], "stage2")])
        d = _grade(diastolic, [(a["stage1_diastolic"], "stage1"), (a["stage2_diastolic"], "stage2")])
        cat = max(s, d, key=_BP_ORDER.__getitem__)
        text = (f"adult cut-offs{age_note}: normal < {a['elevated_systolic']:g}/{a['stage1_diastolic']:g}; "
                f"elevated {a['elevated_systolic']:g}-{a['stage1_systolic'] - 1:g} with diastolic < {a['stage1_diastolic']:g}; "
                f"stage 1 {a['stage1_systolic']:g}-{a['stage2_systolic'] - 1:g} or {a['stage1_diastolic']:g}-{a['stage2_diastolic'] - 1:g}; "
                f"stage 2 >= {a['stage2_systolic']:g} or >= {a['stage2_diastolic']:g} mmHg")
        return BPCategory(cat, text, bp.adult_source)

    if age >= c["from_age"]:
        pair = bp.child_rows[int(age)]
        if sex_ in ("female", "male"):
            screen, who = pair[sex_], sex_
        else:
            screen = (min(pair["female"][0], pair["male"][0]), min(pair["female"][1], pair["male"][1]))
            who = "sex not given, lower of the female and male values"
        s = _grade(systolic, [(screen[0], "elevated"), (c["stage1_systolic"], "stage1"), (c["stage2_systolic"], "stage2")])
        d = _grade(diastolic, [(screen[1], "elevated"), (c["stage1_diastolic"], "stage1"), (c["stage2_diastolic"], "stage2")])
        cat = max(s, d, key=_BP_ORDER.__getitem__)
        text = (f"age {int(age)} y ({who}): screening value {screen[0]:g}/{screen[1]:g} mmHg (90th percentile at the "
                f"5th height percentile); at or above it confirm with the percentile tables using height. "
                f"{c['stage1_systolic']:g}/{c['stage1_diastolic']:g} is at least stage 1 and "
                f"{c['stage2_systolic']:g}/{c['stage2_diastolic']:g} at least stage 2; between the screening value and "
                f"130/80 this table cannot tell elevated from stage 1 or 2")
        return BPCategory(cat, text, bp.child_source)

    return BPCategory("unclassified",
                      f"no high blood pressure cut-offs are shipped under {c['from_age']:g} year; systolic is not below "
                      f"the hypotension limit {low_limit:g} mmHg; compare with infant percentile charts",
                      bp.hypotension_source)
