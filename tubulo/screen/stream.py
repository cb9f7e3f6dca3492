"""Screening a file: read the extract in chunks, score each chunk, write as it goes, show progress.

Memory is bounded by the chunk: a chunk holds `chunk_size` cases (all rows of each; the long layout
carries the rows of the last, possibly incomplete case over to the next chunk), and the output is
appended chunk by chunk.  What grows with the file is the set of case ids seen, to notice a case
whose rows are not contiguous (a few tens of bytes per case).
"""

from __future__ import annotations

import csv
import io
import os
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, TextIO

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ..paths import read_knowledge_yaml
from .check import checked_knowledge
from .prepare import LONG_COLUMNS, ScreenInputError
from .run import DEFAULT_TOP, ChunkReport, output_schema, screen_table

__all__ = ["ScreenSummary", "screen_file", "detect_layout", "file_format", "Progress", "DEFAULT_CHUNK",
           "summary_text", "print_summary", "standing_caution"]

DEFAULT_CHUNK = 20_000  # cases per chunk
_BLOCK = 4 << 20  # bytes per CSV read block
_FORMATS = {".csv": "csv", ".parquet": "parquet", ".pq": "parquet"}
_NOT_CONTIGUOUS = ("the rows of this case are not contiguous in the extract (an earlier part was screened "
                   "already); sort the extract by case")
_REPEATED_ID = "this case id was already used by an earlier row; give each case one row (wide layout)"


def file_format(path: str | Path, what: str) -> str:
    suffix = Path(path).suffix.lower()
    if suffix not in _FORMATS:
        raise ScreenInputError(f"{what} '{path}': expected a .csv or .parquet file, got '{suffix or 'no suffix'}'")
    return _FORMATS[suffix]


def detect_layout(columns: list[str]) -> str:
    """long when the columns include case, section, analyte and value; else wide."""
    return "long" if all(c in columns for c in LONG_COLUMNS) else "wide"


class Progress:
    """A plain-text progress bar on stderr: share done, cases, rate and time left."""

    def __init__(self, stream: TextIO | None, width: int = 24, every: float = 0.25):
        self.stream = stream
        self.width = width
        self.every = every if (stream is not None and getattr(stream, "isatty", lambda: False)()) else 5.0
        self.tty = stream is not None and getattr(stream, "isatty", lambda: False)()
        self.start = time.perf_counter()
        self.last = -1e9

    @staticmethod
    def _clock(seconds: float) -> str:
        seconds = max(0, int(round(seconds)))
        if seconds < 60:
            return f"{seconds} s"
        if seconds < 3600:
            return f"{seconds // 60} min {seconds % 60:02d} s"
        return f"{seconds // 3600} h {seconds % 3600 // 60:02d} min"

    def line(self, fraction: float, cases: int) -> str:
        elapsed = max(time.perf_counter() - self.start, 1e-9)
        fraction = min(max(fraction, 0.0), 1.0)
        filled = int(round(fraction * self.width))
        rate = cases / elapsed
        left = elapsed * (1 - fraction) / fraction if fraction > 0 else float("nan")
        left_text = self._clock(left) if left == left else "?"
        return (f"screen [{'#' * filled}{'.' * (self.width - filled)}] {fraction * 100:3.0f}%  {cases:,} cases  "
                f"{rate:,.0f} cases/s  {left_text} left")

    def update(self, fraction: float, cases: int, final: bool = False) -> None:
        if self.stream is None:
            return
        now = time.perf_counter()
        if not final and now - self.last < self.every:
            return
        self.last = now
        text = self.line(1.0 if final else fraction, cases)
        if self.tty:
            self.stream.write("\r" + text + ("\n" if final else ""))
        else:
            self.stream.write(text + "\n")
        self.stream.flush()


@dataclass
class ScreenSummary:
    """What a run did."""

    input: str
    output: str
    layout: str
    cases: int = 0
    matrix: int = 0
    single: int = 0
    errors: int = 0
    internal: int = 0
    critical: int = 0
    chunks: int = 0
    max_chunk_cases: int = 0
    max_chunk_rows: int = 0
    seconds: float = 0.0
    single_reasons: dict[str, int] = field(default_factory=dict)
    ignored_columns: list[str] = field(default_factory=list)

    @property
    def rate(self) -> float:
        return self.cases / self.seconds if self.seconds > 0 else float("inf")


# --- readers: an iterator of Arrow tables, and a progress fraction ------------------------------------


