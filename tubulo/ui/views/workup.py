"""The Workup view: the entry form.  Every change posts an edit to the application, which revalidates
and re-ranks in a worker; the problems that come back are shown under the field they belong to,
word for word as the command line prints them."""

from __future__ import annotations

import re
from typing import Any, Mapping, Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.message import Message
from textual.suggester import SuggestFromList
from textual.widgets import Button, Input, OptionList, Static
from textual.widgets.option_list import Option

from ...errors import Problem
from ..model import (GROUPS, FieldSpec, compose_quantity, fields_by_group, get_value, list_items,
                     resolve_feature, search_hpo, split_quantity)
from ..widgets import Picker

__all__ = ["FieldEdited", "FieldRow", "ListsEdited", "WorkupView", "dom_id"]

_BP_TEXT = re.compile(r"^\s*(\d+(?:[.,]\d+)?\s*/\s*\d+(?:[.,]\d+)?)\s*(.*?)\s*$")


def dom_id(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_-]", "-", text)


class FieldEdited(Message):
    """A form field changed: the value to store (None removes it)."""

    def __init__(self, spec: FieldSpec, value: Any):
        super().__init__()
        self.spec = spec
        self.value = value


class ListsEdited(Message):
    """One or more list sections changed (features, absent_features, medications, exposures)."""

    def __init__(self, lists: Mapping[str, Sequence[str]]):
        super().__init__()
        self.lists = dict(lists)


def _msg_text(problems: Sequence[Problem]) -> Text:
    t = Text()
    for i, p in enumerate(problems):
        if i:
            t.append("\n")
        mark = {"error": "✗ ", "warning": "▲ "}.get(p.level, "ⓘ ")
        t.append(mark + str(p), style="bold" if p.level == "error" else "")
    return t


class FieldRow(Vertical):
    """One field: label, value box, unit or choice picker, reference flag; its messages below."""

    def __init__(self, spec: FieldSpec, raw: Mapping[str, Any]):
        super().__init__(id="f-" + dom_id(spec.id), classes="field-row")
        self.spec = spec
        value = get_value(raw, spec)
        self._shown: tuple[str, str] = ("", "")
        if spec.kind == "quantity":
            text, unit = split_quantity(value)
            self._shown = (text, unit or spec.default_unit)
        elif spec.kind == "bp":
            m = _BP_TEXT.match(str(value)) if value is not None else None
            self._shown = ((m.group(1), m.group(2) or spec.default_unit) if m
                           else ("" if value is None else str(value), spec.default_unit))
        elif spec.kind == "bool":
            word = {True: "yes", False: "no"}.get(value) if isinstance(value, bool) else (
                {"yes": "yes", "true": "yes", "no": "no", "false": "no"}.get(str(value).strip().lower(), str(value))
                if value is not None else "")
            self._shown = (word, "")
        elif spec.kind == "relatives":
            items = value if isinstance(value, list) else ([] if value is None else [value])
            self._shown = (", ".join(str(v) for v in items), "")
        else:
            self._shown = ("" if value is None else str(value), "")

    def compose(self) -> ComposeResult:
        s = self.spec
        with Horizontal(classes="line"):
            yield Static(s.label, markup=False, classes="f-label")
            if s.kind in ("quantity", "bp"):
                placeholder = "e.g. 118/76" if s.kind == "bp" else ""
                yield Input(self._shown[0], placeholder=placeholder, compact=True, classes="f-value",
                            id=f"in-{dom_id(s.id)}", select_on_focus=False)
                units = list(dict.fromkeys(s.units))
                yield Picker([(u or "(none)", u) for u in units], self._shown[1], title=f"Unit of {s.label}",
                             classes="f-unit", id=f"unit-{dom_id(s.id)}")
            elif s.kind in ("choice", "bool"):
                choices = ("yes", "no") if s.kind == "bool" else s.choices
                yield Picker([("—", "")] + [(c, c) for c in choices], self._shown[0], title=s.label,
                             classes="f-choice", id=f"in-{dom_id(s.id)}")
            else:
                placeholder = "e.g. brother, maternal uncle" if s.kind == "relatives" else ""
                yield Input(self._shown[0], placeholder=placeholder, compact=True, classes="f-text",
                            id=f"in-{dom_id(s.id)}", select_on_focus=False)
            yield Static("", markup=False, classes="f-flag")
        yield Static("", markup=False, classes="f-msg")

    def _current(self) -> tuple[str, str]:
        s = self.spec
        if s.kind in ("quantity", "bp"):
            return self.query_one(Input).value, self.query_one(Picker).value
        if s.kind in ("choice", "bool"):
            return self.query_one(Picker).value, ""
        return self.query_one(Input).value, ""

    def _stored(self, text: str, unit: str) -> Any:
        s = self.spec
        if s.kind == "quantity":
            return compose_quantity(s, text, unit)
        if s.kind == "bp":
            text = text.strip()
            if not text:
                return None
            return text if re.search(r"[A-Za-z]", text) else f"{text} {unit}".strip()
        if s.kind == "bool":
            return {"yes": True, "no": False}.get(text) if text else None
        if s.kind == "relatives":
            items = [w.strip() for w in text.split(",") if w.strip()]
            return items or None
        return text.strip() or None

    def _changed(self) -> None:
        now = self._current()
        if now == self._shown:
            return
        self._shown = now
        self.post_message(FieldEdited(self.spec, self._stored(*now)))

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()
        self._changed()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.screen.focus_next()

    def on_picker_changed(self, event: Picker.Changed) -> None:
        event.stop()
        self._changed()

    def show_feedback(self, problems: Sequence[Problem], flag: str | None) -> None:
        msg = self.query_one(".f-msg", Static)
        msg.update(_msg_text(problems))
        msg.set_class(bool(problems), "-shown")
        self.set_class(any(p.level == "error" for p in problems), "-error")
        word = {"low": "▼ low", "high": "▲ high", "normal": "· normal", "critical": "!!! CRIT"}.get(flag or "", "")
        self.query_one(".f-flag", Static).update(word)
        self.set_class(flag == "critical", "-critical")


