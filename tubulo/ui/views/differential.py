"""The Differential view: ranked candidates with probability as a number and a bar, kind, genes and
segments; Enter opens the evidence of the highlighted one."""

from __future__ import annotations

from typing import Any, Mapping

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.message import Message
from textual.widgets import DataTable, Static

from ..model import candidate_rows, fmt_probability
from ..widgets import bar, put

__all__ = ["DifferentialView", "OpenCandidate"]


class OpenCandidate(Message):
    def __init__(self, cid: str):
        super().__init__()
        self.cid = cid


def short_segment(seg: str) -> str:
    """A segment id as a column shows it: "dct1" -> "DCT1", "proximal_tubule" -> "proximal tubule"."""
    return seg.upper() if len(seg) <= 4 else seg.replace("_", " ")


def segment_labels(tables: Mapping[str, Any], segments: list[str]) -> str:
    nodes = tables.get("nodes") or {}
    return ", ".join(str((nodes.get(s) or {}).get("label") or s) for s in segments)


class DifferentialView(Vertical):
    BINDINGS = [Binding("enter", "open", "open the evidence of the highlighted candidate", show=False)]

    def __init__(self, **kwargs: Any):
        super().__init__(**kwargs)
        self.rows: list[Mapping[str, Any]] = []
        self.document: Mapping[str, Any] | None = None
        self._stale = False
        self._columns_for = 0

    def compose(self) -> ComposeResult:
        yield Static(Text("Working out the differential…"), markup=False, id="diff-head")
        table = DataTable(id="diff-table", cursor_type="row", zebra_stripes=False)
        yield table
        yield Static("", markup=False, id="diff-detail")

    def on_mount(self) -> None:
        self._columns_for = 0
        self._setup_columns()

    def _setup_columns(self) -> None:
        """Columns sized to the terminal: the candidate's name takes what is left."""
        width = self.app.size.width or 80
        if width == self._columns_for:
            return
        self._columns_for = width
        t = self.query_one(DataTable)
        t.clear(columns=True)
        genes = 10 if width < 100 else 16
        segments = 0 if width < 110 else 24
        columns = 6 if segments else 5
        name = max(28, width - (3 + 16 + 9 + genes + segments) - 2 * columns - 4)
        t.add_column("#", key="rank", width=3)
        t.add_column("probability", key="p", width=16)
        t.add_column("candidate", key="name", width=name)
        t.add_column("kind", key="kind", width=9)
        t.add_column("genes", key="genes", width=genes)
        if segments:
            t.add_column("segments", key="segments", width=segments)

    def on_resize(self) -> None:
        if self.document is not None and self.app.size.width != self._columns_for:
            self.show(self.document, getattr(self.app, "tables", None) or {}, self._stale)

    def show(self, document: Mapping[str, Any] | None, tables: Mapping[str, Any], stale: bool) -> None:
        head = self.query_one("#diff-head", Static)
        if document is None:
            head.update(Text("No differential yet: the workup is not valid (see Workup, F2).", style="bold"))
            return
        keep = None
        if self.rows and self.query_one(DataTable).row_count:
            cur = self.query_one(DataTable).cursor_row
            if 0 <= cur < len(self.rows):
                keep = self.rows[cur]["id"]
        self.document = document
        self._stale = stale
        self.rows = candidate_rows(document)
        self._setup_columns()
        t = self.query_one(DataTable)
        t.clear()
        ranks = {c["id"]: i for i, c in enumerate(document.get("candidates") or [], 1)}
        for c in self.rows:
            p = float(c["probability"])
            cell = Text(f"{fmt_probability(p):>7} ")
            cell.append(bar(p, 9))
            rank = Text(str(ranks[c["id"]]))
            cells = [rank, cell, Text(c["name"]), Text(c["kind"]), Text(", ".join(c.get("genes") or []))]
            if len(t.columns) > 5:
                cells.append(Text(", ".join(short_segment(x) for x in c.get("segments") or [])))
            t.add_row(*cells, key=c["id"])
        n = len(document.get("candidates") or [])
        lead = document["candidates"][0] if document.get("candidates") else None
        ht = Text()
        if stale:
            ht.append("✗ from the last valid workup  ", style="bold")
        if lead:
            ht.append("Leading: ", style="bold")
            ht.append(f"{lead['name']} {fmt_probability(lead['probability'])}")
        ht.append(f"  ·  {n} candidates weighed; probabilities add up to 100 %.", style="dim")
        put(head, ht)
        if keep is not None:
            ids = [r["id"] for r in self.rows]
            if keep in ids:
                t.move_cursor(row=ids.index(keep), animate=False)
        self._detail(tables)

    def _detail(self, tables: Mapping[str, Any] | None = None) -> None:
        tables = tables if tables is not None else (getattr(self.app, "tables", None) or {})
        t = self.query_one(DataTable)
        d = self.query_one("#diff-detail", Static)
        if not self.rows or t.cursor_row < 0 or t.cursor_row >= len(self.rows):
            d.update("")
            return
        c = self.rows[t.cursor_row]
        txt = Text()
        txt.append(c["name"], style="bold")
        txt.append(f"  [{c['kind']}]")
        if c.get("genes"):
            txt.append(f"  genes {', '.join(c['genes'])}")
        if c.get("segments"):
            txt.append(f"  ·  segments {segment_labels(tables, c['segments'])}")
        if c.get("xrefs"):
            txt.append(f"  ·  {' '.join(c['xrefs'][:4])}", style="dim")
        txt.append("\nEnter: evidence for and against  ·  F5: its links  ·  F6: the nephron map", style="dim")
        put(d, txt)

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        event.stop()
        self._detail()

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        if event.row_key is not None and event.row_key.value:
            self.post_message(OpenCandidate(str(event.row_key.value)))

    def action_open(self) -> None:
        t = self.query_one(DataTable)
        if self.rows and 0 <= t.cursor_row < len(self.rows):
            self.post_message(OpenCandidate(self.rows[t.cursor_row]["id"]))

    def highlighted_id(self) -> str | None:
        t = self.query_one(DataTable)
        if self.rows and 0 <= t.cursor_row < len(self.rows):
            return str(self.rows[t.cursor_row]["id"])
        return None
