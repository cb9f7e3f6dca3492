"""Gene panel: posterior mass per gene over the inherited candidates, and the smallest covering list."""

from __future__ import annotations

from typing import Any, Mapping, NamedTuple, Sequence

from .scoring import Scored

__all__ = ["Panel", "gene_panel"]


class Panel(NamedTuple):
    genes: tuple[tuple[str, float], ...]  # (HGNC symbol, share of the inherited posterior mass)
    cover: tuple[str, ...]  # smallest greedy list covering `coverage` of that mass
    coverage: float
    covered: float
    inherited_mass: float  # posterior probability that an inherited candidate explains the case


def gene_panel(scored: Sequence[Scored], tables: Mapping[str, Any], coverage: float = 0.95) -> Panel:
    cands = tables["candidates"]
    inherited = [(s.id, s.probability) for s in scored if s.id in cands and cands[s.id]["kind"] == "inherited"
                 and cands[s.id].get("genes")]
    mass = sum(p for _, p in inherited)
    if mass <= 0:
        return Panel((), (), coverage, 0.0, 0.0)
    per_gene: dict[str, float] = {}
    for cid, p in inherited:
        for g in cands[cid]["genes"]:
            per_gene[g] = per_gene.get(g, 0.0) + p / mass
    genes = tuple(sorted(per_gene.items(), key=lambda kv: (-kv[1], kv[0])))
    # a candidate counts as covered when all its genes are on the list (digenic or multi-gene entities)
    gene_sets = {cid: frozenset(cands[cid]["genes"]) for cid, _ in inherited}
    chosen: list[str] = []
    chosen_set: set[str] = set()
    covered = 0.0
    for cid, p in sorted(inherited, key=lambda x: (-x[1], x[0])):
        if covered >= coverage - 1e-12:
            break
        for g in cands[cid]["genes"]:
            if g not in chosen_set:
                chosen.append(g)
                chosen_set.add(g)
        covered = sum(q for c, q in inherited if gene_sets[c] <= chosen_set) / mass
    return Panel(tuple((g, round(v, 6)) for g, v in genes), tuple(chosen), coverage, round(covered, 6), mass)
