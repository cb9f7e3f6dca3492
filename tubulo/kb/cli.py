"""`tubulo knowledge check | list | show`: argparse wiring and handlers (each returns an exit code).

`add_subparser(subparsers)` registers the `knowledge` command on the main parser's subparsers; each
leaf sets `func` to its handler, called as `func(args) -> int`.
Exit codes: 0 clean, 1 problems found (check) or nothing to show, 2 bad input (unknown id).
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any, TextIO

__all__ = ["add_subparser", "cmd_check", "cmd_list", "cmd_show", "main"]

_ARROW = {1: "+", -1: "-"}


def add_subparser(subparsers: Any) -> argparse.ArgumentParser:
    """Register `knowledge` with its subcommands on an argparse subparsers object."""
    p = subparsers.add_parser("knowledge", help="check, list and show the knowledge graph",
                              description="Inspect the knowledge tubulo reasons with.")
    sub = p.add_subparsers(dest="knowledge_command", metavar="{check,list,show}")
    sub.required = True
    dir_help = "a knowledge folder other than the installed one"

    c = sub.add_parser("check", help="validate the knowledge and report physiology consistency")
    c.add_argument("--dir", default=None, help=dir_help)
    c.add_argument("--all", action="store_true", help="also print explained disagreements and warnings in full")
    c.set_defaults(func=cmd_check)

    ls = sub.add_parser("list", help="list the ranking candidates")
    ls.add_argument("--kind", choices=["inherited", "drug", "acquired"], default=None)
    ls.add_argument("--json", action="store_true", help="JSON list of {id, name, kind, xrefs, genes, segments}")
    ls.add_argument("--dir", default=None, help=dir_help)
    ls.set_defaults(func=cmd_list)

    sh = sub.add_parser("show", help="one node with its neighbours and sources")
    sh.add_argument("id", help="node id, name, synonym, gene symbol, INN, OMIM/ORPHA id or ATC code")
    sh.add_argument("--json", action="store_true")
    sh.add_argument("--dir", default=None, help=dir_help)
    sh.set_defaults(func=cmd_show)
    return p


def main(argv: list[str] | None = None) -> int:
    """Stand-alone entry (`python -m tubulo.kb.cli check`), same as `tubulo knowledge ...`."""
    parser = argparse.ArgumentParser(prog="tubulo")
    subs = parser.add_subparsers(dest="command")
    add_subparser(subs)
    args = parser.parse_args(["knowledge", *(sys.argv[1:] if argv is None else argv)])
    return args.func(args)


def _tables(args: argparse.Namespace, graph_view: bool = False):
    """The compiled tables (and graph view), or None after a short message when the knowledge is invalid."""
    from ..errors import KnowledgeError
    from .tables import load_graph_view, load_tables

    try:
        t = load_tables(args.dir)
        return (t, load_graph_view(args.dir)) if graph_view else t
    except KnowledgeError as exc:
        n = len(getattr(exc, "problems", ())) or "some"
        first = str(exc).splitlines()[1].strip() if len(str(exc).splitlines()) > 1 else str(exc)
        print(f"knowledge: the knowledge files have {n} problem(s), first: {first}\n"
              "run `tubulo knowledge check` for all of them", file=sys.stderr)
        return None


# ---------------------------------------------------------------- check


def cmd_check(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Schema, references, ids, sources and physiology consistency; 0 when clean, 1 with problems."""
    from .consistency import consistency_report
    from .graph import build_graph
    from .loader import check_knowledge

    out = out or sys.stdout
    kn, problems = check_knowledge(args.dir)
    errors = [p for p in problems if p.level == "error"]
    warnings = [p for p in problems if p.level == "warning"]
    print("tubulo knowledge check", file=out)
    if kn is not None and kn.meta:
        print(f"knowledge {kn.meta.knowledge_version} ({kn.meta.release_date}), folder {kn.folder}", file=out)
        counts = ", ".join(f"{len(getattr(kn, s))} {s.replace('_', ' ')}" for s in
                           ("segments", "transporters", "hormones", "mechanisms", "disorders", "drug_classes",
                            "exposures"))
        print(f"{len(kn.files)} files; {counts}, {len(kn.edges)} edges, {len(kn.variables)} variables", file=out)
    if errors:
        print(f"\nERRORS ({len(errors)}):", file=out)
        for p in errors:
            print(f"  {p}", file=out)
    if warnings:
        print(f"\nwarnings ({len(warnings)}):", file=out)
        for p in warnings if args.all else warnings[:20]:
            print(f"  {p}", file=out)
        if not args.all and len(warnings) > 20:
            print(f"  ... {len(warnings) - 20} more (--all)", file=out)
    n_problems = len(errors)
    if kn is not None:
        rep = consistency_report(kn, build_graph(kn))
        print(f"\nphysiology consistency: {rep.agreed}/{rep.compared} candidate-variable pairs agree "
              f"({100 * rep.rate:.1f} %); required {100 * rep.min_agreement:.0f} %", file=out)
        print(f"  of the agreements, {rep.lean_agreements} by the lean of a normal most-likely state and "
              f"{rep.bound_agreements} at a variable's bound; by the most likely state's sign alone "
              f"{100 * rep.strict_rate:.1f} %", file=out)
        dis = rep.disagreements
        print(f"  disagreements: {len(dis)} ({len(dis) - len(rep.unexplained)} explained in "
              f"consistency_exceptions.yaml, {len(rep.unexplained)} unexplained)", file=out)
        for c in dis:
            if c.reason is None or args.all:
                pred = "/".join(_ARROW[s] for s in c.predicted)
                tail = f"reason {c.reason}: {c.note}" if c.reason else "UNEXPLAINED"
                print(f"    {c.candidate} / {c.variable}: graph predicts {pred}, curated {c.curated:+d} "
                      f"(most likely {c.most_likely}) - {tail}", file=out)
        if rep.not_reached:
            print(f"  not reached: {len(rep.not_reached)} curated pairs have no causal path from the candidate "
                  "(no explanation path will be shown)", file=out)
            if args.all:
                for cid, vid in rep.not_reached:
                    print(f"    {cid} / {vid}", file=out)
        for cid, vid in rep.stale_exceptions:
            print(f"  warning: consistency_exceptions.yaml lists {cid} / {vid}, which is not a disagreement", file=out)
        if rep.rate < rep.min_agreement:
            n_problems += 1
        n_problems += len(rep.unexplained)
    print(f"\nresult: {'clean' if n_problems == 0 else f'{n_problems} problem(s)'}", file=out)
    return 0 if n_problems == 0 else 1


