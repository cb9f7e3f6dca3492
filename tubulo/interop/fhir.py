"""HL7 FHIR R4 Bundle -> a tubulo case mapping (`tubulo import fhir`).

Patient gives age (birthDate to the newest observation, or to today) and sex (gender);
Observations with a LOINC code of `knowledge/loinc.yaml` give measurements (UCUM units read
through tubulo's unit layer); MedicationStatement / MedicationRequest give medicines by INN.
A code the map does not hold is listed as skipped, never guessed; when one analyte has several
values the newest is kept and the summary says so.  Names, addresses and identifiers of the
patient are never copied.  The bundle is checked against the FHIR R4B models of `fhir.resources`
(R4B keeps the R4 Patient, Observation and Medication* resources) by `validate_bundle`, which is
the only function here that imports a heavy package.
"""

from __future__ import annotations

import json
import math
import re
from datetime import date, datetime, timedelta, timezone
from pathlib import Path
from typing import Any, Mapping, NamedTuple

from ..errors import TubuloError, UnitError
from ..units import analyte_specs, convert, parse_number_unit
from .loinc import loinc_table, ucum_to_case_unit

__all__ = [
    "FhirImport",
    "ImportedMedication",
    "ImportedValue",
    "Skipped",
    "MAX_BUNDLE_BYTES",
    "bundle_to_case",
    "case_yaml",
    "read_bundle",
    "validate_bundle",
]

MAX_BUNDLE_BYTES = 50_000_000  # a long record holds thousands of observations; beyond this it is not one patient
LOINC_SYSTEM = "http://loinc.org"
UCUM_SYSTEM = "http://unitsofmeasure.org"
ATC_SYSTEM = "http://www.whocc.no/atc"
SKIP_OBSERVATION_STATUS = ("entered-in-error", "cancelled", "registered")
SKIP_MEDICATION_STATUS = ("entered-in-error", "cancelled", "stopped", "not-taken", "draft")
SEXES = ("female", "male", "other", "unknown")
SECTION_ORDER = ("patient", "medications", "vitals", "serum", "blood_gas", "urine")
_DATE = re.compile(r"^(\d{4})(?:-(\d{2})(?:-(\d{2}))?)?$")
_SPECIMEN_WORDS = (("urine", "urine"), ("serum", "serum_plasma"), ("plasma", "serum_plasma"),
                   ("blood", "blood"), ("arterial", "blood"), ("venous", "blood"), ("capillary", "blood"))


class ImportedValue(NamedTuple):
    """One value written into the case, with where it came from and what was set aside."""

    key: str  # case key as written, e.g. serum.potassium (serum.bun for urea nitrogen)
    text: str  # the quantity or category written
    resource: str  # "Observation/obs-1"
    code: str  # LOINC code
    effective: str | None
    others: tuple[str, ...] = ()  # older values of the same analyte, not kept


class ImportedMedication(NamedTuple):
    name: str  # the name written into the case (an INN when tubulo knows the drug)
    resource: str
    how: str  # plain words: which code or text gave the name


class Skipped(NamedTuple):
    resource: str
    reason: str


class FhirImport(NamedTuple):
    """A bundle turned into a case mapping (not yet validated by parse_case)."""

    case: Mapping[str, Any]
    values: tuple[ImportedValue, ...]
    medications: tuple[ImportedMedication, ...]
    skipped: tuple[Skipped, ...]
    notes: tuple[str, ...]

    def origin(self, case_path: str) -> str | None:
        """The resource that supplied the value at a case path (for error messages)."""
        for v in self.values:
            if v.key == case_path or (case_path == "vitals.blood_pressure" and v.key.startswith("vitals.")):
                return v.resource
        return None


# --- reading and checking ----------------------------------------------------------------


