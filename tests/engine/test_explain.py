"""What a candidate leaves unexplained: only the states variables.yaml marks abnormal count."""

from __future__ import annotations

from tubulo.explain import explain
from tubulo.findings import Finding, Findings
from tubulo.scoring import Scored

TABLES = {
    "scoring": {"leak": 0.0, "llr_cap": 10.0},
    "variables": {
        "acidification": {"label": "Urinary acidification", "states": ["impaired", "intact"], "abnormal": ["impaired"],
                          "direction": {"impaired": -1, "intact": 1}},
        "k": {"label": "Serum potassium", "states": ["low", "normal", "high"], "abnormal": ["low", "high"],
              "direction": {"low": -1, "normal": 0, "high": 1}},
        "k_secretion": {"label": "Renal potassium secretion", "states": ["appropriate", "low"], "abnormal": ["low"],
                        "direction": {"appropriate": 1, "low": -1}},
    },
    "candidates": {"x": {"kind": "acquired", "manifests": {}}},
}


def _findings(**states: str) -> Findings:
    return Findings({v: Finding(v, s, v, None, "test") for v, s in states.items()}, (), ())


def test_unremarkable_states_are_never_unexplained():
    # a direction of +1 (intact acidification, appropriate secretion) is not an abnormality
    f = _findings(acidification="intact", k="normal", k_secretion="appropriate")
    assert explain(Scored("x", 1.0, 0.0, 0.0, (), ()), f, TABLES).unexplained == ()


def test_abnormal_states_the_candidate_is_silent_on_are_unexplained():
    f = _findings(acidification="impaired", k="low", k_secretion="low")
    got = explain(Scored("x", 1.0, 0.0, 0.0, (), ()), f, TABLES).unexplained
    assert sorted(got) == ["Renal potassium secretion: low", "Serum potassium: low", "Urinary acidification: impaired"]


def test_an_abnormal_state_the_candidate_produces_is_explained():
    tables = {**TABLES, "candidates": {"x": {"kind": "acquired", "manifests": {"k": {"low": 0.9, "normal": 0.1}}}}}
    f = _findings(k="low", acidification="impaired")
    got = explain(Scored("x", 1.0, 0.0, 0.0, (), ()), f, tables).unexplained
    assert got == ("Urinary acidification: impaired",)
