"""The chunk scorer: a pure function from an extract partition (Arrow table or pandas frame) to one
output row per case.  The file runner (stream.py) and the Dask path (parallel.py) both call it.

Output columns (docs/screen.md):
  case, error, critical, critical_keys, flags, candidate_1, name_1, probability_1, ... (k = 1..top),
  route ("matrix": scored on the compiled knowledge; "single": on the single-case path; empty for
  a case that could not be read).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pyarrow as pa

from ..output.check import fmt_number
from .knowledge import ScreenKnowledge
from .prepare import prepare
from .single import INTERNAL, screen_mapping
from .vector import evaluate, pattern_keys, top_candidates

__all__ = ["ChunkReport", "screen_table", "screen_frame", "output_schema", "DEFAULT_TOP", "ROUTE_MATRIX",
           "ROUTE_SINGLE"]

DEFAULT_TOP = 3
ROUTE_MATRIX, ROUTE_SINGLE = "matrix", "single"


def output_schema(k: int = DEFAULT_TOP) -> pa.Schema:
    fields = [("case", pa.string()), ("error", pa.string()), ("critical", pa.string()),
              ("critical_keys", pa.string()), ("flags", pa.string())]
    for r in range(1, k + 1):
        fields += [(f"candidate_{r}", pa.string()), (f"name_{r}", pa.string()), (f"probability_{r}", pa.float64())]
    fields.append(("route", pa.string()))
    return pa.schema(fields)


@dataclass
class ChunkReport:
    """What one chunk did: counts by route, why cases took the single-case path, ignored columns."""

    cases: int = 0
    matrix: int = 0
    single: int = 0
    errors: int = 0
    internal: int = 0
    critical: int = 0
    single_reasons: dict[str, int] = field(default_factory=dict)
    ignored_columns: list[str] = field(default_factory=list)

    def add(self, other: "ChunkReport") -> None:
        for name in ("cases", "matrix", "single", "errors", "internal", "critical"):
            setattr(self, name, getattr(self, name) + getattr(other, name))
        for k, v in other.single_reasons.items():
            self.single_reasons[k] = self.single_reasons.get(k, 0) + v
        for c in other.ignored_columns:
            if c not in self.ignored_columns:
                self.ignored_columns.append(c)


def _join(items) -> str | None:
    return "; ".join(items) if items else None


def _critical_text(sk: ScreenKnowledge, key: str, side: str, value: float, limit: float) -> str:
    spec = sk.specs[key]
    return sk.critical_message.format(label=spec.label, value=fmt_number(value), unit=spec.unit, side=side,
                                      limit=fmt_number(limit))


def _flag_texts(sk: ScreenKnowledge, pstates: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(flags text per distinct abnormal set, set of each pattern): flags depend on the findings only."""
    codes = np.zeros(pstates.shape, dtype=np.int16)
    for j, var in enumerate(sk.variables):
        abn = np.r_[sk.abnormal[var], False]  # state -1 (unobserved) is never abnormal
        s = pstates[:, j].astype(np.intp)
        codes[:, j] = np.where(abn[s], s + 1, 0)
    first, inverse = pattern_keys(codes)
    labels = [[None] + [f"{var}={st}" for st in sk.states[var]] for var in sk.variables]
    rows, cols = np.nonzero(codes[first])  # row-major: each row's findings in variables.yaml order
    words = [labels[j][c] for j, c in zip(cols.tolist(), codes[first][rows, cols].tolist())]
    cuts = np.searchsorted(rows, np.arange(len(first) + 1)).tolist()
    texts = ["; ".join(words[cuts[i]:cuts[i + 1]]) or None for i in range(len(first))]
    return np.array(texts + [None], dtype=object), inverse


