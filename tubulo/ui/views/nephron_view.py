"""The Nephron view: the drawing with the segments of the leading candidates marked, and, in the
forward view, the segments a chosen drug acts in with the findings it is expected to produce."""

from __future__ import annotations

from typing import Any, Mapping

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.widgets import Static

from ..model import fmt_probability
from ..nephron import render_rows, site_lists

__all__ = ["NephronView"]

_ROLE_STYLE = {"": "", "zone": "dim", "box": "", "mark": "bold reverse", "drug": "bold underline",
               "both": "bold reverse underline"}


class NephronView(VerticalScroll, can_focus=True):
    BINDINGS = [
        Binding("plus,equals_sign", "marked(1)", "mark one more candidate"),
        Binding("minus", "marked(-1)", "mark one candidate fewer"),
        Binding("d", "choose_drug", "forward view: choose a drug to draw"),
        Binding("x", "clear_drug", "forward view: clear the drug"),
    ]

    def __init__(self, **kwargs: Any):
        super().__init__(**kwargs)
        self.count = 3
        self.drug: str | None = None
        self.document: Mapping[str, Any] | None = None
        self.tables: Mapping[str, Any] = {}
        self.adjacency: Mapping[str, Any] | None = None

    def compose(self) -> ComposeResult:
        yield Static("", markup=False, id="map")
        yield Static("", markup=False, id="map-legend")

    def show(self, document: Mapping[str, Any] | None, tables: Mapping[str, Any],
             adjacency: Mapping[str, Any] | None) -> None:
        self.document, self.tables, self.adjacency = document, tables, adjacency
        self._draw()

    def _leaders(self) -> list[Mapping[str, Any]]:
        if not self.document:
            return []
        return [c for c in self.document.get("candidates") or [] if c["kind"] != "residual"][: self.count]

    def _draw(self) -> None:
        nodes = self.tables.get("nodes") or {}
        leaders = self._leaders()
        marks: set[str] = set()
        legend = Text()
        legend.append(f"»…« the {len(leaders)} leading candidate{'s' if len(leaders) != 1 else ''} (+/− to change)",
                      style="bold")
        for i, c in enumerate(leaders, 1):
            m, elsewhere = site_lists(c.get("segments") or [], nodes, self.adjacency)
            marks |= m
            where = ", ".join(sorted(str((nodes.get(s) or {}).get("label", s)) for s in m))
            legend.append(f"\n {i}. {c['name']} {fmt_probability(c['probability'])}: ")
            legend.append(where or "no nephron segment drawn")
            if elsewhere:
                legend.append(f"; outside the drawing: {', '.join(elsewhere)}")
        drug_marks: set[str] = set()
        if self.drug and self.drug in (self.tables.get("candidates") or {}):
            from ...output.predict import predict_document

            doc = predict_document(self.tables, self.drug)
            m, elsewhere = site_lists(doc.get("segments") or [], nodes, self.adjacency)
            drug_marks |= m
            legend.append(f"\n◆…◆ forward view: {doc['name']}", style="bold")
            legend.append("  (d: another drug, x: clear)", style="dim")
            if doc.get("members"):
                legend.append(f"\n   members: {', '.join(x for x in doc['members'] if x)}")
            for a in doc.get("acts_on") or []:
                target = str((nodes.get(a.get("target")) or {}).get("label", a.get("target")))
                legend.append(f"\n   acts on {target}: {a.get('effect')}  ")
                legend.append(f"({a.get('source')})", style="dim")
            if elsewhere:
                legend.append(f"\n   outside the drawing: {', '.join(elsewhere)}")
            exp = doc.get("expected") or []
            if exp:
                legend.append("\n   expected, most telling first: ")
                legend.append("; ".join(f"{e['label']} {str(e['state']).replace('_', ' ')} (LR {e['likelihood_ratio']:.1f})"
                                        for e in exp[:5]))
        else:
            legend.append("\n◆…◆ forward view: press d to choose a drug and see where it acts", style="dim")
        t = Text()
        for r, runs in enumerate(render_rows(frozenset(marks), frozenset(drug_marks))):
            if r:
                t.append("\n")
            for text, role in runs:
                t.append(text, style=_ROLE_STYLE.get(role, ""))
        self.query_one("#map", Static).update(t)
        self.query_one("#map-legend", Static).update(legend)

    def action_marked(self, delta: int) -> None:
        self.count = max(1, min(8, self.count + delta))
        self._draw()

    def drug_options(self) -> list[tuple[str, str]]:
        """The drug classes, those of the case's medications first."""
        cands = self.tables.get("candidates") or {}
        listed: list[str] = []
        for m in ((self.document or {}).get("case") or {}).get("medications") or []:
            cid = m.get("class") if isinstance(m, Mapping) else None
            if cid and cid not in listed:
                listed.append(cid)
        drugs = [cid for cid, c in cands.items() if c.get("kind") == "drug"]
        ordered = listed + sorted((d for d in drugs if d not in listed), key=lambda d: cands[d]["name"].lower())
        return [(("on the list: " if d in listed else "") + cands[d]["name"], d) for d in ordered if d in cands]

    def action_choose_drug(self) -> None:
        from ..dialogs import PickOne

        def chosen(value: str | None) -> None:
            if value:
                self.set_drug(value)

        self.app.push_screen(PickOne("Draw a drug's sites (forward view)", self.drug_options(), self.drug or ""),
                             chosen)

    def set_drug(self, cid: str | None) -> None:
        self.drug = cid
        self._draw()

    def action_clear_drug(self) -> None:
        self.set_drug(None)
