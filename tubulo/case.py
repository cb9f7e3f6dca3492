"""Case files: read (YAML or JSON, safely), validate against the case contract, build measurements.

Every problem of a file is collected and reported at once (`CaseError.problems`), each naming the
dotted path, the value and what was expected; an unknown key gets the closest known one.  Notes
(`Case.notes`) tell the user what the tool assumed, e.g. the unit of a bare number.
The contract is docs/case-format.md.
"""

from __future__ import annotations

import difflib
import functools
import json
import math
import re
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping, NamedTuple

from .errors import CaseError, KnowledgeError, Problem, UnitError
from .units import AnalyteSpec, analyte_specs, convert, daily_factor, parse_number_unit

__all__ = [
    "Case",
    "Family",
    "Feature",
    "Measurement",
    "Medication",
    "Patient",
    "MAX_CASE_BYTES",
    "load_case",
    "parse_case",
    "read_case_text",
    "section_keys",
]

MAX_CASE_BYTES = 1_000_000  # a workup is a few kB; anything this large is not a case file
MAX_DEPTH = 12

SEXES = ("female", "male", "other", "unknown")
ONSETS = ("antenatal", "neonatal", "infancy", "childhood", "adolescence", "adulthood")
PATTERNS = ("dominant", "recessive", "x-linked", "unknown")
VOLUMES = ("low", "normal", "high")
SAMPLES = ("spot", "24h", "timed")
AMINO_ACIDS = ("normal", "generalized", "dibasic", "neutral")
DESMOPRESSIN = ("none", "partial", "full")
SCREEN = ("positive", "negative")
PRESENCE = ("present", "absent")

TOP_KEYS = ("case", "patient", "onset", "family", "features", "absent_features", "medications",
            "exposures", "vitals", "serum", "blood_gas", "urine", "tests")
PATIENT_KEYS = ("age", "sex", "weight", "height", "pregnant")
FAMILY_KEYS = ("consanguinity", "affected_relatives", "pattern")
# Categorical keys of the measurement sections: key -> allowed values
CATEGORIES: dict[str, tuple[str, ...]] = {
    "vitals.volume": VOLUMES,
    "urine.sample": SAMPLES,
    "urine.amino_acids": AMINO_ACIDS,
    "tests.desmopressin_response": DESMOPRESSIN,
    "tests.urine_diuretic_screen": SCREEN,
    "tests.monoclonal_protein": PRESENCE,
}
SPECIAL = {"vitals.blood_pressure"}
_BP = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*/\s*(\d+(?:\.\d+)?)\s*(.*?)\s*$")


class Measurement(NamedTuple):
    """One value, in the analyte's internal unit, with the text the user wrote."""

    key: str
    value: float
    unit: str
    given: str
    assumed_unit: bool = False


class Patient(NamedTuple):
    age_years: float | None = None
    sex: str = "unknown"
    weight_kg: float | None = None
    height_cm: float | None = None
    pregnant: bool | None = None


class Family(NamedTuple):
    consanguinity: bool | None = None
    affected_relatives: tuple[str, ...] = ()
    pattern: str | None = None


class Feature(NamedTuple):
    """An HPO term the user gave (as an id or as a phrase)."""

    hpo: str
    label: str
    given: str


class Medication(NamedTuple):
    given: str
    inn: str | None = None
    class_id: str | None = None
    atc: str | None = None


class Case(NamedTuple):
    id: str
    patient: Patient = Patient()
    onset: str | None = None
    family: Family = Family()
    features: tuple[Feature, ...] = ()
    absent_features: tuple[Feature, ...] = ()
    medications: tuple[Medication, ...] = ()
    exposures: tuple[str, ...] = ()
    measurements: Mapping[str, Measurement] = MappingProxyType({})
    categories: Mapping[str, str] = MappingProxyType({})
    notes: tuple[Problem, ...] = ()
    source: str = ""

    def value(self, key: str) -> float | None:
        m = self.measurements.get(key)
        return m.value if m else None

    def values(self) -> dict[str, float]:
        """All measurements as {"section.analyte": value in internal unit}."""
        return {k: m.value for k, m in self.measurements.items()}


