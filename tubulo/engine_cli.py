"""`tubulo rank` and `tubulo predict` (registered by tubulo.cli)."""

from __future__ import annotations

import argparse
import sys

from .errors import TubuloError

__all__ = ["add_subparser"]


def _cmd_rank(args: argparse.Namespace) -> int:
    from .case import load_case
    from .output.rank import rank_json, rank_text
    from .rank import rank_case

    result = rank_case(load_case(args.case))
    sys.stdout.write(rank_json(result, args.top) if args.json else rank_text(result, args.top or 8))
    return 0


def _cmd_predict(args: argparse.Namespace) -> int:
    from .output.predict import predict_text, resolve_candidate
    from .rank import load_tables

    tables = load_tables()
    cid = resolve_candidate(tables, args.name)
    sys.stdout.write(predict_text(tables, cid, as_json=args.json))
    return 0


def add_subparser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("rank", help="rank the candidate explanations of a case, with evidence, next tests and panel")
    p.add_argument("case", help="case file (.yaml or .json)")
    p.add_argument("--json", action="store_true", help="print the JSON document (output contract)")
    p.add_argument("--top", type=int, default=None, help="how many candidates to show (text default 8, JSON all)")
    p.set_defaults(handler=_cmd_rank)
    p = sub.add_parser("predict", help="forward view: what a drug, exposure or disorder is expected to produce, and why")
    p.add_argument("name", help="a drug (INN or class), an exposure, or a disorder id or name")
    p.add_argument("--json", action="store_true")
    p.set_defaults(handler=_cmd_predict)