def read_bundle(path: str | Path) -> dict:
    """Read a FHIR JSON file; TubuloError naming the file and what is wrong."""
    p = Path(path)
    try:
        size = p.stat().st_size
    except OSError as exc:
        raise TubuloError(f"{path}: cannot read the file: {exc.strerror or exc}") from None
    if p.is_dir():
        raise TubuloError(f"{path}: is a folder, not a FHIR bundle")
    if size > MAX_BUNDLE_BYTES:
        raise TubuloError(f"{path}: the file is {size // 1_000_000} MB; a one-patient bundle is smaller "
                          f"(limit {MAX_BUNDLE_BYTES // 1_000_000} MB)")
    try:
        text = p.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError:
        raise TubuloError(f"{path}: not UTF-8 text; expected a FHIR JSON bundle") from None
    try:
        data = json.loads(text)
    except (json.JSONDecodeError, RecursionError) as exc:
        raise TubuloError(f"{path}: not valid JSON ({exc}); expected a FHIR JSON bundle "
                          "(FHIR XML is not read)") from None
    if not isinstance(data, dict):
        raise TubuloError(f"{path}: expected a JSON object with resourceType 'Bundle', got {type(data).__name__}")
    kind = data.get("resourceType")
    if kind != "Bundle":
        raise TubuloError(f"{path}: resourceType is {kind!r}; expected 'Bundle' (a FHIR R4 Bundle of the "
                          "patient's Patient, Observation and Medication resources)")
    return data


def validate_bundle(data: Mapping[str, Any], source: str = "") -> None:
    """Check the bundle against the FHIR R4B models; TubuloError listing the first problems."""
    from pydantic import ValidationError

    from fhir.resources.R4B import get_fhir_model_class
    from fhir.resources.R4B.bundle import Bundle

    head = f"{source}: " if source else ""
    entries = data.get("entry")
    for i, e in enumerate(entries if isinstance(entries, list) else []):
        res = e.get("resource") if isinstance(e, dict) else None
        if isinstance(res, dict):
            kind = res.get("resourceType")
            try:
                get_fhir_model_class(str(kind))
            except (ValueError, KeyError):
                raise TubuloError(f"{head}entry[{i}].resource.resourceType: {kind!r} is not a FHIR R4 resource type"
                                  ) from None
    try:
        Bundle.model_validate(dict(data))
    except ValidationError as exc:
        errors = exc.errors()
        lines = []
        for err in errors[:8]:
            loc = list(err.get("loc") or ())
            where = _loc_text(loc)
            what = _entry_label(data, loc)
            got = err.get("input")
            got_text = f" (found {got!r})" if isinstance(got, (str, int, float, bool)) else ""
            msg = str(err.get("msg", "")).removeprefix("Value error, ")
            lines.append(f"  - {where}{what}: {msg}{got_text}")
        more = f"\n  ... and {len(errors) - 8} more" if len(errors) > 8 else ""
        raise TubuloError(f"{head}not a valid FHIR R4 bundle ({len(errors)} problem"
                          f"{'s' if len(errors) != 1 else ''}):\n" + "\n".join(lines) + more) from None
    except (TypeError, ValueError, KeyError) as exc:
        raise TubuloError(f"{head}not a valid FHIR R4 bundle: {exc}") from None


def _loc_text(loc: list) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


def _entry_label(data: Mapping[str, Any], loc: list) -> str:
    if len(loc) >= 2 and loc[0] == "entry" and isinstance(loc[1], int):
        try:
            res = data["entry"][loc[1]]["resource"]
            return f" ({res.get('resourceType')}/{res.get('id', '?')})"
        except (KeyError, IndexError, TypeError, AttributeError):
            return ""
    return ""


# --- dates -------------------------------------------------------------------------------


def _parse_date(text: Any) -> tuple[date, bool] | None:
    """FHIR date 'YYYY', 'YYYY-MM' or 'YYYY-MM-DD' -> (date, partial); partial dates take the middle."""
    if not isinstance(text, str):
        return None
    m = _DATE.match(text.strip())
    if not m:
        return None
    y, mo, d = m.groups()
    try:
        if d:
            return date(int(y), int(mo), int(d)), False
        if mo:
            return date(int(y), int(mo), 15), True
        return date(int(y), 7, 2), True
    except ValueError:
        return None


