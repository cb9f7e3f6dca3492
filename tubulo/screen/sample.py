"""Sample cases for comparing the matrix path with the single-case path (tests and the run's self-check).

The cases are invented: values drawn on and around the limits the knowledge uses (reference
intervals for every age band and sex, critical limits, the thresholds of findings.yaml, the blood
pressure cut-offs) and at random within each analyte's typical range, some written in another
accepted unit.  They check that two code paths agree; they are never a clinical check value.
"""

from __future__ import annotations

import math
import random
import re
from typing import Any

import pyarrow as pa

from ..case import CATEGORIES
from .knowledge import SEX_CODES, ScreenKnowledge

__all__ = ["sample_cases", "to_long", "to_wide"]

_SECTIONS = ("vitals", "serum", "blood_gas", "urine", "tests")
_NUMBER_UNIT = re.compile(r"^[-+]?[0-9.]+(?:[eE][-+]?[0-9]+)? \S")


def _limits(sk: ScreenKnowledge, key: str) -> list[float]:
    out: set[float] = set()
    for table in (sk.intervals.get(key), sk.criticals.get(key)):
        if table is None:
            continue
        for arr in (table.low, table.high):
            out.update(float(v) for v in arr.ravel() if not math.isnan(v))
    for methods in sk.methods.values():
        for m in methods:
            if m.kind == "measure" and m.name == key:
                for cond in m.conditions:
                    out.update(limit for _, limit in cond.bounds)
    return sorted(out)


def _quantity(rng: random.Random, sk: ScreenKnowledge, key: str) -> tuple[float, str]:
    """(number, unit) of a value of `key`: on a limit, next to it, or within the typical range."""
    spec = sk.specs[key]
    lo, hi = spec.plausible
    limits = [v for v in _limits(sk, key) if lo <= v <= hi]
    r = rng.random()
    if limits and r < 0.45:
        v = rng.choice(limits)
        if r < 0.15:
            v = v * (1 + rng.choice((-1, 1)) * 1e-3)
    else:
        tlo, thi = spec.typical
        tlo = max(tlo, lo, 1e-3)
        v = math.exp(rng.uniform(math.log(tlo), math.log(max(thi, tlo * 1.01))))
        v = round(v, rng.choice((1, 2, 3)))
    v = min(max(v, lo), hi)
    unit = spec.unit
    others = [u for u in spec.units if u != spec.unit]
    if others and rng.random() < 0.15:
        u = rng.choice(others)
        try:
            factor = sk.factor(key, u)
        except Exception:  # a spelling pint cannot read for this analyte: keep the internal unit
            factor = None
        if factor:
            return round(v / factor, 6), u
    return v, unit


