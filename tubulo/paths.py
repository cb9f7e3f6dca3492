"""Where the knowledge files are: inside the wheel, or beside the package in a source checkout."""

from __future__ import annotations

from functools import cache
from pathlib import Path

__all__ = ["knowledge_dir", "read_knowledge_yaml", "require_knowledge_yaml"]


@cache
def knowledge_dir() -> Path:
    """The folder holding `knowledge/*.yaml` (wheel: tubulo/knowledge_data; checkout: ../knowledge)."""
    here = Path(__file__).resolve().parent
    for candidate in (here / "knowledge_data", here.parent / "knowledge"):
        if (candidate / "variables.yaml").is_file():
            return candidate
    raise FileNotFoundError("tubulo knowledge folder not found beside the package")


@cache
def read_knowledge_yaml(name: str):
    """One knowledge file, parsed with the safe (C) loader.

    All YAML files are parsed together once per knowledge version and kept in the on-disk cache
    (`tubulo.cache`), so a normal run unpickles instead of parsing.  FileNotFoundError when absent.
    """
    from .cache import cached

    group = "compile" if _compile_only(name) else "runtime"
    parsed = cached(f"yaml_{group}", lambda: _parse_all(group))
    if name not in parsed:
        raise FileNotFoundError(knowledge_dir() / name)
    return parsed[name]


def require_knowledge_yaml(name: str):
    """Like `read_knowledge_yaml`, but a missing file is a KnowledgeError that names it."""
    from .errors import KnowledgeError

    try:
        return read_knowledge_yaml(name)
    except FileNotFoundError:
        raise KnowledgeError(f"{name}: file missing from the knowledge folder") from None
    except OSError as exc:
        raise KnowledgeError(f"{name}: cannot be read ({exc.strerror or exc})") from None


# Files only the knowledge compiler reads (a case run reads the compiled tables instead); kept in a
# cache group of their own so a run does not unpickle them.
_COMPILE_ONLY = ("disorders_", "acquired", "drugs", "mechanisms", "transporters", "segments", "hormones",
                 "consistency_exceptions", "hpo_exceptions", "exposures")


def _compile_only(name: str) -> bool:
    return name.startswith(_COMPILE_ONLY)


def parse_knowledge_file(path: Path):
    """Parse one YAML file with the safe loader (no cache)."""
    import yaml

    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
    with open(path, encoding="utf-8") as fh:
        return yaml.load(fh, Loader=loader)


def _parse_all(group: str) -> dict:
    import yaml

    from .errors import KnowledgeError

    out = {}
    for path in sorted(knowledge_dir().glob("*.yaml")):
        if _compile_only(path.name) != (group == "compile"):
            continue
        try:
            out[path.name] = parse_knowledge_file(path)
        except yaml.YAMLError as exc:
            raise KnowledgeError(f"{path.name}: not valid YAML: {exc}") from None
    return out
