"""The single-case path for one extract row: parse_case -> assess -> derive_findings -> score, cautions.

Used for the cases the matrix path does not read (and to word the problems of a case that cannot be
read).  The output fields are built from the same objects `tubulo rank` builds.
"""

from __future__ import annotations

from typing import Any, Mapping, NamedTuple

from ..case import parse_case
from ..cautions import cautions
from ..errors import CaseError, TubuloError
from ..findings import derive_findings
from ..scoring import score
from ..workup import assess
from .knowledge import ScreenKnowledge

__all__ = ["RowResult", "screen_mapping", "abnormal_findings", "critical_items", "internal_error", "INTERNAL",
           "problems_text"]


class RowResult(NamedTuple):
    error: str | None
    critical: tuple[str, ...] = ()
    critical_keys: tuple[str, ...] = ()
    flags: tuple[str, ...] = ()
    top: tuple[tuple[str, str, float], ...] = ()  # (candidate id, name, probability)


def abnormal_findings(sk: ScreenKnowledge, variables: Mapping[str, Any]) -> tuple[str, ...]:
    """`variable=state` of every abnormal finding (see knowledge._abnormal), in variables.yaml order."""
    out = []
    for var in sk.variables:
        f = variables.get(var)
        if f is None:
            continue
        state = f.state if hasattr(f, "state") else f
        if sk.abnormal[var][sk.states[var].index(state)]:
            out.append(f"{var}={state}")
    return tuple(out)


def critical_items(caution_list) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """(messages, measurement keys) of the critical cautions."""
    crit = [c for c in caution_list if c.level == "critical"]
    return tuple(c.message for c in crit), tuple(c.id.split(":", 1)[1] for c in crit)


INTERNAL = "internal error"


def internal_error(exc: Exception) -> str:
    return (f"{INTERNAL}: tubulo failed on this case ({type(exc).__name__}: {exc}); the case was not screened. "
            "Please report it with the row")


def problems_text(problems) -> str:
    return " | ".join(str(p) for p in problems)


def screen_mapping(sk: ScreenKnowledge, data: Mapping[str, Any], own: list[str] | None = None,
                   k: int = 3) -> RowResult:
    """One case mapping through the single-case path; `own` are problems found before parse_case."""
    try:
        case = parse_case(data)
    except CaseError as exc:
        return RowResult(problems_text(list(own or []) + [str(p) for p in exc.problems]))
    except Exception as exc:  # a defect of tubulo, not of the row: reported, and the run goes on
        return RowResult(internal_error(exc))
    if own:
        return RowResult(problems_text(own))
    try:
        workup = assess(case)
        findings = derive_findings(workup)
        scored = score(case, findings, sk.tables)
        msgs, keys = critical_items(cautions(workup, findings))
    except TubuloError as exc:
        return RowResult(f"the case could not be scored: {exc}")
    except Exception as exc:
        return RowResult(internal_error(exc))
    names = dict(zip(sk.candidates, sk.names))
    top = tuple((s.id, names[s.id], s.probability) for s in scored[:k])
    return RowResult(None, msgs, keys, abnormal_findings(sk, findings.variables), top)