class _Reader:
    def __init__(self, path: str, fmt: str, batch_rows: int):
        self.path, self.fmt = path, fmt
        self.size = max(os.path.getsize(path), 1)
        if fmt == "csv":
            self.columns = _csv_header(path)
            import pyarrow.csv as pcsv

            self._file = pa.OSFile(path, "rb")
            self._reader = pcsv.open_csv(
                self._file,
                read_options=pcsv.ReadOptions(block_size=_BLOCK, use_threads=True),
                convert_options=pcsv.ConvertOptions(column_types={c: pa.string() for c in self.columns},
                                                    strings_can_be_null=True, quoted_strings_can_be_null=True,
                                                    null_values=[""]))
            self.total_rows = None
        else:
            import pyarrow.parquet as pq

            try:
                self._pf = pq.ParquetFile(path)
            except (pa.ArrowInvalid, OSError) as exc:
                raise ScreenInputError(f"input '{path}': not a readable Parquet file ({exc})") from None
            self.columns = list(self._pf.schema_arrow.names)
            self.total_rows = max(self._pf.metadata.num_rows, 1)
            self._reader = self._pf.iter_batches(batch_size=batch_rows)
        self.rows_read = 0

    def fraction(self) -> float:
        if self.total_rows is not None:
            return self.rows_read / self.total_rows
        return self._file.tell() / self.size

    def batches(self) -> Iterator[pa.RecordBatch]:
        try:
            for batch in self._reader:
                self.rows_read += batch.num_rows
                yield batch
        except pa.ArrowInvalid as exc:
            raise ScreenInputError(f"input '{self.path}': the file cannot be read past row {self.rows_read:,}: {exc}") from None


def _csv_header(path: str) -> list[str]:
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            header = next(csv.reader(io.StringIO(fh.readline())), None)
    except UnicodeDecodeError:
        raise ScreenInputError(f"input '{path}': not UTF-8 text") from None
    except OSError as exc:
        raise ScreenInputError(f"input '{path}': cannot be read ({exc.strerror or exc})") from None
    if not header:
        raise ScreenInputError(f"input '{path}': empty file (expected a header row)")
    dupes = sorted({c for c in header if header.count(c) > 1})
    if dupes:
        raise ScreenInputError(f"input '{path}': column(s) {', '.join(dupes)} appear more than once in the header")
    return header


def _chunks(reader: _Reader, layout: str, chunk_size: int) -> Iterator[pa.Table]:
    """Tables of `chunk_size` cases each (the last may be smaller)."""
    pending: list[pa.RecordBatch] = []
    pending_rows = 0
    if layout == "wide":
        for batch in reader.batches():
            pending.append(batch)
            pending_rows += batch.num_rows
            while pending_rows >= chunk_size:
                t = pa.Table.from_batches(pending)
                yield t.slice(0, chunk_size)
                rest = t.slice(chunk_size)
                pending, pending_rows = rest.to_batches(), rest.num_rows
        if pending_rows:
            yield pa.Table.from_batches(pending)
        return
    runs = 0  # case runs (contiguous rows of one id) among the pending rows
    last_id = None
    for batch in reader.batches():
        ids = pc.fill_null(batch.column(batch.schema.get_field_index("case")).cast(pa.string()), "\x00")
        if len(ids) == 0:
            continue
        change = np.ones(len(ids), dtype=bool)
        if len(ids) > 1:
            change[1:] = np.asarray(pc.not_equal(ids.slice(1), ids.slice(0, len(ids) - 1)))
        if last_id is not None and ids[0].as_py() == last_id:
            change[0] = False
        last_id = ids[-1].as_py()
        pending.append(batch)
        pending_rows += batch.num_rows
        runs += int(change.sum())
        if runs <= chunk_size:
            continue
        t = pa.Table.from_batches(pending)
        tids = pc.fill_null(t.column("case").cast(pa.string()), "\x00").combine_chunks()
        starts = np.flatnonzero(np.r_[True, np.asarray(pc.not_equal(tids.slice(1), tids.slice(0, len(tids) - 1)))])
        while len(starts) > chunk_size:
            cut = int(starts[chunk_size])
            yield t.slice(0, cut)
            t = t.slice(cut)
            starts = starts[chunk_size:] - cut
        pending, pending_rows, runs = t.to_batches(), t.num_rows, len(starts)
    if pending_rows:
        yield pa.Table.from_batches(pending)


# --- writers ----------------------------------------------------------------------------------------


class _Writer:
    def __init__(self, path: str, fmt: str, schema: pa.Schema, meta: dict[str, str]):
        self.fmt = fmt
        if fmt == "csv":
            import pyarrow.csv as pcsv

            self._w = pcsv.CSVWriter(path, schema)
        else:
            import pyarrow.parquet as pq

            self._w = pq.ParquetWriter(path, schema.with_metadata(meta))

    def write(self, table: pa.Table) -> None:
        self._w.write_table(table)

    def close(self) -> None:
        self._w.close()


