"""The Workup view: the entry sheet.  One line per field (value, unit, reference flag, first problem);
the editor under the sheet takes the highlighted field's value and unit.  Every change posts an edit
to the application, which revalidates and re-ranks in a worker; the problems that come back are
shown on the field's line and in full under the editor, word for word as the command line prints
them.  Features, medications and exposures open a list editor."""

from __future__ import annotations

import re
from typing import Any, Mapping, Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.widgets import DataTable, Input, Static

from ...errors import Problem
from ..model import (GROUPS, FieldSpec, compose_quantity, fields_by_group, get_value, list_items, resolve_feature,
                     split_quantity, unknown_fields)
from ..widgets import Picker, put

__all__ = ["FieldEdited", "ListsEdited", "WorkupView", "field_shown", "stored_value", "problem_text"]

_BP_TEXT = re.compile(r"^\s*(\d+(?:[.,]\d+)?\s*/\s*\d+(?:[.,]\d+)?)\s*(.*?)\s*$")
LIST_ROWS = {"Features": ("features",), "Medications and exposures": ("medications", "exposures")}
_LIST_LABELS = {"features": "Findings (HPO)", "medications": "Medications", "exposures": "Exposures"}


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


def problem_text(problems: Sequence[Problem]) -> Text:
    t = Text()
    for i, p in enumerate(problems):
        if i:
            t.append("\n")
        mark = {"error": "✗ ", "warning": "▲ "}.get(p.level, "ⓘ ")
        t.append(mark + str(p), style="bold" if p.level == "error" else "")
    return t


def field_shown(spec: FieldSpec, raw: Mapping[str, Any]) -> tuple[str, str, bool]:
    """(value text, unit or choice, unit assumed) of a field as the editor shows it."""
    value = get_value(raw, spec)
    if spec.kind == "quantity":
        text, unit = split_quantity(value)
        return text, unit or spec.default_unit, bool(text) and unit is None and text.lower() not in spec.qualitative
    if spec.kind == "bp":
        m = _BP_TEXT.match(str(value)) if value is not None else None
        if m:
            return m.group(1), m.group(2) or spec.default_unit, not m.group(2)
        return ("" if value is None else str(value)), spec.default_unit, False
    if spec.kind == "bool":
        if isinstance(value, bool):
            return ("yes" if value else "no"), "", False
        word = {"yes": "yes", "true": "yes", "no": "no", "false": "no"}.get(str(value).strip().lower(), str(value))
        return ("" if value is None else word), "", False
    if spec.kind == "relatives":
        items = value if isinstance(value, list) else ([] if value is None else [value])
        return ", ".join(str(v) for v in items), "", False
    return ("" if value is None else str(value)), "", False


def stored_value(spec: FieldSpec, text: str, unit: str) -> Any:
    """What the raw mapping stores for a value typed as `text` with `unit` (None removes the field)."""
    if spec.kind == "quantity":
        return compose_quantity(spec, text, unit)
    if spec.kind == "bp":
        text = text.strip()
        if not text:
            return None
        return text if re.search(r"[A-Za-z]", text) else f"{text} {unit}".strip()
    if spec.kind == "bool":
        return {"yes": True, "no": False}.get(text.strip().lower()) if text.strip() else None
    if spec.kind == "choice":
        return text.strip() or None
    if spec.kind == "relatives":
        return [w.strip() for w in text.split(",") if w.strip()] or None
    return text.strip() or None


def list_summary(raw: Mapping[str, Any], name: str) -> str:
    if name == "features":
        present = [resolve_feature(x) for x in list_items(raw, "features")]
        absent = [resolve_feature(x) for x in list_items(raw, "absent_features")]
        parts = [h[1] if h else "?" for h in present] + [f"no {h[1]}" if h else "no ?" for h in absent]
        return "; ".join(parts) if parts else "none listed"
    items = list_items(raw, name)
    return ", ".join(items) if items else "none listed"


