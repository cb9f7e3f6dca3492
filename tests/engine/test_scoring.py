"""The scorer against a hand-computed Bayesian example, and its invariants (property tests)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tubulo.case import parse_case
from tubulo.findings import Finding, Findings
from tubulo.paths import read_knowledge_yaml
from tubulo.scoring import RESIDUAL_ID, score, state_probability

PRIORS = read_knowledge_yaml("priors.yaml")


def _tables(leak=0.0, cap=50.0, alpha=1.0, weight=1.0):
    # A two-candidate knowledge fixture: only its arithmetic is checked, against Bayes' theorem.
    variables = {
        "v1": {"label": "v1", "states": ["low", "normal"], "background": {"low": 0.5, "normal": 0.5}},
        "v2": {"label": "v2", "states": ["present", "absent"], "background": {"present": 0.2, "absent": 0.8}},
        "v3": {"label": "v3", "states": ["high", "normal"], "background": {"high": 0.25, "normal": 0.75}},
    }
    candidates = {
        "a": {"kind": "acquired", "name": "A", "prevalence": 0.3,
              "manifests": {"v1": {"low": 0.9, "normal": 0.1}, "v2": {"present": 0.6, "absent": 0.4},
                            "v3": {"high": 0.5, "normal": 0.5}}},
        "b": {"kind": "acquired", "name": "B", "prevalence": 0.1,
              "manifests": {"v1": {"low": 0.2, "normal": 0.8}, "v2": {"present": 0.1, "absent": 0.9},
                            "v3": {"high": 0.9, "normal": 0.1}}},
    }
    return {"scoring": {"leak": leak, "llr_cap": cap, "prior_exponent": alpha, "min_prior": 1e-9,
                        "evidence_weight": weight},
            "variables": variables, "candidates": candidates}


def _findings(**states):
    return Findings({v: Finding(v, s, v, None, "test") for v, s in states.items()}, (), ())


def test_hand_computed_two_candidates_three_findings():
    # Bayes' theorem: P(c | x) = P(c) P(x | c) / sum_k P(k) P(x | k); the background terms cancel
    # except for the residual candidate, whose likelihood ratio is 1 by definition.
    tables = _tables()
    case = parse_case({"case": "bayes"})
    obs = dict(v1="low", v2="present", v3="high")
    scored = {s.id: s.probability for s in score(case, _findings(**obs), tables)}
    bg = {"v1": 0.5, "v2": 0.2, "v3": 0.25}
    lik_a = 0.9 * 0.6 * 0.5
    lik_b = 0.2 * 0.1 * 0.9
    lik_bg = bg["v1"] * bg["v2"] * bg["v3"]
    w_a, w_b = 0.3, 0.1
    w_r = PRIORS["residual_weight"]
    z = w_a * lik_a + w_b * lik_b + w_r * lik_bg
    assert scored["a"] == pytest.approx(w_a * lik_a / z, rel=1e-12)
    assert scored["b"] == pytest.approx(w_b * lik_b / z, rel=1e-12)
    assert scored[RESIDUAL_ID] == pytest.approx(w_r * lik_bg / z, rel=1e-12)
    # hand arithmetic: 0.3 * 0.27 = 0.081, 0.1 * 0.018 = 0.0018
    assert w_a * lik_a == pytest.approx(0.081) and w_b * lik_b == pytest.approx(0.0018)


def test_evidence_weight_tempers_the_likelihood():
    # with evidence weight T the posterior is prior x likelihood ** T (a tempered Bayes update)
    tables = _tables(weight=0.5)
    case = parse_case({"case": "bayes"})
    scored = {s.id: s.probability for s in score(case, _findings(v1="low", v2="present", v3="high"), tables)}
    bg = 0.5 * 0.2 * 0.25
    ra, rb = (0.9 * 0.6 * 0.5 / bg) ** 0.5, (0.2 * 0.1 * 0.9 / bg) ** 0.5
    z = 0.3 * ra + 0.1 * rb + PRIORS["residual_weight"]
    assert scored["a"] == pytest.approx(0.3 * ra / z, rel=1e-12)


def test_leak_gives_unlisted_states_a_small_share():
    p = state_probability({"low": 1.0}, ["low", "normal", "high"], "high", leak=0.03)
    assert p == pytest.approx(0.01)
    assert state_probability({"low": 1.0}, ["low", "normal", "high"], "low", leak=0.03) == pytest.approx(0.97 + 0.01)


def test_cap_limits_one_variable():
    tables = _tables(cap=0.5)
    case = parse_case({"case": "cap"})
    (a,) = [s for s in score(case, _findings(v1="low"), tables) if s.id == "a"]
    assert a.evidence[0].log_lr == pytest.approx(0.5)


state_sets = st.fixed_dictionaries({}, optional={"v1": st.sampled_from(["low", "normal"]),
                                                 "v2": st.sampled_from(["present", "absent"]),
                                                 "v3": st.sampled_from(["high", "normal"])})


@settings(max_examples=60, deadline=None)
@given(state_sets, st.floats(0.0, 0.2), st.floats(0.5, 5.0))
def test_probabilities_sum_to_one(obs, leak, cap):
    scored = score(parse_case({"case": "p"}), _findings(**obs), _tables(leak, cap))
    assert math.isclose(sum(s.probability for s in scored), 1.0, rel_tol=1e-12)
    assert [s.probability for s in scored] == sorted((s.probability for s in scored), reverse=True)


@settings(max_examples=60, deadline=None)
@given(state_sets)
def test_a_variable_with_likelihood_ratio_one_changes_nothing(obs):
    tables = _tables()
    # v4: every candidate gives it exactly the background distribution
    tables["variables"]["v4"] = {"label": "v4", "states": ["x", "y"], "background": {"x": 0.3, "y": 0.7}}
    for c in tables["candidates"].values():
        c["manifests"]["v4"] = {"x": 0.3, "y": 0.7}
    case = parse_case({"case": "p"})
    before = {s.id: s.probability for s in score(case, _findings(**obs), tables)}
    after = {s.id: s.probability for s in score(case, _findings(**obs, v4="x"), tables)}
    for k in before:
        assert after[k] == pytest.approx(before[k], rel=1e-12, abs=1e-15)


@settings(max_examples=40, deadline=None)
@given(st.permutations(["v1", "v2", "v3"]))
def test_input_order_does_not_matter(order):
    obs = {"v1": "low", "v2": "absent", "v3": "high"}
    case = parse_case({"case": "p"})
    ref = [(s.id, s.probability) for s in score(case, _findings(**obs), _tables(0.02, 3.0))]
    got = [(s.id, s.probability) for s in score(case, _findings(**{k: obs[k] for k in order}), _tables(0.02, 3.0))]
    assert got == ref


def test_all_candidates_at_once_equal_one_candidate_at_a_time():
    # the per-state index of `likelihood_tables` must give each candidate exactly `likelihood_table`'s list
    from pathlib import Path

    import yaml

    from tubulo.findings import derive_findings
    from tubulo.rank import load_tables
    from tubulo.scoring import _context, likelihood_table, likelihood_tables, observations
    from tubulo.workup import assess

    tables = load_tables()
    folder = Path(__file__).resolve().parents[1] / "vignettes"
    for path in sorted(folder.glob("v-*.yaml"))[::7]:
        case = parse_case(yaml.safe_load(path.read_text(encoding="utf-8"))["case"], str(path))
        ctx = _context(observations(derive_findings(assess(case)), tables))
        lists = likelihood_tables(ctx, tables)
        assert set(lists) == set(tables["candidates"])
        for cid in tables["candidates"]:
            assert lists[cid] == likelihood_table(cid, ctx, tables), (path.name, cid)