class FeatureItem(Horizontal):
    """One listed finding: present or absent, its HPO id and label, buttons to flip or remove it."""

    def __init__(self, section: str, index: int, text: str, problems: Sequence[Problem]):
        super().__init__(classes="list-item", id=f"{section}-{index}")
        self.section = section
        self.index = index
        self.text = text
        self.problems = list(problems)

    def compose(self) -> ComposeResult:
        hit = resolve_feature(self.text)
        t = Text()
        t.append("present " if self.section == "features" else "absent  ", style="bold")
        if hit:
            t.append(f"{hit[0]} {hit[1]}")
            if self.text.strip() not in (hit[0], f"{hit[0]} {hit[1]}"):
                t.append(f"  (written '{self.text}')", style="dim")
        else:
            t.append(self.text)
        if self.problems:
            t.append("\n")
            t.append(_msg_text(self.problems))
        yield Static(t, markup=False, classes="item-text")
        flip = "mark absent" if self.section == "features" else "mark present"
        yield Button(flip, compact=True, classes="flip")
        yield Button("remove", compact=True, classes="remove")
        self.set_class(any(p.level == "error" for p in self.problems), "-error")


class DrugItem(Horizontal):
    """One listed medication or exposure with what the knowledge makes of it."""

    def __init__(self, section: str, index: int, text: str, meaning: str, problems: Sequence[Problem]):
        super().__init__(classes="list-item", id=f"{section}-{index}")
        self.section = section
        self.index = index
        self.text = text
        self.meaning = meaning
        self.problems = list(problems)

    def compose(self) -> ComposeResult:
        t = Text(self.text, style="bold")
        t.append(f"  {self.meaning}")
        if self.problems:
            t.append("\n")
            t.append(_msg_text(self.problems))
        yield Static(t, markup=False, classes="item-text")
        yield Button("remove", compact=True, classes="remove")
        self.set_class(any(p.level == "error" for p in self.problems), "-error")


