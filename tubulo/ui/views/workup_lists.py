"""The list editor of the Workup view: findings (HPO search by label or synonym, ids shown, present or
absent), medications (INN completion) and exposures."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.suggester import SuggestFromList
from textual.widgets import Input, OptionList, Static
from textual.widgets.option_list import Option

from ..model import drug_names, exposure_names, list_items, problems_by_field, resolve_feature, search_hpo
from .workup import problem_text

__all__ = ["ListEditor"]

_TITLES = {"features": "Findings: present or looked for and absent (HPO)",
           "medications": "Medications (INN; synonyms accepted)", "exposures": "Exposures"}


class ListEditor(ModalScreen[None]):
    CSS_PATH = str(Path(__file__).resolve().parent.parent / "dialogs.tcss")
    BINDINGS = [
        Binding("escape", "close", "close the list editor"),
        Binding("space", "toggle", "present ↔ absent (findings)"),
        Binding("delete", "remove", "remove the highlighted item"),
    ]

    def __init__(self, name: str):
        super().__init__()
        self.list_name = name
        self.rows: list[tuple[str, int]] = []  # (section, index) of each listed item

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide"):
            yield Static(Text(_TITLES[self.list_name], style="bold"), classes="dialog-title")
            if self.list_name == "features":
                hint = ("Type a label, synonym or HP id; ↓ to the matches, Enter adds as present. "
                        "◆ marks findings the knowledge weighs.")
                placeholder = "e.g. nephrocalcinosis, polyuria, HP:0000121"
            elif self.list_name == "medications":
                hint = "Type a medicine; → accepts the completion; Enter adds it."
                placeholder = "e.g. furosemide"
            else:
                hint = "Type an exposure; → accepts the completion; Enter adds it."
                placeholder = "e.g. licorice"
            yield Static(Text(hint, style="dim"))
            yield Input(placeholder=placeholder, id="list-input", compact=True)
            yield OptionList(id="list-hits")
            yield Static(Text("LISTED  (Space: present ↔ absent · Delete: remove · Esc: close)", style="bold"))
            yield OptionList(id="list-items")
            yield Static("", markup=False, id="list-msg")

    def on_mount(self) -> None:
        self.query_one("#list-hits", OptionList).display = False
        tables = getattr(self.app, "tables", None) or {}
        if self.list_name == "medications" and tables:
            self.query_one(Input).suggester = SuggestFromList(drug_names(tables), case_sensitive=False)
        elif self.list_name == "exposures" and tables:
            self.query_one(Input).suggester = SuggestFromList(exposure_names(tables), case_sensitive=False)
        self.refresh_items()
        self.query_one(Input).focus()

    # --- the listed items ------------------------------------------------------------------

    def _sections(self) -> tuple[str, ...]:
        return ("features", "absent_features") if self.list_name == "features" else (self.list_name,)

    def _problems(self) -> dict[str, list]:
        ev = getattr(self.app, "evaluation", None)
        if ev is None:
            return {}
        return problems_by_field(list(ev.problems) + list(ev.notes), self.app.raw)[0]

    def refresh_items(self) -> None:
        from ...vocab import lookup_drug, lookup_exposure

        ol = self.query_one("#list-items", OptionList)
        keep = ol.highlighted
        ol.clear_options()
        self.rows = []
        probs = self._problems()
        cands = (getattr(self.app, "tables", None) or {}).get("candidates") or {}
        for section in self._sections():
            for i, text in enumerate(list_items(self.app.raw, section)):
                t = Text()
                mine = probs.get(f"{section}[{i}]", [])
                if any(p.level == "error" for p in mine):
                    t.append("✗ ", style="bold")
                if self.list_name == "features":
                    t.append("present " if section == "features" else "absent  ", style="bold")
                    hit = resolve_feature(text)
                    t.append(f"{hit[0]} {hit[1]}" if hit else text)
                    if hit and text.strip() not in (hit[0], f"{hit[0]} {hit[1]}"):
                        t.append(f"  (written '{text}')", style="dim")
                elif self.list_name == "medications":
                    t.append(text, style="bold")
                    m = lookup_drug(text)
                    if m is None:
                        t.append("  not in tubulo's drug knowledge: kept, not weighed", style="dim")
                    else:
                        name = (cands.get(m.class_id) or {}).get("name", m.class_id)
                        t.append(f"  → {m.inn}: {name}" + (f" (ATC {m.atc})" if m.atc else ""))
                else:
                    t.append(text, style="bold")
                    eid = lookup_exposure(text)
                    t.append(f"  → {eid}" if eid else "  not an exposure tubulo knows")
                ol.add_option(Option(t, id=f"{section}:{i}"))
                self.rows.append((section, i))
        if not self.rows:
            ol.add_option(Option(Text("nothing listed yet", style="dim"), disabled=True))
        else:
            ol.highlighted = 0 if keep is None else min(keep, len(self.rows) - 1)
        self._show_msg()

    def _show_msg(self) -> None:
        ol = self.query_one("#list-items", OptionList)
        msg = self.query_one("#list-msg", Static)
        if ol.highlighted is None or not self.rows or ol.highlighted >= len(self.rows):
            msg.update("")
            return
        section, i = self.rows[ol.highlighted]
        msg.update(problem_text(self._problems().get(f"{section}[{i}]", [])))

    def _edit(self, lists: dict[str, list[str]]) -> None:
        self.app.edit_lists(lists)  # type: ignore[attr-defined]
        self.refresh_items()

    def _highlighted(self) -> tuple[str, int] | None:
        ol = self.query_one("#list-items", OptionList)
        if ol.highlighted is None or ol.highlighted >= len(self.rows):
            return None
        return self.rows[ol.highlighted]

    def action_toggle(self) -> None:
        if self.list_name != "features" or self.focused is self.query_one(Input):
            return
        hit = self._highlighted()
        if hit is None:
            return
        section, i = hit
        items = list_items(self.app.raw, section)
        text = items.pop(i)
        other = "absent_features" if section == "features" else "features"
        self._edit({section: items, other: list_items(self.app.raw, other) + [text]})

    def action_remove(self) -> None:
        if self.focused is self.query_one(Input):
            return
        hit = self._highlighted()
        if hit is None:
            return
        section, i = hit
        items = list_items(self.app.raw, section)
        items.pop(i)
        self._edit({section: items})

    def action_close(self) -> None:
        self.dismiss(None)

    # --- adding ----------------------------------------------------------------------------

    def add(self, text: str) -> None:
        """Add a finding (by HPO id) or a medicine/exposure name to the list."""
        text = text.strip()
        if not text:
            return
        if self.list_name == "features":
            hit = resolve_feature(text)
            present = list_items(self.app.raw, "features")
            absent = list_items(self.app.raw, "absent_features")
            known = {(resolve_feature(x) or ("",))[0] for x in present + absent}
            if hit and hit[0] in known:
                self.notify(f"{hit[0]} {hit[1]} is already listed")
                return
            self._edit({"features": present + [f"{hit[0]} {hit[1]}" if hit else text]})
        else:
            self._edit({self.list_name: list_items(self.app.raw, self.list_name) + [text]})
        inp = self.query_one(Input)
        inp.value = ""
        self.query_one("#list-hits", OptionList).display = False
        inp.focus()

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()
        if self.list_name != "features":
            return
        hits = search_hpo(event.value, limit=8)
        ol = self.query_one("#list-hits", OptionList)
        ol.clear_options()
        weighed = set((getattr(self.app, "tables", None) or {}).get("hpo_labels") or {})
        for h in hits:
            t = Text("◆ " if h.id in weighed else "  ")
            t.append(f"{h.id} {h.label}")
            if h.matched != h.label:
                t.append(f"  ({h.matched})", style="dim")
            ol.add_option(Option(t, id=h.id))
        ol.display = bool(hits)
        if hits:
            ol.highlighted = 0

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if self.list_name == "features":
            ol = self.query_one("#list-hits", OptionList)
            if ol.display and ol.option_count:
                self.add(str(ol.get_option_at_index(ol.highlighted or 0).id))
            elif event.value.strip():
                self.add(event.value)  # an unknown phrase is kept so that its error shows
        else:
            self.add(event.value)

    def on_key(self, event: Any) -> None:
        if self.focused is self.query_one(Input) and event.key == "down":
            hits = self.query_one("#list-hits", OptionList)
            event.stop()
            (hits if hits.display else self.query_one("#list-items", OptionList)).focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        if event.option_list.id == "list-hits":
            self.add(str(event.option.id))

    def on_option_list_option_highlighted(self, event: OptionList.OptionHighlighted) -> None:
        event.stop()
        if event.option_list.id == "list-items":
            self._show_msg()