# --- reading ---------------------------------------------------------------------------


def _yaml_loader():
    import yaml

    base = getattr(yaml, "CSafeLoader", yaml.SafeLoader)

    class StrictLoader(base):  # type: ignore[misc, valid-type]
        """Safe loader that refuses duplicate keys."""

        def construct_mapping(self, node, deep=False):
            seen: dict[Any, Any] = {}
            for key_node, _ in node.value:
                key = self.construct_object(key_node, deep=deep)
                try:
                    hash(key)
                except TypeError:
                    raise yaml.constructor.ConstructorError(
                        None, None, "a mapping key must be a plain word", key_node.start_mark) from None
                if key in seen:
                    raise yaml.constructor.ConstructorError(
                        None, None, f"duplicate key '{key}' (line {key_node.start_mark.line + 1})",
                        key_node.start_mark)
                seen[key] = True
            return super().construct_mapping(node, deep=deep)

    return StrictLoader


def _check_shared(obj: Any, seen: set[int], depth: int = 0) -> str | None:
    """Anchors/aliases make the same container appear twice; refuse them (YAML bombs)."""
    if isinstance(obj, (dict, list)):
        if id(obj) in seen:
            return "anchors and aliases (&name / *name) are not accepted in a case file"
        if depth > MAX_DEPTH:
            return f"nesting deeper than {MAX_DEPTH} levels is not a case file"
        seen.add(id(obj))
        items = obj.values() if isinstance(obj, dict) else obj
        for item in items:
            msg = _check_shared(item, seen, depth + 1)
            if msg:
                return msg
    return None


def read_case_text(text: str, fmt: str, source: str = "") -> dict:
    """Parse case text ('yaml' or 'json') into a mapping; CaseError with a located message if not."""
    import yaml

    if len(text.encode("utf-8", "ignore")) > MAX_CASE_BYTES:
        raise CaseError([Problem("", f"the file is larger than {MAX_CASE_BYTES // 1000} kB; a case file is a few kB")], source)
    if not text.strip():
        raise CaseError([Problem("", "the file is empty; a case needs at least 'case: <id>'")], source)
    if "\x00" in text:
        raise CaseError([Problem("", "the file is binary, not a YAML or JSON text")], source)
    if fmt == "json":
        def pairs(items):
            out = {}
            for k, v in items:
                if k in out:
                    raise ValueError(f"duplicate key '{k}'")
                out[k] = v
            return out

        try:
            data = json.loads(text, object_pairs_hook=pairs)
        except (json.JSONDecodeError, ValueError, RecursionError) as exc:
            raise CaseError([Problem("", f"not valid JSON: {exc}")], source) from None
    else:
        # the event stream is checked first: aliases are refused before anything is built
        try:
            for event in yaml.parse(text, Loader=getattr(yaml, "CSafeLoader", yaml.SafeLoader)):
                if isinstance(event, yaml.AliasEvent):
                    raise CaseError([Problem("", "anchors and aliases (&name / *name) are not accepted in a case file")], source)
            docs = list(yaml.load_all(text, Loader=_yaml_loader()))
        except CaseError:
            raise
        except yaml.YAMLError as exc:
            where = ""
            mark = getattr(exc, "problem_mark", None)
            if mark is not None:
                where = f" (line {mark.line + 1}, column {mark.column + 1})"
            problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
            if "could not determine a constructor" in str(exc):
                problem = "YAML tags (!something) are not accepted in a case file"
            raise CaseError([Problem("", f"not valid YAML{where}: {problem}")], source) from None
        except RecursionError:
            raise CaseError([Problem("", "nesting too deep to be a case file")], source) from None
        if len(docs) != 1:
            raise CaseError([Problem("", f"expected one YAML document, found {len(docs)}")], source)
        data = docs[0]
    if not isinstance(data, dict):
        raise CaseError([Problem("", f"expected a mapping of sections (case:, patient:, serum: ...), got {type(data).__name__}")], source)
    msg = _check_shared(data, set())
    if msg:
        raise CaseError([Problem("", msg)], source)
    return data


