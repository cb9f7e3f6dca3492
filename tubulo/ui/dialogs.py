"""Dialogs of the workbench: choose one, leave with unsaved work, recover a copy, name a file, read
all cautions."""

from __future__ import annotations

from typing import Any, Mapping, Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Input, OptionList, Static
from textual.widgets.option_list import Option

__all__ = ["AskPath", "CautionList", "LeaveDialog", "PickOne", "RecoverDialog"]


class PickOne(ModalScreen[str | None]):
    """A short list to choose from; Enter takes the highlighted choice, Esc keeps the old one."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [Binding("escape", "dismiss(None)", "close without choosing")]

    def __init__(self, title: str, options: Sequence[tuple[str, str]], current: str = ""):
        super().__init__()
        self.title_text = title
        self.options = list(options)
        self.current = current

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(Text(self.title_text, style="bold"), classes="dialog-title")
            yield OptionList(*[Option(Text(label), id=str(i)) for i, (label, _) in enumerate(self.options)],
                             id="pick-list")
            yield Static(Text("↑ ↓ move · Enter choose · Esc close", style="dim"))

    def on_mount(self) -> None:
        ol = self.query_one(OptionList)
        values = [v for _, v in self.options]
        if self.current in values:
            ol.highlighted = values.index(self.current)
        ol.focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        self.dismiss(self.options[int(event.option.id or 0)][1])


class LeaveDialog(ModalScreen[str]):
    """Quitting with unsaved changes: save first, leave without saving, or stay."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [
        Binding("s", "choose('save')", "save, then quit"),
        Binding("d", "choose('discard')", "quit without saving"),
        Binding("escape", "choose('stay')", "stay in the workbench"),
    ]

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(Text("The workup has unsaved changes.", style="bold"), classes="dialog-title")
            yield Static("Save them before quitting?", markup=False)
            with Horizontal(classes="buttons"):
                yield Button("Save and quit (s)", id="save", variant="primary")
                yield Button("Quit without saving (d)", id="discard")
                yield Button("Stay (Esc)", id="stay")

    def action_choose(self, what: str) -> None:
        self.dismiss(what)

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.dismiss(event.button.id or "stay")


class RecoverDialog(ModalScreen[bool]):
    """A recovery copy newer than the file was found: use it, or open the file as saved."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [
        Binding("r", "choose(True)", "recover the unsaved copy"),
        Binding("o", "choose(False)", "open the file as saved"),
        Binding("escape", "choose(False)", "open the file as saved"),
    ]

    def __init__(self, copy_path: str, when: str, has_file: bool):
        super().__init__()
        self.copy_path = copy_path
        self.when = when
        self.has_file = has_file

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(Text("Unsaved work was found.", style="bold"), classes="dialog-title")
            newer = "newer than the case file" if self.has_file else "of a workup never saved"
            yield Static(f"A recovery copy from {self.when}, {newer}, is at {self.copy_path}.", markup=False)
            with Horizontal(classes="buttons"):
                yield Button("Recover it (r)", id="recover", variant="primary")
                yield Button("Open as saved (o)" if self.has_file else "Start empty (o)", id="open")

    def action_choose(self, recover: bool) -> None:
        self.dismiss(recover)

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.dismiss(event.button.id == "recover")


class AskPath(ModalScreen[str | None]):
    """Ask for a file name (save as, export)."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [Binding("escape", "dismiss(None)", "cancel")]

    def __init__(self, title: str, default: str):
        super().__init__()
        self.title_text = title
        self.default = default

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(Text(self.title_text, style="bold"), classes="dialog-title")
            yield Input(self.default, id="path-input")
            yield Static(Text("Enter to write · Esc to cancel", style="dim"))

    def on_mount(self) -> None:
        self.query_one(Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.dismiss(event.value.strip() or None)


class CautionList(ModalScreen[None]):
    """Every caution of the current result, with its source."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [Binding("escape,f8,q", "dismiss(None)", "close")]

    def __init__(self, cautions: Sequence[Mapping[str, Any]], caution_text: str = ""):
        super().__init__()
        self.cautions = list(cautions)
        self.caution_text = caution_text

    def compose(self) -> ComposeResult:
        t = Text()
        for c in self.cautions:
            level = str(c.get("level", "info"))
            mark = {"critical": "!!! CRITICAL", "warning": "▲ warning"}.get(level, "ⓘ note")
            t.append(f"{mark}\n", style="bold reverse" if level == "critical" else "bold")
            t.append(str(c.get("message", "")) + "\n")
            if c.get("source"):
                t.append(f"  source: {c['source']}\n", style="dim")
            t.append("\n")
        if self.caution_text:
            t.append(self.caution_text + "\n", style="italic")
        with Vertical(classes="dialog wide"):
            yield Static(Text("Cautions", style="bold"), classes="dialog-title")
            with VerticalScroll():
                yield Static(t, markup=False)
            yield Static(Text("Esc close", style="dim"))
