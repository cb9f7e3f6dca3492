"""The run's self-check: the matrix path against the single-case path on sample cases.

The matrix path mirrors the single-case code (findings rules, gates, scorer); when that code or the
knowledge changes in a way the mirror does not follow, the two disagree.  Before its first chunk a
run screens `SAMPLE` invented cases (tubulo/screen/sample.py) both ways; if any differs, every case
of the run takes the single-case path and the run says why.  The verdict is cached per knowledge
version and source code, so the check costs a few seconds once after an upgrade.
"""

from __future__ import annotations

import functools
import hashlib
import math
import sys
from pathlib import Path
from typing import Any, Mapping

from .knowledge import ScreenKnowledge, compile_knowledge

__all__ = ["self_check", "checked_knowledge", "SAMPLE", "compare_rows"]

SAMPLE = 240
_REL = 1e-9


# the modules either path runs (the single-case path from parse_case to cautions, and this package)
_CODE = ("case.py", "units.py", "reference.py", "indices.py", "findings.py", "scoring.py", "cautions.py",
         "workup.py", "quality.py", "vocab.py", "paths.py", "rank.py", "output/check.py", "output/rank.py",
         "kb/tables.py", "screen/*.py")


@functools.cache
def _code_key() -> str:
    """Hash of the interpreter's float-sum rule, numpy's version and the source of both paths (once a run)."""
    import numpy

    h = hashlib.sha256(f"{sys.version_info[:2]}-{numpy.__version__}".encode())
    root = Path(__file__).resolve().parents[1]
    for pattern in _CODE:
        for path in sorted(root.glob(pattern)):
            h.update(str(path.relative_to(root)).encode())
            h.update(path.read_bytes())
    return h.hexdigest()[:20]


def compare_rows(a: Mapping[str, Any], b: Mapping[str, Any], k: int) -> str | None:
    """Why two output rows differ (None when equal: ids exact, probabilities to 1e-9 relative)."""
    if (a.get("error") is None) != (b.get("error") is None):
        return f"error {a.get('error')!r} vs {b.get('error')!r}"
    for col in ("critical", "critical_keys", "flags"):
        if (a.get(col) or None) != (b.get(col) or None):
            return f"{col} {a.get(col)!r} vs {b.get(col)!r}"
    for r in range(1, k + 1):
        if a.get(f"candidate_{r}") != b.get(f"candidate_{r}"):
            return f"candidate_{r} {a.get(f'candidate_{r}')!r} vs {b.get(f'candidate_{r}')!r}"
        pa_, pb = a.get(f"probability_{r}"), b.get(f"probability_{r}")
        if pa_ is None and pb is None:
            continue
        if pa_ is None or pb is None or not math.isclose(pa_, pb, rel_tol=_REL, abs_tol=0.0):
            return f"probability_{r} {pa_!r} vs {pb!r}"
    return None


def self_check(sk: ScreenKnowledge, n: int = SAMPLE, seed: int = 1) -> list[str]:
    """Disagreements between the two paths on `n` sample cases (empty when they agree)."""
    from .run import screen_table
    from .sample import sample_cases, to_long
    from .single import screen_mapping

    if sk.unsupported:
        return []
    k = 3
    cases = sample_cases(sk, n, seed)
    out = screen_table(to_long(cases), "long", sk, k).to_pylist()
    problems = []
    for case, row in zip(cases, out):
        if row["route"] not in (None, "matrix"):
            continue
        res = screen_mapping(sk, case, None, k)
        single = {"error": res.error, "critical": "; ".join(res.critical) or None,
                  "critical_keys": "; ".join(res.critical_keys) or None, "flags": "; ".join(res.flags) or None}
        for r, (cid, _, p) in enumerate(res.top, 1):
            single[f"candidate_{r}"], single[f"probability_{r}"] = cid, p
        why = compare_rows(row, single, k)
        if why:
            problems.append(f"{case['case']}: {why}")
    return problems


def checked_knowledge(tables: Mapping[str, Any] | None = None) -> ScreenKnowledge:
    """The compiled knowledge after the self-check: `unsupported` names the disagreement, if any."""
    from ..cache import cached
    from .knowledge import screen_knowledge

    sk = screen_knowledge(tables)
    if sk.unsupported:
        return sk
    key = f"{sk.fingerprint or 'nohash'}-{_code_key()}"
    problems = cached("screen_selfcheck", lambda: self_check(compile_knowledge(sk.tables)), key=key)
    if not problems:
        return sk
    note = (f"self-check: {len(problems)} of {SAMPLE} sample cases differ between the matrix path and the "
            f"single-case path (first: {problems[0]})")
    return sk._replace(unsupported=(note,))
