"""Writing a report file atomically: a temporary file in the target folder, then os.replace."""

from __future__ import annotations

from pathlib import Path

from ..atomic import replace_file
from ..errors import TubuloError

__all__ = ["FORMATS", "format_for", "write_atomic"]

FORMATS = {".html": "html", ".htm": "html", ".md": "md", ".markdown": "md"}


def format_for(out: str, given: str | None) -> str:
    """The format to write: `given` (html|md) when set, else from the output file's suffix."""
    if given:
        if given not in ("html", "md"):
            raise TubuloError(f"--format: {given!r} is not a report format; expected html or md")
        return given
    suffix = Path(out).suffix.lower()
    if suffix not in FORMATS:
        raise TubuloError(f"-o/--output: {out!r} ends in {suffix or 'no suffix'!r}; expected a name ending in "
                          ".html or .md (or give --format html|md)")
    return FORMATS[suffix]


def write_atomic(path: str | Path, text: str) -> int:
    """Write `text` (UTF-8) to `path` so that a reader never sees a half-written file; returns bytes written."""
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise TubuloError(f"-o/--output: the folder {str(folder)!r} does not exist; create it or choose another path")
    if target.is_dir():
        raise TubuloError(f"-o/--output: {str(target)!r} is a folder; expected a file name ending in .html or .md")
    data = text.encode("utf-8")
    try:
        return replace_file(target, data)
    except OSError as exc:
        raise TubuloError(f"-o/--output: cannot write {str(target)!r}: {exc.strerror or exc}") from None
