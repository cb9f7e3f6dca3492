"""Shared helpers of the screening tests: the expected row of a case, computed on the single-case
path (`parse_case` + `rank_case`), to compare with what `tubulo screen` writes."""

from __future__ import annotations

import math
from typing import Any

import pytest

from tubulo.case import parse_case
from tubulo.errors import CaseError
from tubulo.rank import load_tables, rank_case

pytest.importorskip("numpy")
pytest.importorskip("pyarrow")

K = 3
INTERNAL = "internal error"


@pytest.fixture(scope="session")
def tables():
    return load_tables()


@pytest.fixture(scope="session")
def sk(tables):
    from tubulo.screen.knowledge import screen_knowledge

    return screen_knowledge(tables)


def abnormal(sk, variables: dict) -> str | None:
    """The flags text of a findings mapping: variable=state of each state variables.yaml marks abnormal."""
    from tubulo.screen.single import abnormal_findings

    return "; ".join(abnormal_findings(sk, variables)) or None


def expected_row(sk, tables, mapping: dict[str, Any]) -> dict[str, Any]:
    """What the single-case path says about a case mapping, in the screen's columns."""
    try:
        case = parse_case(mapping)
    except CaseError as exc:
        return {"error": " | ".join(str(p) for p in exc.problems)}
    except Exception as exc:  # a defect of the single-case path: the screen reports it on the row
        return {"error": INTERNAL, "exception": exc}
    r = rank_case(case, tables)
    crit = [c for c in r.cautions if c.level == "critical"]
    row: dict[str, Any] = {"error": None, "flags": abnormal(sk, r.findings.variables),
                           "critical": "; ".join(c.message for c in crit) or None,
                           "critical_keys": "; ".join(c.id.split(":", 1)[1] for c in crit) or None}
    for i, s in enumerate(r.scored[:K], 1):
        row[f"candidate_{i}"], row[f"probability_{i}"] = s.id, s.probability
    return row


def assert_same(got: dict[str, Any], want: dict[str, Any], where: str) -> None:
    """Top-k ids exactly, probabilities to 1e-9 relative, flags, critical and error texts equal."""
    if want["error"] == INTERNAL:
        assert got["error"].startswith(INTERNAL) and type(want["exception"]).__name__ in got["error"], where
        assert got["candidate_1"] is None and got["route"] is None, where
        return
    if want["error"] is not None:
        assert got["error"] == want["error"], where
        assert got["candidate_1"] is None, where
        return
    assert got["error"] is None, (where, got["error"])
    for col in ("flags", "critical", "critical_keys"):
        assert got[col] == want[col], (where, col, got[col], want[col])
    for i in range(1, K + 1):
        assert got[f"candidate_{i}"] == want[f"candidate_{i}"], (where, i)
        assert math.isclose(got[f"probability_{i}"], want[f"probability_{i}"], rel_tol=1e-9, abs_tol=0.0), (where, i)