def load_case(path: str | Path) -> Case:
    """Read and validate a case file (.yaml/.yml/.json)."""
    p = Path(path)
    source = str(path)
    try:
        size = p.stat().st_size
    except OSError as exc:
        raise CaseError([Problem("", f"cannot read the file: {exc.strerror or exc}")], source) from None
    if p.is_dir():
        raise CaseError([Problem("", "is a folder, not a case file")], source)
    if size > MAX_CASE_BYTES:
        raise CaseError([Problem("", f"the file is {size // 1000} kB; a case file is a few kB (limit {MAX_CASE_BYTES // 1000} kB)")], source)
    raw = p.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise CaseError([Problem("", "the file is not UTF-8 text (binary or another encoding)")], source) from None
    fmt = "json" if p.suffix.lower() == ".json" else "yaml"
    return parse_case(read_case_text(text, fmt, source), source)


# --- validation ------------------------------------------------------------------------


class _Collector:
    def __init__(self) -> None:
        self.problems: list[Problem] = []
        self.notes: list[Problem] = []

    def error(self, path: str, message: str) -> None:
        self.problems.append(Problem(path, message))

    def note(self, path: str, message: str, level: str = "info") -> None:
        self.notes.append(Problem(path, message, level))


def _unknown_key(col: _Collector, section: str, key: Any, known: list[str]) -> None:
    path = f"{section}.{key}" if section else str(key)
    if not isinstance(key, str):
        col.error(path, f"keys must be words, got {key!r}")
        return
    close = difflib.get_close_matches(key, known, n=1, cutoff=0.6)
    elsewhere = [k for k in _all_measurement_keys() if k.split(".", 1)[1] == key] if section else []
    if elsewhere:
        hint = f"; {key} belongs in {elsewhere[0].split('.')[0]} (did you mean {elsewhere[0]}?)"
    elif close:
        hint = f"; did you mean {section + '.' if section else ''}{close[0]}?"
    else:
        hint = f"; known keys: {', '.join(known)}"
    col.error(path, f"unknown key '{key}'{hint}")


def _all_measurement_keys() -> list[str]:
    keys = [k for k in analyte_specs() if not k.startswith(("patient.",))]
    keys += list(CATEGORIES) + sorted(SPECIAL)
    return keys


@functools.lru_cache(maxsize=None)
def section_keys(section: str) -> Mapping[str, str]:
    """{key as written -> analyte/category key} for a measurement section, aliases included (read-only, cached)."""
    out: dict[str, str] = {}
    for key, spec in analyte_specs().items():
        sec, name = key.split(".", 1)
        if sec != section or key in ("vitals.systolic_bp", "vitals.diastolic_bp"):
            continue
        out[name] = key
        for alias in spec.aliases:
            out[alias] = key
    for key in list(CATEGORIES) + sorted(SPECIAL):
        sec, name = key.split(".", 1)
        if sec == section:
            out[name] = key
    return MappingProxyType(out)


def _fmt(v: Any) -> str:
    return f"'{v}'" if isinstance(v, str) else repr(v)