# ---------------------------------------------------------------- list


def cmd_list(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Every candidate (optionally of one kind), as text or JSON."""
    out = out or sys.stdout
    t = _tables(args)
    if t is None:
        return 2
    rows = [{"id": c["id"], "name": c["name"], "kind": c["kind"], "xrefs": list(c["xrefs"]),
             "genes": list(c["genes"]), "segments": list(c["segments"])}
            for c in t["candidates"].values() if args.kind is None or c["kind"] == args.kind]
    if args.json:
        json.dump(rows, out, indent=1)
        out.write("\n")
        return 0
    if not rows:
        print("no candidates", file=out)
        return 1
    w = max(len(r["id"]) for r in rows)
    for r in rows:
        extra = ", ".join(r["genes"]) or ", ".join(r["xrefs"][:3])
        print(f"{r['id']:<{w}}  {r['kind']:<9}  {r['name']}" + (f"  [{extra}]" if extra else ""), file=out)
    print(f"{len(rows)} candidates", file=out)
    return 0


# ---------------------------------------------------------------- show


def cmd_show(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """One node, its neighbours grouped by edge kind with sources, and a candidate's causal paths."""
    from .tables import find_nodes

    out = out or sys.stdout
    got = _tables(args, graph_view=True)
    if got is None:
        return 2
    t, view = got
    hits = find_nodes(t, args.id, view["lookup"])
    if not hits:
        print(f"knowledge show: no node matches {args.id!r} (expected a node id, name, synonym, gene, INN, "
              "OMIM/ORPHA id or ATC code; see `tubulo knowledge list`)", file=sys.stderr)
        return 2
    if len(hits) > 1:
        print(f"knowledge show: {args.id!r} matches several nodes: {', '.join(hits)}; give one id", file=sys.stderr)
        return 2
    nid = hits[0]
    node = t["nodes"][nid]
    adj = view["adjacency"].get(nid, {"out": [], "in": []})
    cand = t["candidates"].get(nid)
    paths = t["paths"].get(nid, {})
    if args.json:
        json.dump({"id": nid, "node": node, "adjacency": adj, "candidate": cand, "paths": paths}, out, indent=1)
        out.write("\n")
        return 0
    print(f"{nid}  [{node.get('kind')}]  {node.get('label', nid)}", file=out)
    if cand:
        for key in ("kind", "xrefs", "genes", "inheritance", "onset", "prevalence", "segments", "exposures"):
            val = cand.get(key)
            if val not in (None, [], ""):
                print(f"  {key}: {', '.join(map(str, val)) if isinstance(val, list) else val}", file=out)
        for m in cand.get("members", []):
            print(f"  member: {m['inn']} ({m['atc'] or 'no ATC'})" +
                  (f" also {', '.join(m['synonyms'])}" if m["synonyms"] else ""), file=out)
        print(f"  source: {cand['source']}", file=out)
    for direction, title in (("out", "->"), ("in", "<-")):
        edges = adj[direction]
        by_kind: dict[str, list[dict]] = {}
        for e in edges:
            by_kind.setdefault(e["kind"], []).append(e)
        for kind, es in by_kind.items():
            if kind == "manifests" and cand:
                continue  # listed with their distributions below
            print(f"  {title} {kind}:", file=out)
            for e in es:
                e = {**e, "node": e["to"] if direction == "out" else e["from"]}
                other = t["nodes"].get(e["node"], {})
                tags = [f"sign {e['sign']:+d}" if "sign" in e and kind not in ("manifests",) else "",
                        e.get("effect", "") if kind == "acts_on" else "", e.get("side", "")]
                tags = ", ".join(x for x in tags if x)
                print(f"     {e['node']} ({other.get('label', e['node'])})" + (f" [{tags}]" if tags else "")
                      + f"  source: {e.get('source', '')}" + (f"  note: {e['note']}" if e.get("note")
                                                            and kind != "acts_on" else ""), file=out)
    if cand and cand["manifests"]:
        print("  manifests:", file=out)
        for key, states in cand["manifests"].items():
            dist = ", ".join(f"{s} {p:g}" for s, p in states.items())
            print(f"     {key}: {dist}  source: {cand['manifest_sources'][key]}", file=out)
    if paths:
        print("  causal paths (shortest signed path from the candidate's target):", file=out)
        for vid, p in paths.items():
            chain = " ".join(f"{'->' if i else ''}{s['node']}({_ARROW[s['direction']]})"
                             for i, s in enumerate(p["steps"]))
            flag = " ambiguous" if p["ambiguous"] else ""
            print(f"     {vid}: {chain}{flag}", file=out)
    if cand:
        print(f"\nNote: {t['meta'].get('caution', '').strip()}", file=out)
    return 0


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
