"""`tubulo screen INPUT -o OUTPUT` (registered by tubulo.cli); numpy, pandas and pyarrow load only
when the command runs."""

from __future__ import annotations

import argparse
import sys

__all__ = ["add_subparser"]


def _cmd_screen(args: argparse.Namespace) -> int:
    from ..errors import TubuloError

    try:
        from .stream import print_summary, screen_file
    except ImportError as exc:  # the screen extra is not installed
        raise TubuloError(f"tubulo screen needs numpy and pyarrow ({exc.name} is missing): "
                          "pip install 'tubulo[screen]'") from None
    summary = screen_file(args.input, args.output, layout=args.layout, chunk_size=args.chunk_size, k=args.top,
                          progress=None if args.quiet else sys.stderr)
    print_summary(summary, sys.stderr)
    return 0


def add_subparser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "screen", help="batch pre-screening of a laboratory extract (CSV or Parquet, long or wide)",
        description="Screen an extract: one output row per case with its critical values, abnormal findings and "
                    "the three most probable explanations. Decision support, not a diagnosis.")
    p.add_argument("input", help="extract file (.csv or .parquet)")
    p.add_argument("-o", "--output", required=True, help="result file (.csv or .parquet)")
    p.add_argument("--layout", choices=["auto", "long", "wide"], default="auto",
                   help="long: case, section, analyte, value, unit rows; wide: one row per case (default: by columns)")
    p.add_argument("--chunk-size", type=int, default=20_000, metavar="N",
                   help="cases per chunk; memory grows with it (default 20000)")
    p.add_argument("--top", type=int, default=3, metavar="K", help="candidates per case in the output (default 3)")
    p.add_argument("--quiet", action="store_true", help="no progress bar (the summary is still printed)")
    p.set_defaults(handler=_cmd_screen)
