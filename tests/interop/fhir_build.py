"""Small builders of HL7 FHIR R4 resources for the import tests, made with the `fhir.resources`
package (its R4B models: R4B keeps the R4 Patient, Observation, Specimen and Medication*
resources), so every bundle the tests feed in is one the FHIR models accept."""

from __future__ import annotations

import json
from typing import Any

from fhir.resources.R4B.bundle import Bundle, BundleEntry
from fhir.resources.R4B.codeableconcept import CodeableConcept
from fhir.resources.R4B.coding import Coding
from fhir.resources.R4B.medication import Medication
from fhir.resources.R4B.medicationrequest import MedicationRequest
from fhir.resources.R4B.medicationstatement import MedicationStatement
from fhir.resources.R4B.observation import Observation, ObservationComponent
from fhir.resources.R4B.patient import Patient
from fhir.resources.R4B.quantity import Quantity
from fhir.resources.R4B.reference import Reference
from fhir.resources.R4B.specimen import Specimen

LOINC = "http://loinc.org"
UCUM = "http://unitsofmeasure.org"
ATC = "http://www.whocc.no/atc"  # HL7 FHIR terminology system URI for WHO ATC (from memory)


def loinc(code: str, display: str | None = None) -> CodeableConcept:
    return CodeableConcept(coding=[Coding(system=LOINC, code=code, display=display)])


def quantity(value: float, ucum: str | None, unit_text: str | None = None, comparator: str | None = None) -> Quantity:
    kw: dict[str, Any] = {"value": value}
    if ucum is not None:
        kw.update(system=UCUM, code=ucum, unit=unit_text or ucum)
    elif unit_text is not None:
        kw["unit"] = unit_text
    if comparator:
        kw["comparator"] = comparator
    return Quantity(**kw)


def patient(pid: str = "p1", birth: str | None = "2001-08-14", gender: str | None = "female") -> Patient:
    kw: dict[str, Any] = {"id": pid}
    if birth:
        kw["birthDate"] = birth
    if gender:
        kw["gender"] = gender
    return Patient(**kw)


def observation(oid: str, code: str, value: float | None = None, ucum: str | None = None, *, when: str | None = None,
                status: str = "final", unit_text: str | None = None, comparator: str | None = None,
                subject: str | None = "Patient/p1", specimen: str | None = None, text_value: str | None = None,
                components: list[ObservationComponent] | None = None, absent: str | None = None) -> Observation:
    kw: dict[str, Any] = {"id": oid, "status": status, "code": loinc(code)}
    if subject:
        kw["subject"] = Reference(reference=subject)
    if when:
        kw["effectiveDateTime"] = when
    if value is not None:
        kw["valueQuantity"] = quantity(value, ucum, unit_text, comparator)
    if text_value is not None:
        kw["valueCodeableConcept"] = CodeableConcept(text=text_value)
    if specimen:
        kw["specimen"] = Reference(reference=specimen)
    if components:
        kw["component"] = components
    if absent:
        kw["dataAbsentReason"] = CodeableConcept(text=absent)
    return Observation(**kw)


def component(code: str, value: float, ucum: str) -> ObservationComponent:
    return ObservationComponent(code=loinc(code), valueQuantity=quantity(value, ucum))


def specimen(sid: str, type_text: str) -> Specimen:
    return Specimen(id=sid, type=CodeableConcept(text=type_text))


def statement(mid: str, text: str | None = None, atc: str | None = None, status: str = "active",
              reference: str | None = None, subject: str = "Patient/p1") -> MedicationStatement:
    kw: dict[str, Any] = {"id": mid, "status": status, "subject": Reference(reference=subject)}
    if reference:
        kw["medicationReference"] = Reference(reference=reference)
    else:
        kw["medicationCodeableConcept"] = _drug_concept(text, atc)
    return MedicationStatement(**kw)


def request(mid: str, text: str | None = None, atc: str | None = None, status: str = "active") -> MedicationRequest:
    return MedicationRequest(id=mid, status=status, intent="order", subject=Reference(reference="Patient/p1"),
                             medicationCodeableConcept=_drug_concept(text, atc))


def medication(mid: str, display: str) -> Medication:
    return Medication(id=mid, code=CodeableConcept(coding=[Coding(display=display)]))


def _drug_concept(text: str | None, atc: str | None) -> CodeableConcept:
    kw: dict[str, Any] = {}
    if text:
        kw["text"] = text
    if atc:
        kw["coding"] = [Coding(system=ATC, code=atc)]
    return CodeableConcept(**kw)


def bundle(*resources) -> dict:
    """A collection Bundle of the resources, as the parsed JSON a file would hold."""
    b = Bundle(type="collection", entry=[BundleEntry(fullUrl=f"urn:uuid:entry-{i}", resource=r)
                                         for i, r in enumerate(resources)])
    return json.loads(b.model_dump_json(exclude_none=True))
