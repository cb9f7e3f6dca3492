"""Exchange with other systems: HL7 FHIR R4 bundles in (`tubulo import fhir`), GA4GH Phenopacket v2
out (`tubulo export phenopacket`).  The LOINC map is knowledge (`knowledge/loinc.yaml`)."""

__all__: list[str] = []