def _quantity(col: _Collector, path: str, raw: Any, spec: AnalyteSpec,
              day: tuple[str | None, float | None] | None = None) -> Measurement | None:
    """Validate one quantity; returns a Measurement in the internal unit, or records a problem.

    `day` is (urine sample, urine volume in L) for urine values: there an amount per day is read too."""
    if isinstance(raw, bool) or raw is None or isinstance(raw, (list, dict)):
        col.error(path, f"{_fmt(raw)} is not a quantity; expected a number with a unit like '{_example(spec)}'")
        return None
    assumed = False
    if isinstance(raw, (int, float)):
        number, unit = float(raw), None
        given = repr(raw)
    else:
        text = str(raw)
        given = text
        try:
            parsed = parse_number_unit(text)
        except ValueError:
            col.error(path, f"{_fmt(text)} is not a quantity; expected a number with a unit like '{_example(spec)}'")
            return None
        number, unit = parsed.number, parsed.unit
        if parsed.decimal_comma:
            col.note(path, f"read the decimal comma in {_fmt(text)} as a decimal point ({number:g})")
    if not math.isfinite(number):
        col.error(path, f"{_fmt(raw)} is not a finite number")
        return None
    if unit is None:
        assumed = True
        if spec.default_unit not in ("pH", ""):
            col.note(path, f"no unit given for {given}; assumed {spec.default_unit}")
    try:
        value = convert(number, unit, spec)
    except UnitError as exc:
        factor = daily_factor(unit, spec) if day is not None and unit else None
        if factor is None:
            col.error(path, f"{_fmt(raw)}: {exc}")
            return None
        value = _daily_amount(col, path, raw, number * factor, spec, day)
        if value is None:
            return None
    lo, hi = spec.plausible
    if not (lo <= value <= hi):
        col.error(path, _implausible(number, unit or spec.default_unit, value, spec))
        return None
    key = spec.stored_as or spec.key
    out_unit = analyte_specs()[key].unit if spec.stored_as else spec.unit
    if spec.stored_as:
        col.note(path, f"{given} stored as {key} = {value:.3g} {out_unit}")
    return Measurement(key, value, out_unit, given, assumed)


def _daily_amount(col: _Collector, path: str, raw: Any, per_day: float, spec: AnalyteSpec,
                  day: tuple[str | None, float | None]) -> float | None:
    """A 24-h urine amount ('6.2 mmol/24h') as the concentration it makes in that day's volume."""
    sample, volume = day
    if sample != "24h" or volume is None:
        col.error(path, f"{_fmt(raw)} is an amount per day: give urine.sample: 24h and urine.volume (the day's "
                  f"volume) to read it, or write the concentration ({', '.join(spec.units)})")
        return None
    value = per_day / volume
    col.note(path, f"{_fmt(raw)} read as {value:.3g} {spec.unit} in the day's {volume:g} L")
    return value


def _urine_day(data: Mapping[str, Any]) -> tuple[str | None, float | None]:
    """The urine sample kind and volume (L) as written, read ahead so daily amounts can be placed;
    their own problems are reported where they are parsed."""
    sec = data.get("urine")
    if not isinstance(sec, dict):
        return None, None
    keys = {target: raw for key, raw in sec.items() if (target := section_keys("urine").get(key))}
    sample = keys.get("urine.sample")
    sample = sample.strip().lower() if isinstance(sample, str) else None
    volume = None
    if keys.get("urine.volume") is not None:
        m = _quantity(_Collector(), "urine.volume", keys["urine.volume"], analyte_specs()["urine.volume"])
        volume = m.value if m else None
    return sample, volume


def _example(spec: AnalyteSpec) -> str:
    mid = math.sqrt(max(spec.typical[0], 1e-3) * spec.typical[1]) if spec.typical[0] > 0 else spec.typical[1] / 4
    return f"{mid:.3g} {spec.default_unit}".strip()


def _implausible(number: float, unit: str, value: float, spec: AnalyteSpec) -> str:
    """Message for an impossible value, naming the unit the user probably meant."""
    lo, hi = spec.plausible
    guesses = []
    for other in spec.units:
        if other == unit:
            continue
        try:
            v = convert(number, other, spec)
        except (UnitError, KnowledgeError):
            continue
        tlo, thi = spec.typical
        if tlo <= v <= thi:
            centre = math.sqrt(max(tlo, 1e-6) * thi)
            guesses.append((abs(math.log(max(v, 1e-9) / centre)), other, v))
    seen: set[float] = set()
    hints = []
    for _, other, v in sorted(guesses):
        if round(v, 6) in seen:
            continue
        seen.add(round(v, 6))
        hints.append(f"{number:g} {other} (= {v:.3g} {spec.unit})")
    msg = (f"{number:g} {unit} is not a possible {spec.label.lower()} "
           f"(expected {lo:g} to {hi:g} {spec.unit})")
    if hints:
        msg += "; the number fits another unit: did you mean " + " or ".join(hints[:2]) + "?"
    return msg


