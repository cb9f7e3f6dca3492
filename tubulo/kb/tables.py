"""The compiled knowledge tables, loaded from the on-disk cache (fast path of every case run).

`load_tables()` imports neither networkx, pydantic nor numpy when the cache is warm: it hashes the
knowledge files, unpickles plain data, and only on a miss calls `compile.build_tables`.
Treat the returned dict as read-only: it is shared within the process, and equal small dicts
and strings inside it are one object (see `compile._share`).

Layout (`tables_version` 1):
  meta            {knowledge_version, release_date, hpo_release, description, caution, checks,
                   knowledge_hash, files}
  scoring         {leak, llr_cap, prior_exponent, min_prior, source, notes}
  variables       {variable: {label, states, direction, hpo, gate, background, cost}}
  hpo_labels      {HP:id: label} for the HPO ids the knowledge uses (from hpo_subset.json when present)
  candidates      {id: {id, name, kind (inherited|acquired|drug), synonyms, xrefs (OMIM:/ORPHA:, or
                   ATC:code of each drug member), genes, segments, inheritance, onset, prevalence,
                   prevalence_source, exposures, acts_on [{target, effect, sign, source, note}],
                   members [{inn, atc, synonyms}], atc_prefix [..], manifests {variable|HP:id:
                   {state: p}} (HPO features as {present, absent}), manifest_sources {key: source},
                   notes, source, origin "file:line"}}    in file order
  exposures       {id: {id, name, synonyms, acts_on, source}}
  drug_index      {inn or synonym, lower-case: [{class, inn}]}
  atc_index       {ATC code: [{class, inn}]}
  exposure_index  {id, name or synonym, lower-case: exposure id}
  paths           {candidate: {variable: {predicted (+1|-1|None when ambiguous), ambiguous, distance,
                   curated (sign of the curated most likely state, or None), steps, alternative}}}
                   for each variable the candidate manifests and reaches; a step is
                   {node, label, kind, edge, sign, direction, source, note}: `edge` is the kind of
                   the edge that led to `node`, `sign` that edge's sign, `direction` the cumulative
                   sign at `node`.  The first step is the candidate's target (edge acts_on).
  nodes           {node id: {kind, label, ...attributes}}
  -- graph view (`load_graph_view()`, a second cache entry) --
  adjacency       {node id: {out: [edge], in: [edge]}}; an edge is {from, to, kind, source, and
                   sign / effect / side / note / origin where they apply}, the same dict at both ends
  lookup          {lower-case id, label, synonym, xref, INN, ATC, gene symbol: [node ids]}
  consistency     {compared, agreed, rate, strict_rate, lean_agreements, bound_agreements, min_agreement,
                   disagreements [...]}
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["load_tables", "load_graph_view", "folder_hash", "find_nodes", "TABLES_VERSION", "GRAPH_VIEW_KEYS"]

TABLES_VERSION = 2  # raise when the layout below changes, so that old caches are not read
GRAPH_VIEW_KEYS = ("adjacency", "lookup")


def folder_hash(folder: Path) -> str:
    """The cache key of a knowledge folder other than the installed one (same rule as `knowledge_hash`)."""
    from ..cache import content_hash

    return content_hash(Path(folder))


def _key(folder: Path | str | None) -> str:
    from ..cache import knowledge_hash

    return (knowledge_hash() if folder is None else "f" + folder_hash(Path(folder))) + f"-t{TABLES_VERSION}"


def _build_both(folder: Path | str | None, key: str) -> tuple[dict[str, object], dict[str, object]]:
    """Compile once; store the graph view in its own cache entry and return (core, graph view)."""
    from ..cache import cached
    from .compile import build_tables

    full = build_tables(folder, key=key)
    view = {k: full.pop(k) for k in GRAPH_VIEW_KEYS}
    cached("tables_graph", lambda: view, key=key)
    return full, view


def load_tables(folder: Path | str | None = None) -> dict[str, object]:
    """The compiled tables of the installed knowledge (or of `folder`), from cache when warm.

    `adjacency` and `lookup` (used by `tubulo knowledge show`) are kept in a second cache entry so a
    case run does not unpickle them; `load_graph_view()` returns them."""
    from ..cache import cached

    key = _key(folder)
    return cached("tables", lambda: _build_both(folder, key)[0], key=key)


def load_graph_view(folder: Path | str | None = None) -> dict[str, object]:
    """{adjacency, lookup} of the compiled tables (see the layout above), from cache when warm."""
    from ..cache import cached

    key = _key(folder)
    return cached("tables_graph", lambda: _build_both(folder, key)[1], key=key)


def find_nodes(tables: dict[str, object], query: str, lookup: dict[str, list[str]] | None = None) -> list[str]:
    """Node ids matching `query`: an exact id first, else a case-insensitive name, synonym or xref
    (from `lookup` of the graph view; `tables["lookup"]` when the tables were compiled whole)."""
    if query in tables["nodes"]:
        return [query]
    for prefix in ("gene:", "drug:"):
        if prefix + query in tables["nodes"]:
            return [prefix + query]
    if "gene:" + query.upper() in tables["nodes"]:
        return ["gene:" + query.upper()]
    lookup = lookup if lookup is not None else tables["lookup"]
    return list(lookup.get(query.lower(), []))