def _parse_datetime(text: Any) -> datetime | None:
    """FHIR dateTime/instant -> an aware datetime (a date alone is read as its midnight UTC)."""
    if not isinstance(text, str) or not text.strip():
        return None
    t = text.strip()
    d = _parse_date(t)
    if d is not None:
        return datetime(d[0].year, d[0].month, d[0].day, tzinfo=timezone.utc)
    try:
        dt = datetime.fromisoformat(t.replace("Z", "+00:00"))
    except ValueError:
        return None
    return dt if dt.tzinfo else dt.replace(tzinfo=timezone.utc)


def _effective(res: Mapping[str, Any]) -> tuple[datetime | None, str | None]:
    for key in ("effectiveDateTime", "effectiveInstant"):
        if res.get(key):
            return _parse_datetime(res[key]), str(res[key])
    period = res.get("effectivePeriod")
    if isinstance(period, dict):
        for key in ("end", "start"):
            if period.get(key):
                return _parse_datetime(period[key]), str(period[key])
    if res.get("issued"):
        return _parse_datetime(res["issued"]), str(res["issued"])
    return None, None


def _age_text(birth: date, ref: date) -> str:
    """Age written for the case: exact days under 2 years, else years floored to one decimal."""
    days = (ref - birth).days
    if days < 730:
        return f"{days} d"
    years = math.floor(days / 365.25 * 10) / 10
    return f"{years:.1f} y"


# --- the walk ----------------------------------------------------------------------------


def _ref(res: Mapping[str, Any], index: int) -> str:
    rid = res.get("id")
    kind = res.get("resourceType", "resource")
    return f"{kind}/{rid}" if rid else f"entry[{index}] ({kind})"


def _number_text(x: float) -> str:
    text = repr(float(x))
    return text[:-2] if text.endswith(".0") else text


def _codings(concept: Any) -> list[dict]:
    if not isinstance(concept, dict):
        return []
    return [c for c in concept.get("coding") or [] if isinstance(c, dict)]


def _concept_text(concept: Any) -> str:
    if not isinstance(concept, dict):
        return ""
    if concept.get("text"):
        return str(concept["text"])
    for c in _codings(concept):
        if c.get("display"):
            return str(c["display"])
    return ""


class _Candidate(NamedTuple):
    key: str
    group: str  # the stored key (serum.bun and serum.urea are one analyte)
    text: str
    number: float | None
    unit: str | None
    resource: str
    code: str
    when: datetime | None
    when_text: str | None
    order: int


def _specimen_kind(res: Mapping[str, Any], resources: Mapping[str, Mapping[str, Any]]) -> str | None:
    spec = res.get("specimen")
    if not isinstance(spec, dict):
        return None
    target = resources.get(str(spec.get("reference", "")))
    words = " ".join(filter(None, [str(spec.get("display", "")),
                                   _concept_text(target.get("type")) if isinstance(target, dict) else ""])).lower()
    for word, kind in _SPECIMEN_WORDS:
        if word in words:
            return kind
    return None


