"""The Links view: one node of the knowledge graph and its neighbours grouped by edge kind, so a user
can walk segment -> transporter -> gene -> disorder or drug, and back."""

from __future__ import annotations

from typing import Any, Mapping

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.widgets import Input, OptionList, Static, Tree
from textual.widgets.option_list import Option

from ..graphview import Neighbour, edge_detail, neighbour_groups, node_title, search_nodes

__all__ = ["LinksView"]

_BIG_GROUP = 12  # larger groups start folded


class LinksView(Vertical):
    BINDINGS = [
        Binding("slash", "search", "find a node by name, id or gene symbol"),
        Binding("backspace", "back", "back to the previous node"),
        Binding("escape", "escape", "leave the search / go back"),
    ]

    def __init__(self, **kwargs: Any):
        super().__init__(**kwargs)
        self.nodes: Mapping[str, Any] = {}
        self.adjacency: Mapping[str, Any] = {}
        self.lookup: Mapping[str, list[str]] = {}
        self.current: str | None = None
        self.history: list[str] = []

    def compose(self) -> ComposeResult:
        yield Input(placeholder="/ find: segment, transporter, gene, hormone, drug, disorder, finding",
                    compact=True, id="links-search")
        yield OptionList(id="links-hits")
        yield Static("", markup=False, id="links-trail")
        yield Static("", markup=False, id="links-node")
        yield Tree(Text("neighbours"), id="links-tree")
        yield Static("", markup=False, id="links-edge")

    def on_mount(self) -> None:
        self.query_one("#links-hits", OptionList).display = False
        tree = self.query_one(Tree)
        tree.show_root = False

    def set_graph(self, nodes: Mapping[str, Any], adjacency: Mapping[str, Any], lookup: Mapping[str, list[str]]) -> None:
        self.nodes, self.adjacency, self.lookup = nodes, adjacency, lookup

    # --- navigation -------------------------------------------------------------------------

    def go(self, node: str, remember: bool = True) -> None:
        """Show `node` and its neighbours."""
        if node not in self.nodes:
            self.query_one("#links-node", Static).update(Text(f"'{node}' is not a node of the knowledge graph.",
                                                               style="bold"))
            return
        if remember and self.current and self.current != node:
            self.history.append(self.current)
            del self.history[:-50]
        self.current = node
        n = self.nodes[node]
        head = Text()
        head.append(node_title(self.nodes, node), style="bold")
        head.append(f"  [{n.get('kind', '?')}]  id {node}")
        extras = [f"{k} {v}" for k, v in n.items() if k not in ("kind", "label") and isinstance(v, (str, int, float))]
        if extras:
            head.append("  ·  " + ", ".join(extras), style="dim")
        self.query_one("#links-node", Static).update(head)
        trail = Text("trail: ", style="dim")
        trail.append(" › ".join(node_title(self.nodes, h) for h in (self.history[-4:] + [node])))
        trail.append("   (Backspace: back)", style="dim")
        self.query_one("#links-trail", Static).update(trail)
        tree = self.query_one(Tree)
        tree.clear()
        groups = neighbour_groups(self.nodes, self.adjacency, node)
        for g in groups:
            branch = tree.root.add(Text(f"{g.title} ({len(g.items)})", style="bold"), data=None,
                                   expand=len(g.items) <= _BIG_GROUP)
            for it in g.items:
                label = Text(it.label)
                label.append(f"  {it.kind}", style="dim")
                extra = edge_detail(it.edge)
                if extra:
                    label.append(f"  ({extra[:60]})", style="dim")
                branch.add_leaf(label, data=it)
        if not groups:
            tree.root.add_leaf(Text("no neighbours", style="dim"))
        tree.root.expand()
        tree.move_cursor(tree.root.children[0] if tree.root.children else None)
        self.query_one("#links-edge", Static).update(Text("Enter on a neighbour opens it; on a group folds it.",
                                                          style="dim"))

    def action_back(self) -> None:
        if self.history:
            self.go(self.history.pop(), remember=False)

    def action_search(self) -> None:
        self.query_one("#links-search", Input).focus()

    def action_escape(self) -> None:
        search = self.query_one("#links-search", Input)
        hits = self.query_one("#links-hits", OptionList)
        if search.has_focus or hits.has_focus:
            search.value = ""
            hits.display = False
            self.query_one(Tree).focus()
        else:
            self.action_back()

    # --- events -----------------------------------------------------------------------------

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id != "links-search":
            return
        event.stop()
        hits = self.query_one("#links-hits", OptionList)
        hits.clear_options()
        found = search_nodes(self.nodes, self.lookup, event.value, limit=20)
        for nid in found:
            t = Text(node_title(self.nodes, nid))
            t.append(f"  {(self.nodes.get(nid) or {}).get('kind', '')}  {nid}", style="dim")
            hits.add_option(Option(t, id=nid))
        hits.display = bool(found)
        if found:
            hits.highlighted = 0

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.input.id != "links-search":
            return
        event.stop()
        hits = self.query_one("#links-hits", OptionList)
        if hits.option_count:
            self._open_hit(str(hits.get_option_at_index(hits.highlighted or 0).id))

    def on_key(self, event: Any) -> None:
        if getattr(self.app.focused, "id", None) == "links-search" and event.key == "down":
            hits = self.query_one("#links-hits", OptionList)
            if hits.display:
                event.stop()
                hits.focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        if event.option_list.id == "links-hits":
            event.stop()
            self._open_hit(str(event.option.id))

    def _open_hit(self, nid: str) -> None:
        search = self.query_one("#links-search", Input)
        search.value = ""
        self.query_one("#links-hits", OptionList).display = False
        self.go(nid)
        self.query_one(Tree).focus()

    def on_tree_node_highlighted(self, event: Tree.NodeHighlighted) -> None:
        event.stop()
        it = event.node.data
        edge = self.query_one("#links-edge", Static)
        if isinstance(it, Neighbour):
            t = Text(f"{node_title(self.nodes, self.current or '')} — {it.edge.get('kind', '').replace('_', ' ')} — "
                     f"{it.label}")
            extra = edge_detail(it.edge)
            if extra:
                t.append(f"\n{extra}")
            t.append(f"\nsource: {it.edge.get('source') or 'not given'}", style="dim")
            edge.update(t)

    def on_tree_node_selected(self, event: Tree.NodeSelected) -> None:
        event.stop()
        it = event.node.data
        if isinstance(it, Neighbour):
            self.go(it.node)
