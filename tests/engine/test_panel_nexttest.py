"""Gene panel coverage and next-test information gain on small fixtures (arithmetic checks)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tubulo.findings import Finding, Findings
from tubulo.nexttest import _entropy, information_gain, next_tests
from tubulo.panel import gene_panel
from tubulo.scoring import Scored


def _s(cid, p):
    return Scored(cid, p, 0.0, 0.0, (), ())


TABLES = {
    "scoring": {"leak": 0.0, "llr_cap": 10.0},
    "variables": {
        "k": {"label": "K", "states": ["low", "normal"], "background": {"low": 0.5, "normal": 0.5}, "cost": "routine"},
        "u": {"label": "U", "states": ["high", "low"], "background": {"high": 0.5, "low": 0.5}, "cost": "routine"},
    },
    "candidates": {
        "x": {"kind": "inherited", "genes": ["G1"], "manifests": {"u": {"high": 1.0}}},
        "y": {"kind": "inherited", "genes": ["G2", "G3"], "manifests": {"u": {"low": 1.0}}},
        "z": {"kind": "acquired", "genes": [], "manifests": {}},
    },
}


def test_panel_mass_and_smallest_cover():
    scored = [_s("x", 0.6), _s("y", 0.3), _s("z", 0.1)]
    panel = gene_panel(scored, TABLES, coverage=0.95)
    assert panel.inherited_mass == pytest.approx(0.9)
    genes = dict(panel.genes)
    assert genes["G1"] == pytest.approx(0.6 / 0.9) and genes["G2"] == pytest.approx(0.3 / 0.9)
    # covering 95 % of the inherited mass needs x (G1) and all genes of y (G2, G3)
    assert panel.cover == ("G1", "G2", "G3") and panel.covered == pytest.approx(1.0)
    assert gene_panel(scored, TABLES, coverage=0.6).cover == ("G1",)


def test_next_test_gain_is_the_entropy_reduction():
    # Two equally likely candidates that a test separates perfectly: expected gain = 1 bit (Shannon 1948).
    scored = [_s("x", 0.5), _s("y", 0.5)]
    tests = next_tests(scored, Findings({}, (), ()), TABLES)
    (u,) = [t for t in tests if t.variable == "u"]
    assert u.expected_bits == pytest.approx(1.0, abs=1e-4)
    assert not [t for t in tests if t.variable == "k"]  # neither candidate says anything about k


def test_observed_variables_are_not_proposed():
    scored = [_s("x", 0.5), _s("y", 0.5)]
    f = Findings({"u": Finding("u", "high", "U", None, "test")}, (), ())
    assert all(t.variable != "u" for t in next_tests(scored, f, TABLES))


# --- the information-gain identity the next-test ranking relies on -------------------------------------


def _posterior_form(pi, dists):
    """H(C) - sum_x P(x) H(C | x): the definition, one posterior per state (Cover & Thomas 2006, eq. 2.39)."""
    expected = 0.0
    for k in range(len(dists[0])):
        ps = sum(p * d[k] for p, d in zip(pi, dists))
        if ps > 0:
            expected += ps * _entropy([p * d[k] / ps for p, d in zip(pi, dists)])
    return _entropy(pi) - expected


def _normalised(xs):
    z = sum(xs)
    return [x / z for x in xs]


_weights = st.floats(min_value=1e-6, max_value=1.0, allow_nan=False)


@settings(max_examples=300, deadline=None)
@given(st.integers(min_value=1, max_value=8).flatmap(
    lambda n: st.tuples(st.lists(_weights, min_size=n, max_size=n),
                        st.integers(min_value=2, max_value=5).flatmap(
                            lambda m: st.lists(st.lists(_weights, min_size=m, max_size=m), min_size=n, max_size=n)))))
def test_information_gain_equals_the_posterior_entropy_definition(drawn):
    raw_pi, raw_dists = drawn
    pi = _normalised(raw_pi)
    dists = [_normalised(d) for d in raw_dists]
    fast = information_gain(pi, dists, [_entropy(d) for d in dists])
    assert abs(fast - _posterior_form(pi, dists)) < 1e-9
    assert fast >= -1e-12  # mutual information is never negative


def test_information_gain_of_a_perfectly_separating_test_is_the_prior_entropy():
    # two equally likely candidates, a test that reads "a" for one and "b" for the other: 1 bit
    assert abs(information_gain([0.5, 0.5], [[1.0, 0.0], [0.0, 1.0]], [0.0, 0.0]) - 1.0) < 1e-12
    # a test both candidates answer alike tells nothing
    assert abs(information_gain([0.5, 0.5], [[0.3, 0.7], [0.3, 0.7]], [_entropy([0.3, 0.7])] * 2)) < 1e-12