class WorkupView(Vertical):
    """The entry sheet and its editor."""

    BINDINGS = [
        Binding("enter", "edit", "edit the highlighted field (lists open their editor)", show=False),
        Binding("delete", "clear", "clear the highlighted field", show=False),
    ]

    def __init__(self, raw: Mapping[str, Any], **kwargs: Any):
        super().__init__(**kwargs)
        self.raw = raw
        self.fields: dict[str, FieldSpec] = {}
        self.order: list[str] = []  # row keys in sheet order
        self.current: str | None = None
        self._shown: tuple[str, str] = ("", "")
        self.by_field: dict[str, list[Problem]] = {}
        self.flags: dict[str, str | None] = {}
        self._cells: dict[tuple[str, str], Text] = {}

    def _raw(self) -> Mapping[str, Any]:
        """The application's current workup (this view's copy until it is mounted in one)."""
        raw = getattr(self.app, "raw", None)
        return raw if isinstance(raw, Mapping) else self.raw

    def _cell(self, row: str, column: str, value: Text) -> None:
        """Update one cell of the sheet, only when its text changed (keeps an edit's re-draw small)."""
        if self._cells.get((row, column)) == value:
            return
        self._cells[(row, column)] = value
        self.query_one("#sheet", DataTable).update_cell(row, column, value)

    def compose(self) -> ComposeResult:
        yield Static("", markup=False, id="general-problems")
        yield DataTable(id="sheet", cursor_type="row", zebra_stripes=False)
        with Vertical(id="editor"):
            yield Static("", markup=False, id="editor-label")
            with Horizontal(id="editor-line"):
                yield Input(compact=True, id="editor-value", select_on_focus=False)
                yield Picker([], "", title="Unit", id="editor-unit")
            yield Static("", markup=False, id="editor-msg")

    def on_mount(self) -> None:
        t = self.query_one("#sheet", DataTable)
        t.add_column("field", key="field", width=26)
        t.add_column("value", key="value", width=16)
        t.add_column("unit", key="unit", width=10)
        t.add_column("flag", key="flag", width=9)
        t.add_column("problem", key="problem", width=60)
        groups = fields_by_group()
        extra = unknown_fields(self.raw)
        if extra:
            t.add_row(Text("NOT RECOGNISED (Delete clears a line)", style="bold"), "", "", "", "",
                      key="head:Not recognised")
            self.order.append("head:Not recognised")
            for f in extra:
                self.fields[f.id] = f
                text, _, _ = field_shown(f, self.raw)
                t.add_row(Text(f"  {f.label}"), Text(text), Text(""), Text(""), Text(""), key=f.id)
                self._cells.update({(f.id, "value"): Text(text), (f.id, "unit"): Text(""),
                                    (f.id, "flag"): Text(""), (f.id, "problem"): Text("")})
                self.order.append(f.id)
        for g in GROUPS:
            key = f"head:{g}"
            t.add_row(Text(g.upper(), style="bold"), "", "", "", "", key=key)
            self.order.append(key)
            for name in LIST_ROWS.get(g, ()):
                key = f"list:{name}"
                t.add_row(Text(f"  {_LIST_LABELS[name]}"), Text(list_summary(self.raw, name)), Text("Enter ▸"), "", "",
                          key=key)
                self.order.append(key)
            for f in groups[g]:
                self.fields[f.id] = f
                text, unit, assumed = field_shown(f, self.raw)
                cells = (Text(text), Text(unit + ("*" if assumed else "")))
                t.add_row(Text(f"  {f.label}"), *cells, Text(""), Text(""), key=f.id)
                self._cells.update({(f.id, "value"): cells[0], (f.id, "unit"): cells[1],
                                    (f.id, "flag"): Text(""), (f.id, "problem"): Text("")})
                self.order.append(f.id)
        self.query_one("#general-problems", Static).display = False
        first = next(i for i, k in enumerate(self.order) if k in self.fields)
        t.move_cursor(row=first, animate=False)
        self._load(self.order[first])

    def tables_ready(self) -> None:
        """Completion lists come with the knowledge; nothing in the sheet depends on it."""

    # --- the editor --------------------------------------------------------------------------

    def _load(self, key: str) -> None:
        """Put the field of sheet row `key` into the editor."""
        self.current = key
        label = self.query_one("#editor-label", Static)
        value = self.query_one("#editor-value", Input)
        unit = self.query_one("#editor-unit", Picker)
        f = self.fields.get(key)
        if f is None:
            value.display = False
            unit.display = False
            if key.startswith("list:"):
                label.update(Text(f"{_LIST_LABELS[key[5:]]}: Enter opens the list editor", style="bold"))
            elif key.startswith("derived:"):
                label.update(Text("Computed by tubulo from the values above (formula and source on the line).",
                                  style="dim"))
            else:
                label.update(Text(f"{key[5:]}: ↓ to its fields", style="dim"))
            self._show_msg(key)
            return
        text, u, assumed = field_shown(f, self._raw())
        self._shown = (text, u)
        head = Text(f.label, style="bold")
        path = f"{f.section}.{f.key}" if f.section else f.key
        head.append(f"  ({path})", style="dim")
        if assumed:
            head.append(f"  * no unit written: read as {u}", style="bold")
        if f.kind in ("quantity", "bp"):
            head.append("  value, then the unit (Tab; ← → or Enter to pick)", style="dim")
        elif f.kind in ("choice", "bool"):
            head.append("  ← → or Enter to pick", style="dim")
        elif f.kind == "relatives":
            head.append("  relation words separated by commas", style="dim")
        label.update(head)
        with self.prevent(Input.Changed, Picker.Changed):
            if f.kind in ("choice", "bool"):
                value.display = False
                choices = ("yes", "no") if f.kind == "bool" else f.choices
                unit.options = [("— not given", "")] + [(c, c) for c in choices]
                unit.title = f.label
                unit.set_value(text, notify=False)
                unit.display = True
                unit.styles.width = 28
            else:
                value.display = True
                value.value = text
                value.placeholder = {"bp": "e.g. 118/76", "relatives": "e.g. brother, maternal uncle"}.get(f.kind, "")
                if f.kind in ("quantity", "bp"):
                    unit.options = [(x or "(none)", x) for x in dict.fromkeys(f.units)]
                    unit.title = f"Unit of {f.label}"
                    unit.set_value(u, notify=False)
                    unit.display = True
                    unit.styles.width = 16
                else:
                    unit.display = False
        self._show_msg(key)

    def _show_msg(self, key: str) -> None:
        msg = self.query_one("#editor-msg", Static)
        probs = self.by_field.get(key, [])
        if key == "list:features":
            probs = [p for k, v in self.by_field.items() if k.startswith(("features[", "absent_features[")) for p in v]
        elif key.startswith("list:"):
            probs = [p for k, v in self.by_field.items() if k.startswith(key[5:] + "[") for p in v]
        put(msg, problem_text(probs) if probs else Text(""))
        msg.set_class(any(p.level == "error" for p in probs), "-error")

    def _editor_state(self) -> tuple[str, str]:
        f = self.fields.get(self.current or "")
        if f is None:
            return self._shown
        if f.kind in ("choice", "bool"):
            return self.query_one("#editor-unit", Picker).value, ""
        unit = self.query_one("#editor-unit", Picker).value if f.kind in ("quantity", "bp") else ""
        return self.query_one("#editor-value", Input).value, unit

    def _changed(self) -> None:
        f = self.fields.get(self.current or "")
        if f is None:
            return
        now = self._editor_state()
        if now == self._shown:
            return
        self._shown = now
        value = stored_value(f, now[0], now[1])
        # the sheet's line follows with the evaluation (one re-draw per edit instead of two)
        self.post_message(FieldEdited(f, value))

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id == "editor-value":
            event.stop()
            self._changed()

    def on_picker_changed(self, event: Picker.Changed) -> None:
        if event.picker.id == "editor-unit":
            event.stop()
            self._changed()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.input.id == "editor-value":
            event.stop()
            self.move(1, keep_editing=False)

    def move(self, delta: int, keep_editing: bool = True) -> None:
        """Go to the next (or previous) field of the sheet; keep the editor focused if asked."""
        t = self.query_one("#sheet", DataTable)
        i = t.cursor_row
        j = i
        while 0 <= j + delta < len(self.order):
            j += delta
            if not self.order[j].startswith(("head:", "derived:")):
                break
        t.move_cursor(row=j, animate=False)
        self._load(self.order[j])
        if keep_editing:
            self._focus_editor()
        else:
            t.focus()

    def _focus_editor(self) -> None:
        f = self.fields.get(self.current or "")
        if f is None:
            return
        if f.kind in ("choice", "bool"):
            self.query_one("#editor-unit", Picker).focus()
        else:
            self.query_one("#editor-value", Input).focus()

    def on_key(self, event: Any) -> None:
        focused = self.app.focused
        fid = getattr(focused, "id", None)
        if fid == "editor-value" and event.key in ("up", "down"):
            event.stop()
            self.move(-1 if event.key == "up" else 1)
        elif fid == "editor-value" and event.key == "escape":
            event.stop()
            self.query_one("#sheet", DataTable).focus()
        elif fid == "editor-unit" and event.key == "escape":
            event.stop()
            self.query_one("#sheet", DataTable).focus()
        elif fid == "sheet" and event.is_printable and event.character and self.current in self.fields:
            f = self.fields[self.current]
            if f.kind not in ("choice", "bool"):
                event.stop()
                value = self.query_one("#editor-value", Input)
                value.focus()
                value.value = event.character
                value.cursor_position = len(value.value)

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        if event.data_table.id == "sheet" and event.row_key is not None:
            event.stop()
            self._load(str(event.row_key.value))

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        if event.data_table.id == "sheet":
            event.stop()
            self.action_edit()

    def action_edit(self) -> None:
        key = self.current or ""
        if key.startswith("list:"):
            self.open_list(key[5:])
        elif key.startswith("head:"):
            self.move(1, keep_editing=False)
        else:
            f = self.fields.get(key)
            self._focus_editor()
            if f is not None and f.kind in ("choice", "bool"):
                self.query_one("#editor-unit", Picker).action_open()

    def action_clear(self) -> None:
        f = self.fields.get(self.current or "")
        if f is None:
            return
        if f.kind in ("choice", "bool"):
            self.query_one("#editor-unit", Picker).set_value("")
        else:
            self.query_one("#editor-value", Input).value = ""

    def select_field(self, fid: str, edit: bool = True) -> None:
        """Highlight a field (by id, e.g. "serum.potassium") and, if asked, focus its editor."""
        t = self.query_one("#sheet", DataTable)
        t.move_cursor(row=self.order.index(fid), animate=False)
        self._load(fid)
        if edit:
            self._focus_editor()

    def open_list(self, name: str) -> None:
        from .workup_lists import ListEditor

        self.app.push_screen(ListEditor(name))

    # --- feedback ------------------------------------------------------------------------------

    def refresh_lists(self, raw: Mapping[str, Any], by_field: Mapping[str, list[Problem]] | None = None) -> None:
        self.raw = raw
        for name in ("features", "medications", "exposures"):
            self._cell(f"list:{name}", "value", Text(list_summary(raw, name)))

    def show_feedback(self, by_field: Mapping[str, list[Problem]], general: Sequence[Problem],
                      flags: Mapping[str, str | None], derived: Sequence[Mapping[str, Any]] | None) -> None:
        """Put each problem and note on its field's line (in full under the editor), the rest on top."""
        self.by_field = {k: list(v) for k, v in by_field.items()}
        t = self.query_one("#sheet", DataTable)
        words = {"low": "▼ low", "high": "▲ high", "normal": "· normal", "critical": "!!! CRIT"}
        for fid, f in self.fields.items():
            text, unit, assumed = field_shown(f, self._raw())
            self._cell(fid, "value", Text(text))
            self._cell(fid, "unit", Text(unit + ("*" if assumed else "")) if f.kind in ("quantity", "bp") else Text(""))
            flag = flags.get(f.measure_key or f.id) if f.kind in ("quantity", "bp") else None
            if f.kind == "bp" and flag is None:
                flag = flags.get("vitals.diastolic_bp")
            new_flag = Text(words.get(flag or "", ""), style="bold reverse" if flag == "critical" else "")
            probs = self.by_field.get(fid, [])
            first = probs[0] if probs else None
            prob = Text()
            if first is not None:
                prob.append({"error": "✗ ", "warning": "▲ "}.get(first.level, "ⓘ "), style="bold")
                prob.append(first.message, style="bold" if first.level == "error" else "")
                if len(probs) > 1:
                    prob.append(f" (+{len(probs) - 1})")
            self._cell(fid, "flag", new_flag)
            self._cell(fid, "problem", prob)
        for name in ("features", "medications", "exposures"):
            prefixes = ("features[", "absent_features[") if name == "features" else (f"{name}[",)
            probs = [p for k, v in self.by_field.items() if k.startswith(prefixes) for p in v]
            errors = [p for p in probs if p.level == "error"]
            cell = Text()
            if probs:
                cell.append(f"{'✗' if errors else '▲'} {len(probs)} problem{'s' if len(probs) != 1 else ''}: ",
                            style="bold")
                cell.append(probs[0].message)
            self._cell(f"list:{name}", "problem", cell)
        gp = self.query_one("#general-problems", Static)
        put(gp, problem_text(general) if general else Text(""))
        if gp.display != bool(general):
            gp.display = bool(general)
        self._show_derived(derived or [])
        if self.current:
            self._show_msg(self.current)

    def _show_derived(self, derived: Sequence[Mapping[str, Any]]) -> None:
        """The indices computed from the values, as read-only lines at the end of the sheet."""
        t = self.query_one("#sheet", DataTable)
        rows = [d for d in derived if d.get("valid", True) and d.get("value") is not None]
        wanted = ["head:computed"] + [f"derived:{d['id']}" for d in rows] if rows else []
        have = [k for k in self.order if k == "head:computed" or k.startswith("derived:")]
        if have != wanted:
            for k in have:
                t.remove_row(k)
                for col in ("value", "unit", "problem"):
                    self._cells.pop((k, col), None)
            self.order = [k for k in self.order if k not in have]
            if rows:
                t.add_row(Text("COMPUTED FROM THESE VALUES", style="bold"), "", "", "", "", key="head:computed")
                self.order.append("head:computed")
                for d in rows:
                    key = f"derived:{d['id']}"
                    t.add_row(Text(f"  {d['label']}"), "", "", "", "", key=key)
                    self.order.append(key)
        for d in rows:
            key = f"derived:{d['id']}"
            self._cell(key, "value", Text(f"{d['value']:.3g}"))
            self._cell(key, "unit", Text("" if d.get("unit") in (None, "1") else str(d["unit"])))  # UCUM "1": a ratio
            self._cell(key, "problem", Text(f"{d.get('formula', '')}  ({d.get('source', '')})", style="dim"))
