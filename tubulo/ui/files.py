"""Files of the workbench: reading a case into its raw mapping, atomic saves with a backup, the
autosave recovery copy, and exports.  No Textual import here.

A save writes a temporary file in the target's folder and renames it over the target (so a crash
leaves either the old or the new file, never half of one); the previous version is kept as
`NAME.yaml.bak`.  The recovery copy of a named case is `.NAME.yaml.autosave` beside it; an unsaved
new case keeps its copy in the recovery folder (`<cache dir>/recovery` unless told otherwise).
"""

from __future__ import annotations

import json
from ..atomic import replace_file
import shutil
from pathlib import Path
from typing import Any, Mapping

from ..errors import CaseError, Problem

__all__ = [
    "UNTITLED",
    "autosave_path",
    "clear_autosave",
    "default_recovery_dir",
    "dump_case",
    "read_raw",
    "recovery_offer",
    "save_case",
    "write_atomic",
    "write_autosave",
]

UNTITLED = "untitled.yaml"


def default_recovery_dir() -> Path:
    from ..cache import cache_dir

    return cache_dir() / "recovery"


def _fmt(path: Path) -> str:
    return "json" if path.suffix.lower() == ".json" else "yaml"


def read_raw(path: str | Path) -> dict[str, Any]:
    """A case file's raw mapping (not yet validated); CaseError when the file cannot be read as a case."""
    from ..case import MAX_CASE_BYTES, read_case_text

    p = Path(path)
    try:
        if p.is_dir():
            raise CaseError([Problem("", "is a folder, not a case file")], str(path))
        size = p.stat().st_size
        if size > MAX_CASE_BYTES:
            raise CaseError([Problem("", f"the file is {size // 1000} kB; a case file is a few kB")], str(path))
        data = p.read_bytes()
    except OSError as exc:
        raise CaseError([Problem("", f"cannot read the file: {exc.strerror or exc}")], str(path)) from None
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise CaseError([Problem("", "the file is not UTF-8 text (binary or another encoding)")], str(path)) from None
    return read_case_text(text, _fmt(p), str(path))


def dump_case(raw: Mapping[str, Any], fmt: str = "yaml") -> str:
    """The raw mapping as case-file text: YAML in the mapping's own order, or JSON."""
    if fmt == "json":
        return json.dumps(raw, indent=2, ensure_ascii=False) + "\n"
    import yaml

    return yaml.safe_dump(dict(raw), sort_keys=False, allow_unicode=True, default_flow_style=False)


def write_atomic(path: str | Path, text: str) -> None:
    """Write `text` to `path` through a temporary file in the same folder and a rename."""
    replace_file(path, text.encode("utf-8"))


def save_case(path: str | Path, raw: Mapping[str, Any]) -> Path | None:
    """Save the workup atomically; the previous file (if any) is kept as `NAME.bak`, whose path is returned."""
    p = Path(path)
    backup = None
    if p.is_file():
        backup = p.with_name(p.name + ".bak")
        shutil.copy2(p, backup)
    write_atomic(p, dump_case(raw, _fmt(p)))
    return backup


def autosave_path(path: str | Path | None, recovery_dir: str | Path | None = None) -> Path:
    """Where the recovery copy of this workup goes."""
    if path is not None:
        p = Path(path)
        return p.with_name(f".{p.name}.autosave")
    return Path(recovery_dir or default_recovery_dir()) / f".{UNTITLED}.autosave"


def write_autosave(path: str | Path | None, raw: Mapping[str, Any], recovery_dir: str | Path | None = None) -> Path:
    """Write the recovery copy (YAML, whatever the case's own format); returns its path."""
    target = autosave_path(path, recovery_dir)
    target.parent.mkdir(parents=True, exist_ok=True)
    write_atomic(target, dump_case(raw, "yaml"))
    return target


def clear_autosave(path: str | Path | None, recovery_dir: str | Path | None = None) -> None:
    try:
        autosave_path(path, recovery_dir).unlink()
    except FileNotFoundError:
        pass


def recovery_offer(path: str | Path | None, recovery_dir: str | Path | None = None) -> Path | None:
    """The recovery copy to offer at start: one that exists and is newer than the case file (or has no file)."""
    copy = autosave_path(path, recovery_dir)
    try:
        copy_time = copy.stat().st_mtime
    except OSError:
        return None
    if path is not None:
        try:
            if Path(path).stat().st_mtime >= copy_time:
                return None
        except OSError:
            pass  # the case file is gone: the copy is all there is
    return copy
