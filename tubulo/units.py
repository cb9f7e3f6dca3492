"""Quantities: "NUMBER UNIT" text -> a value in the analyte's internal unit.

The conversion factors are worked out by the units library (pint, with the laboratory units of
`knowledge/units.txt`) once per knowledge version and cached, so a normal run only looks a factor
up.  A spelling the cache does not know is handed to pint on the spot.  Molar mass, valence and the
"per creatinine" convention come from `knowledge/analytes.yaml`; pint supplies the dimensional
arithmetic: for each accepted unit we search the smallest combination of molar mass (g/mol),
valence (eq/mol) and creatinine molar mass that makes the given unit commensurable with the
internal one.

>>> spec = analyte_spec("serum.calcium")
>>> round(convert(9.4, "mg/dL", spec), 3)
2.345
"""

from __future__ import annotations

import difflib
import itertools
import re
from functools import cache
from typing import Any, Mapping, NamedTuple

from .errors import KnowledgeError, UnitError
from .paths import knowledge_dir, read_knowledge_yaml

__all__ = [
    "AnalyteSpec",
    "ParsedQuantity",
    "analyte_spec",
    "analyte_specs",
    "convert",
    "normalise_unit",
    "parse_number_unit",
    "unit_table",
]

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_CREATININE_MOLAR_MASS_KEY = "urine.creatinine"


class AnalyteSpec(NamedTuple):
    """What `knowledge/analytes.yaml` says about one measurable quantity."""

    key: str
    label: str
    unit: str
    default_unit: str
    units: tuple[str, ...]
    plausible: tuple[float, float]
    typical: tuple[float, float]
    molar_mass: float | None = None
    formula: str | None = None
    valence: int | None = None
    per_creatinine: bool = False
    qualitative: tuple[str, ...] = ()
    aliases: tuple[str, ...] = ()
    factors: Mapping[str, float] | None = None
    stored_as: str | None = None
    note: str | None = None


class ParsedQuantity(NamedTuple):
    """A number and the unit it was written in (None when the text had no unit)."""

    number: float
    unit: str | None
    decimal_comma: bool = False


@cache
def analyte_specs() -> dict[str, AnalyteSpec]:
    """All analytes of the case contract, keyed "section.analyte"."""
    raw = read_knowledge_yaml("analytes.yaml")
    out: dict[str, AnalyteSpec] = {}
    for key, entry in (raw.get("analytes") or {}).items():
        try:
            out[key] = AnalyteSpec(
                key=key,
                label=entry["label"],
                unit=entry["unit"],
                default_unit=entry["default_unit"],
                units=tuple(entry["units"]),
                plausible=(float(entry["plausible"][0]), float(entry["plausible"][1])),
                typical=(float(entry["typical"][0]), float(entry["typical"][1])),
                molar_mass=entry.get("molar_mass"),
                formula=entry.get("formula"),
                valence=entry.get("valence"),
                per_creatinine=bool(entry.get("per_creatinine", False)),
                qualitative=tuple(entry.get("qualitative", ())),
                aliases=tuple(entry.get("aliases", ())),
                factors=entry.get("factors"),
                stored_as=entry.get("stored_as"),
                note=entry.get("note"),
            )
        except (KeyError, TypeError, IndexError, ValueError) as exc:
            raise KnowledgeError(f"analytes.yaml: entry {key}: missing or malformed field ({exc})") from exc
    return out


def analyte_spec(key: str) -> AnalyteSpec:
    """One analyte's spec; KnowledgeError when the key is not in analytes.yaml."""
    try:
        return analyte_specs()[key]
    except KeyError:
        raise KnowledgeError(f"analytes.yaml: no entry {key}") from None


@cache
def _rewrites() -> tuple[tuple[str, str], ...]:
    raw = read_knowledge_yaml("analytes.yaml")
    return tuple((str(a), str(b)) for a, b in (raw.get("unit_rewrites") or {}).items())


def normalise_unit(unit: str) -> str:
    """Collapse white space and apply the spelling rewrites of analytes.yaml."""
    text = " ".join(unit.split())
    for old, new in _rewrites():
        text = text.replace(old, new)
    return text.strip()


def parse_number_unit(text: str) -> ParsedQuantity:
    """Split "2.7 mmol/L" into 2.7 and "mmol/L"; ValueError when there is no leading number."""
    match = _NUMBER.match(text)
    if not match:
        raise ValueError(text)
    number_text, unit = match.groups()
    comma = "," in number_text
    number = float(number_text.replace(",", "."))
    return ParsedQuantity(number, unit or None, comma)


# --- the cached factor table -------------------------------------------------------------


