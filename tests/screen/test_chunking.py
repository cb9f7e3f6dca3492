"""Streaming: the chunk size is honoured, a long case split across read batches stays whole, memory
does not grow with the file, and cases whose rows are not contiguous (or repeated wide ids) are named."""

from __future__ import annotations

import tracemalloc

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import tubulo.screen.stream as stream
from tubulo.screen.sample import sample_cases, to_long, to_wide
from tubulo.screen.stream import screen_file


@pytest.fixture(scope="module")
def cases(sk):
    return sample_cases(sk, 300, seed=41)


@pytest.mark.parametrize("layout", ["long", "wide"])
def test_no_chunk_holds_more_cases_than_asked(cases, tmp_path, monkeypatch, layout):
    seen_sizes = []
    real = stream.screen_table

    def spy(table, lay, sk, k, rep):
        out = real(table, lay, sk, k, rep)
        seen_sizes.append(out.num_rows)
        return out

    monkeypatch.setattr(stream, "screen_table", spy)
    src = tmp_path / "in.parquet"
    # small row groups: the reader's batches end inside cases of the long layout
    pq.write_table(to_long(cases) if layout == "long" else to_wide(cases), src, row_group_size=97)
    s = screen_file(src, tmp_path / "out.parquet", chunk_size=23)
    assert max(seen_sizes) <= 23 and sum(seen_sizes) == len(cases) == s.cases
    assert s.chunks == len(seen_sizes) == -(-len(cases) // 23)
    assert s.max_chunk_cases <= 23
    whole = pq.read_table(tmp_path / "out.parquet")
    screen_file(src, tmp_path / "one.parquet", chunk_size=10_000)
    assert whole.equals(pq.read_table(tmp_path / "one.parquet"))  # no case was cut in two


def _peak(path, out, chunk) -> int:
    tracemalloc.start()
    try:
        screen_file(path, out, chunk_size=chunk)
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_memory_does_not_grow_with_the_extract(sk, tmp_path):
    large = sample_cases(sk, 400, seed=42)
    small = large[:100]
    pq.write_table(to_wide(small), tmp_path / "s.parquet")
    pq.write_table(to_wide(large), tmp_path / "l.parquet")
    screen_file(tmp_path / "l.parquet", tmp_path / "warm.parquet", chunk_size=25)  # memo tables, caches, self-check
    p_small = _peak(tmp_path / "s.parquet", tmp_path / "o1.parquet", 25)
    p_large = _peak(tmp_path / "l.parquet", tmp_path / "o2.parquet", 25)
    # four times the cases, same chunk: the peak stays near the small run's (unbounded would be ~4x)
    assert p_large < 2.0 * p_small, (p_small, p_large)


def test_rows_of_a_case_that_are_not_contiguous_are_named(tmp_path):
    src = tmp_path / "l.csv"
    src.write_text("case,section,analyte,value,unit\n"
                   "a,serum,potassium,3.1,mmol/L\n"
                   "b,serum,sodium,140,mmol/L\n"
                   "a,serum,sodium,139,mmol/L\n", encoding="utf-8")
    s = screen_file(src, tmp_path / "o.parquet", chunk_size=1)
    rows = pq.read_table(tmp_path / "o.parquet").to_pylist()
    assert [r["case"] for r in rows] == ["a", "b", "a"]
    assert rows[0]["error"] is None and "not contiguous" in rows[2]["error"] and rows[2]["candidate_1"] is None
    assert s.cases == 3 and s.errors == 1 and s.matrix == 2
    # in one chunk the rows of a case are gathered wherever they are
    s = screen_file(src, tmp_path / "o2.parquet", chunk_size=100)
    assert [r["case"] for r in pq.read_table(tmp_path / "o2.parquet").to_pylist()] == ["a", "b"]


def test_a_wide_case_id_used_twice_is_named(tmp_path):
    table = pa.table({"case": ["x", "y", "x"], "serum.sodium [mmol/L]": [140.0, 141.0, 150.0]})
    pq.write_table(table, tmp_path / "w.parquet")
    s = screen_file(tmp_path / "w.parquet", tmp_path / "o.parquet", chunk_size=2)
    rows = pq.read_table(tmp_path / "o.parquet").to_pylist()
    assert rows[0]["error"] is None and rows[1]["error"] is None
    assert "already used by an earlier row" in rows[2]["error"] and s.errors == 1
