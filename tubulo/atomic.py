"""One way to write a file so that no reader ever sees it half-written: a temporary file, then a rename."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["replace_file"]


def replace_file(path: str | Path, data: bytes, mode: int = 0o644) -> int:
    """Write `data` to a temporary file beside `path`, sync it and rename it over `path`.

    Returns the number of bytes written. Any OSError is re-raised after the temporary file is removed,
    so callers turn it into their own located message; the old file stays untouched on failure.
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return len(data)
