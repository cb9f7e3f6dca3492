"""Small widgets of the workbench: the caution strip, the status line, the value picker, bars."""

from __future__ import annotations

from typing import Any, Mapping, Sequence

from rich.text import Text
from textual.binding import Binding
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget
from textual.widgets import Static

__all__ = ["CautionStrip", "Picker", "StatusLine", "bar", "put", "weight_bar"]

_EIGHTHS = " ▏▎▍▌▋▊▉"


def bar(fraction: float, width: int = 10) -> str:
    """A horizontal bar of `width` cells for a fraction 0..1 (eighth-cell steps; a visible sliver for any non-zero)."""
    fraction = max(0.0, min(1.0, float(fraction)))
    eighths = round(fraction * width * 8)
    if fraction > 0 and eighths == 0:
        eighths = 1
    full, part = divmod(eighths, 8)
    text = "█" * full + (_EIGHTHS[part] if part else "")
    return text.ljust(width)


def put(widget: Static, content: Any, layout: bool = True) -> None:
    """Update a Static only when its content changed (a re-layout per keystroke is what costs)."""
    key = (content.plain, tuple(content.spans), str(content.style)) if isinstance(content, Text) else content
    if getattr(widget, "_tubulo_last", None) == key:
        return
    widget._tubulo_last = key  # type: ignore[attr-defined]
    widget.update(content, layout=layout)


def weight_bar(log_lr: float, cap: float = 3.0, width: int = 6) -> str:
    """The size of one piece of evidence (|log LR| against the cap) as a short bar."""
    return bar(min(abs(log_lr), cap) / cap, width)


def first_sentence(text: str) -> str:
    """The head of a caution text: up to its first colon or full stop."""
    for stop in (": ", ". "):
        if stop in text:
            return text.split(stop, 1)[0] + "."
    return text


class CautionStrip(Static):
    """Cautions, always on top: critical values in a heavy frame with `!!!` markers (not colour alone),
    then the count of warnings, then the standing decision-support line."""

    DEFAULT_CSS = """
    CautionStrip { height: auto; max-height: 7; padding: 0 1; }
    """

    def __init__(self, **kwargs: Any):
        super().__init__("", markup=False, **kwargs)
        self.cautions: list[Mapping[str, Any]] = []
        self.critical_count = 0
        self._stale = False

    def on_resize(self, event: Any) -> None:
        # the warning line is clipped to the width: clip it again when the width is known or changes
        if self.cautions:
            self.show(self.cautions, self._stale)

    def show(self, cautions: Sequence[Mapping[str, Any]], stale: bool = False) -> None:
        self.cautions = list(cautions)
        self._stale = stale
        crit = [c for c in cautions if c.get("level") == "critical"]
        warn = [c for c in cautions if c.get("level") == "warning"]
        standing = next((c for c in cautions if c.get("id") == "decision_support"), None)
        self.critical_count = len(crit)
        t = Text()
        if crit:
            t.append(f"!!! CRITICAL VALUE{'S' if len(crit) > 1 else ''} ({len(crit)}) !!!", style="bold reverse")
            for c in crit[:3]:
                t.append("\n!!! ", style="bold")
                t.append(str(c.get("message", "")), style="bold")
            if len(crit) > 3:
                t.append(f"\n!!! and {len(crit) - 3} more: F8 lists them all", style="bold")
            t.append("\n")
        if warn:
            t.append(f"▲ {len(warn)} warning{'s' if len(warn) > 1 else ''}: ", style="bold")
            first = str(warn[0].get("message", ""))
            room = max(20, (self.size.width or 80) - 22)
            t.append(first if len(first) <= room else first[: room - 1].rstrip() + "…")
            t.append("  F8" if len(first) > room or len(warn) > 1 else "", style="dim")
            t.append("\n")
        line = first_sentence(str(standing.get("message"))) if standing else "Decision support, not a diagnosis."
        t.append("ⓘ ", style="bold")
        t.append(line)
        t.append("  F8 lists every caution with its source", style="dim")
        if stale:
            t.append("\n✗ The workup has problems: the results shown are from its last valid version.", style="bold")
        self.set_class(bool(crit), "-critical")
        self.set_class(bool(warn) and not crit, "-warning")
        put(self, t)


class StatusLine(Static):
    """One line: case id, file, saved state, validity, last ranking time."""

    DEFAULT_CSS = "StatusLine { height: 1; padding: 0 1; }"

    def __init__(self, **kwargs: Any):
        super().__init__("", markup=False, **kwargs)

    def show(self, case_id: str, path: str | None, dirty: bool, problems: int, busy: bool, seconds: float | None,
             show_timing: bool = True) -> None:
        t = Text()
        t.append(case_id or "(no case id)", style="bold")
        t.append(f"  {path}" if path else "  (not saved yet)")
        t.append("  ● unsaved" if dirty else "  saved" if path else "", style="bold" if dirty else "")
        if problems:
            t.append(f"  ✗ {problems} problem{'s' if problems != 1 else ''} (see Workup)", style="bold")
        else:
            t.append("  ✓ valid")
        if busy:
            t.append("  ranking…")
        elif seconds is not None and show_timing:
            t.append(f"  {seconds * 1000:.0f} ms", style="dim")
        put(self, t, layout=False)


class Picker(Widget, can_focus=True):
    """A one-line chooser: shows the current choice; Enter, space or a click opens the list; ← → step."""

    DEFAULT_CSS = """
    Picker { height: 1; width: 14; padding: 0 1; }
    """
    BINDINGS = [
        Binding("enter,space", "open", "choose from the list", show=False),
        Binding("left", "step(-1)", "previous choice", show=False),
        Binding("right", "step(1)", "next choice", show=False),
    ]

    value: reactive[str] = reactive("", init=False)

    class Changed(Message):
        def __init__(self, picker: "Picker", value: str):
            super().__init__()
            self.picker = picker
            self.value = value

        @property
        def control(self) -> "Picker":
            return self.picker

    def __init__(self, options: Sequence[tuple[str, str]], value: str = "", title: str = "", **kwargs: Any):
        super().__init__(**kwargs)
        self.options = list(options)  # (shown text, value)
        self.title = title
        if value and value not in [v for _, v in self.options]:
            self.options.append((value, value))
        self.set_reactive(Picker.value, value)

    def shown(self) -> str:
        for label, v in self.options:
            if v == self.value:
                return label
        return self.value or "—"

    def render(self) -> Text:
        return Text(f"{self.shown()} ▾", no_wrap=True, overflow="ellipsis")

    def set_value(self, value: str, notify: bool = True) -> None:
        if value not in [v for _, v in self.options]:
            self.options.append((value, value))
        if value == self.value:
            return
        self.value = value
        if notify:
            self.post_message(self.Changed(self, value))

    def action_step(self, delta: int) -> None:
        values = [v for _, v in self.options]
        if not values:
            return
        i = values.index(self.value) if self.value in values else 0
        self.set_value(values[(i + delta) % len(values)])

    def action_open(self) -> None:
        from .dialogs import PickOne

        def chosen(value: str | None) -> None:
            if value is not None:
                self.set_value(value)

        self.app.push_screen(PickOne(self.title or "Choose", self.options, self.value), chosen)

    def on_click(self) -> None:
        self.focus()
        self.action_open()