def _category(col: _Collector, path: str, raw: Any, allowed: tuple[str, ...]) -> str | None:
    if isinstance(raw, bool) and set(allowed) == set(PRESENCE):
        return "present" if raw else "absent"
    text = str(raw).strip().lower() if isinstance(raw, (str, int, float)) and not isinstance(raw, bool) else None
    if text in allowed:
        return text
    close = difflib.get_close_matches(text or "", list(allowed), n=1, cutoff=0.6)
    hint = f"; did you mean {close[0]}?" if close else ""
    col.error(path, f"{_fmt(raw)} is not one of {', '.join(allowed)}{hint}")
    return None


def _bool(col: _Collector, path: str, raw: Any) -> bool | None:
    if isinstance(raw, bool):
        return raw
    if isinstance(raw, str) and raw.strip().lower() in ("yes", "no", "true", "false"):
        return raw.strip().lower() in ("yes", "true")
    col.error(path, f"{_fmt(raw)} is not true or false")
    return None


def _mapping(col: _Collector, path: str, raw: Any) -> dict:
    if raw is None:
        return {}
    if not isinstance(raw, dict):
        col.error(path, f"expected a mapping of keys (e.g. '{path}:\\n  key: value'), got {type(raw).__name__}")
        return {}
    return raw


def _string_list(col: _Collector, path: str, raw: Any) -> list[str]:
    if raw is None:
        return []
    if isinstance(raw, str):
        raw = [raw]
    if not isinstance(raw, list):
        col.error(path, f"expected a list, got {type(raw).__name__}")
        return []
    out = []
    for i, item in enumerate(raw):
        if isinstance(item, str) and item.strip():
            out.append(item.strip())
        else:
            col.error(f"{path}[{i}]", f"{_fmt(item)} is not a text item")
    return out


def _features(col: _Collector, path: str, raw: Any) -> tuple[Feature, ...]:
    from .vocab import in_subset, lookup_hpo_id, lookup_phrase, suggest_phrases

    def outside(where: str, term) -> None:
        if not in_subset(term.id):
            col.note(where, f"{term.id} {term.label} is an HPO term outside those tubulo's knowledge is written in: "
                     "it is kept, and weighs only through the broader terms it falls under", "info")

    out: list[Feature] = []
    for i, item in enumerate(_string_list(col, path, raw)):
        where = f"{path}[{i}]"
        term, hid, label = lookup_hpo_id(item)
        if hid:
            if term is None:
                col.error(where, f"'{hid}' is not an HPO term tubulo knows (bundled HPO subset); "
                          "check the id, or write the finding as a phrase")
                continue
            if term.obsolete:
                col.error(where, f"'{hid}' is an obsolete HPO term ({term.label})")
                continue
            if label and lookup_phrase(label) is not term and label.lower() != term.label.lower():
                col.note(where, f"label '{label}' differs from HPO's '{term.label}' for {hid}; the id is used",
                         "warning")
            outside(where, term)
            out.append(Feature(term.id, term.label, item))
            continue
        term = lookup_phrase(item)
        if term is None:
            hints = suggest_phrases(item)
            hint = f"; did you mean {' or '.join(hints)}?" if hints else "; give an HPO id (HP:0000000) instead"
            col.error(where, f"'{item}' is not a finding tubulo knows{hint}")
            continue
        outside(where, term)
        out.append(Feature(term.id, term.label, item))
    return tuple(out)


