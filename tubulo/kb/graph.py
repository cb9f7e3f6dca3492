"""The knowledge graph (networkx MultiDiGraph) and the signed propagation along it.

Node kinds (attribute `kind`): segment, transporter, gene, hormone, drug (`role` class | member),
exposure, mechanism, finding (a variable, `var:state` for each state, an HPO feature `HP:nnnnnnn`),
disorder (`candidate_kind` inherited | acquired).  A hormone whose id is also a variable id (renin,
aldosterone) is one node: the hormone's amount is the measured level.  Gene nodes are `gene:SYMBOL`,
drug member nodes `drug:inn`.

Edge kinds (attribute `kind`, every edge has `source`):
  expressed_in  transporter -> segment (`side`)       part_of      segment -> segment
  encoded_by    transporter/hormone -> gene           defect_of    disorder -> gene
  causes        node -> node/variable (`sign` +1/-1)  regulates    hormone -> node/variable (`sign`)
  acts_on       candidate/exposure -> target (`effect`, `sign`)
  exposed_to    disorder -> exposure (sign +1)        member_of    drug member -> drug class
  located_in    candidate -> segment                  manifests    candidate -> finding (`states`)
  has_state     variable -> variable:state

Propagation rule (`propagate`): a candidate starts with sign +1 at its own node; following an
`acts_on` edge multiplies by the effect's sign (loss/inhibit/decrease -1, gain/activate/increase +1),
an `exposed_to` edge by +1, a `causes`/`regulates` edge by its sign.  For every reachable node the
prediction is the sign of its shortest path (fewest edges, breadth-first in file order); when
shortest paths of both signs exist the node is `ambiguous` and both are kept.  A node's sign says
whether its amount/activity goes up (+1) or down (-1); at a variable it is compared with the
variable's `direction` map.
"""

from __future__ import annotations

from collections import deque
from typing import NamedTuple

import networkx as nx

from .loader import Knowledge
from .schema import EFFECT_SIGN, FeatureManifest

__all__ = ["build_graph", "propagate", "Prediction", "PathStep", "CAUSAL_KINDS", "gene_node", "drug_node",
           "state_node"]

CAUSAL_KINDS = frozenset({"causes", "regulates", "acts_on", "exposed_to"})


def gene_node(symbol: str) -> str:
    return f"gene:{symbol}"


def drug_node(inn: str) -> str:
    return f"drug:{inn.lower()}"


def state_node(variable: str, state: str) -> str:
    return f"{variable}:{state}"


def build_graph(kn: Knowledge, hpo_labels: dict[str, str] | None = None) -> nx.MultiDiGraph:
    """Every node and edge of the knowledge, with kinds, labels and sources."""
    hpo_labels = hpo_labels or {}
    g = nx.MultiDiGraph()
    for sid, s in kn.segments.items():
        g.add_node(sid, kind="segment", label=s.name)
    for sid, s in kn.segments.items():
        if s.part_of:
            g.add_edge(sid, s.part_of, kind="part_of", source=s.source)
    for vid, v in kn.variables.items():
        g.add_node(vid, kind="finding", label=v.label, variable=vid)
        for st in v.states:
            g.add_node(state_node(vid, st), kind="finding", label=f"{v.label}: {st.replace('_', ' ')}",
                       variable=vid, state=st, hpo=v.hpo.get(st))
            g.add_edge(vid, state_node(vid, st), kind="has_state", source="variables.yaml")
    for tid, t in kn.transporters.items():
        g.add_node(tid, kind="transporter", label=t.name, type=t.type)
        for e in t.expressed_in:
            g.add_edge(tid, e.segment, kind="expressed_in", side=e.side, source=e.source)
        for gene in t.genes:
            _gene(g, gene)
            g.add_edge(tid, gene_node(gene), kind="encoded_by", source=t.source)
    for hid, h in kn.hormones.items():
        attrs = {"variable": hid} if hid in kn.variables else {}
        g.add_node(hid, kind="hormone", label=h.name, **attrs)
        for gene in h.genes:
            _gene(g, gene)
            g.add_edge(hid, gene_node(gene), kind="encoded_by", source=h.source)
    for mid, m in kn.mechanisms.items():
        g.add_node(mid, kind="mechanism", label=m.name)
        if m.segment:
            g.add_edge(mid, m.segment, kind="located_in", source=m.source)
    for xid, x in kn.exposures.items():
        g.add_node(xid, kind="exposure", label=x.name)
    for rec in kn.edges:
        e = rec.edge
        kind = "regulates" if g.nodes[e.from_].get("kind") == "hormone" else "causes"
        g.add_edge(e.from_, e.to, kind=kind, sign=e.sign, source=e.source, note=e.note,
                   origin=f"{rec.file}:{rec.line}")
    for cid, c in kn.candidates().items():
        ckind = kn.candidate_kind(cid)
        if ckind == "drug":
            g.add_node(cid, kind="drug", role="class", candidate_kind="drug", label=c.name)
            for m in c.members:
                g.add_node(drug_node(m.inn), kind="drug", role="member", label=m.inn, atc=m.atc)
                g.add_edge(drug_node(m.inn), cid, kind="member_of", source=c.source)
        else:
            g.add_node(cid, kind="disorder", candidate_kind=ckind, label=c.name)
            for gene in c.genes:
                _gene(g, gene)
                g.add_edge(cid, gene_node(gene), kind="defect_of", source=c.source)
            for x in c.exposures:
                g.add_edge(cid, x, kind="exposed_to", sign=1, source=c.source, note="exposure")
        for s in c.segments:
            g.add_edge(cid, s, kind="located_in", source=c.source)
        for key, m in kn.manifests.get(cid, {}).items():
            if isinstance(m, FeatureManifest):
                if key not in g:
                    g.add_node(key, kind="finding", label=hpo_labels.get(key, key), hpo=key)
                g.add_edge(cid, key, kind="manifests", states={"present": m.present}, source=m.source)
            else:
                g.add_edge(cid, key, kind="manifests", states=dict(m.states), source=m.source)
    for sec in ("disorders", "drug_classes", "exposures"):
        for cid, c in getattr(kn, sec).items():
            for a in c.acts_on:
                g.add_edge(cid, a.target, kind="acts_on", effect=a.effect, sign=EFFECT_SIGN[a.effect],
                           source=a.source, note=a.note or a.effect)
    return g


