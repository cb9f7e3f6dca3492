"""`tubulo ui [CASE]` (registered by tubulo.cli); Textual is imported only when the command runs."""

from __future__ import annotations

import argparse

from .errors import TubuloError

__all__ = ["add_subparser"]


def _cmd_ui(args: argparse.Namespace) -> int:
    try:
        import textual  # noqa: F401
    except ImportError:
        raise TubuloError("the terminal workbench needs the 'textual' package: pip install 'tubulo[ui]'") from None
    from pathlib import Path

    from .ui.files import read_raw
    from .ui.model import Prefetch

    # read the case and start loading the knowledge and ranking before the screen library is imported
    path = Path(args.case) if args.case else None
    raw = read_raw(path) if path is not None and path.exists() else ({"case": path.stem} if path else None)
    prefetch = Prefetch(raw, str(path or ""))
    from .ui.app import launch

    start = "workup" if path is not None and not path.exists() else None
    return launch(raw, path, start, mono=args.mono, prefetch=prefetch)


def add_subparser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("ui", help="open the interactive workbench in the terminal (decision support, not a diagnosis)")
    p.add_argument("case", nargs="?", default=None,
                   help="case file to open (.yaml or .json); a new name starts an empty workup saved there")
    p.add_argument("--mono", action="store_true", help="monochrome display (as with NO_COLOR set)")
    p.set_defaults(handler=_cmd_ui)