def _medications(col: _Collector, raw: Any) -> tuple[Medication, ...]:
    from .vocab import lookup_drug, lookup_exposure, suggest_drugs

    out = []
    for i, name in enumerate(_string_list(col, "medications", raw)):
        m = lookup_drug(name)
        if m is None:
            exposure = lookup_exposure(name)
            hints = suggest_drugs(name)
            if exposure:
                hint = f" (the knowledge holds it as the exposure '{exposure}': list it under exposures when it applies)"
            else:
                hint = f" (did you mean {' or '.join(hints)}?)" if hints else ""
            col.note(f"medications[{i}]", f"'{name}' is not in tubulo's drug knowledge{hint}; "
                     "it is kept but cannot be weighed", "warning")
            out.append(Medication(name))
        else:
            out.append(Medication(name, m.inn, m.class_id, m.atc))
    return tuple(out)


def _exposures(col: _Collector, raw: Any) -> tuple[str, ...]:
    from .vocab import lookup_exposure, suggest_exposures

    out = []
    for i, name in enumerate(_string_list(col, "exposures", raw)):
        eid = lookup_exposure(name)
        if eid is None:
            hints = suggest_exposures(name)
            hint = f"; did you mean {' or '.join(hints)}?" if hints else ""
            col.error(f"exposures[{i}]", f"'{name}' is not an exposure tubulo knows{hint}")
        else:
            out.append(eid)
    return tuple(out)


def _age(col: _Collector, raw: Any) -> float | None:
    spec = analyte_specs()["patient.age"]
    if isinstance(raw, (int, float)) and not isinstance(raw, bool):
        if not (0 <= raw <= spec.plausible[1]):
            col.error("patient.age", f"{raw!r} is not a possible age in years (0 to {spec.plausible[1]:g})")
            return None
        return float(raw)
    m = _quantity(col, "patient.age", raw, spec)
    return m.value if m else None


def parse_case(data: Mapping[str, Any], source: str = "") -> Case:
    """Validate a parsed case mapping; CaseError listing every problem, else a Case."""
    col = _Collector()
    for key in data:
        if key not in TOP_KEYS:
            _unknown_key(col, "", key, list(TOP_KEYS))
    case_id = data.get("case")
    if case_id is None:
        col.error("case", "missing; every case needs an id, e.g. 'case: clinic-2026-014'")
    elif not isinstance(case_id, (str, int)) or isinstance(case_id, bool) or not str(case_id).strip():
        col.error("case", f"{_fmt(case_id)} is not a usable id (a short text)")

    pat = _mapping(col, "patient", data.get("patient"))
    for key in pat:
        if key not in PATIENT_KEYS:
            _unknown_key(col, "patient", key, list(PATIENT_KEYS))
    age = _age(col, pat["age"]) if "age" in pat else None
    sex = "unknown"
    if "sex" in pat:
        sex = _category(col, "patient.sex", pat["sex"], SEXES) or "unknown"
    weight = height = None
    if "weight" in pat:
        m = _quantity(col, "patient.weight", pat["weight"], analyte_specs()["patient.weight"])
        weight = m.value if m else None
    if "height" in pat:
        m = _quantity(col, "patient.height", pat["height"], analyte_specs()["patient.height"])
        height = m.value if m else None
    pregnant = _bool(col, "patient.pregnant", pat["pregnant"]) if "pregnant" in pat else None
    if pregnant and sex == "male":
        col.error("patient.pregnant", "true, but patient.sex is male")
    onset = _category(col, "onset", data["onset"], ONSETS) if data.get("onset") is not None else None

    fam = _mapping(col, "family", data.get("family"))
    for key in fam:
        if key not in FAMILY_KEYS:
            _unknown_key(col, "family", key, list(FAMILY_KEYS))
    family = Family(
        consanguinity=_bool(col, "family.consanguinity", fam["consanguinity"]) if "consanguinity" in fam else None,
        affected_relatives=tuple(_string_list(col, "family.affected_relatives", fam.get("affected_relatives"))),
        pattern=_category(col, "family.pattern", fam["pattern"], PATTERNS) if fam.get("pattern") is not None else None,
    )

    features = _features(col, "features", data.get("features"))
    absent = _features(col, "absent_features", data.get("absent_features"))
    both = {f.hpo for f in features} & {f.hpo for f in absent}
    for hid in sorted(both):
        col.error("absent_features", f"{hid} is listed both as present (features) and absent")
    medications = _medications(col, data.get("medications"))
    exposures = _exposures(col, data.get("exposures"))

    measurements: dict[str, Measurement] = {}
    categories: dict[str, str] = {}
    day = _urine_day(data)
    for section in ("vitals", "serum", "blood_gas", "urine", "tests"):
        sec = _mapping(col, section, data.get(section))
        known = section_keys(section)
        for key, raw in sec.items():
            path = f"{section}.{key}"
            target = known.get(key) if isinstance(key, str) else None
            if target is None:
                _unknown_key(col, section, key, sorted(known))
                continue
            if raw is None:
                continue  # an empty field is simply not measured
            if target in CATEGORIES:
                value = _category(col, path, raw, CATEGORIES[target])
                if value:
                    categories[target] = value
                continue
            if target == "vitals.blood_pressure":
                _blood_pressure(col, path, raw, measurements)
                continue
            spec = analyte_specs()[target]
            if spec.qualitative and isinstance(raw, str) and raw.strip().lower() in spec.qualitative:
                categories[target] = raw.strip().lower()
                continue
            m = _quantity(col, path, raw, spec, day if section == "urine" else None)
            if m:
                if m.key in measurements:
                    col.error(path, f"given twice (also as {measurements[m.key].given!r}); keep one")
                    continue
                measurements[m.key] = m
    if "urine.sample" not in categories and any(k.startswith("urine.") for k in measurements):
        col.note("urine.sample", "not given; the urine values are read as a spot sample")
    if categories.get("urine.sample") == "24h" and "urine.volume" not in measurements:
        col.note("urine.volume", "24-h sample without its volume: daily excretions cannot be computed", "warning")
    _blood_gas_consistency(col, measurements)

    if col.problems:
        raise CaseError(col.problems, source)
    return Case(
        id=str(case_id).strip(),
        patient=Patient(age, sex, weight, height, pregnant),
        onset=onset,
        family=family,
        features=features,
        absent_features=absent,
        medications=medications,
        exposures=exposures,
        measurements=measurements,
        categories=categories,
        notes=tuple(col.notes),
        source=source,
    )