def unit_table() -> dict[str, dict[str, float]]:
    """{analyte key: {normalised unit spelling: factor to the internal unit}} (cached on disk)."""
    from .cache import cached, knowledge_hash

    return cached("units", _build_unit_table, key=knowledge_hash(("analytes.yaml", "units.txt")))


@cache
def _registry():
    import pint

    ureg = pint.UnitRegistry()
    for line in (knowledge_dir() / "units.txt").read_text(encoding="utf-8").splitlines():
        line = line.split("#", 1)[0].strip()
        if line:
            ureg.define(line)
    return ureg


def _pint_factor(unit: str, spec: AnalyteSpec) -> float:
    """Factor from `unit` to the analyte's internal unit, found with pint; UnitError if none."""
    import pint

    ureg = _registry()
    target_text = normalise_unit(spec.unit)
    try:
        source = ureg.Quantity(1.0, _pint_spelling(normalise_unit(unit)))
        target = ureg.Quantity(1.0, _pint_spelling(target_text))
    except (pint.errors.PintError, AttributeError, TypeError, ValueError, AssertionError, SyntaxError) as exc:
        raise UnitError(f"unit '{unit}' is not a unit tubulo can read") from exc
    bridges: list[tuple[Any, ...]] = [(None,)]
    g_per_mol = ureg.Quantity(spec.molar_mass, "g/mol") if spec.molar_mass else None
    eq_per_mol = ureg.Quantity(spec.valence, "eq/mol") if spec.valence else None
    cr = analyte_specs().get(_CREATININE_MOLAR_MASS_KEY)
    cr_mass = ureg.Quantity(cr.molar_mass, "g/mol") if (spec.per_creatinine and cr and cr.molar_mass) else None
    options = []
    for bridge in (g_per_mol, eq_per_mol, cr_mass):
        options.append((0,) if bridge is None else (0, 1, -1))
    for exps in sorted(itertools.product(*options), key=lambda e: sum(abs(x) for x in e)):
        q = source
        for bridge, power in zip((g_per_mol, eq_per_mol, cr_mass), exps):
            if power and bridge is not None:
                q = q * bridge**power
        try:
            return float(q.to(target.units).magnitude)
        except pint.errors.DimensionalityError:
            continue
    if spec.factors and unit in spec.factors:
        return float(spec.factors[unit])
    raise UnitError(
        f"unit '{unit}' cannot be converted to {spec.unit} for {spec.key}; accepted: {', '.join(spec.units)}"
    )


def _pint_spelling(unit: str) -> str:
    if unit in ("", "pH"):
        return "dimensionless"
    # "ng/mL/h" -> pint reads left to right, which is what we mean; "mo"/"wk" are clinic words
    return {"mo": "month", "wk": "week", "months": "month", "y": "year", "yr": "year"}.get(unit, unit)


def _build_unit_table() -> dict[str, dict[str, float]]:
    table: dict[str, dict[str, float]] = {}
    for key, spec in analyte_specs().items():
        row: dict[str, float] = {}
        for unit in spec.units:
            if spec.factors and unit in spec.factors:
                row[normalise_unit(unit)] = float(spec.factors[unit])
                continue
            try:
                row[normalise_unit(unit)] = _pint_factor(unit, spec)
            except UnitError as exc:
                raise KnowledgeError(f"analytes.yaml: entry {key}: field units: {exc}") from exc
        table[key] = row
    return table


def daily_factor(unit: str, spec: AnalyteSpec) -> float | None:
    """Factor from an amount per day ('mg/24h', 'mmol/d') to the analyte's internal concentration unit
    times litres per day (so dividing by the day's urine volume in litres gives the concentration);
    None when the analyte is no concentration or `unit` is no amount per day of it."""
    if not spec.unit.endswith("/L"):
        return None
    try:
        return _pint_factor(normalise_unit(unit), spec._replace(unit=f"{spec.unit[:-2]}/d"))
    except UnitError:
        return None


def convert(number: float, unit: str | None, spec: AnalyteSpec) -> float:
    """`number` in `unit` (None: the default unit) expressed in the analyte's internal unit."""
    unit = spec.default_unit if unit is None else unit
    norm = normalise_unit(unit)
    row = unit_table().get(spec.key, {})
    if norm in row:
        return number * row[norm]
    try:
        factor = _pint_factor(norm, spec)
    except UnitError as exc:
        close = difflib.get_close_matches(unit, spec.units, n=2, cutoff=0.5)
        hint = f"; did you mean {' or '.join(close)}?" if close else f"; accepted: {', '.join(spec.units)}"
        raise UnitError(f"{exc}{hint}") from None
    return number * factor
