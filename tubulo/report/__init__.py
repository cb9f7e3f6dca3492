"""The printable case report (`tubulo report CASE -o OUT.html|OUT.md`): builder, HTML and Markdown
renderers, the probability chart and the nephron map.

Names are imported on first use, so that registering the command costs nothing at start-up.
"""

from __future__ import annotations

from typing import Any

__all__ = ["SECTIONS", "Report", "build_report", "render_html", "render_markdown", "write_atomic", "make_report"]

_WHERE = {"SECTIONS": "builder", "Report": "builder", "build_report": "builder", "render_html": "html",
          "render_markdown": "markdown", "write_atomic": "write"}


def __getattr__(name: str) -> Any:
    if name in _WHERE:
        from importlib import import_module

        return getattr(import_module(f"{__name__}.{_WHERE[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def make_report(result: Any, fmt: str, *, date: str, top: int = 10, detail: int = 3) -> str:
    """The report text of a ranking result in `fmt` (html | md)."""
    from .builder import build_report
    from .html import render_html
    from .markdown import render_markdown

    report = build_report(result, date=date, top=top, detail=detail)
    return render_html(report) if fmt == "html" else render_markdown(report)
