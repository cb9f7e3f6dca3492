"""The help overlay: a short guide for a first visit, then every key of the workbench, gathered from
the bindings themselves so that the list cannot fall behind the code."""

from __future__ import annotations

from typing import Iterable

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

__all__ = ["GUIDE", "HelpOverlay", "COMMON_KEYS", "key_name", "key_rows"]

GUIDE = "\n".join((
    "tubulo weighs what could explain a tubular workup: inherited tubulopathies, drug effects and conditions "
    "outside the kidney. It is decision support, not a diagnosis: critical values come first (framed and marked "
    "!!! at the top); local protocols and your clinical judgement decide.",
    "",
    "First steps",
    "1. Workup (F2): one line per field. ↑ ↓ choose a field, then type its value; Tab moves to the unit "
    "(← → or Enter to pick). Enter goes to the next field, ↑ ↓ move while you type. A problem shows on the "
    "field's line and in full under the editor, in the words of the command line. Findings, medicines and "
    "exposures open a list editor with Enter.",
    "2. Differential (F3): the candidates by probability, as a number and a bar, with kind and genes. It "
    "updates as you type. Enter on a candidate opens its evidence.",
    "3. Evidence (F4): what speaks FOR (+) and AGAINST (−) the candidate with its weight (the log likelihood "
    "ratio), and what it does not explain. Enter on a finding moves to its PATH: from the defect or drug target, "
    "step by step, to the finding; ↑ raised, ↓ lowered; each step names its source. Enter on a step opens that "
    "node in Links.",
    "4. Links (F5): any node of the knowledge graph with its neighbours by kind of link. Enter follows a link, "
    "Backspace goes back, / finds a node by name, id or gene symbol.",
    "5. Nephron (F6): the segments of the leading candidates are marked »like this«; d draws where a drug acts "
    "(forward view), marked ◆like this◆.",
    "6. Plan (F7): the next tests that would best separate the leaders, and the gene panel with its coverage.",
    "",
    "Save with Ctrl+S (the previous file is kept as .bak). A recovery copy is written as you work, so a crash "
    "loses nothing; it is offered the next time the case is opened.",
))

# keys handled by the widgets themselves (Textual's own), listed so that the overlay is complete
COMMON_KEYS: tuple[tuple[str, str], ...] = (
    ("Tab / Shift+Tab", "next / previous field or panel"),
    ("↑ ↓", "move in a list or table"),
    ("Enter", "open, choose, or confirm"),
    ("→", "accept the completion offered in a medicine or exposure box"),
    ("Esc", "close a dialog; go back"),
    ("mouse", "click tabs, rows, buttons and fields; scroll with the wheel"),
)

_NAMES = {"left_square_bracket": "[", "right_square_bracket": "]", "slash": "/", "question_mark": "?",
          "equals_sign": "=", "plus": "+", "minus": "-", "escape": "Esc", "enter": "Enter", "space": "Space",
          "backspace": "Backspace", "left": "←", "right": "→", "exclamation_mark": "!"}


def key_name(key: str) -> str:
    """A binding's key list as a reader writes it: "ctrl+s" -> "Ctrl+S", "f2" -> "F2"."""
    out = []
    for k in key.split(","):
        k = k.strip()
        parts = k.split("+")
        base = parts[-1]
        shown = _NAMES.get(base, base.upper() if (len(base) <= 3 and base[:1] == "f" and base[1:].isdigit())
                           else (base.upper() if len(base) == 1 and parts[:-1] else base))
        mods = [m.capitalize() for m in parts[:-1]]
        out.append("+".join(mods + [shown]))
    return " / ".join(out)


def key_rows(scopes: Iterable[tuple[str, Iterable[Binding | tuple]]]) -> list[tuple[str, str, str]]:
    """(scope, key, what it does) for every binding of every scope."""
    rows = []
    for scope, bindings in scopes:
        for b in bindings:
            if not isinstance(b, Binding):
                b = Binding(*b)
            rows.append((scope, b.key_display or key_name(b.key), b.tooltip or b.description))
    return rows


class HelpOverlay(ModalScreen[None]):
    """The guide and every key."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [Binding("escape,f1,q,question_mark", "dismiss(None)", "close the help")]

    def __init__(self, rows: list[tuple[str, str, str]]):
        super().__init__()
        self.rows = rows

    def text(self) -> Text:
        t = Text(GUIDE + "\n\n")
        t.append("Everywhere\n", style="bold")
        for k, what in COMMON_KEYS:
            t.append(f"  {k:<22}", style="bold")
            t.append(f"{what}\n")
        scope = None
        for s, k, what in self.rows:
            if s != scope:
                scope = s
                t.append(f"\n{s}\n", style="bold")
            t.append(f"  {k:<22}", style="bold")
            t.append(f"{what}\n")
        return t

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide tall"):
            yield Static(Text("tubulo workbench: guide and keys", style="bold"), classes="dialog-title")
            with VerticalScroll(id="help-body"):
                yield Static(self.text(), markup=False, id="help-text")
            yield Static(Text("Esc, F1 or q closes", style="dim"))
