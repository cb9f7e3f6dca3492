"""The whole reasoning pass for one case: workup -> findings -> scores -> explanation, next tests,
panel, cautions.  `rank_case` is pure given the compiled tables."""

from __future__ import annotations

from typing import Any, Mapping, NamedTuple

from .case import Case
from .cautions import Caution, cautions
from .explain import Explained, explain
from .findings import Findings, derive_findings
from .nexttest import NextTest, next_tests
from .panel import Panel, gene_panel
from .scoring import Scored, _priors_conf, score
from .workup import Workup, assess

__all__ = ["RankResult", "rank_case", "load_tables"]


class RankResult(NamedTuple):
    workup: Workup
    findings: Findings
    scored: tuple[Scored, ...]
    explained: Mapping[str, Explained]
    next_tests: tuple[NextTest, ...]
    panel: Panel
    cautions: tuple[Caution, ...]
    tables: Mapping[str, Any]


def load_tables() -> dict[str, Any]:
    from .kb.tables import load_tables as _load

    return _load()


def rank_case(case: Case, tables: Mapping[str, Any] | None = None, explain_top: int = 10) -> RankResult:
    tables = tables if tables is not None else load_tables()
    workup = assess(case)
    findings = derive_findings(workup)
    scored = tuple(score(case, findings, tables))
    explained = {s.id: explain(s, findings, tables) for s in scored[:explain_top]}
    tests = tuple(next_tests(scored, findings, tables))
    panel = gene_panel(scored, tables, float(_priors_conf()["panel_coverage"]))
    return RankResult(workup, findings, scored, explained, tests, panel, tuple(cautions(workup, findings)), tables)