def screen_table(table: pa.Table, layout: str, sk: ScreenKnowledge | None = None, k: int = DEFAULT_TOP,
                 report: ChunkReport | None = None) -> pa.Table:
    """Screen every case of `table` (all rows of each case present); one output row per case, in order
    of first appearance."""
    if sk is None:
        from .check import checked_knowledge

        sk = checked_knowledge()
    prep = prepare(table, layout, sk)
    n = prep.n
    rep = report if report is not None else ChunkReport()
    rep.cases += n
    for c in prep.ignored_columns:
        if c not in rep.ignored_columns:
            rep.ignored_columns.append(c)
    error = np.full(n, None, dtype=object)
    critical = np.full(n, None, dtype=object)
    critical_keys = np.full(n, None, dtype=object)
    flags = np.full(n, None, dtype=object)
    route = np.full(n, ROUTE_MATRIX, dtype=object)
    top_idx = np.full((n, k), len(sk.candidates), dtype=np.intp)  # the extra index reads as empty
    top_p = np.full((n, k), np.nan)
    whole_run = bool(sk.unsupported)
    matrix_rows = np.flatnonzero(~prep.problem & ~prep.single) if not whole_run else np.zeros(0, dtype=np.intp)

    if len(matrix_rows):
        batch = prep.batch.take(matrix_rows)
        ev = evaluate(sk, batch)
        idx, prob, inverse, pstates = top_candidates(sk, ev.states, batch.sex, k)
        top_idx[matrix_rows] = idx[inverse]
        top_p[matrix_rows] = prob[inverse]
        texts, set_of = _flag_texts(sk, pstates)
        flags[matrix_rows] = texts[set_of[inverse]]
        for pos, crit in ev.critical.items():
            i = matrix_rows[pos]
            critical[i] = _join([_critical_text(sk, *c) for c in crit])
            critical_keys[i] = _join([c[0] for c in crit])
        rep.matrix += len(matrix_rows)

    names = np.array(sk.names + (None,), dtype=object)
    ids = np.array(sk.candidates + (None,), dtype=object)
    cand_cols = [ids[top_idx[:, r]] for r in range(k)]
    name_cols = [names[top_idx[:, r]] for r in range(k)]
    others = np.flatnonzero(prep.problem | prep.single) if not whole_run else np.arange(n)
    for i in others.tolist():
        res = None
        if prep.problem[i] and not whole_run:  # its message from the cells that have a problem
            res = screen_mapping(sk, prep.mapping(i, problems_only=True), prep.own.get(i), k)
            res = res if res.error is not None else None
        if res is None:
            res = screen_mapping(sk, prep.mapping(i), prep.own.get(i), k)
        if res.error is not None:
            error[i], route[i] = res.error, None
            rep.errors += 1
            if res.error.startswith(INTERNAL):
                rep.internal += 1
            continue
        route[i] = ROUTE_SINGLE
        rep.single += 1
        why = ("knowledge the matrix path does not read: " + "; ".join(sk.unsupported) if whole_run
               else "pregnancy (read on the single-case path)" if prep.single[i]
               else "a form the matrix path set aside (e.g. a repeated row) that parse_case reads")
        rep.single_reasons[why] = rep.single_reasons.get(why, 0) + 1
        critical[i] = _join(res.critical)
        critical_keys[i] = _join(res.critical_keys)
        flags[i] = _join(res.flags)
        for r, (cid, name, p) in enumerate(res.top):
            cand_cols[r][i], name_cols[r][i], top_p[i, r] = cid, name, p
    rep.critical += int(np.count_nonzero(critical != None))  # noqa: E711 (element-wise)

    cols: dict[str, Any] = {"case": prep.ids, "error": pa.array(error, pa.string()),
                            "critical": pa.array(critical, pa.string()),
                            "critical_keys": pa.array(critical_keys, pa.string()),
                            "flags": pa.array(flags, pa.string())}
    for r in range(k):
        p = top_p[:, r]
        cols[f"candidate_{r + 1}"] = pa.array(cand_cols[r], pa.string())
        cols[f"name_{r + 1}"] = pa.array(name_cols[r], pa.string())
        cols[f"probability_{r + 1}"] = pa.array(p, pa.float64(), mask=np.isnan(p))
    cols["route"] = pa.array(route, pa.string())
    return pa.table(cols, schema=output_schema(k))


def screen_frame(frame: Any, layout: str = "wide", k: int = DEFAULT_TOP) -> Any:
    """`screen_table` over a pandas DataFrame (a Dask partition); returns a pandas DataFrame."""
    import pandas as pd

    if len(frame.columns) == 0 or len(frame) == 0:
        return output_schema(k).empty_table().to_pandas()
    from .check import checked_knowledge

    table = pa.Table.from_pandas(_arrow_ready(frame, pd), preserve_index=False)
    return screen_table(table, layout, checked_knowledge(), k).to_pandas()


def _arrow_ready(frame: Any, pd: Any) -> Any:
    """Object columns that mix numbers and texts become texts (a number keeps its repr); every missing
    marker (None, NaN, pd.NA) stays missing.  Typed columns are left to Arrow."""
    out = frame.copy()
    for name in out.columns:
        col = out[name]
        if col.dtype != object:
            continue

        def text(v: Any) -> Any:
            if v is None or (not isinstance(v, str) and pd.isna(v)):
                return None
            return repr(float(v)) if isinstance(v, float) else str(v)

        out[name] = col.map(text).astype(object)
    return out
