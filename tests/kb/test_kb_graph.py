"""The knowledge graph: node and edge kinds, sources on every edge, signed shortest-path propagation."""

from __future__ import annotations

import networkx as nx
import pytest
from hypothesis import given, settings, strategies as st

from tubulo.kb.graph import build_graph, propagate
from tubulo.kb.loader import load_knowledge

from .conftest import GOOD


@pytest.fixture(scope="module")
def graph():
    return build_graph(load_knowledge(GOOD))


def test_node_kinds(graph):
    kinds = {d["kind"] for _, d in graph.nodes(data=True)}
    assert kinds == {"segment", "transporter", "gene", "hormone", "drug", "exposure", "mechanism", "finding",
                     "disorder"}
    assert graph.nodes["drug:furosemide"]["role"] == "member"
    assert graph.nodes["loop_diuretic"]["role"] == "class"
    assert graph.nodes["serum_potassium:low"]["hpo"] == "HP:0002900"
    # a hormone that is also a measured variable is one node
    assert graph.nodes["renin"]["kind"] == "hormone" and graph.nodes["renin"]["variable"] == "renin"


def test_edge_kinds_and_sources(graph):
    kinds = {d["kind"] for *_, d in graph.edges(data=True)}
    assert {"expressed_in", "encoded_by", "causes", "regulates", "acts_on", "defect_of", "manifests",
            "member_of", "exposed_to", "part_of", "has_state"} <= kinds
    for u, v, d in graph.edges(data=True):
        assert d.get("source"), (u, v, d)
    sides = {d["side"] for _, _, d in graph.out_edges("romk", data=True) if d["kind"] == "expressed_in"}
    assert sides == {"apical"}
    assert graph.has_edge("gitelman", "gene:SLC12A3")
    assert any(d["kind"] == "acts_on" and d["sign"] == -1 for _, _, d in graph.out_edges("gitelman", data=True))


def test_gitelman_paths(graph):
    """NCC loss: hypokalaemia and alkalosis via distal Na delivery, hypocalciuria, Mg wasting, high renin."""
    reach = propagate(graph, "gitelman")
    expected = {"serum_potassium": -1, "acid_base": 1, "urine_calcium": -1, "renal_mg_handling": 1,
                "serum_magnesium": -1, "renin": 1, "blood_pressure": -1, "renal_k_handling": 1}
    assert {v: reach[v].sign for v in expected} == expected
    steps = reach["serum_potassium"].paths[-1]
    assert [s.node for s in steps][:3] == ["ncc", "dct_nacl_reabsorption", "distal_na_delivery"]
    assert steps[0].edge == "acts_on" and steps[0].sign == -1
    # cumulative sign is the product of the edge signs so far
    run = 1
    for s in steps:
        run *= s.sign
        assert s.direction == run


def test_exposure_route(graph):
    reach = propagate(graph, "licorice_excess")
    assert reach["licorice"].sign == 1
    assert reach["hsd11b2"].sign == -1
    assert reach["renin"].sign == -1 and reach["aldosterone"].sign == -1
    assert reach["serum_potassium"].sign == -1


def test_propagation_ignores_non_causal_edges(graph):
    reach = propagate(graph, "gitelman")
    assert "gene:SLC12A3" not in reach and "dct1" not in reach and "serum_potassium:low" not in reach


def _chain(signs):
    g = nx.MultiDiGraph()
    g.add_node("c", kind="disorder")
    g.add_edge("c", "n0", kind="acts_on", sign=signs[0], source="t")
    for i, s in enumerate(signs[1:]):
        g.add_edge(f"n{i}", f"n{i + 1}", kind="causes", sign=s, source="t")
    for n in g.nodes:
        g.nodes[n].setdefault("kind", "mechanism")
    return g


@settings(max_examples=60, deadline=None)
@given(st.lists(st.sampled_from([1, -1]), min_size=1, max_size=12))
def test_chain_sign_is_product(signs):
    g = _chain(signs)
    reach = propagate(g, "c")
    prod = 1
    for i, s in enumerate(signs):
        prod *= s
        assert reach[f"n{i}"].sign == prod
        assert reach[f"n{i}"].distance == i + 1


@settings(max_examples=40, deadline=None)
@given(st.lists(st.sampled_from([1, -1]), min_size=2, max_size=6),
       st.lists(st.sampled_from([1, -1]), min_size=2, max_size=6))
def test_two_routes_shortest_wins_and_ties_are_ambiguous(a, b):
    g = nx.MultiDiGraph()
    g.add_node("c", kind="disorder")
    for route, signs in (("a", a), ("b", b)):
        prev = "c"
        for i, s in enumerate(signs):
            nxt = "end" if i == len(signs) - 1 else f"{route}{i}"
            g.add_edge(prev, nxt, kind="acts_on" if prev == "c" else "causes", sign=s, source="t")
            prev = nxt
    for n in g.nodes:
        g.nodes[n].setdefault("kind", "mechanism")
    pa, pb = 1, 1
    for s in a:
        pa *= s
    for s in b:
        pb *= s
    got = propagate(g, "c")["end"]
    if len(a) < len(b):
        assert got.signs == (pa,)
    elif len(b) < len(a):
        assert got.signs == (pb,)
    else:
        assert set(got.signs) == {pa, pb}
        assert got.ambiguous == (pa != pb)
