"""The workbench application: one screen with the caution strip on top, six views in tabs (Workup,
Differential, Evidence, Links, Nephron, Plan) and the key line at the bottom.

The workup is the raw case mapping.  Each edit replaces it, schedules the recovery copy and asks
for an evaluation; evaluations run in a worker thread, one at a time, the newest edit winning (an
edit made while one runs is evaluated as soon as it ends), so typing never waits for the engine.
"""

from __future__ import annotations

import copy
import json
import os
import time
from pathlib import Path
from typing import Any, Mapping

from rich.text import Text
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.theme import Theme
from textual.widgets import Footer, TabbedContent, TabPane

from ..errors import CaseError, Problem, TubuloError
from . import files
from .dialogs import AskPath, CautionList, LeaveDialog, RecoverDialog
from .help import HelpOverlay, key_rows
from .model import Evaluation, evaluate, problems_by_field
from .views.differential import DifferentialView, OpenCandidate
from .views.evidence import EvidenceView, OpenNode
from .views.links import LinksView
from .views.nephron_view import NephronView
from .views.plan import PlanView
from .views.workup import FieldEdited, ListsEdited, WorkupView
from .widgets import CautionStrip, Picker, StatusLine

__all__ = ["VIEWS", "TubuloApp", "launch", "opening", "run"]

VIEWS = (("workup", "F2 Workup"), ("differential", "F3 Differential"), ("evidence", "F4 Evidence"),
         ("links", "F5 Links"), ("nephron", "F6 Nephron"), ("plan", "F7 Plan"))

CALM = Theme(
    name="tubulo-calm",
    primary="#5f8fa8",
    secondary="#7a9e7e",
    accent="#c9a66b",
    foreground="#d8dee4",
    background="#1c2228",
    surface="#232b33",
    panel="#2b3540",
    success="#7a9e7e",
    warning="#d9a441",
    error="#e0605a",
    dark=True,
)