def _read_value(obs: Mapping[str, Any], key: str, qualitative: bool) -> tuple[str, float | None, str | None] | str:
    """(text, number, unit) of an Observation's value, or the reason it cannot be read."""
    spec = analyte_specs()[key]
    if obs.get("dataAbsentReason"):
        return f"no value (dataAbsentReason: {_concept_text(obs['dataAbsentReason']) or 'given'})"
    q = obs.get("valueQuantity")
    if isinstance(q, dict):
        if q.get("comparator"):
            return f"the value is a bound ({q['comparator']}{q.get('value')}), not a number; not imported"
        if q.get("value") is None:
            return "valueQuantity has no value"
        try:
            number = float(q["value"])
        except (TypeError, ValueError):
            return f"value {q['value']!r} is not a number"
        if not math.isfinite(number):
            return f"value {q['value']!r} is not a finite number"
        code = q.get("code") if q.get("system") == UCUM_SYSTEM else None
        raw_unit = code or q.get("unit") or q.get("code")
        unit = ucum_to_case_unit(str(raw_unit)) if raw_unit else ""
        dimensionless = spec.unit in ("pH", "")
        if not unit or unit == "1":
            if not dimensionless:
                return f"no unit given with {number:g}; units are never guessed"
            unit = ""
        if dimensionless and unit == "pH":
            unit = ""
        try:
            convert(number, unit or None, spec)
        except UnitError as exc:
            return f"unit {raw_unit!r} cannot be read for {key}: {exc}"
        text = f"{_number_text(number)} {unit}".strip()
        return text, number, unit or None
    words = None
    if isinstance(obs.get("valueCodeableConcept"), dict):
        words = _concept_text(obs["valueCodeableConcept"])
    elif isinstance(obs.get("valueString"), str):
        words = obs["valueString"]
    if words is not None:
        folded = words.strip().lower()
        if spec.qualitative and folded in spec.qualitative:
            return folded, None, None
        if not spec.qualitative and not qualitative:
            try:
                parsed = parse_number_unit(words)
            except ValueError:
                parsed = None
            if parsed is not None and parsed.unit:
                try:
                    convert(parsed.number, ucum_to_case_unit(parsed.unit), spec)
                except UnitError:
                    return f"value text {words!r} has a unit that cannot be read for {key}"
                return f"{_number_text(parsed.number)} {ucum_to_case_unit(parsed.unit)}", parsed.number, parsed.unit
        expected = ", ".join(spec.qualitative) if spec.qualitative else "a quantity with a unit"
        return f"value {words!r} is not one tubulo reads for {key} (expected {expected})"
    for other in ("valueBoolean", "valueInteger", "valueRange", "valueRatio", "valueSampledData",
                  "valueTime", "valueDateTime", "valuePeriod"):
        if other in obs:
            return f"{other} is not read for {key} (expected valueQuantity)"
    return "no value"


def _observation_candidates(res: Mapping[str, Any], ref: str, order: int, resources: Mapping[str, Mapping[str, Any]],
                            skipped: list[Skipped]) -> list[_Candidate]:
    table = loinc_table()
    codings = [c for c in _codings(res.get("code")) if c.get("system") == LOINC_SYSTEM and c.get("code")]
    if not codings:
        text = _concept_text(res.get("code"))
        skipped.append(Skipped(ref, f"no LOINC code{f' ({text!r})' if text else ''}; not guessed"))
        return []
    entry = next((table.codes[str(c["code"])] for c in codings if str(c["code"]) in table.codes), None)
    if entry is None:
        c = codings[0]
        label = f" ({c['display']})" if c.get("display") else ""
        skipped.append(Skipped(ref, f"LOINC {c['code']}{label} is not in knowledge/loinc.yaml; not guessed"))
        return []
    when, when_text = _effective(res)
    if entry.key is None:  # a panel: read its components
        out: list[_Candidate] = []
        comps = [c for c in res.get("component") or [] if isinstance(c, dict)]
        if not comps:
            skipped.append(Skipped(ref, f"LOINC {entry.code} ({entry.long_name}) is a panel without components"))
        for j, comp in enumerate(comps):
            sub = dict(comp)
            sub["resourceType"] = "Observation"
            for k in ("effectiveDateTime", "effectiveInstant", "effectivePeriod", "issued", "specimen", "status"):
                if k in res:
                    sub[k] = res[k]
            out += _observation_candidates(sub, f"{ref} component[{j}]", order, resources, skipped)
        return out
    specimen = _specimen_kind(res, resources)
    if specimen is not None and entry.specimen != "none":
        coded_urine = entry.specimen == "urine"
        if (specimen == "urine") != coded_urine:
            skipped.append(Skipped(ref, f"LOINC {entry.code} ({entry.long_name}) does not fit its specimen "
                                        f"({specimen.replace('_', '/')}); not imported"))
            return []
    value = _read_value(res, entry.key, entry.qualitative)
    if isinstance(value, str):
        skipped.append(Skipped(ref, f"LOINC {entry.code} ({entry.long_name}): {value}"))
        return []
    text, number, unit = value
    spec = analyte_specs()[entry.key]
    return [_Candidate(entry.key, spec.stored_as or entry.key, text, number, unit, ref, entry.code, when, when_text,
                       order)]


