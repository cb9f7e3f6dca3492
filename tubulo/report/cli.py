"""`tubulo report CASE -o OUT.html|OUT.md` (registered by tubulo.cli)."""

from __future__ import annotations

import argparse
import sys

from ..errors import TubuloError

__all__ = ["add_subparser"]


def _date(text: str | None) -> str:
    import datetime

    if text is None:
        return datetime.date.today().isoformat()
    try:
        return datetime.date.fromisoformat(text).isoformat()
    except ValueError:
        raise TubuloError(f"--date: {text!r} is not a calendar date; expected YYYY-MM-DD, e.g. 2026-03-14") from None


def _count(flag: str, value: int, low: int, high: int) -> int:
    if not low <= value <= high:
        raise TubuloError(f"{flag}: {value} is out of range; expected a whole number from {low} to {high}")
    return value


def _cmd_report(args: argparse.Namespace) -> int:
    from ..case import load_case
    from ..rank import rank_case
    from . import make_report
    from .write import format_for, write_atomic

    fmt = format_for(args.output, args.format if args.output != "-" else (args.format or "html"))
    date = _date(args.date)
    top = _count("--top", args.top, 1, 200)
    detail = _count("--detail", args.detail, 0, 10)
    result = rank_case(load_case(args.case))
    text = make_report(result, fmt, date=date, top=top, detail=detail)
    crit = [c for c in result.cautions if c.level == "critical"]
    if args.output == "-":
        sys.stdout.write(text)
    else:
        size = write_atomic(args.output, text)
        print(f"tubulo: wrote {args.output} ({fmt}, {size} bytes)", file=sys.stderr)
    for c in crit:
        print(f"tubulo: !!! CRITICAL: {c.message}", file=sys.stderr)
    return 0


def add_subparser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("report", help="write a printable report of a case (HTML or Markdown, self-contained)")
    p.add_argument("case", help="case file (.yaml or .json)")
    p.add_argument("-o", "--output", required=True, help="report file ending in .html or .md ('-' for stdout)")
    p.add_argument("--format", default=None, help="html or md (default: from the output suffix)")
    p.add_argument("--date", default=None, help="date printed on the report, YYYY-MM-DD (default: today)")
    p.add_argument("--top", type=int, default=10, help="how many candidates the differential lists (default 10)")
    p.add_argument("--detail", type=int, default=3, help="how many leading candidates get evidence and the nephron "
                                                         "map (default 3, at most 10)")
    p.set_defaults(handler=_cmd_report)
