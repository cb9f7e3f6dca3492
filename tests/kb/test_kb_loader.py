"""Loader and schema: good knowledge loads; every fault is reported at once with file, entry, field."""

from __future__ import annotations

import re

import pytest
from hypothesis import given, strategies as st

from tubulo.errors import KnowledgeError
from tubulo.kb import schema as S
from tubulo.kb.loader import check_knowledge, load_knowledge

from .conftest import GOOD


def test_good_fixture_loads_with_every_section():
    kn = load_knowledge(GOOD)
    assert set(kn.disorders) == {"gitelman", "bartter_type1", "licorice_excess"}
    assert set(kn.drug_classes) == {"thiazide_diuretic", "loop_diuretic"}
    assert kn.disorders["licorice_excess"].kind == "acquired"
    assert kn.origin["gitelman"][0] == "disorders_fixture.yaml"
    assert kn.manifests["gitelman"]["HP:0000934"].present == pytest.approx(0.1)
    assert len(kn.edges) == 31
    assert kn.meta.checks.consistency_min_agreement == pytest.approx(0.9)


BAD_DISORDERS = """\
disorders:
  - id: bad_one
    name: Faulty entry
    kind: inherited
    xrefs: [OMIM:26380]
    genes: [SLC12A3]
    inheritance: AR
    prevalence: 1.0e-5
    prevalence_source: from memory
    colour: red
    acts_on: [{target: no_such_transporter, effect: loss, source: common practice}]
    manifests:
      serum_potassium: {states: {low: 0.9, lowish: 0.1}, source: from memory}
      urine_calcium: {states: {low: 0.9}}
    source: common practice
  - id: gitelman
    name: A second Gitelman
    kind: inherited
    inheritance: AR
    prevalence: 1.0e-5
    prevalence_source: from memory
    source: common practice
"""

BAD_EDGES = """\
edges:
  - {from: ncc, to: dct_nacl_reabsorption, sign: 1}
  - {from: ncc, to: nowhere, sign: 1, source: common practice}
"""


def test_all_faults_reported_at_once_with_file_entry_and_field(good_copy):
    (good_copy / "disorders_bad.yaml").write_text(BAD_DISORDERS)
    (good_copy / "mechanisms_bad.yaml").write_text(BAD_EDGES)
    with pytest.raises(KnowledgeError) as info:
        load_knowledge(good_copy)
    msg = str(info.value)
    lines = [str(p) for p in info.value.problems]
    expected = [
        # (file:line, entry, field, what)
        ("disorders_bad.yaml:5:", "'bad_one'", "xrefs[0]", "not a valid OMIM id"),
        ("disorders_bad.yaml:10:", "'bad_one'", "field colour", "unknown field"),
        ("disorders_bad.yaml:2:", "'bad_one'", "acts_on[0].target", "'no_such_transporter'"),
        ("disorders_bad.yaml:13:", "'bad_one'", "serum_potassium", "unknown state(s) ['lowish']"),
        ("disorders_bad.yaml:14:", "'bad_one'", "source", "unsourced"),
        ("mechanisms_bad.yaml:2:", "'ncc' -> 'dct_nacl_reabsorption'", "field source", "unsourced"),
        ("mechanisms_bad.yaml:3:", "'ncc' -> 'nowhere'", "field to", "not a node or variable id"),
    ]
    for where, entry, fld, what in expected:
        hits = [ln for ln in lines if ln.startswith(where) and entry in ln and fld in ln and what in ln]
        assert hits, f"no problem {where} {entry} {fld} {what!r} in:\n{msg}"
    dup = [ln for ln in lines if "'gitelman'" in ln and "duplicate id" in ln]
    assert len(dup) == 1 and "disorders_bad.yaml:16" in dup[0] and "disorders_fixture.yaml:" in dup[0], msg
    assert msg.startswith(f"{len(lines)} knowledge problem(s)")


def test_check_returns_problems_without_raising(good_copy):
    (good_copy / "mechanisms_bad.yaml").write_text(BAD_EDGES)
    kn, problems = check_knowledge(good_copy)
    assert kn is None
    assert sum(p.level == "error" for p in problems) == 2


def test_yaml_syntax_error_names_file_and_line(good_copy):
    (good_copy / "exposures.yaml").write_text("exposures:\n  - id: x\n    name: [unclosed\n")
    kn, problems = check_knowledge(good_copy)
    assert kn is None
    assert any(str(p).startswith("exposures.yaml:") and "not valid YAML" in str(p) for p in problems)


def test_missing_required_file(good_copy):
    (good_copy / "meta.yaml").unlink()
    _, problems = check_knowledge(good_copy)
    assert any(p.path == "meta.yaml" and "missing" in p.message for p in problems)


def test_opposite_signed_duplicate_edge_is_an_error(good_copy):
    (good_copy / "mechanisms_more.yaml").write_text(
        "edges:\n  - {from: ncc, to: dct_nacl_reabsorption, sign: -1, source: common practice}\n")
    _, problems = check_knowledge(good_copy)
    assert any(p.level == "error" and "opposite sign" in p.message for p in problems)