def _pick_newest(cands: list[_Candidate], notes: list[str]) -> tuple[_Candidate, tuple[str, ...]]:
    epoch = datetime.min.replace(tzinfo=timezone.utc)
    ranked = sorted(cands, key=lambda c: (c.when is not None, c.when or epoch, c.order))
    kept = ranked[-1]
    others = tuple(f"{c.text} ({c.when_text or 'undated'}, {c.resource})" for c in reversed(ranked[:-1]))
    if len(ranked) > 1:
        same = [c for c in ranked[:-1] if c.when is not None and c.when == kept.when and c.text != kept.text]
        if same:
            notes.append(f"{kept.group}: {len(same) + 1} different values at the same time {kept.when_text}; "
                         f"kept {kept.text} ({kept.resource}, listed last); check which is right")
        if any(c.when is None for c in ranked) and kept.when is not None:
            notes.append(f"{kept.group}: undated values were treated as older than dated ones")
    return kept, others


def _medication_name(concept: Any, drugs_by_atc: Mapping[str, str]) -> tuple[str, str] | None:
    """(name, how) from a medication CodeableConcept: an ATC code tubulo knows, else a name in its texts."""
    from ..vocab import fold, lookup_drug

    for c in _codings(concept):
        code = str(c.get("code") or "").strip().upper()
        if c.get("system") == ATC_SYSTEM and code in drugs_by_atc:
            return drugs_by_atc[code], f"ATC {code}"
    texts = [t for t in [concept.get("text") if isinstance(concept, dict) else None]
             + [c.get("display") for c in _codings(concept)] if isinstance(t, str) and t.strip()]
    for t in texts:
        words = fold(t).split()
        for n in (len(words), 3, 2, 1):
            for i in range(0, max(len(words) - n + 1, 0)):
                m = lookup_drug(" ".join(words[i:i + n]))
                if m is not None:
                    return m.inn, f"name in {t!r}"
    if texts:
        # not a drug tubulo knows: keep the words before the first dose or form number
        head = re.split(r"\s(?=\d)", texts[0].strip(), maxsplit=1)[0].strip()
        return head or texts[0].strip(), f"text {texts[0]!r} (not in tubulo's drug knowledge)"
    return None


def _drugs_by_atc() -> dict[str, str]:
    from ..paths import read_knowledge_yaml

    out: dict[str, str] = {}
    raw = read_knowledge_yaml("drugs.yaml") or {}
    for cls in raw.get("drug_classes") or []:
        for member in cls.get("members") or []:
            if member.get("atc"):
                out.setdefault(str(member["atc"]).upper(), member["inn"])
    return out