def _blood_pressure(col: _Collector, path: str, raw: Any, out: dict[str, Measurement]) -> None:
    m = _BP.match(str(raw)) if isinstance(raw, str) else None
    if not m:
        col.error(path, f"{_fmt(raw)} is not a blood pressure; expected 'SYSTOLIC/DIASTOLIC mmHg', e.g. '118/76 mmHg'")
        return
    sys_t, dia_t, unit = m.groups()
    sys_m = _quantity(col, path, f"{sys_t} {unit}".strip() if unit else float(sys_t), analyte_specs()["vitals.systolic_bp"])
    dia_m = _quantity(col, path, f"{dia_t} {unit}".strip() if unit else float(dia_t), analyte_specs()["vitals.diastolic_bp"])
    if sys_m and dia_m:
        if dia_m.value >= sys_m.value:
            col.error(path, f"{_fmt(raw)}: the diastolic value is not below the systolic one")
            return
        out[sys_m.key] = Measurement(sys_m.key, sys_m.value, sys_m.unit, str(raw), sys_m.assumed_unit)
        out[dia_m.key] = Measurement(dia_m.key, dia_m.value, dia_m.unit, str(raw), dia_m.assumed_unit)


def _blood_gas_consistency(col: _Collector, ms: Mapping[str, Measurement]) -> None:
    """Henderson-Hasselbalch: warn when pH, pCO2 and bicarbonate do not agree."""
    from .quality import henderson_hasselbalch_check

    ph, pco2, hco3 = (ms.get(k) for k in ("blood_gas.ph", "blood_gas.pco2", "blood_gas.bicarbonate"))
    if ph and pco2 and hco3:
        problem = henderson_hasselbalch_check(ph.value, pco2.value, hco3.value)
        if problem:
            col.note("blood_gas", problem, "warning")
