"""A small on-disk cache for compiled knowledge, keyed by a hash of the files it was built from.

Compiling (pint, pydantic, networkx) is slow; loading a pickle of plain dicts and lists is fast, so
the first run builds and later runs only read.  The cache folder is `$TUBULO_CACHE_DIR`, else
`$XDG_CACHE_HOME/tubulo`, else `~/.cache/tubulo`; if it cannot be written, the build is kept in
memory for the process.  Writes are atomic (temporary file, then rename).
"""

from __future__ import annotations

import functools
import os
import pickle
from pathlib import Path

from . import __version__
from .paths import knowledge_dir

__all__ = ["cache_dir", "cached", "content_hash", "knowledge_hash"]

_MEMORY: dict = {}
# raise when the classes pickled here change shape, so that a cache written by an older tubulo is not read
_LAYOUT = 2


def cache_dir() -> Path:
    """The folder that holds compiled caches."""
    env = os.environ.get("TUBULO_CACHE_DIR")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "tubulo"


def content_hash(folder: Path, patterns: tuple[str, ...] = ("*.yaml", "*.txt", "*.json")) -> str:
    """sha256 over the names and bytes of the files in `folder` matching `patterns`, and the tool version."""
    import hashlib

    h = hashlib.sha256(__version__.encode())
    for pattern in patterns:
        for path in sorted(Path(folder).glob(pattern)):
            h.update(path.name.encode())
            h.update(path.read_bytes())
    return h.hexdigest()[:20]


def _stamp(folder: Path, patterns: tuple[str, ...]) -> tuple:
    """Name, size and modification time of each file `content_hash` would read: a change to any of
    them (an edit, a reinstall) changes the stamp."""
    import fnmatch

    with os.scandir(folder) as it:
        entries = sorted((e.name, e.stat()) for e in it if e.is_file())
    return (__version__, str(folder), patterns,
            tuple((name, st.st_size, st.st_mtime_ns) for name, st in entries
                  if any(fnmatch.fnmatch(name, p) for p in patterns)))


@functools.cache
def knowledge_hash(patterns: tuple[str, ...] = ("*.yaml", "*.txt", "*.json")) -> str:
    """`content_hash` of the installed knowledge folder.

    Reading and hashing every knowledge file costs about a tenth of a cold start, so the hash is kept
    beside the caches with the stamp (`_stamp`) of the files it was computed from, and computed again
    only when the stamp differs.
    """
    folder = knowledge_dir()
    try:
        stamp = _stamp(folder, patterns)
    except OSError:
        return content_hash(folder, patterns)
    record = cache_dir() / "knowledge-stamps.pickle"
    try:
        with open(record, "rb") as fh:
            known = pickle.load(fh)
        if not isinstance(known, dict):
            known = {}
    except (OSError, pickle.PickleError, EOFError, AttributeError, ImportError, TypeError, ValueError):
        known = {}
    digest = known.get(stamp)
    if isinstance(digest, str):
        return digest
    digest = content_hash(folder, patterns)
    # the stamps of other folders (installs sharing this cache) and other patterns stay, the newest 16
    fresh = {k: v for k, v in known.items() if isinstance(k, tuple) and len(k) == 4 and k[1:3] != stamp[1:3]}
    fresh = dict(list(fresh.items())[-15:])
    fresh[stamp] = digest
    _write_atomic(record, fresh)
    return digest


def cached(name: str, builder, key: str | None = None):
    """Return the object `builder()` makes, from the on-disk cache when its key matches."""
    key = key or knowledge_hash()
    mem_key = f"{name}-{key}"
    if mem_key in _MEMORY:
        return _MEMORY[mem_key]
    path = cache_dir() / f"{name}-{key}-c{_LAYOUT}.pickle"
    try:
        with open(path, "rb") as fh:
            obj = pickle.load(fh)
    except (OSError, pickle.PickleError, EOFError, AttributeError, ImportError, TypeError, ValueError):
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
