"""Browsing the knowledge graph: a node's neighbours grouped by edge kind and direction, and node
search by id, name, synonym, gene symbol or part of a label.  No Textual import here."""

from __future__ import annotations

from typing import Any, Mapping, NamedTuple

__all__ = ["EDGE_WORDS", "Neighbour", "NeighbourGroup", "edge_detail", "neighbour_groups", "node_title",
           "search_nodes"]

# How the browser words each edge kind, read from the current node: (outgoing, incoming)
EDGE_WORDS: dict[str, tuple[str, str]] = {
    "part_of": ("part of", "contains"),
    "expressed_in": ("found in", "hosts"),
    "located_in": ("acts in", "site of"),
    "encoded_by": ("encoded by", "encodes"),
    "defect_of": ("defect of", "defective in"),
    "acts_on": ("acts on", "acted on by"),
    "causes": ("leads to", "comes from"),
    "regulates": ("regulates", "regulated by"),
    "member_of": ("member of", "members"),
    "exposed_to": ("exposure", "exposure of"),
    "manifests": ("shows", "shown by"),
}
_GROUP_ORDER = ("part_of", "expressed_in", "located_in", "encoded_by", "defect_of", "acts_on", "regulates",
                "causes", "member_of", "exposed_to", "manifests")


class Neighbour(NamedTuple):
    node: str
    label: str
    kind: str
    edge: Mapping[str, Any]


class NeighbourGroup(NamedTuple):
    edge_kind: str
    direction: str  # out | in
    title: str
    items: tuple[Neighbour, ...]


def node_title(nodes: Mapping[str, Any], node: str) -> str:
    n = nodes.get(node) or {}
    return str(n.get("label") or node)


def neighbour_groups(nodes: Mapping[str, Any], adjacency: Mapping[str, Any], node: str) -> tuple[NeighbourGroup, ...]:
    """The neighbours of `node`, one group per (edge kind, direction), groups in a fixed reading order."""
    adj = adjacency.get(node) or {}
    groups: dict[tuple[str, str], list[Neighbour]] = {}
    for direction, end in (("out", "to"), ("in", "from")):
        for e in adj.get(direction) or []:
            other = e.get(end)
            if other is None or other == node:
                continue
            n = nodes.get(other) or {}
            groups.setdefault((e.get("kind", "?"), direction), []).append(
                Neighbour(other, str(n.get("label") or other), str(n.get("kind") or "?"), e))
    order = {k: i for i, k in enumerate(_GROUP_ORDER)}
    out = []
    for (kind, direction), items in sorted(groups.items(), key=lambda kv: (order.get(kv[0][0], 99), kv[0][0],
                                                                            kv[0][1] != "out")):
        words = EDGE_WORDS.get(kind, (kind.replace("_", " "), f"{kind.replace('_', ' ')} (from)"))
        title = words[0] if direction == "out" else words[1]
        seen: dict[str, Neighbour] = {}
        for it in items:
            seen.setdefault(it.node, it)
        out.append(NeighbourGroup(kind, direction, title,
                                  tuple(sorted(seen.values(), key=lambda n: (n.kind, n.label.lower())))))
    return tuple(out)


def edge_detail(edge: Mapping[str, Any]) -> str:
    """A short reading of an edge's attributes: effect, sign, side, note."""
    parts = []
    if edge.get("effect"):
        parts.append(str(edge["effect"]))
    sign = edge.get("sign")
    if sign in (1, -1):
        parts.append("same direction" if sign == 1 else "opposite direction")
    if edge.get("side"):
        parts.append(f"{edge['side']} side")
    if edge.get("note"):
        parts.append(str(edge["note"]))
    return "; ".join(parts)


def search_nodes(nodes: Mapping[str, Any], lookup: Mapping[str, list[str]] | None, query: str,
                 limit: int = 30) -> list[str]:
    """Node ids for `query`: exact id, name, synonym, xref or gene symbol first, then labels containing it."""
    q = query.strip()
    if not q:
        return []
    out: list[str] = []
    for cand in (q, f"gene:{q.upper()}", f"drug:{q.lower()}"):
        if cand in nodes and cand not in out:
            out.append(cand)
    for nid in (lookup or {}).get(q.lower(), []):
        if nid not in out:
            out.append(nid)
    ql = q.lower()
    starts, inside = [], []
    for nid, n in nodes.items():
        if nid in out:
            continue
        label = str(n.get("label") or nid).lower()
        if label.startswith(ql) or nid.lower().startswith(ql):
            starts.append((len(label), label, nid))
        elif ql in label:
            inside.append((len(label), label, nid))
    if lookup:
        seen = set(out) | {t[2] for t in starts + inside}
        for key, ids in lookup.items():
            if ql in key:
                for nid in ids:
                    if nid not in seen:
                        seen.add(nid)
                        inside.append((len(key) + 1000, key, nid))
    out += [nid for _, _, nid in sorted(starts)] + [nid for _, _, nid in sorted(inside)]
    return out[:limit]
