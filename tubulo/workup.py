"""The measurement layer's result: a case's values with their reference flags and derived indices.

`assess(case)` is a pure function of the case; every later layer (findings, scoring, outputs)
reads the `Workup` it returns.
"""

from __future__ import annotations

import functools
from typing import NamedTuple

from .case import Case
from .indices import DerivedIndex, IndexContext, compute_indices
from .reference import Interval, bp_category, classify, reference_interval
from .units import analyte_specs

__all__ = ["FlaggedMeasurement", "Workup", "assess", "index_context", "measurement_order"]


class FlaggedMeasurement(NamedTuple):
    key: str
    label: str
    given: str
    value: float
    unit: str
    assumed_unit: bool
    interval: Interval | None
    flag: str | None  # low | normal | high | None (no interval for this analyte and age)


class Workup(NamedTuple):
    case: Case
    measurements: tuple[FlaggedMeasurement, ...]
    derived: tuple[DerivedIndex, ...]
    bp_category: str | None = None
    bp_source: str | None = None

    def derived_by_id(self) -> dict[str, DerivedIndex]:
        return {d.id: d for d in self.derived}

    def flag(self, key: str) -> str | None:
        for m in self.measurements:
            if m.key == key:
                return m.flag
        return None


def index_context(case: Case) -> IndexContext:
    p = case.patient
    return IndexContext(p.age_years, p.sex, p.weight_kg, p.height_cm, case.categories.get("urine.sample"), p.pregnant)


def assess(case: Case) -> Workup:
    """Flag every measurement against its age- and sex-specific interval and compute the indices."""
    specs = analyte_specs()
    age, sex = case.patient.age_years, case.patient.sex
    flagged = []
    for key in sorted(case.measurements, key=measurement_order):
        m = case.measurements[key]
        interval = reference_interval(key, age, sex)
        flag = classify(m.value, interval) if interval else None
        flagged.append(FlaggedMeasurement(key, specs[key].label if key in specs else key, m.given, m.value,
                                          m.unit, m.assumed_unit, interval, flag))
    derived = compute_indices(case.values(), index_context(case))
    bp = None
    sbp, dbp = case.value("vitals.systolic_bp"), case.value("vitals.diastolic_bp")
    if sbp is not None and dbp is not None:
        bp = bp_category(sbp, dbp, age, sex)
    return Workup(case, tuple(flagged), derived, bp.category if bp else None, bp.source if bp else None)


_SECTION_ORDER = {"vitals": 0, "serum": 1, "blood_gas": 2, "urine": 3, "tests": 4}


def measurement_order(key: str) -> tuple[int, int]:
    """Sort key that lists measurements section by section, in knowledge order within a section."""
    keys = _analyte_positions()
    return (_SECTION_ORDER.get(key.split(".")[0], 9), keys.get(key, 999))


@functools.lru_cache(maxsize=1)
def _analyte_positions() -> dict[str, int]:
    return {k: i for i, k in enumerate(analyte_specs())}
