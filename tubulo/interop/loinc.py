"""The LOINC map of `knowledge/loinc.yaml`: code -> case key, long name, specimen, export unit.

Also the UCUM spellings: a UCUM unit code turned into the spelling tubulo's unit reader accepts.
"""

from __future__ import annotations

import re
from functools import cache
from typing import Any, Mapping, NamedTuple

from ..errors import KnowledgeError
from ..paths import require_knowledge_yaml
from ..units import analyte_specs

__all__ = ["LoincEntry", "LoincTable", "SPECIMENS", "check_digit", "loinc_table", "parse_loinc_table",
           "ucum_to_case_unit"]

FILE = "loinc.yaml"
SPECIMENS = ("serum_plasma", "blood", "arterial_blood", "venous_blood", "urine", "none")
_CODE = re.compile(r"^(\d{1,7})-(\d)$")
_ANNOTATION = re.compile(r"\{[^{}]*\}")


class LoincEntry(NamedTuple):
    """One LOINC code tubulo reads (and maybe writes)."""

    code: str
    key: str | None  # case key "section.analyte"; None for a panel read through its components
    long_name: str
    specimen: str
    export: str | None = None  # UCUM unit of the phenopacket value when this is the analyte's assay
    qualitative: bool = False


class LoincTable(NamedTuple):
    source: str
    codes: Mapping[str, LoincEntry]
    ucum_spellings: tuple[tuple[str, str], ...]

    def assay(self, key: str) -> LoincEntry | None:
        """The code written as the assay of analyte `key` in a phenopacket (None when none is marked)."""
        for entry in self.codes.values():
            if entry.key == key and entry.export:
                return entry
        return None


def check_digit(number: str) -> int:
    """LOINC mod-10 check digit of the digits before the hyphen (LOINC Users' Guide, Regenstrief)."""
    digits = [int(c) for c in reversed(number)]
    total = 0
    for i, d in enumerate(digits):
        if i % 2 == 0:  # odd positions counted from the right are doubled
            d *= 2
            total += d // 10 + d % 10
        else:
            total += d
    return (10 - total % 10) % 10


@cache
def loinc_table() -> LoincTable:
    """Read and check knowledge/loinc.yaml; KnowledgeError naming the entry and field when wrong."""
    return parse_loinc_table(require_knowledge_yaml(FILE))


def parse_loinc_table(raw: Any) -> LoincTable:
    """Check the parsed content of loinc.yaml and build the table (KnowledgeError when wrong)."""
    if not isinstance(raw, dict) or not isinstance(raw.get("codes"), dict):
        raise KnowledgeError(f"{FILE}: expected a mapping with a 'codes' section")
    specs = analyte_specs()
    codes: dict[str, LoincEntry] = {}
    assays: dict[str, str] = {}
    for code, entry in raw["codes"].items():
        where = f"{FILE}: entry {code}"
        m = _CODE.match(str(code))
        if not m:
            raise KnowledgeError(f"{where}: not a LOINC code (digits, hyphen, check digit)")
        if check_digit(m.group(1)) != int(m.group(2)):
            raise KnowledgeError(f"{where}: check digit should be {check_digit(m.group(1))}; the code is mistyped")
        if not isinstance(entry, dict):
            raise KnowledgeError(f"{where}: expected a mapping with key, long_name, specimen")
        key = entry.get("key")
        if key is not None and key not in specs:
            raise KnowledgeError(f"{where}: field key: {key!r} is not an analyte of analytes.yaml")
        long_name = entry.get("long_name")
        if not isinstance(long_name, str) or not long_name.strip():
            raise KnowledgeError(f"{where}: field long_name: missing")
        specimen = entry.get("specimen")
        if specimen not in SPECIMENS:
            raise KnowledgeError(f"{where}: field specimen: {specimen!r} is not one of {', '.join(SPECIMENS)}")
        export = entry.get("export")
        if export is not None:
            if key is None:
                raise KnowledgeError(f"{where}: field export: a panel has no value to export")
            if key in assays:
                raise KnowledgeError(f"{where}: field export: {key} already exports as {assays[key]}; keep one")
            assays[key] = str(code)
        codes[str(code)] = LoincEntry(str(code), key, long_name.strip(), specimen,
                                      str(export) if export is not None else None, bool(entry.get("qualitative", False)))
    spellings = tuple((str(a), str(b)) for a, b in (raw.get("ucum_spellings") or {}).items())
    return LoincTable(str(raw.get("source", "")), codes, spellings)


def ucum_to_case_unit(code: str) -> str:
    """A UCUM unit code ('m[IU]/L', 'mg/g{creat}', '[pH]') in the spelling tubulo's unit reader takes."""
    text = _ANNOTATION.sub("", code).strip()
    for old, new in loinc_table().ucum_spellings:
        text = text.replace(old, new)
    return text