class TubuloApp(App[int]):
    """The tubulo workbench."""

    CSS_PATH = "tubulo.tcss"
    TITLE = "tubulo workbench"
    ENABLE_COMMAND_PALETTE = False
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (110, "-wide")]
    BINDINGS = [
        Binding("f1", "help", "help", tooltip="the guide and every key (this overlay)"),
        Binding("f2", "view('workup')", "workup", tooltip="Workup: enter and correct the values"),
        Binding("f3", "view('differential')", "differential", tooltip="Differential: the ranked candidates"),
        Binding("f4", "view('evidence')", "evidence", tooltip="Evidence: for, against and paths of one candidate"),
        Binding("f5", "view('links')", "links", tooltip="Links: browse the knowledge graph"),
        Binding("f6", "view('nephron')", "nephron", tooltip="Nephron: the map of implicated segments"),
        Binding("f7", "view('plan')", "plan", tooltip="Plan: next tests and the gene panel"),
        Binding("f8", "cautions", "cautions", tooltip="every caution with its source"),
        Binding("ctrl+s", "save", "save", tooltip="save the workup as a case file (a backup of the old one is kept)"),
        Binding("ctrl+e", "export_json", "JSON", tooltip="export the result as JSON (the `tubulo rank --json` document)"),
        Binding("ctrl+r", "export_report", "report",
                tooltip="export the report: .html or .md as `tubulo report` writes it, .txt as `tubulo rank` prints it"),
        Binding("ctrl+q", "leave", "quit", priority=True, tooltip="quit (asks first when there are unsaved changes)"),
    ]

    def __init__(self, raw: Mapping[str, Any] | None = None, path: str | Path | None = None,
                 tables: Mapping[str, Any] | None = None, graph: Mapping[str, Any] | None = None,
                 recovery_dir: str | Path | None = None, autosave_delay: float = 2.0,
                 start_view: str | None = None, check_recovery: bool = True, show_timing: bool = True,
                 prefetch: Any = None):
        super().__init__()
        self.raw: dict[str, Any] = dict(raw) if raw is not None else {"case": "new-case"}
        self._saved_raw: dict[str, Any] | None = copy.deepcopy(self.raw) if (raw is not None and path is not None
                                                                               and Path(path).is_file()) else None
        if self._saved_raw is None and raw is None:
            self._saved_raw = copy.deepcopy(self.raw)  # an untouched new workup is nothing to lose
        self.path: Path | None = Path(path) if path is not None else None
        self.tables: Mapping[str, Any] | None = tables
        self.graph: Mapping[str, Any] | None = graph
        self.recovery_dir = Path(recovery_dir) if recovery_dir is not None else None
        self.autosave_delay = autosave_delay
        self.check_recovery = check_recovery
        self.show_timing = show_timing
        self.prefetch = prefetch
        self._prefetched_raw = copy.deepcopy(self.raw)
        self.start_view = start_view or ("differential" if raw is not None else "workup")
        self.evaluation: Evaluation | None = None
        self.valid_evaluation: Evaluation | None = None
        self.generation = 0
        self.applied = 0  # evaluations shown so far (tests and the bench wait on it)
        self.edit_times: dict[int, float] = {}
        self.latencies: list[float] = []
        self._busy = False
        self._pending = False
        self._autosave_timer: Any = None
        self._stale_views: set[str] = set()
        self._critical_ids: set[str] = set()
        self.first_paint: float | None = None
        self.load_error: str | None = None

    # --- layout --------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield CautionStrip(id="cautions")
        yield StatusLine(id="status")
        with TabbedContent(initial=self.start_view, id="tabs"):
            for vid, title in VIEWS:
                with TabPane(title, id=vid):
                    if vid == "workup":
                        yield WorkupView(self.raw, id="workup-view")
                    elif vid == "differential":
                        yield DifferentialView(id="differential-view")
                    elif vid == "evidence":
                        yield EvidenceView(id="evidence-view")
                    elif vid == "links":
                        yield LinksView(id="links-view")
                    elif vid == "nephron":
                        yield NephronView(id="nephron-view")
                    else:
                        yield PlanView(id="plan-view")
        yield Footer()

    def on_mount(self) -> None:
        self.register_theme(CALM)
        self.theme = "tubulo-calm"
        if self.no_color:
            self.screen.add_class("-mono")
        self.query_one(CautionStrip).show([], False)
        self._refresh_status()
        self.call_after_refresh(self._painted)
        self.call_after_refresh(self._focus_view, self.start_view)
        if self.tables is None:
            self.run_worker(self._load_thread, thread=True, group="load", exit_on_error=False)
        else:
            self._tables_ready(self.tables, self.graph)
        if self.check_recovery:
            self._offer_recovery()

    def push_screen(self, screen: Any, *args: Any, **kwargs: Any) -> Any:
        """Dialogs carry the monochrome class too, so their cursors also change text style."""
        if self.no_color and not isinstance(screen, str):
            screen.add_class("-mono")
        return super().push_screen(screen, *args, **kwargs)

    def _painted(self) -> None:
        if self.first_paint is None:
            self.first_paint = time.perf_counter()

    def _load_thread(self) -> None:
        from .model import Prefetch

        prefetch = self.prefetch if self.prefetch is not None else Prefetch(None)
        tables, graph, ev, error = prefetch.result()
        if error is not None:
            self.call_from_thread(self._load_failed, error)
            return
        self.call_from_thread(self._tables_ready, tables, graph, ev)
        from .model import search_hpo

        search_hpo("warm")  # builds the HPO name list here, not on the first keystroke in the findings list

    def _load_failed(self, message: str) -> None:
        self.load_error = message
        self.query_one(CautionStrip).update(Text(f"!!! The knowledge could not be loaded: {message}", style="bold"))
        self.notify(message, title="knowledge error", severity="error", timeout=30)

    def _tables_ready(self, tables: Mapping[str, Any], graph: Mapping[str, Any] | None,
                      first: Evaluation | None = None) -> None:
        self.tables = tables
        if graph is None:
            from ..kb.tables import load_graph_view

            graph = load_graph_view()
        self.graph = graph
        links = self.query_one(LinksView)
        links.set_graph(tables.get("nodes") or {}, graph.get("adjacency") or {}, graph.get("lookup") or {})
        for w in self.query(WorkupView):
            w.tables_ready()
            w.refresh_lists(self.raw)
        if first is not None and self.generation == 0 and self.raw == self._prefetched_raw:
            self.generation = first.generation
            self._apply(first)  # evaluated while the screen was being built
        else:
            self.request_evaluation()

    # --- evaluation ------------------------------------------------------------------------

    def request_evaluation(self) -> None:
        """Evaluate the current workup in the worker (or as soon as the running evaluation ends)."""
        if self.tables is None:
            return
        if self._busy:
            self._pending = True
            self._refresh_status()
            return
        self._busy = True
        self._pending = False
        self.generation += 1
        gen = self.generation
        raw = self.raw
        self.edit_times.setdefault(gen, time.perf_counter())
        self._refresh_status()
        self.run_worker(lambda: self._eval_thread(raw, gen), thread=True, group="rank", exit_on_error=False)

    def _eval_thread(self, raw: Mapping[str, Any], gen: int) -> None:
        try:
            ev = evaluate(raw, self.tables or {}, str(self.path or ""), gen)
        except TubuloError as exc:
            ev = Evaluation(False, (Problem("", str(exc)),), generation=gen)
        except Exception as exc:  # noqa: BLE001 - the user sees a message, never a traceback
            ev = Evaluation(False, (Problem("", f"internal error while ranking ({type(exc).__name__}: {exc}); "
                                            "the workup is kept, please report this"),), generation=gen)
        self.call_from_thread(self._apply, ev)

    def _apply(self, ev: Evaluation) -> None:
        self._busy = False
        self.evaluation = ev
        if ev.valid:
            self.valid_evaluation = ev
        doc = self.valid_evaluation.document if self.valid_evaluation else None
        stale = not ev.valid
        cautions = list((doc or {}).get("cautions") or [])
        self.query_one(CautionStrip).show(cautions, stale and doc is not None)
        crit = {c.get("id", "") for c in cautions if c.get("level") == "critical"}
        if crit - self._critical_ids and ev.valid:
            self.bell()
        self._critical_ids = crit
        self._feedback(ev)
        self.query_one(DifferentialView).show(doc, self.tables or {}, stale)
        self._stale_views = {"evidence", "nephron", "plan"}
        self._refresh_view(self.query_one(TabbedContent).active)
        self.applied += 1
        started = self.edit_times.pop(ev.generation, None)
        if started is not None:
            self.latencies.append(time.perf_counter() - started)
        self._refresh_status()
        if self._pending:
            self.request_evaluation()

    def _feedback(self, ev: Evaluation) -> None:
        forms = list(self.query(WorkupView))
        if not forms:
            return
        form = forms[0]
        by_field, general = problems_by_field(list(ev.problems) + list(ev.notes), self.raw)
        doc = ev.document if ev.valid else None
        flags: dict[str, str | None] = {}
        for m in (doc or {}).get("measurements") or []:
            flags[m["key"]] = m.get("flag")
        for c in (doc or {}).get("cautions") or []:
            if c.get("level") == "critical" and str(c.get("id", "")).startswith("critical:"):
                flags[c["id"].split(":", 1)[1]] = "critical"
        form.refresh_lists(self.raw)
        form.show_feedback(by_field, general, flags, (doc or {}).get("derived"))
        from .views.workup_lists import ListEditor

        if isinstance(self.screen, ListEditor):
            self.screen.refresh_items()

    def _refresh_view(self, vid: str) -> None:
        if vid not in self._stale_views:
            return
        self._stale_views.discard(vid)
        doc = self.valid_evaluation.document if self.valid_evaluation else None
        tables = self.tables or {}
        adjacency = (self.graph or {}).get("adjacency")
        if vid == "evidence":
            self.query_one(EvidenceView).show(doc, tables, adjacency)
        elif vid == "nephron":
            self.query_one(NephronView).show(doc, tables, adjacency)
        elif vid == "plan":
            self.query_one(PlanView).show(doc, tables)

    def _refresh_status(self) -> None:
        ev = self.evaluation
        problems = len(ev.problems) if ev is not None and not ev.valid else 0
        case_id = str(self.raw.get("case") or "")
        self.query_one(StatusLine).show(case_id, self.path.name if self.path else None, self.dirty, problems,
                                        self._busy or self._pending,
                                        ev.seconds if ev is not None else None, self.show_timing)

    # --- edits -----------------------------------------------------------------------------

    @property
    def dirty(self) -> bool:
        return self.raw != self._saved_raw

    def edit(self, raw: Mapping[str, Any]) -> None:
        """Replace the workup (the one entry point of every change)."""
        raw = dict(raw)
        if raw == self.raw:
            return
        self.raw = raw
        self._schedule_autosave()
        self.request_evaluation()
        self._refresh_status()

    def on_field_edited(self, message: FieldEdited) -> None:
        from .model import with_value

        self.edit(with_value(self.raw, message.spec, message.value))

    def edit_lists(self, lists: Mapping[str, Any]) -> None:
        """Replace list sections (features, absent_features, medications, exposures)."""
        from .model import with_list

        raw: Mapping[str, Any] = self.raw
        for name, items in lists.items():
            raw = with_list(raw, name, items)
        self.edit(raw)
        for form in self.query(WorkupView):
            form.refresh_lists(self.raw)

    def on_lists_edited(self, message: ListsEdited) -> None:
        self.edit_lists(message.lists)

    def _schedule_autosave(self) -> None:
        if self._autosave_timer is not None:
            self._autosave_timer.stop()
        self._autosave_timer = self.set_timer(self.autosave_delay, self._autosave)

    def _autosave(self) -> None:
        self._autosave_timer = None
        if not self.dirty:
            return
        try:
            files.write_autosave(self.path, self.raw, self.recovery_dir)
        except OSError as exc:
            self.notify(f"the recovery copy could not be written: {exc}", severity="warning")

    # --- recovery ----------------------------------------------------------------------------

    def _offer_recovery(self) -> None:
        copy_path = files.recovery_offer(self.path, self.recovery_dir)
        if copy_path is None:
            return
        when = time.strftime("%Y-%m-%d %H:%M", time.localtime(copy_path.stat().st_mtime))
        has_file = self.path is not None and self.path.is_file()

        def chosen(recover: bool | None) -> None:
            if recover:
                from ..case import read_case_text

                try:
                    raw = read_case_text(copy_path.read_text(encoding="utf-8"), "yaml", str(copy_path))
                except (CaseError, OSError) as exc:
                    self.notify(f"the recovery copy cannot be read: {exc}", severity="error")
                    return
                self.call_later(self._replace_workup, raw)
            else:
                try:
                    os.replace(copy_path, copy_path.with_name(copy_path.name + ".old"))
                except OSError:
                    pass

        self.push_screen(RecoverDialog(str(copy_path), when, has_file), chosen)

    async def _replace_workup(self, raw: Mapping[str, Any]) -> None:
        self.raw = dict(raw)
        pane = self.query_one("#workup", TabPane)
        await pane.remove_children()
        await pane.mount(WorkupView(self.raw, id="workup-view"))
        for form in self.query(WorkupView):
            form.tables_ready()
        self.request_evaluation()
        self._refresh_status()

    # --- views -----------------------------------------------------------------------------

    def action_view(self, vid: str) -> None:
        tabs = self.query_one(TabbedContent)
        tabs.active = vid
        self._refresh_view(vid)
        self._focus_view(vid)

    def _focus_view(self, vid: str) -> None:
        target = {"workup": "#sheet", "differential": "#diff-table", "evidence": "#ev-items",
                  "links": "#links-tree", "nephron": "#nephron-view", "plan": "#plan-tests"}.get(vid)
        if target:
            found = self.query(target)
            if found:
                found.first().focus()

    def on_tabbed_content_tab_activated(self, event: TabbedContent.TabActivated) -> None:
        vid = event.pane.id or ""
        if vid == "links" and self.query_one(LinksView).current is None:
            self._links_home()
        self._refresh_view(vid)

    def _links_home(self) -> None:
        links = self.query_one(LinksView)
        doc = self.valid_evaluation.document if self.valid_evaluation else None
        nodes = (self.tables or {}).get("nodes") or {}
        start = "nephron"
        for c in (doc or {}).get("candidates") or []:
            if c["id"] in nodes:
                start = c["id"]
                break
        if start in nodes:
            links.go(start)

    def on_open_candidate(self, message: OpenCandidate) -> None:
        doc = self.valid_evaluation.document if self.valid_evaluation else None
        self._stale_views.discard("evidence")
        self.query_one(EvidenceView).show(doc, self.tables or {}, (self.graph or {}).get("adjacency"), message.cid)
        self.query_one(TabbedContent).active = "evidence"
        self._focus_view("evidence")

    def on_open_node(self, message: OpenNode) -> None:
        self.query_one(TabbedContent).active = "links"
        self.query_one(LinksView).go(message.node)
        self._focus_view("links")

    # --- dialogs -----------------------------------------------------------------------------

    def help_rows(self) -> list[tuple[str, str, str]]:
        from .views.workup_lists import ListEditor

        return key_rows([
            ("Anywhere", self.BINDINGS),
            ("Workup", WorkupView.BINDINGS),
            ("Workup: a unit or choice box", Picker.BINDINGS),
            ("Workup: list editor", ListEditor.BINDINGS),
            ("Differential", DifferentialView.BINDINGS),
            ("Evidence", EvidenceView.BINDINGS),
            ("Links", LinksView.BINDINGS),
            ("Nephron", NephronView.BINDINGS),
            ("Dialogs", LeaveDialog.BINDINGS + RecoverDialog.BINDINGS),
        ])

    def action_help(self) -> None:
        if isinstance(self.screen, HelpOverlay):
            return
        self.push_screen(HelpOverlay(self.help_rows()))

    def action_cautions(self) -> None:
        from ..output.check import CAUTION

        doc = self.valid_evaluation.document if self.valid_evaluation else None
        self.push_screen(CautionList((doc or {}).get("cautions") or [], CAUTION))

    # --- files -------------------------------------------------------------------------------

    def _default_path(self, suffix: str) -> str:
        if self.path is not None:
            return str(self.path.with_name(self.path.stem + suffix)) if suffix else str(self.path)
        stem = "".join(ch if ch.isalnum() or ch in "-_." else "-" for ch in str(self.raw.get("case") or "case"))
        return str(Path.cwd() / (stem + (suffix or ".yaml")))

    def action_save(self) -> None:
        if self.path is None:
            self.push_screen(AskPath("Save the workup as", self._default_path("")),
                             lambda p: self.save_to(p) if p else None)
        else:
            self.save_to(self.path)

    def save_to(self, path: str | Path) -> bool:
        """Save the workup to `path` (atomic, previous version kept as .bak); True when written."""
        target = Path(path).expanduser()
        if target.suffix.lower() not in (".yaml", ".yml", ".json"):
            target = target.with_name(target.name + ".yaml")
        try:
            backup = files.save_case(target, self.raw)
        except OSError as exc:
            self.notify(f"not saved: {exc.strerror or exc} ({target})", severity="error", timeout=10)
            return False
        old = self.path
        if old is not None and old != target:
            files.clear_autosave(old, self.recovery_dir)
        if old is None:
            files.clear_autosave(None, self.recovery_dir)
        files.clear_autosave(target, self.recovery_dir)
        self.path = target
        self._saved_raw = copy.deepcopy(self.raw)
        ev = self.evaluation
        more = f"; it still has {len(ev.problems)} problem(s)" if ev is not None and not ev.valid else ""
        kept = f" (previous version kept as {backup.name})" if backup else ""
        self.notify(f"saved to {target}{kept}{more}", timeout=6)
        self._refresh_status()
        return True

    def _current_result(self) -> Evaluation | None:
        ev = self.evaluation
        if ev is None or not ev.valid or self._busy or self._pending:
            self.notify("nothing to export: the workup is not valid yet, or is being ranked" if ev is None or not ev.valid
                        else "ranking in progress; try again in a moment", severity="warning")
            return None
        return ev

    def action_export_json(self) -> None:
        ev = self._current_result()
        if ev is None:
            return
        text = json.dumps(ev.document, indent=2, ensure_ascii=False) + "\n"
        self.push_screen(AskPath("Export the result (JSON) to", self._default_path(".rank.json")),
                         lambda p: self._export(p, text) if p else None)

    def action_export_report(self) -> None:
        ev = self._current_result()
        if ev is None:
            return
        self.push_screen(AskPath("Export the report (.html, .md or .txt) to", self._default_path(".report.html")),
                         lambda p: self._export_report(p, ev) if p else None)

    def _export_report(self, path: str, ev: Evaluation) -> None:
        """The printable report of `tubulo report` for .html/.md, the `tubulo rank` text for .txt."""
        suffix = Path(path).suffix.lower()
        if suffix == ".txt":
            from ..output.rank import rank_text

            text = rank_text(ev.result, 8)
        else:
            from datetime import date

            from ..errors import TubuloError
            from ..report import make_report
            from ..report.write import format_for

            try:
                fmt = format_for(path, None)
            except TubuloError:
                self.notify(f"not written: {path!r} must end in .html, .md or .txt", severity="error", timeout=10)
                return
            text = make_report(ev.result, fmt, date=date.today().isoformat())
        self._export(path, text)

    def _export(self, path: str, text: str) -> None:
        target = Path(path).expanduser()
        try:
            files.write_atomic(target, text)
        except OSError as exc:
            self.notify(f"not written: {exc.strerror or exc} ({target})", severity="error", timeout=10)
            return
        self.notify(f"written: {target}", timeout=6)

    def action_leave(self) -> None:
        if isinstance(self.screen, LeaveDialog):
            return
        if not self.dirty:
            self.exit(0)
            return

        def chosen(what: str | None) -> None:
            if what == "save":
                if self.path is not None:
                    if self.save_to(self.path):
                        self.exit(0)
                else:
                    self.push_screen(AskPath("Save the workup as", self._default_path("")),
                                     lambda p: self.exit(0) if p and self.save_to(p) else None)
            elif what == "discard":
                files.clear_autosave(self.path, self.recovery_dir)
                self.exit(0)

        self.push_screen(LeaveDialog(), chosen)


def opening(case: str | None) -> tuple[dict[str, Any] | None, Path | None, str | None]:
    """(raw workup, path, start view) for `tubulo ui [CASE]`: a file is read, a new name starts empty."""
    path = Path(case) if case else None
    if path is not None and path.exists():
        return files.read_raw(path), path, None
    if path is not None:
        return {"case": path.stem}, path, "workup"  # a new case that will be saved under this name
    return None, None, None


def launch(raw: Mapping[str, Any] | None, path: Path | None, start: str | None = None, mono: bool = False,
           prefetch: Any = None) -> int:
    """Run the workbench until the user quits; returns the exit code."""
    if mono:
        os.environ["NO_COLOR"] = "1"
    app = TubuloApp(raw, path, start_view=start, prefetch=prefetch)
    return int(app.run() or 0)


def run(case: str | None = None, mono: bool = False) -> int:
    """Open the workbench on a case file (or empty); returns the exit code."""
    raw, path, start = opening(case)
    return launch(raw, path, start, mono)
