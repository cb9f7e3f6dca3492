"""knowledge/loinc.yaml: codes well formed (LOINC mod-10 check digit), keys are analytes,
specimens fit the case sections, export units fit the code's property and convert."""

from __future__ import annotations

import re

import pytest

from tubulo.errors import KnowledgeError
from tubulo.interop.loinc import check_digit, loinc_table, parse_loinc_table, ucum_to_case_unit
from tubulo.paths import read_knowledge_yaml
from tubulo.units import analyte_specs, convert

SECTION_SPECIMENS = {"serum": {"serum_plasma", "blood"}, "blood_gas": {"blood", "arterial_blood", "venous_blood"},
                     "urine": {"urine"}, "vitals": {"none"}, "patient": {"none"}}


def test_check_digit_worked_example():
    # LOINC Users' Guide (Regenstrief Institute), "Calculating Mod 10 check digits": 12345 -> 5 (from memory)
    assert check_digit("12345") == 5


def test_table_loads_and_every_code_has_its_check_digit():
    table = loinc_table()
    assert len(table.codes) >= 40
    for code in table.codes:
        number, digit = code.split("-")
        assert check_digit(number) == int(digit), code
    assert table.source.startswith("LOINC (Regenstrief Institute)") and "from memory" in table.source


def test_keys_and_specimens_fit_the_case_sections():
    specs = analyte_specs()
    for code, e in loinc_table().codes.items():
        if e.key is None:
            assert e.export is None and "panel" in e.long_name.lower(), code
            continue
        assert e.key in specs, code
        section = e.key.split(".")[0]
        assert e.specimen in SECTION_SPECIMENS[section], (code, e.key, e.specimen)
        if e.specimen == "urine":
            assert e.long_name.endswith(("in Urine", "of Urine", "in Urine by Test strip")), code
        if e.specimen == "serum_plasma":
            assert "Serum or Plasma" in e.long_name or e.long_name.endswith("in Plasma"), code


# the property in a LOINC long name and the unit dimension it takes (LOINC Users' Guide, property axis;
# common practice, no source)
_PROPERTY_UNITS = [
    (r"\[Moles/volume\]", r"mol/L$"),
    (r"\[Mass/volume\]", r"^(m|u|n|p)?g/(d|m)?L$"),
    (r"\[Mass Ratio\]", r"^m?g/g$"),
    (r"^Osmolality", r"^mosm/kg$"),
    (r"^pH of", r"^\[pH\]$"),
    (r"\[Enzymatic activity/volume\]", r"^(U/L|ng/mL/h)$"),
    (r"\[Units/volume\]", r"\[IU\]/L$"),
    (r"\[Partial pressure\]", r"^mm\[Hg\]$"),
    (r"blood pressure$", r"^mm\[Hg\]$"),
    (r"^Body weight$", r"^kg$"),
    (r"^Body height$", r"^cm$"),
]


def test_export_units_fit_the_code_property_and_convert():
    specs = analyte_specs()
    exported = set()
    for code, e in loinc_table().codes.items():
        if not e.export:
            continue
        exported.add(e.key)
        rule = next(((p, u) for p, u in _PROPERTY_UNITS if re.search(p, e.long_name)), None)
        assert rule is not None, f"{code}: no property rule for {e.long_name!r}"
        assert re.search(rule[1], e.export), (code, e.long_name, e.export)
        assert convert(1.0, ucum_to_case_unit(e.export) or None, specs[e.key]) > 0
    keys = {specs[e.key].stored_as or e.key for e in loinc_table().codes.values() if e.key}
    assert exported == keys  # every analyte the map reads can also be written (BUN is stored as urea)


@pytest.mark.parametrize("ucum, expected", [("m[IU]/L", "mIU/L"), ("mg/g{creat}", "mg/g"), ("[pH]", "pH"),
                                            ("mm[Hg]", "mmHg"), ("[lb_av]", "lb"), ("mmol/L", "mmol/L")])
def test_ucum_spellings(ucum, expected):
    assert ucum_to_case_unit(ucum) == expected


def _raw() -> dict:
    import copy

    return copy.deepcopy(read_knowledge_yaml("loinc.yaml"))


def test_knowledge_errors_name_the_entry_and_the_field():
    raw = _raw()
    raw["codes"]["2823-4"] = raw["codes"].pop("2823-3")
    with pytest.raises(KnowledgeError, match=r"loinc.yaml: entry 2823-4: check digit should be 3"):
        parse_loinc_table(raw)
    raw = _raw()
    raw["codes"]["2951-2"]["key"] = "serum.sodum"
    with pytest.raises(KnowledgeError, match=r"entry 2951-2: field key: 'serum.sodum'"):
        parse_loinc_table(raw)
    raw = _raw()
    raw["codes"]["2028-9"]["export"] = "mmol/L"
    with pytest.raises(KnowledgeError, match=r"entry 2028-9: field export: serum.bicarbonate already exports"):
        parse_loinc_table(raw)
    raw = _raw()
    raw["codes"]["2951-2"]["specimen"] = "sweat"
    with pytest.raises(KnowledgeError, match=r"entry 2951-2: field specimen"):
        parse_loinc_table(raw)
