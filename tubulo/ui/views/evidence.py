"""The Evidence view: for one candidate, the findings for and against with their weight and what it
leaves unexplained; for the highlighted finding, the causal path from the defect or drug target to
the finding, one step per line with its source.  Enter on a step opens that node in Links."""

from __future__ import annotations

from typing import Any, Mapping

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option

from ..graphview import EDGE_WORDS
from ..model import PathStep, candidate_rows, fmt_probability, path_steps
from ..widgets import weight_bar

__all__ = ["EvidenceView", "OpenNode", "direction_mark"]


class OpenNode(Message):
    def __init__(self, node: str):
        super().__init__()
        self.node = node


def direction_mark(direction: int | None) -> str:
    return {1: "↑", -1: "↓"}.get(direction, "?") if direction is not None else "?"


class EvidenceView(Vertical):
    BINDINGS = [
        Binding("left_square_bracket", "step_candidate(-1)", "previous candidate"),
        Binding("right_square_bracket", "step_candidate(1)", "next candidate"),
        Binding("escape", "back", "back to the differential"),
    ]

    def __init__(self, **kwargs: Any):
        super().__init__(**kwargs)
        self.cid: str | None = None
        self.document: Mapping[str, Any] | None = None
        self.tables: Mapping[str, Any] = {}
        self.adjacency: Mapping[str, Any] | None = None
        self.items: dict[str, Mapping[str, Any]] = {}
        self.steps: tuple[PathStep, ...] = ()

    def compose(self) -> ComposeResult:
        yield Static(Text("Choose a candidate in the Differential (F3) and press Enter."), markup=False, id="ev-head")
        with Horizontal(id="ev-body"):
            with Vertical(id="ev-left"):
                yield Static(Text("EVIDENCE (log LR; + raises, − lowers) · Enter: its path", style="bold"),
                             classes="pane-title")
                yield OptionList(id="ev-items")
            with Vertical(id="ev-right"):
                yield Static(Text("PATH", style="bold"), markup=False, id="ev-path-title", classes="pane-title")
                yield OptionList(id="ev-path")
                yield Static("", markup=False, id="ev-step")

    # --- filling -----------------------------------------------------------------------

    def candidate(self) -> Mapping[str, Any] | None:
        if not self.document or not self.cid:
            return None
        for c in self.document.get("candidates") or []:
            if c["id"] == self.cid:
                return c
        return None

    def show(self, document: Mapping[str, Any] | None, tables: Mapping[str, Any], adjacency: Mapping[str, Any] | None,
             cid: str | None = None) -> None:
        self.document = document
        self.tables = tables
        self.adjacency = adjacency
        if cid is not None:
            self.cid = cid
        if document and (self.cid is None or self.candidate() is None) and document.get("candidates"):
            self.cid = document["candidates"][0]["id"]
        self._fill()

    def _fill(self) -> None:
        head = self.query_one("#ev-head", Static)
        items = self.query_one("#ev-items", OptionList)
        c = self.candidate()
        items.clear_options()
        self.items = {}
        if c is None or self.document is None:
            head.update(Text("No candidate to show yet.", style="bold"))
            self._show_path(None)
            return
        cands = self.document["candidates"]
        rank = [x["id"] for x in cands].index(c["id"]) + 1
        h = Text()
        h.append(f"#{rank}/{len(cands)} ", style="dim")
        h.append(c["name"], style="bold")
        h.append(f" {fmt_probability(c['probability'])} {c['kind']}")
        if c.get("genes"):
            h.append(f" · {', '.join(c['genes'])}")
        nodes = self.tables.get("nodes") or {}
        if c.get("segments"):
            h.append(" · " + ", ".join(str((nodes.get(s) or {}).get("label", s)) for s in c["segments"]))
        notes = list(c.get("prior_notes") or [])
        if notes:
            h.append(f"\nprior: {'; '.join(notes)}", style="dim")
        head.update(h)
        if "support" not in c:
            items.add_option(Option(Text(f"Evidence is worked out for the {len(candidate_rows(self.document)) - 1} "
                                         "leading candidates; this one ranks lower."), disabled=True))
            self._show_path(None)
            return
        items.add_option(Option(Text("FOR", style="bold"), disabled=True))
        for i, e in enumerate(c.get("support") or []):
            self.items[f"s{i}"] = e
            items.add_option(Option(self._item_text(e), id=f"s{i}"))
        if not c.get("support"):
            items.add_option(Option(Text("  nothing in the workup raises it", style="dim"), disabled=True))
        items.add_option(Option(Text("AGAINST", style="bold"), disabled=True))
        for i, e in enumerate(c.get("against") or []):
            self.items[f"a{i}"] = e
            items.add_option(Option(self._item_text(e), id=f"a{i}"))
        if not c.get("against"):
            items.add_option(Option(Text("  nothing in the workup lowers it", style="dim"), disabled=True))
        if c.get("unexplained"):
            items.add_option(Option(Text("NOT EXPLAINED BY IT", style="bold"), disabled=True))
            for u in c["unexplained"]:
                items.add_option(Option(Text(f"  ? {u}"), disabled=True))
        first = next((i for i in range(items.option_count) if not items.get_option_at_index(i).disabled), None)
        if first is not None:
            items.highlighted = first
            self._show_path(self.items[str(items.get_option_at_index(first).id)])
        else:
            self._show_path(None)

    @staticmethod
    def _item_text(e: Mapping[str, Any]) -> Text:
        llr = float(e["log_lr"])
        t = Text(f"{'+' if llr >= 0 else '−'}{abs(llr):.2f} ", style="bold")
        t.append(weight_bar(llr))
        t.append(f" {e['label']}: {str(e['state']).replace('_', ' ')}")
        if e.get("path"):
            t.append(" ⇢", style="bold")
        t.append(f"  ({e.get('from', '')})", style="dim")
        return t

    def _show_path(self, item: Mapping[str, Any] | None) -> None:
        ol = self.query_one("#ev-path", OptionList)
        title = self.query_one("#ev-path-title", Static)
        ol.clear_options()
        self.steps = ()
        c = self.candidate()
        if item is None or c is None:
            title.update(Text("PATH", style="bold"))
            self.query_one("#ev-step", Static).update("")
            return
        title.update(Text(f"PATH to {item['label']}: {str(item['state']).replace('_', ' ')}", style="bold"))
        self.steps = path_steps(c, item, self.tables, self.adjacency)
        if not item.get("path"):
            src = ((self.tables.get("candidates") or {}).get(c["id"]) or {}).get("manifest_sources") or {}
            ol.add_option(Option(Text("No drawn path: this finding is weighed from the curated frequency "
                                      "in the candidate's entry."), disabled=True))
            for i, s in enumerate(self.steps[:1]):
                ol.add_option(Option(self._step_text(i, s), id=str(i)))
            self.query_one("#ev-step", Static).update(
                Text(f"weight from: {src.get(item['variable'], 'the candidate entry')}", style="dim"))
            return
        for i, s in enumerate(self.steps):
            ol.add_option(Option(self._step_text(i, s), id=str(i)))
        ol.highlighted = 0
        self._show_step(0)

    @staticmethod
    def _step_text(i: int, s: PathStep) -> Text:
        t = Text(f"{i:>2} ")
        if s.edge:
            words = EDGE_WORDS.get(s.edge, (s.edge.replace("_", " "), ""))[0]
            t.append(f"{words} ", style="dim")
        t.append(f"{s.label}", style="bold" if i == 0 else "")
        if i:
            t.append(f" {direction_mark(s.direction)}", style="bold")
        t.append(f"  {s.kind}", style="dim")
        return t

    def _show_step(self, index: int) -> None:
        st = self.query_one("#ev-step", Static)
        if not (0 <= index < len(self.steps)):
            st.update("")
            return
        s = self.steps[index]
        t = Text()
        if index:
            t.append(f"{s.label} is {'raised' if s.direction == 1 else 'lowered' if s.direction == -1 else 'changed'}",
                     style="bold")
            if s.edge:
                t.append(f" (edge: {s.edge.replace('_', ' ')}, {'same' if s.sign == 1 else 'opposite' if s.sign == -1 else 'unsigned'})")
        else:
            t.append(f"{s.label}", style="bold")
        if s.where:
            t.append(f"\nin: {', '.join(s.where)}")
        if s.note:
            t.append(f"\nnote: {s.note}")
        t.append(f"\nsource: {s.source or 'not given'}", style="dim")
        st.update(t)

    # --- events --------------------------------------------------------------------------

    def on_option_list_option_highlighted(self, event: OptionList.OptionHighlighted) -> None:
        event.stop()
        if event.option_list.id == "ev-items" and event.option.id in self.items:
            self._show_path(self.items[str(event.option.id)])
        elif event.option_list.id == "ev-path" and event.option.id is not None:
            self._show_step(int(event.option.id))

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        if event.option_list.id == "ev-items":
            path = self.query_one("#ev-path", OptionList)
            path.focus()
            if self.steps and path.highlighted is None:
                path.highlighted = 0
        elif event.option_list.id == "ev-path" and event.option.id is not None:
            i = int(event.option.id)
            if 0 <= i < len(self.steps):
                self.post_message(OpenNode(self.steps[i].node))

    def action_step_candidate(self, delta: int) -> None:
        if not self.document:
            return
        rows = candidate_rows(self.document)
        ids = [r["id"] for r in rows]
        i = ids.index(self.cid) if self.cid in ids else 0
        self.cid = ids[max(0, min(len(ids) - 1, i + delta))]
        self._fill()

    def action_back(self) -> None:
        if self.query_one("#ev-path", OptionList).has_focus:
            self.query_one("#ev-items", OptionList).focus()
        else:
            self.app.action_view("differential")  # type: ignore[attr-defined]
