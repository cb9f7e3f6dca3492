"""Property tests: random case structures only ever raise the tool's own validation error."""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tubulo.case import parse_case, read_case_text
from tubulo.errors import CaseError

KEYS = ["case", "patient", "serum", "urine", "blood_gas", "vitals", "tests", "features", "medications",
        "family", "onset", "exposures", "absent_features", "age", "sex", "sodium", "potassium", "ph",
        "calcium", "creatinine", "blood_pressure", "sample", "weight", "pattern", "bogus"]
scalars = st.one_of(
    st.none(), st.booleans(), st.integers(-10**6, 10**6), st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=12),
    st.sampled_from(["2.7 mmol/L", "9.4 mg/dL", "140", "abc mmol/L", "1,5 mmol/L", "104/66 mmHg", "HP:0000121",
                     "nephrocalcinosis", "24 y", "female", "spot", "1e400 mmol/L", "-1 mg/dL", "7.4"]),
)
trees = st.recursive(scalars, lambda kids: st.one_of(st.lists(kids, max_size=4),
                                                     st.dictionaries(st.sampled_from(KEYS), kids, max_size=5)),
                     max_leaves=20)


@settings(max_examples=300, suppress_health_check=[HealthCheck.too_slow], deadline=None)
@given(st.dictionaries(st.sampled_from(KEYS), trees, max_size=8))
def test_random_structures_raise_only_case_errors(data):
    try:
        case = parse_case(data)
    except CaseError as exc:
        assert exc.problems and all(p.message for p in exc.problems)
    else:
        assert case.id


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=300))
def test_random_text_raises_only_case_errors(text):
    try:
        parse_case(read_case_text(text, "yaml"))
    except CaseError:
        pass


@settings(max_examples=100, deadline=None)
@given(st.floats(min_value=0.05, max_value=6.0), st.sampled_from(["mmol/L", "mg/dL", "mEq/L"]))
def test_written_unit_does_not_change_the_stored_value(mmol, unit):
    factor = {"mmol/L": 1.0, "mg/dL": 40.078 / 10, "mEq/L": 2.0}[unit]  # molar mass and valence of calcium
    text = f"{mmol * factor!r} {unit}"
    try:
        case = parse_case({"case": "x", "serum": {"calcium": text}})
    except CaseError:
        assert not (0.5 <= mmol <= 5)  # only impossible values may be refused
        return
    assert abs(case.value("serum.calcium") - mmol) <= 1e-6 * mmol