def test_drug_member_outside_class_prefix(good_copy):
    text = (good_copy / "drugs.yaml").read_text().replace("atc: C03CA02", "atc: C07AB02")
    (good_copy / "drugs.yaml").write_text(text)
    _, problems = check_knowledge(good_copy)
    assert any("drugs.yaml" in p.path and "'loop_diuretic'" in p.message and "bumetanide" in p.message
               for p in problems)


# ----------------------------------------------------------------- id formats and sources
# OMIM MIM numbers are six digits (OMIM, McKusick-Nathans Institute, Johns Hopkins University);
# ORPHA codes are integers (Orphanet nomenclature); HPO ids are HP: and seven digits (Köhler S et al.
# 2021 Nucleic Acids Res); ATC substance codes are letter, 2 digits, 2 letters, 2 digits (WHO
# Collaborating Centre for Drug Statistics Methodology, Guidelines for ATC classification and DDD
# assignment; structure from memory).

@pytest.mark.parametrize("code,ok", [("C03CA01", True), ("A12CC05", True), ("C03CA1", False),
                                     ("c03ca01", False), ("Z03CA01", False), ("C3CA001", False)])
def test_atc_substance_format(code, ok):
    assert bool(S.ATC_SUBSTANCE_RE.match(code)) is ok


@pytest.mark.parametrize("code,ok", [("C", True), ("C03", True), ("C03C", True), ("C03CA", True),
                                     ("C03CA01", True), ("C0", False), ("C03CA0", False)])
def test_atc_prefix_levels(code, ok):
    assert bool(S.ATC_PREFIX_RE.match(code)) is ok


@pytest.mark.parametrize("xref,ok", [("OMIM:263800", True), ("ORPHA:358", True), ("OMIM:26380", False),
                                     ("OMIM:2638000", False), ("ORPHA:", False), ("MIM:263800", False)])
def test_xref_formats(xref, ok):
    if ok:
        assert S._check_xref(xref) == xref
    else:
        with pytest.raises(ValueError):
            S._check_xref(xref)


@pytest.mark.parametrize("src,ok", [
    ("Blanchard A et al. 2017 Kidney Int", True), ("common practice", True), ("from memory", True),
    ("Seyberth HW, Schlingmann KP 2011 Pediatr Nephrol; values from memory", True),
    ("a review somewhere", False), ("", False), ("Smith 2011 Lancet PMID:abc", False),
    ("Smith 2011 Lancet doi:11.1/x", False), ("Smith 2011 Lancet PMID:12345678", True),
])
def test_source_forms(src, ok):
    if ok:
        assert S.check_source(src)
    else:
        with pytest.raises(ValueError):
            S.check_source(src)


@given(st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=60))
def test_source_accepts_only_year_or_marker(text):
    """Whatever the text, it is accepted only when it carries a year or one of the two markers."""
    has_marker = (text.strip().lower().startswith("common practice") or "from memory" in text.lower()
                  or re.search(r"\b(1[89]\d{2}|20\d{2})\b", text) is not None)
    try:
        S.check_source(text)
        accepted = True
    except ValueError:
        accepted = False
    if accepted:
        assert has_marker
    elif has_marker and "PMID:" not in text and "doi:" not in text.lower():
        pytest.fail(f"rejected a source with a year or marker: {text!r}")


@given(st.dictionaries(st.sampled_from(["low", "normal", "high"]), st.floats(0, 1), min_size=1))
def test_state_manifest_sums(states):
    total = sum(states.values())
    if total <= 1 + 1e-6:
        assert S.StateManifest(states=states, source="from memory").states == states
    else:
        with pytest.raises(ValueError):
            S.StateManifest(states=states, source="from memory")


def test_one_faulty_variable_does_not_hide_the_others(good_copy):
    p = good_copy / "variables.yaml"
    p.write_text(p.read_text().replace("    label: Serum potassium\n", "    label: Serum potassium\n    colour: blue\n"))
    _, problems = check_knowledge(good_copy)
    errors = [str(x) for x in problems if x.level == "error"]
    assert len(errors) == 1 and "variable 'serum_potassium': field colour: unknown field" in errors[0]