def _mark_repeats(table: pa.Table, seen: set, layout: str, rep: ChunkReport) -> pa.Table:
    """Cases whose id was screened before (a split long case, a repeated wide row) get an error
    (and leave the counts of the route they had)."""
    ids = table.column("case").to_pylist()
    fresh = set(ids)
    fresh.discard(None)
    if len(fresh) == len(ids) - ids.count(None) and seen.isdisjoint(fresh):
        seen |= fresh
        return table
    hits = []
    for i, cid in enumerate(ids):
        if cid is None:
            continue
        if cid in seen:
            hits.append(i)
        else:
            seen.add(cid)
    if not hits:
        return table
    mask = np.zeros(len(ids), dtype=bool)
    mask[hits] = True
    m = pa.array(mask)
    routes = table.column("route").to_pylist()
    crit = table.column("critical").to_pylist()
    for i in hits:
        if routes[i] == "matrix":
            rep.matrix -= 1
        elif routes[i] == "single":
            rep.single -= 1
        else:
            rep.errors -= 1
        rep.critical -= crit[i] is not None
        rep.errors += 1
    message = _NOT_CONTIGUOUS if layout == "long" else _REPEATED_ID
    cols = {}
    for name in table.column_names:
        col = table.column(name)
        if name == "case":
            cols[name] = col
        elif name == "error":
            cols[name] = pc.if_else(m, pa.scalar(message), col)
        else:
            cols[name] = pc.if_else(m, pa.scalar(None, col.type), col)
    return pa.table(cols, schema=table.schema)


def standing_caution() -> str:
    return " ".join(read_knowledge_yaml("cautions.yaml")["standing"].split())


def screen_file(input_path: str | Path, output_path: str | Path, layout: str = "auto",
                chunk_size: int = DEFAULT_CHUNK, k: int = DEFAULT_TOP, progress: TextIO | None = None) -> ScreenSummary:
    """Screen an extract file into an output file (CSV or Parquet each); returns the run summary."""
    inp, out = str(input_path), str(output_path)
    in_fmt, out_fmt = file_format(inp, "input"), file_format(out, "output")
    if not os.path.isfile(inp):
        raise ScreenInputError(f"input '{inp}': no such file")
    if os.path.exists(out) and os.path.samefile(inp, out):
        raise ScreenInputError("the output file must not be the input file")
    if chunk_size < 1:
        raise ScreenInputError(f"chunk size {chunk_size}: expected at least 1 case")
    if k < 1:
        raise ScreenInputError(f"top {k}: expected at least 1 candidate")
    t0 = time.perf_counter()
    sk = checked_knowledge()
    reader = _Reader(inp, in_fmt, batch_rows=max(1024, min(chunk_size, 65_536)))
    lay = detect_layout(reader.columns) if layout == "auto" else layout
    if lay not in ("long", "wide"):
        raise ScreenInputError(f"layout '{layout}': expected auto, long or wide")
    summary = ScreenSummary(inp, out, lay)
    if sk.unsupported and progress is not None:
        progress.write("tubulo screen: the matrix path is off for this run (" + "; ".join(sk.unsupported)
                       + "): every case takes the single-case path, which is much slower\n")
    meta = {"tubulo.caution": standing_caution(), "tubulo.knowledge": sk.fingerprint}
    bar = Progress(progress)
    seen: set = set()
    writer = _Writer(out, out_fmt, output_schema(k), meta)
    rep = ChunkReport()
    try:
        for chunk in _chunks(reader, lay, chunk_size):
            result = screen_table(chunk, lay, sk, k, rep)
            result = _mark_repeats(result, seen, lay, rep)
            writer.write(result)
            summary.chunks += 1
            summary.max_chunk_cases = max(summary.max_chunk_cases, result.num_rows)
            summary.max_chunk_rows = max(summary.max_chunk_rows, chunk.num_rows)
            bar.update(reader.fraction(), rep.cases)
    finally:
        writer.close()
    summary.seconds = time.perf_counter() - t0
    bar.update(1.0, rep.cases, final=True)
    for name in ("cases", "matrix", "single", "errors", "internal", "critical"):
        setattr(summary, name, getattr(rep, name))
    summary.single_reasons = dict(rep.single_reasons)
    summary.ignored_columns = list(rep.ignored_columns)
    return summary


def summary_text(s: ScreenSummary) -> str:
    """The end-of-run report for stderr: counts, critical values loud, the standing caution."""
    lines = [f"tubulo screen: {s.cases:,} cases ({s.layout} layout) in {s.seconds:.1f} s ({s.rate:,.0f} cases/s), "
             f"{s.chunks} chunk(s) -> {s.output}",
             f"  {s.matrix:,} scored on the compiled knowledge, {s.single:,} on the single-case path, "
             f"{s.errors:,} could not be read (column error)"]
    for why, count in s.single_reasons.items():
        lines.append(f"  single-case path: {count:,} case(s): {why}")
    if s.internal:
        lines.append(f"!!! {s.internal:,} case(s) hit an internal error of tubulo (column error starts with "
                     "'internal error'): they were not screened; please report them !!!")
    if s.ignored_columns:
        lines.append(f"  columns not read: {', '.join(s.ignored_columns)}")
    if s.critical:
        lines.append(f"!!! {s.critical:,} case(s) have CRITICAL values (column critical): act on them now under the "
                     "local protocol; do not wait for the screening result !!!")
    lines.append(f"caution: {standing_caution()}")
    return "\n".join(lines) + "\n"


def print_summary(s: ScreenSummary, stream: TextIO = sys.stderr) -> None:
    stream.write(summary_text(s))
