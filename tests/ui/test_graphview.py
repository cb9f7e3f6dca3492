"""Browsing the knowledge graph: from a segment to its transporters, their genes, the disorders and
drugs that act there, and back."""

from __future__ import annotations

from tubulo.ui.graphview import edge_detail, neighbour_groups, search_nodes


def _group(groups, title):
    return next(g for g in groups if g.title == title)


def test_segment_to_transporter_to_gene_to_disorder(tables, graph):
    nodes, adj = tables["nodes"], graph["adjacency"]
    hosts = _group(neighbour_groups(nodes, adj, "dct1"), "hosts")
    assert "ncc" in [n.node for n in hosts.items]
    genes = _group(neighbour_groups(nodes, adj, "ncc"), "encoded by")
    assert [n.node for n in genes.items] == ["gene:SLC12A3"]
    defective = _group(neighbour_groups(nodes, adj, "gene:SLC12A3"), "defective in")
    assert "gitelman" in [n.node for n in defective.items]
    acted = _group(neighbour_groups(nodes, adj, "ncc"), "acted on by")
    kinds = {n.kind for n in acted.items}
    assert "drug" in kinds and "disorder" in kinds
    back = _group(neighbour_groups(nodes, adj, "gitelman"), "acts in")
    assert "dct1" in [n.node for n in back.items]


def test_each_edge_is_listed_once_per_direction(tables, graph):
    nodes, adj = tables["nodes"], graph["adjacency"]
    for node in ("dct1", "ncc", "gitelman", "thiazide_diuretic"):
        for g in neighbour_groups(nodes, adj, node):
            ids = [n.node for n in g.items]
            assert len(ids) == len(set(ids)), (node, g.title)


def test_search_by_symbol_label_and_part_of_a_label(tables, graph):
    nodes, lookup = tables["nodes"], graph["lookup"]
    assert search_nodes(nodes, lookup, "SLC12A3")[0] == "gene:SLC12A3"
    assert search_nodes(nodes, lookup, "slc12a3")[0] == "gene:SLC12A3"
    assert "dct1" in search_nodes(nodes, lookup, "DCT1")[:3]
    hits = search_nodes(nodes, lookup, "thick ascending")
    assert "tal" in hits
    assert search_nodes(nodes, lookup, "") == []


def test_edge_detail_words_sign_effect_and_side():
    assert edge_detail({"effect": "inhibit", "sign": -1}) == "inhibit; opposite direction"
    assert edge_detail({"side": "apical"}) == "apical side"
    assert edge_detail({}) == ""