def bundle_to_case(data: Mapping[str, Any], source: str = "", case_id: str | None = None,
                   age_at: date | None = None, today: date | None = None) -> FhirImport:
    """Turn a FHIR R4 Bundle (parsed JSON) into a case mapping; TubuloError when it cannot be one patient."""
    head = f"{source}: " if source else ""
    entries = data.get("entry") or []
    if not isinstance(entries, list):
        raise TubuloError(f"{head}Bundle.entry must be a list of entries")
    resources: dict[str, Mapping[str, Any]] = {}
    items: list[tuple[int, Mapping[str, Any]]] = []
    for i, e in enumerate(entries):
        res = e.get("resource") if isinstance(e, dict) else None
        if not isinstance(res, dict):
            continue
        items.append((i, res))
        if res.get("id"):
            resources[f"{res.get('resourceType')}/{res['id']}"] = res
        if isinstance(e.get("fullUrl"), str):
            resources[e["fullUrl"]] = res

    skipped: list[Skipped] = []
    notes: list[str] = []
    patients = [(i, r) for i, r in items if r.get("resourceType") == "Patient"]
    patient_refs: set[str] = set()
    if len({r.get("id") or i for i, r in patients}) > 1:
        ids = ", ".join(_ref(r, i) for i, r in patients)
        raise TubuloError(f"{head}the bundle holds {len(patients)} patients ({ids}); a case is one patient")
    patient = patients[0][1] if patients else None
    if patient is not None:
        if patient.get("id"):
            patient_refs.add(f"Patient/{patient['id']}")
        for e in entries:
            if isinstance(e, dict) and e.get("resource") is patient and isinstance(e.get("fullUrl"), str):
                patient_refs.add(e["fullUrl"])
    else:
        notes.append("no Patient resource: age and sex are not imported")

    def other_subject(res: Mapping[str, Any]) -> bool:
        subj = res.get("subject")
        ref = subj.get("reference") if isinstance(subj, dict) else None
        return bool(ref and patient_refs and ref not in patient_refs)

    # observations -> candidates per analyte
    by_group: dict[str, list[_Candidate]] = {}
    ignored: dict[str, int] = {}
    medications: list[ImportedMedication] = []
    atc_map: dict[str, str] | None = None
    for order, (i, res) in enumerate(items):
        kind = res.get("resourceType")
        ref = _ref(res, i)
        if kind == "Observation":
            status = res.get("status")
            if status in SKIP_OBSERVATION_STATUS:
                skipped.append(Skipped(ref, f"status {status}"))
                continue
            if other_subject(res):
                skipped.append(Skipped(ref, f"subject {res['subject'].get('reference')} is not the bundle's patient"))
                continue
            for cand in _observation_candidates(res, ref, order, resources, skipped):
                by_group.setdefault(cand.group, []).append(cand)
        elif kind in ("MedicationStatement", "MedicationRequest"):
            status = res.get("status")
            if status in SKIP_MEDICATION_STATUS:
                skipped.append(Skipped(ref, f"status {status}; only current medicines are imported"))
                continue
            if other_subject(res):
                skipped.append(Skipped(ref, f"subject {res['subject'].get('reference')} is not the bundle's patient"))
                continue
            concept = res.get("medicationCodeableConcept")
            via = ""
            if concept is None and isinstance(res.get("medicationReference"), dict):
                target_ref = str(res["medicationReference"].get("reference", ""))
                target = resources.get(target_ref)
                if target is None and target_ref.startswith("#"):
                    target = next((c for c in res.get("contained") or []
                                   if isinstance(c, dict) and c.get("id") == target_ref[1:]), None)
                if target is None:
                    skipped.append(Skipped(ref, f"medicationReference {target_ref!r} is not in the bundle"))
                    continue
                concept = target.get("code")
                via = f" via {target_ref}"
            if atc_map is None:
                atc_map = _drugs_by_atc()
            found = _medication_name(concept, atc_map)
            if found is None:
                skipped.append(Skipped(ref, "no medication name or code"))
                continue
            name, how = found
            if any(m.name.lower() == name.lower() for m in medications):
                notes.append(f"medication {name} listed more than once ({ref}); kept once")
                continue
            medications.append(ImportedMedication(name, ref, how + via))
        elif kind != "Patient":
            ignored[str(kind)] = ignored.get(str(kind), 0) + 1
    if ignored:
        notes.append("not read: " + ", ".join(f"{n} {k}" for k, n in sorted(ignored.items())))

    values: list[ImportedValue] = []
    kept: dict[str, _Candidate] = {}
    for group, cands in by_group.items():
        best, others = _pick_newest(cands, notes)
        kept[group] = best
        values.append(ImportedValue(best.key, best.text, best.resource, best.code, best.when_text, others))

    case: dict[str, Any] = {"case": case_id or (patient or {}).get("id") or data.get("id") or "fhir-import"}
    sections: dict[str, dict[str, Any]] = {}
    pat: dict[str, Any] = {}
    if patient is not None:
        gender = patient.get("gender")
        if gender in SEXES:
            pat["sex"] = gender
        elif gender is not None:
            notes.append(f"Patient.gender {gender!r} is not one of {', '.join(SEXES)}; sex left unknown")
        birth = _parse_date(patient.get("birthDate")) if patient.get("birthDate") else None
        if patient.get("birthDate") and birth is None:
            raise TubuloError(f"{head}Patient.birthDate {patient['birthDate']!r} is not a FHIR date (YYYY-MM-DD)")
        if birth is not None:
            dated = [c.when for cs in by_group.values() for c in cs if c.when is not None]
            if age_at is not None:
                ref_day, basis = age_at, f"the date given ({age_at.isoformat()})"
            elif dated:
                ref_day = max(dated).date()
                basis = f"the newest observation ({ref_day.isoformat()})"
            else:
                ref_day = today or date.today()
                basis = f"today ({ref_day.isoformat()}; no observation carries a date)"
            if ref_day < birth[0]:
                raise TubuloError(f"{head}Patient.birthDate {patient['birthDate']} is after {basis}")
            pat["age"] = _age_text(birth[0], ref_day)
            partial = (f"; birthDate {patient['birthDate']} is partial, read as {birth[0].isoformat()} "
                       "(uncertain by up to half a year or month)") if birth[1] else ""
            notes.append(f"age {pat['age']} from birthDate to {basis}{partial}")
        elif patient.get("birthDate") is None:
            notes.append("Patient has no birthDate: age not imported (age-specific reference intervals need it)")
    for group, best in kept.items():
        sec, name = best.key.split(".", 1)
        if sec == "patient":
            pat[name] = best.text
        elif sec == "vitals" and name in ("systolic_bp", "diastolic_bp"):
            continue
        else:
            sections.setdefault(sec, {})[name] = best.text
    sys_c, dia_c = kept.get("vitals.systolic_bp"), kept.get("vitals.diastolic_bp")
    if sys_c and dia_c:
        specs = analyte_specs()
        s = convert(sys_c.number or 0.0, sys_c.unit, specs["vitals.systolic_bp"])
        d = convert(dia_c.number or 0.0, dia_c.unit, specs["vitals.diastolic_bp"])
        sections.setdefault("vitals", {})["blood_pressure"] = f"{s:.0f}/{d:.0f} mmHg"
        if sys_c.when != dia_c.when:
            notes.append(f"blood pressure: systolic ({sys_c.when_text}) and diastolic ({dia_c.when_text}) "
                         "come from different times")
    elif sys_c or dia_c:
        one = sys_c or dia_c
        skipped.append(Skipped(one.resource, "blood pressure needs both systolic and diastolic; only one was found"))
        values = [v for v in values if v.resource != one.resource or not v.key.startswith("vitals.")]
    if "urine" in sections:
        sections["urine"] = {"sample": "spot", **sections["urine"]}
        notes.append("urine values read as a spot sample (the LOINC codes read are untimed 'in Urine' codes)")
    if pat:
        case["patient"] = pat
    if medications:
        case["medications"] = [m.name for m in medications]
    for sec in SECTION_ORDER:
        if sec in sections:
            case[sec] = sections[sec]
    return FhirImport(case, tuple(sorted(values, key=lambda v: v.key)), tuple(medications), tuple(skipped),
                      tuple(notes))


