"""Physiology consistency: does the signed graph predict what the curated tables say?

For each candidate, `graph.propagate` gives the sign of its shortest causal path to every reachable
variable.  The curated side of a variable is read from the candidate's manifest:

* the most likely listed state s* (highest probability; among equals, the one with the larger
  |direction|) gives the curated sign `direction[s*]` (variables.yaml); a variable or state with no
  direction takes no part;
* curated sign +1/-1: the pair agrees when the predicted sign is the same;
* curated sign 0 (the most likely state is normal): the graph predicts a direction of change, not
  its size, so the pair agrees when the remaining mass leans the predicted way
  (P(direction = predicted) > P(direction = -predicted)); such agreements are counted apart
  (`lean_agreements`) so the report shows them;
* a variable with no state in the predicted direction (polyuria has present +1 and absent 0, no
  state below normal) agrees when the most likely state is its bound on that side (polyuria absent
  for a predicted fall); counted apart too (`bound_agreements`);
* a variable reached by shortest paths of both signs (`ambiguous`) does not agree.

Pairs compared = variables both reached and curated with a direction.  A pair that does not agree is
a disagreement; it needs an entry in knowledge/consistency_exceptions.yaml (candidate, variable,
reason).  The check fails when agreement < the `consistency_min_agreement` of meta.yaml's `checks`
or any disagreement is unexplained.
"""

from __future__ import annotations

from typing import NamedTuple

import networkx as nx

from .graph import Prediction, propagate
from .loader import Knowledge
from .schema import StateManifest

__all__ = ["Comparison", "ConsistencyReport", "curated_sign", "compare_candidate", "consistency_report"]


class Comparison(NamedTuple):
    """One candidate-variable pair: predicted and curated direction, and whether they agree."""

    candidate: str
    variable: str
    predicted: tuple[int, ...]
    curated: int
    most_likely: str
    agrees: bool
    rule: str  # sign | lean | bound | ambiguous
    reason: str | None = None
    note: str | None = None


class ConsistencyReport(NamedTuple):
    """Every compared pair, the agreement rate and what is left unexplained."""

    comparisons: tuple[Comparison, ...]
    not_reached: tuple[tuple[str, str], ...]
    stale_exceptions: tuple[tuple[str, str], ...]
    min_agreement: float

    @property
    def compared(self) -> int:
        return len(self.comparisons)

    @property
    def agreed(self) -> int:
        return sum(c.agrees for c in self.comparisons)

    @property
    def lean_agreements(self) -> int:
        return sum(c.agrees and c.rule == "lean" for c in self.comparisons)

    @property
    def bound_agreements(self) -> int:
        return sum(c.agrees and c.rule == "bound" for c in self.comparisons)

    @property
    def rate(self) -> float:
        return self.agreed / self.compared if self.comparisons else 1.0

    @property
    def strict_rate(self) -> float:
        """Agreement counting only pairs whose most likely state itself moves the predicted way."""
        return sum(c.agrees and c.rule == "sign" for c in self.comparisons) / self.compared if self.comparisons else 1.0

    @property
    def disagreements(self) -> tuple[Comparison, ...]:
        return tuple(c for c in self.comparisons if not c.agrees)

    @property
    def unexplained(self) -> tuple[Comparison, ...]:
        return tuple(c for c in self.disagreements if c.reason is None)

    @property
    def ok(self) -> bool:
        return self.rate >= self.min_agreement and not self.unexplained


def curated_sign(m: StateManifest, direction: dict[str, int]) -> tuple[int, str, float] | None:
    """(sign of the most likely state, that state, lean) or None when the variable has no direction there."""
    listed = [(p, abs(direction[s]), s) for s, p in m.states.items() if s in direction]
    if not listed:
        return None
    p, _, state = max(listed)
    lean = sum(p for s, p in m.states.items() if direction.get(s) == 1) - \
        sum(p for s, p in m.states.items() if direction.get(s) == -1)
    return direction[state], state, lean


def compare_candidate(kn: Knowledge, g: nx.MultiDiGraph, cid: str,
                      reach: dict[str, Prediction] | None = None) -> tuple[list[Comparison], list[str]]:
    """Comparisons for one candidate, and the directed variables it curates but does not reach."""
    reach = propagate(g, cid) if reach is None else reach
    out: list[Comparison] = []
    missing: list[str] = []
    for vid, m in kn.manifests.get(cid, {}).items():
        if not isinstance(m, StateManifest):
            continue
        cur = curated_sign(m, kn.variables[vid].direction)
        if cur is None:
            continue
        sign, state, lean = cur
        pred = reach.get(vid)
        if pred is None:
            missing.append(vid)
            continue
        directions = set(kn.variables[vid].direction.values())
        if pred.ambiguous:
            agrees, rule = False, "ambiguous"
        elif sign != 0:
            agrees, rule = pred.sign == sign, "sign"
        elif pred.sign not in directions:
            bound = max(directions) if pred.sign > 0 else min(directions)
            agrees, rule = sign == bound, "bound"
        else:
            agrees, rule = lean * pred.sign > 0, "lean"
        out.append(Comparison(cid, vid, pred.signs, sign, state, agrees, rule))
    return out, missing


def consistency_report(kn: Knowledge, g: nx.MultiDiGraph,
                       reaches: dict[str, dict[str, Prediction]] | None = None) -> ConsistencyReport:
    """Compare every candidate; attach the listed reasons to disagreements."""
    listed = {(x.candidate, x.variable): x for x in
              (kn.consistency_exceptions.exceptions if kn.consistency_exceptions else [])}
    used: set[tuple[str, str]] = set()
    comps: list[Comparison] = []
    not_reached: list[tuple[str, str]] = []
    for cid in kn.candidates():
        reach = reaches.get(cid) if reaches else None
        cs, missing = compare_candidate(kn, g, cid, reach)
        not_reached += [(cid, v) for v in missing]
        for c in cs:
            x = listed.get((c.candidate, c.variable))
            if not c.agrees and x is not None:
                used.add((c.candidate, c.variable))
                c = c._replace(reason=x.reason, note=x.note)
            comps.append(c)
    stale = tuple(k for k in listed if k not in used)
    if kn.meta is None:
        raise ValueError("meta.yaml is required for the consistency threshold")
    return ConsistencyReport(tuple(comps), tuple(not_reached), stale, kn.meta.checks.consistency_min_agreement)