def _gene(g: nx.MultiDiGraph, symbol: str) -> None:
    if gene_node(symbol) not in g:
        g.add_node(gene_node(symbol), kind="gene", label=symbol)


class PathStep(NamedTuple):
    """One hop of a causal path: the node reached, the edge that led there, the sign so far."""

    node: str
    label: str
    kind: str
    edge: str
    sign: int
    direction: int
    source: str
    note: str | None

    def as_dict(self) -> dict:
        return {"node": self.node, "label": self.label, "kind": self.kind, "edge": self.edge,
                "sign": self.sign, "direction": self.direction, "source": self.source, "note": self.note}


class Prediction(NamedTuple):
    """The signed reach of a candidate at one node: sign(s) of its shortest paths and one path per sign."""

    node: str
    distance: int
    signs: tuple[int, ...]
    paths: dict[int, tuple[PathStep, ...]]

    @property
    def ambiguous(self) -> bool:
        return len(self.signs) > 1

    @property
    def sign(self) -> int | None:
        return self.signs[0] if len(self.signs) == 1 else None


def propagate(g: nx.MultiDiGraph, start: str, start_sign: int = 1) -> dict[str, Prediction]:
    """Shortest signed paths from `start` along causal edges (rule in the module docstring)."""
    dist: dict[tuple[str, int], int] = {(start, start_sign): 0}
    parent: dict[tuple[str, int], tuple[tuple[str, int], dict]] = {}
    queue = deque([(start, start_sign)])
    while queue:
        state = queue.popleft()
        node, sign = state
        for _, nxt, data in g.out_edges(node, data=True):
            if data["kind"] not in CAUSAL_KINDS:
                continue
            if data["kind"] == "acts_on" and node != start and g.nodes[node].get("kind") != "exposure":
                continue
            new = (nxt, sign * data.get("sign", 1))
            if new not in dist:
                dist[new] = dist[state] + 1
                parent[new] = (state, data)
                queue.append(new)
    best: dict[str, int] = {}
    for (node, _), d in dist.items():
        best[node] = min(d, best.get(node, d))
    out: dict[str, Prediction] = {}
    for node, d in best.items():
        if node == start:
            continue
        signs = tuple(s for s in (1, -1) if dist.get((node, s)) == d)
        out[node] = Prediction(node, d, signs, {s: _path(g, parent, (node, s)) for s in signs})
    return out


def _path(g, parent, state) -> tuple[PathStep, ...]:
    steps: list[PathStep] = []
    while state in parent:
        prev, data = parent[state]
        node, sign = state
        attrs = g.nodes[node]
        steps.append(PathStep(node=node, label=attrs.get("label", node), kind=attrs.get("kind", "?"),
                              edge=data["kind"], sign=data.get("sign", 1), direction=sign,
                              source=data.get("source", ""), note=data.get("note")))
        state = prev
    return tuple(reversed(steps))