# --- writing -----------------------------------------------------------------------------


def case_yaml(imp: FhirImport, source: str, version: str) -> str:
    """The case file text: every value quoted, with a comment naming the resource it came from."""
    by_key = {v.key: v for v in imp.values}
    lines = [
        f"# Case file imported from the FHIR bundle {Path(source).name} by tubulo {version}.",
        "# Values as the bundle reported them; check them against the record before relying on them.",
        "# tubulo is decision support, not a diagnosis.",
        f"case: {json.dumps(str(imp.case['case']))}",
    ]
    for sec in SECTION_ORDER:
        if sec not in imp.case:
            continue
        body = imp.case[sec]
        if sec == "medications":
            lines.append("medications:")
            for m in imp.medications:
                lines.append(f"  - {json.dumps(m.name)}  # {m.resource}: {m.how}")
            continue
        lines.append(f"{sec}:")
        for name, text in body.items():
            v = by_key.get(f"{sec}.{name}")
            comment = ""
            if v is not None:
                comment = f"  # {v.resource}, LOINC {v.code}, {v.effective or 'undated'}"
                if v.others:
                    comment += f"; newest of {len(v.others) + 1} values"
            elif sec == "vitals" and name == "blood_pressure":
                parts = sorted((x for x in imp.values if x.key in ("vitals.systolic_bp", "vitals.diastolic_bp")),
                               key=lambda x: x.key, reverse=True)  # systolic first
                comment = "  # " + ", ".join(f"{x.resource} ({x.effective or 'undated'})" for x in parts)
            lines.append(f"  {name}: {json.dumps(text)}{comment}")
    return "\n".join(lines) + "\n"
