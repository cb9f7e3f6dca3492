"""The Plan view: the next tests ranked by the information they are expected to add, with the
candidates they would separate, and the gene list with its coverage of the inherited probability."""

from __future__ import annotations

from typing import Any, Mapping

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.widgets import DataTable, Static

from ..widgets import bar
from .evidence import OpenNode

__all__ = ["PlanView"]


class PlanView(Vertical):
    def __init__(self, **kwargs: Any):
        super().__init__(**kwargs)
        self.genes: list[str] = []

    def compose(self) -> ComposeResult:
        yield Static("", markup=False, id="plan-tests-head", classes="pane-title")
        yield DataTable(id="plan-tests", cursor_type="row")
        yield Static("", markup=False, id="plan-panel-head", classes="pane-title")
        yield DataTable(id="plan-genes", cursor_type="row")

    def on_mount(self) -> None:
        t = self.query_one("#plan-tests", DataTable)
        t.add_column("bits", width=5)
        t.add_column("cost", width=8)
        t.add_column("test", width=34)
        t.add_column("would separate", width=40)
        g = self.query_one("#plan-genes", DataTable)
        g.add_column("gene", width=9)
        g.add_column("share", width=18)
        g.add_column("panel", width=6)
        g.add_column("candidates with this gene", width=44)

    def show(self, document: Mapping[str, Any] | None, tables: Mapping[str, Any]) -> None:
        tests = self.query_one("#plan-tests", DataTable)
        genes = self.query_one("#plan-genes", DataTable)
        tests.clear()
        genes.clear()
        self.genes = []
        th = self.query_one("#plan-tests-head", Static)
        gh = self.query_one("#plan-panel-head", Static)
        if not document:
            th.update(Text("No plan yet: the workup is not valid (see Workup, F2).", style="bold"))
            gh.update("")
            return
        cands = tables.get("candidates") or {}

        def name(cid: str) -> str:
            return str((cands.get(cid) or {}).get("name") or ("No listed cause fits" if cid == "residual" else cid))

        nt = document.get("next_tests") or []
        th.update(Text(f"NEXT TESTS, most informative first (expected information in bits): {len(nt)}"
                       if nt else "NEXT TESTS: none left that would change the ranking by 0.01 bit or more", style="bold"))
        for t in nt:
            tests.add_row(Text(f"{t['expected_bits']:.2f}"), Text(str(t["cost"])), Text(str(t["test"])),
                          Text("; ".join(name(c) for c in t.get("separates") or []) or "—"))
        p = document.get("panel") or {}
        cover = list(p.get("cover") or [])
        if cover:
            gh.update(Text(f"GENE PANEL: inherited causes hold {p.get('inherited_mass', 0) * 100:.0f} % of the probability; "
                           f"{len(cover)} gene{'s cover' if len(cover) != 1 else ' covers'} {p.get('covered', 0) * 100:.0f} % of it "
                           f"(target {p.get('coverage_target', 0) * 100:.0f} %): {', '.join(cover)}", style="bold"))
        else:
            gh.update(Text("GENE PANEL: no inherited candidate holds probability", style="bold"))
        by_gene: dict[str, list[str]] = {}
        for cid, c in cands.items():
            if c.get("kind") == "inherited":
                for g in c.get("genes") or []:
                    by_gene.setdefault(g, []).append(c["name"])
        for row in p.get("genes") or []:
            share = float(row["mass"])
            if share < 5e-4 and row["gene"] not in cover:
                continue
            cell = Text(f"{share * 100:5.1f} % ")
            cell.append(bar(share, 9))
            self.genes.append(row["gene"])
            genes.add_row(Text(row["gene"], style="bold"), cell, Text("✓ on" if row["gene"] in cover else ""),
                          Text("; ".join(by_gene.get(row["gene"], []))), key=row["gene"])

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        if event.data_table.id == "plan-genes" and event.row_key is not None and event.row_key.value:
            event.stop()
            self.post_message(OpenNode(f"gene:{event.row_key.value}"))
