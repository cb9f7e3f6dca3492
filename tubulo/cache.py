"""A small on-disk cache for compiled knowledge, keyed by a hash of the files it was built from.

Compiling (pint, pydantic, networkx) is slow; loading a pickle of plain dicts and lists is fast, so
the first run builds and later runs only read.  The cache folder is `$TUBULO_CACHE_DIR`, else
`$XDG_CACHE_HOME/tubulo`, else `~/.cache/tubulo`; if it cannot be written, the build is kept in
memory for the process.  Writes are atomic (temporary file, then rename).
"""

from __future__ import annotations

import functools
import hashlib
import os
import pickle
from pathlib import Path

from . import __version__
from .paths import knowledge_dir

__all__ = ["cache_dir", "cached", "knowledge_hash"]

_MEMORY: dict = {}


def cache_dir() -> Path:
    """The folder that holds compiled caches."""
    env = os.environ.get("TUBULO_CACHE_DIR")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "tubulo"


@functools.cache
def knowledge_hash(patterns: tuple[str, ...] = ("*.yaml", "*.txt", "*.json")) -> str:
    """sha256 over the names and bytes of the knowledge files matching `patterns`, and the tool version."""
    h = hashlib.sha256(__version__.encode())
    folder = knowledge_dir()
    for pattern in patterns:
        for path in sorted(folder.glob(pattern)):
            h.update(path.name.encode())
            h.update(path.read_bytes())
    return h.hexdigest()[:20]


def cached(name: str, builder, key: str | None = None):
    """Return the object `builder()` makes, from the on-disk cache when its key matches."""
    key = key or knowledge_hash()
    mem_key = f"{name}-{key}"
    if mem_key in _MEMORY:
        return _MEMORY[mem_key]
    path = cache_dir() / f"{name}-{key}.pickle"
    try:
        with open(path, "rb") as fh:
            obj = pickle.load(fh)
    except (OSError, pickle.PickleError, EOFError, AttributeError, ImportError):
        obj = builder()
        _write_atomic(path, obj)
        for stale in path.parent.glob(f"{name}-*.pickle"):
            if stale != path:
                try:
                    stale.unlink()
                except OSError:
                    pass
    _MEMORY[mem_key] = obj
    return obj


def _write_atomic(path: Path, obj) -> None:
    from .atomic import replace_file

    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        replace_file(path, pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL), mode=0o600)
    except OSError:
        pass  # an unwritable cache only costs speed