@pytest.mark.parametrize("edit, what", [
    (("    abnormal: [very_low, low, high, very_high]\n", ""), "field abnormal: missing required field"),
    (("    abnormal: [very_low, low, high, very_high]\n", "    abnormal: [low, lowish]\n"),
     "abnormal names unknown states ['lowish']"),
    (("    abnormal: [very_low, low, high, very_high]\n", "    abnormal: [very_low, low, normal, high, very_high]\n"),
     "at least one state must be unremarkable"),
    (("    abnormal: [very_low, low, high, very_high]\n", "    abnormal: [low, high, very_high]\n"),
     "hpo names states ['very_low'] that abnormal does not list"),
    (("    abnormal: [very_low, low, high, very_high]\n", "    abnormal: [very_low, low, normal, high]\n"),
     "abnormal lists ['normal'], of direction 0"),
])
def test_abnormal_states_are_checked(good_copy, edit, what):
    p = good_copy / "variables.yaml"
    text = p.read_text()
    assert edit[0] in text
    p.write_text(text.replace(edit[0], edit[1], 1))
    _, problems = check_knowledge(good_copy)
    # the faulty entry, located; manifests and gates that use the dropped variable are reported apart
    errors = [str(x) for x in problems if x.level == "error" and "variable 'serum_potassium'" in str(x)]
    assert len(errors) == 1, errors
    assert errors[0].startswith("variables.yaml:5:") and what in errors[0], errors[0]


_CAUTIONS = """version: 1
standing: Decision support, not a diagnosis.
critical_message: "{label} {value} {unit} is past the limit ({side} {limit} {unit})"
critical_source_note: the local list decides
quality:
  - id: rule_one
    level: warning
    when: {variable: serum_potassium, states: [low]}
    message: a caution
    source: common practice
"""


def test_a_good_cautions_file_is_clean(good_copy):
    (good_copy / "cautions.yaml").write_text(_CAUTIONS)
    _, problems = check_knowledge(good_copy)
    assert not [x for x in problems if x.level == "error" and "cautions.yaml" in str(x)]


@pytest.mark.parametrize("edit,what", [
    (("states: [low]", "states: [lowish]"), "field when: states ['lowish'] are not states of serum_potassium"),
    (("variable: serum_potassium", "variable: serum_potasium"), "field when: 'serum_potasium' is not a variable"),
    (("    when: {variable: serum_potassium, states: [low]}\n", "    drug_class_on_list: [no_such_class]\n"),
     "field drug_class_on_list: 'no_such_class' is not a drug class"),
    (("    when: {variable: serum_potassium, states: [low]}\n", ""), "names no condition"),
    (("level: warning", "level: loud"), "level"),
    (("is past the limit", "is past {cap}"), "names ['cap']"),
    (("    source: common practice\n", ""), "source"),
], ids=["state", "variable", "drug-class", "no-condition", "level", "message-field", "no-source"])
def test_cautions_are_checked(good_copy, edit, what):
    assert edit[0] in _CAUTIONS
    (good_copy / "cautions.yaml").write_text(_CAUTIONS.replace(edit[0], edit[1], 1))
    _, problems = check_knowledge(good_copy)
    errors = [str(x) for x in problems if x.level == "error" and "cautions.yaml" in str(x)]
    assert len(errors) == 1 and what in errors[0], errors


def _real_copy(tmp_path, name):
    import shutil

    from tubulo.paths import knowledge_dir

    dst = tmp_path / "kn"
    shutil.copytree(knowledge_dir(), dst)
    return dst, dst / name


@pytest.mark.parametrize("name,edit,what", [
    ("priors.yaml", ("evidence_weight: 1.0", "evidence_weight: 0"), "evidence_weight"),
    ("priors.yaml", ("panel_coverage: 0.95", "panel_coverage: 1.5"), "panel_coverage"),
    ("priors.yaml", ("  AR: 3.0\nfamily", "  ARR: 3.0\nfamily"), "consanguinity_factor"),
    ("phrases.yaml", ("cramps: HP:0003394", "cramps: HP:003394"), "is not an HPO id"),
    ("phrases.yaml", ("cramps: HP:0003394", "cramps: HP:9999999"), "not in hpo_subset.json"),
    ("checks.yaml", ("pka: 6.1", "pka: -6.1"), "pka"),
], ids=["priors-typo", "priors-share", "priors-inheritance", "phrase-id", "phrase-unknown", "checks-sign"])
def test_runtime_settings_files_are_checked(tmp_path, name, edit, what):
    folder, path = _real_copy(tmp_path, name)
    text = path.read_text()
    assert edit[0] in text
    path.write_text(text.replace(edit[0], edit[1], 1))
    _, problems = check_knowledge(folder)
    errors = [str(x) for x in problems if x.level == "error"]
    assert len(errors) == 1 and errors[0].startswith(name) and what in errors[0], errors


def test_a_mistyped_settings_field_is_named_with_the_closest_field(tmp_path):
    folder, path = _real_copy(tmp_path, "priors.yaml")
    path.write_text(path.read_text().replace("drug_on_list_weight: 0.6", "drug_on_list_weigth: 0.6", 1))
    _, problems = check_knowledge(folder)
    errors = sorted(str(x) for x in problems if x.level == "error")
    assert len(errors) == 2, errors  # the typed field is unknown, the intended one is missing
    assert any("drug_on_list_weigth: unknown field" in e and "did you mean drug_on_list_weight?" in e for e in errors)
    assert any("drug_on_list_weight: missing required field" in e for e in errors)