def sample_cases(sk: ScreenKnowledge, n: int, seed: int = 0) -> list[dict[str, Any]]:
    """`n` invented case mappings (the case-file shape parse_case reads), deterministic for a seed."""
    rng = random.Random(seed)
    keys = {s: sorted({k for k in sk.section_keys[s].values()
                       if k not in CATEGORIES and k != "vitals.blood_pressure"}) for s in _SECTIONS}
    edges = [float(b) for b in sk.breaks]
    bp = sk.bp
    sbp_cuts = sorted({bp.adult[k] for k in ("elevated_systolic", "stage1_systolic", "stage2_systolic")}
                      | {row.systolic_below for row in bp.hypotension if row.systolic_below is not None}
                      | {p[s][0] for p in bp.child_rows.values() for s in ("female", "male")})
    out = []
    for i in range(n):
        case: dict[str, Any] = {"case": f"sample-{seed}-{i:05d}"}
        patient: dict[str, Any] = {}
        r = rng.random()
        if r < 0.35:
            age = rng.choice(edges)
        elif r < 0.45:
            age = max(0.0, rng.choice(edges) - 1e-6)
        elif r < 0.92:
            age = round(rng.uniform(0, 95), rng.choice((0, 1, 2)))
        else:
            age = None
        if age is not None:
            patient["age"] = age
        if rng.random() < 0.9:
            patient["sex"] = rng.choice(SEX_CODES)
        if rng.random() < 0.4:
            patient["weight"] = round(rng.uniform(3, 110), 1)
        if rng.random() < 0.3:
            patient["height"] = round(rng.uniform(50, 195), 1)
        if patient:
            case["patient"] = patient
        density = rng.uniform(0.2, 0.8)
        bad = rng.random() < 0.04  # a few cases carry an impossible value: the error path
        stored: set[str] = set()
        for section in _SECTIONS:
            sec: dict[str, Any] = {}
            for key in keys[section]:
                target = sk.specs[key].stored_as or key
                if rng.random() < density and target not in stored:
                    stored.add(target)
                    name = key.split(".", 1)[1]
                    num, unit = _quantity(rng, sk, key)
                    if bad:
                        num, unit, bad = sk.specs[key].plausible[1] * 10 + 1, sk.specs[key].unit, False
                    sec[name] = f"{num!r} {unit}" if unit else num
            for key, allowed in CATEGORIES.items():
                if key.startswith(section + ".") and rng.random() < density * 0.6:
                    sec[key.split(".", 1)[1]] = rng.choice(allowed)
            if section == "urine" and "sample" in sec and rng.random() < 0.5:
                sec["sample"] = "24h"
            if section == "urine":
                for key in ("urine.glucose", "urine.cystine"):
                    if key in sk.category_values and rng.random() < 0.1:
                        sec[key.split(".", 1)[1]] = rng.choice(sk.category_values[key])
            if section == "vitals" and rng.random() < density:
                s = rng.choice(sbp_cuts) + rng.choice((-1, 0, 0, 1))
                d = min(s - 5, rng.choice((50, 60, 79, 80, 89, 90, 95)))
                sec["blood_pressure"] = f"{s:g}/{d:g} mmHg"
            if sec:
                case[section] = sec
        out.append(case)
    return out


def _cells(case: dict[str, Any]):
    """(section, name, value text, unit) of every cell of a mapping (numbers split from their unit)."""
    for fld, v in (case.get("patient") or {}).items():
        yield "patient", fld, (repr(float(v)) if isinstance(v, (int, float)) and not isinstance(v, bool) else str(v)), None
    for section in _SECTIONS:
        for name, v in (case.get(section) or {}).items():
            if isinstance(v, str) and _NUMBER_UNIT.match(v):
                num, unit = v.split(" ", 1)
                yield section, name, num, unit
            elif isinstance(v, str) and v.endswith(" mmHg"):
                yield section, name, v[: -len(" mmHg")], "mmHg"
            else:
                yield section, name, (repr(v) if isinstance(v, float) else str(v)), None


def to_long(cases: list[dict[str, Any]]) -> pa.Table:
    """The long layout of the mappings: case, section, analyte, value, unit (patient fields as rows)."""
    cols: dict[str, list] = {"case": [], "section": [], "analyte": [], "value": [], "unit": []}
    for case in cases:
        for section, name, value, unit in _cells(case):
            for col, v in zip(cols, (case["case"], section, name, value, unit)):
                cols[col].append(v)
    return pa.table({k: pa.array(v, pa.string()) for k, v in cols.items()})


def to_wide(cases: list[dict[str, Any]]) -> pa.Table:
    """The wide layout: case, age, sex, weight, height, and one column per (key, unit) written."""
    rows: list[dict[str, str]] = []
    names: dict[str, None] = {"case": None}
    for case in cases:
        row = {"case": case["case"]}
        for section, name, value, unit in _cells(case):
            col = name if section == "patient" else f"{section}.{name}" + (f" [{unit}]" if unit else "")
            row[col] = value
            names.setdefault(col, None)
        rows.append(row)
    return pa.table({c: pa.array([r.get(c) for r in rows], pa.string()) for c in names})
