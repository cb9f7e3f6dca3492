"""The `tubulo` command line: a parser builder plus `main(argv=None)`; heavy imports stay inside commands."""

from __future__ import annotations

import argparse
import sys
from typing import Sequence

from . import __version__
from .errors import CaseError, KnowledgeError, TubuloError

__all__ = ["build_parser", "main"]

EXIT_OK, EXIT_PROBLEMS, EXIT_INVALID = 0, 1, 2


def _cmd_check(args: argparse.Namespace) -> int:
    from .case import load_case
    from .output.check import check_json, check_text
    from .workup import assess

    case = load_case(args.case)
    workup = assess(case)
    out = check_json(workup) if args.json else check_text(workup, show_all=args.all)
    sys.stdout.write(out)
    return EXIT_OK


# The module that registers each command. A run that names a known command builds only that command's
# parser (a cold start pays for one module); help, an unknown command or no command builds them all.
_COMMAND_MODULES = {
    "check": "",
    "knowledge": "tubulo.kb.cli",
    "rank": "tubulo.engine_cli",
    "predict": "tubulo.engine_cli",
    "report": "tubulo.report.cli",
    "screen": "tubulo.screen.cli",
    "ui": "tubulo.ui_cli",
    "import": "tubulo.interop.cli",
    "export": "tubulo.interop.cli",
}


def _columns() -> int:
    """Help width as argparse takes it ($COLUMNS, else the terminal, less 2), without importing shutil."""
    import os

    try:
        cols = int(os.environ["COLUMNS"])
    except (KeyError, ValueError):
        try:
            cols = os.get_terminal_size(sys.__stdout__.fileno()).columns
        except (AttributeError, ValueError, OSError):
            cols = 80
    return max(cols - 2, 20)


class _Formatter(argparse.HelpFormatter):
    # argparse builds a formatter for every add_argument call, and its default width imports shutil
    # (a few ms of a cold start); the width is read here the same way instead.
    def __init__(self, prog: str, **kwargs) -> None:
        kwargs.setdefault("width", _columns())
        super().__init__(prog, **kwargs)


class _Parser(argparse.ArgumentParser):
    def __init__(self, *args, **kwargs) -> None:
        kwargs.setdefault("formatter_class", _Formatter)
        super().__init__(*args, **kwargs)


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The full parser, or (given a command name) one holding only that command and `check`."""
    parser = _Parser(
        prog="tubulo",
        description="Offline clinical reasoning about the renal tubule (decision support, not a diagnosis).",
    )
    parser.add_argument("--version", action="version", version=f"tubulo {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    p = sub.add_parser("check", help="validate a case; show measurements with reference flags and derived indices")
    p.add_argument("case", help="case file (.yaml or .json)")
    p.add_argument("--json", action="store_true", help="print JSON (keys: case, measurements, derived)")
    p.add_argument("--all", action="store_true", help="also list the indices that cannot be computed, with why")
    p.set_defaults(handler=_cmd_check)
    if command in _COMMAND_MODULES:
        modules = tuple(m for m in (_COMMAND_MODULES[command],) if m)
    else:
        modules = tuple(dict.fromkeys(m for m in _COMMAND_MODULES.values() if m))
    for module in modules:
        try:
            mod = __import__(module, fromlist=["add_subparser"])
        except ImportError:
            continue
        mod.add_subparser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    words = list(sys.argv[1:] if argv is None else argv)
    first = words[0] if words and words[0] in _COMMAND_MODULES else None
    parser = build_parser(first)
    args = parser.parse_args(argv)
    handler = getattr(args, "handler", None) or getattr(args, "func", None)
    if handler is None:
        parser.print_help()
        return EXIT_INVALID
    try:
        return int(handler(args) or 0)
    except CaseError as exc:
        where = f"{exc.source}: " if exc.source else ""
        print(f"tubulo: {where}the case is not valid ({len(exc.problems)} problem"
              f"{'s' if len(exc.problems) != 1 else ''}):", file=sys.stderr)
        for p in exc.problems:
            print(f"  - {p}", file=sys.stderr)
        return EXIT_INVALID
    except KnowledgeError as exc:
        print(f"tubulo: knowledge error: {exc}", file=sys.stderr)
        return EXIT_INVALID
    except TubuloError as exc:
        print(f"tubulo: {exc}", file=sys.stderr)
        return EXIT_INVALID
    except BrokenPipeError:
        return EXIT_OK
    except KeyboardInterrupt:
        return 130


# One-shot commands: they read, compute, print or write one file, and end. Their process holds only
# plain data with no cycles to collect and no threads, so the console entry point runs them without the
# cyclic garbage collector and leaves by os._exit once every stream is flushed: an interpreter tearing
# down the compiled knowledge object by object cost about a fifth of a cold start (bench/cold_start.py).
# The terminal application and batch screening run long and exit normally.
_ONE_SHOT = frozenset({"check", "rank", "predict", "knowledge", "report", "import", "export"})


def entry() -> None:
    """The `tubulo` console command (and `python -m tubulo.cli`): `main` on sys.argv, then exit."""
    one_shot = len(sys.argv) > 1 and sys.argv[1] in _ONE_SHOT
    if one_shot:
        import gc

        gc.disable()
    code = main()
    if not one_shot:
        raise SystemExit(code)
    import os

    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (BrokenPipeError, OSError, ValueError):
            pass
    os._exit(code)


if __name__ == "__main__":
    entry()