class WorkupView(Vertical):
    """Sections of the workup; the section list on the left jumps to a section."""

    def __init__(self, raw: Mapping[str, Any], **kwargs: Any):
        super().__init__(**kwargs)
        self.raw = raw
        self._problems: dict[str, list[Problem]] = {}

    def compose(self) -> ComposeResult:
        with Horizontal():
            yield OptionList(*[Option(Text(g), id=dom_id(g)) for g in GROUPS], id="sections")
            with VerticalScroll(id="form"):
                yield Static("", markup=False, id="general-problems")
                groups = fields_by_group()
                for g in GROUPS:
                    yield Static(Text(g.upper(), style="bold"), markup=False, classes="section-head",
                                 id=f"head-{dom_id(g)}")
                    if g == "Features":
                        yield Static(Text("Type a finding (label, synonym or HP id); ↓ to the list, Enter adds it. "
                                          "◆ marks findings the knowledge weighs.", style="dim"), classes="hint")
                        yield Input(placeholder="find a finding, e.g. nephrocalcinosis", compact=True,
                                    id="feature-search")
                        yield OptionList(id="feature-hits")
                        yield Vertical(id="feature-items", classes="items")
                    elif g == "Medications and exposures":
                        yield Static(Text("Type a medicine (INN; → completes) or an exposure, Enter adds it.",
                                          style="dim"), classes="hint")
                        yield Input(placeholder="medicine, e.g. furosemide", compact=True, id="med-input")
                        yield Vertical(id="med-items", classes="items")
                        yield Input(placeholder="exposure, e.g. licorice", compact=True, id="exp-input")
                        yield Vertical(id="exp-items", classes="items")
                    for f in groups[g]:
                        yield FieldRow(f, self.raw)
                yield Static(Text("COMPUTED FROM THESE VALUES", style="bold"), classes="section-head", id="head-derived")
                yield Static("", markup=False, id="derived")

    def on_mount(self) -> None:
        self.query_one("#feature-hits", OptionList).display = False
        self._set_suggesters()
        self.refresh_lists(self.raw, {})

    def _set_suggesters(self) -> None:
        tables = getattr(self.app, "tables", None)
        if not tables:
            return
        from ..model import drug_names, exposure_names

        self.query_one("#med-input", Input).suggester = SuggestFromList(drug_names(tables), case_sensitive=False)
        self.query_one("#exp-input", Input).suggester = SuggestFromList(exposure_names(tables), case_sensitive=False)

    def tables_ready(self) -> None:
        self._set_suggesters()

    # --- sections ------------------------------------------------------------------------

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        if event.option_list.id == "sections":
            event.stop()
            self.jump_to(str(event.option.id))
        elif event.option_list.id == "feature-hits":
            event.stop()
            self._add_feature(str(event.option.id))

    def jump_to(self, group_id: str) -> None:
        """Scroll the form to a section and focus its first field."""
        form = self.query_one("#form", VerticalScroll)
        head = self.query_one(f"#head-{group_id}")
        form.scroll_to_widget(head, top=True, animate=False)
        children = list(form.children)
        for w in children[children.index(head) + 1:]:
            if isinstance(w, FieldRow):
                w.query("Input, Picker").first().focus()
                break
            if isinstance(w, Input):
                w.focus()
                break

    # --- features ------------------------------------------------------------------------

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id != "feature-search":
            return
        event.stop()
        hits = search_hpo(event.value, limit=8)
        ol = self.query_one("#feature-hits", OptionList)
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

    def on_key(self, event: Any) -> None:
        focused = self.app.focused
        if getattr(focused, "id", None) == "feature-search" and event.key == "down":
            ol = self.query_one("#feature-hits", OptionList)
            if ol.display:
                event.stop()
                ol.focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        iid = event.input.id
        if iid == "feature-search":
            event.stop()
            ol = self.query_one("#feature-hits", OptionList)
            if ol.option_count:
                opt = ol.get_option_at_index(ol.highlighted or 0)
                self._add_feature(str(opt.id))
        elif iid in ("med-input", "exp-input"):
            event.stop()
            text = event.value.strip()
            if text:
                name = "medications" if iid == "med-input" else "exposures"
                self.post_message(ListsEdited({name: list_items(self.app.raw, name) + [text]}))
                event.input.value = ""

    def _add_feature(self, hid: str) -> None:
        from ..model import resolve_feature as _resolve

        raw = self.app.raw
        present = list_items(raw, "features")
        absent = list_items(raw, "absent_features")
        known = {(_resolve(x) or ("",))[0] for x in present + absent}
        if hid not in known:
            hit = _resolve(hid)
            present.append(f"{hid} {hit[1]}" if hit else hid)
            self.post_message(ListsEdited({"features": present}))
        search = self.query_one("#feature-search", Input)
        search.value = ""
        self.query_one("#feature-hits", OptionList).display = False
        search.focus()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        item = event.button.parent
        if not isinstance(item, (FeatureItem, DrugItem)):
            return
        event.stop()
        raw = self.app.raw
        items = list_items(raw, item.section)
        if item.index >= len(items):
            return
        text = items.pop(item.index)
        lists: dict[str, list[str]] = {item.section: items}
        if event.button.has_class("flip"):
            other = "absent_features" if item.section == "features" else "features"
            lists[other] = list_items(raw, other) + [text]
        self.post_message(ListsEdited(lists))

    # --- feedback ------------------------------------------------------------------------

    def refresh_lists(self, raw: Mapping[str, Any], by_field: Mapping[str, list[Problem]]) -> None:
        """Rebuild the listed features, medications and exposures from the raw mapping."""
        from ...vocab import lookup_drug, lookup_exposure

        self.raw = raw
        tables = getattr(self.app, "tables", None) or {}
        cands = tables.get("candidates") or {}
        feats = self.query_one("#feature-items", Vertical)
        feats.remove_children()
        rows: list[Any] = []
        for section in ("features", "absent_features"):
            for i, text in enumerate(list_items(raw, section)):
                rows.append(FeatureItem(section, i, text, by_field.get(f"{section}[{i}]", [])))
        if not rows:
            rows.append(Static(Text("no findings listed", style="dim"), classes="empty"))
        feats.mount(*rows)
        meds = self.query_one("#med-items", Vertical)
        meds.remove_children()
        rows = []
        for i, text in enumerate(list_items(raw, "medications")):
            m = lookup_drug(text)
            if m is None:
                meaning = "not in tubulo's drug knowledge: kept, not weighed"
            else:
                name = (cands.get(m.class_id) or {}).get("name", m.class_id)
                meaning = f"→ {m.inn}: {name}" + (f" (ATC {m.atc})" if m.atc else "")
            rows.append(DrugItem("medications", i, text, meaning, by_field.get(f"medications[{i}]", [])))
        meds.mount(*rows)
        exps = self.query_one("#exp-items", Vertical)
        exps.remove_children()
        rows = []
        for i, text in enumerate(list_items(raw, "exposures")):
            eid = lookup_exposure(text)
            meaning = f"→ {eid}" if eid else "not an exposure tubulo knows"
            rows.append(DrugItem("exposures", i, text, meaning, by_field.get(f"exposures[{i}]", [])))
        exps.mount(*rows)

    def show_feedback(self, by_field: Mapping[str, list[Problem]], general: Sequence[Problem],
                      flags: Mapping[str, str | None], derived: Sequence[Mapping[str, Any]] | None) -> None:
        """Put each problem and note under its field, the rest at the top; flags beside the values."""
        self._problems = {k: list(v) for k, v in by_field.items()}
        for row in self.query(FieldRow):
            row.show_feedback(by_field.get(row.spec.id, []), flags.get(row.spec.measure_key or row.spec.id))
        gp = self.query_one("#general-problems", Static)
        extra = list(general)
        gp.update(_msg_text(extra) if extra else "")
        gp.set_class(bool(extra), "-shown")
        d = self.query_one("#derived", Static)
        t = Text()
        for item in derived or []:
            if not item.get("valid", True) or item.get("value") is None:
                continue
            t.append(f"{item['label']}: ", style="bold")
            t.append(f"{item['value']:.3g} {item.get('unit') or ''}".rstrip())
            t.append(f"   {item.get('formula', '')}  ({item.get('source', '')})\n", style="dim")
        d.update(t if t.plain else Text("nothing can be computed from these values yet", style="dim"))
