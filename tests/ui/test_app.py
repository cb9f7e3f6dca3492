"""The workbench driven by keys, as a user would: open the demo, read the leader, edit, walk the
evidence, browse the graph, save, quit, recover, and a bad value that must not crash."""

from __future__ import annotations

import json
import os
import time

import pytest
from textual.binding import Binding
from textual.widgets import DataTable, Input, OptionList, Tree

from tubulo.case import load_case
from tubulo.rank import rank_case
from tubulo.ui.dialogs import AskPath, LeaveDialog, RecoverDialog
from tubulo.ui.files import autosave_path, read_raw
from tubulo.ui.help import HelpOverlay, key_name
from tubulo.ui.views.differential import DifferentialView
from tubulo.ui.views.evidence import EvidenceView
from tubulo.ui.views.links import LinksView
from tubulo.ui.views.workup import WorkupView
from tubulo.ui.views.workup_lists import ListEditor
from tubulo.ui.widgets import CautionStrip

from .conftest import CRITICAL_DEMO, DEMO, make_app, run_app, screen_text, settle


def _type(pilot, text):
    return pilot.press(*list(text))


async def _edit_field(app, pilot, fid: str, text: str) -> None:
    """Highlight a field in the sheet and type a new value into its editor."""
    await pilot.press("f2")
    app.query_one(WorkupView).select_field(fid)
    await pilot.pause()
    box = app.query_one("#editor-value", Input)
    assert box.has_focus
    box.value = ""
    await _type(pilot, text)
    await settle(app, pilot)


def test_the_demo_opens_on_its_leading_candidate(tmp_path, tables):
    expected = rank_case(load_case(DEMO), tables).scored[0].id  # the engine on its own, outside the UI
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        view = app.query_one(DifferentialView)
        assert view.rows[0]["id"] == expected
        table = app.query_one("#diff-table", DataTable)
        assert table.get_row_at(0)[2].plain == view.rows[0]["name"]
        text = screen_text(app)
        assert view.rows[0]["name"] in text and "Leading:" in text
        assert "Decision support, not a diagnosis" in text  # the standing caution is always on screen
        assert table.has_focus  # keyboard-first: the list has the focus at once

    run_app(app, scenario)


def test_editing_a_value_changes_the_ranking(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        before = [c["id"] for c in app.valid_evaluation.document["candidates"][:3]]
        p_before = app.valid_evaluation.document["candidates"][0]["probability"]
        await _edit_field(app, pilot, "urine.chloride", "5")
        assert app.raw["urine"]["chloride"] == "5 mmol/L"
        after = [c["id"] for c in app.valid_evaluation.document["candidates"][:3]]
        assert after != before
        assert app.valid_evaluation.document["candidates"][0]["probability"] < p_before
        view = app.query_one(DifferentialView)
        assert [r["id"] for r in view.rows[:3]] == after  # the table shows the new order
        assert app.dirty

    run_app(app, scenario)


def test_a_bad_value_shows_its_error_and_nothing_crashes(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        await _edit_field(app, pilot, "serum.potassium", "abc")
        assert not app.evaluation.valid
        msg = str(app.query_one("#editor-msg").render())
        assert "serum.potassium" in msg and "is not a quantity" in msg
        row = app.query_one("#sheet", DataTable).get_row("serum.potassium")
        assert "is not a quantity" in row[4].plain
        assert app.valid_evaluation is not None  # the last valid ranking stays, marked stale
        await pilot.press("f3")
        assert "from the last valid workup" in screen_text(app)
        await _edit_field(app, pilot, "serum.potassium", "2.7")
        assert app.evaluation.valid

    run_app(app, scenario)


def test_a_unit_that_does_not_fit_names_the_likely_one(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        await _edit_field(app, pilot, "serum.calcium", "9.4")
        msg = str(app.query_one("#editor-msg").render())
        assert "is not a possible calcium (total)" in msg and "mg/dL" in msg
        # choose the unit the message names with the unit picker (→ steps through the units)
        await pilot.press("tab")
        picker = app.query_one("#editor-unit")
        assert picker.has_focus
        while picker.value != "mg/dL":
            await pilot.press("right")
        await settle(app, pilot)
        assert app.raw["serum"]["calcium"] == "9.4 mg/dL"
        assert app.evaluation.valid

    run_app(app, scenario)


def test_open_a_candidate_and_walk_a_path(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        await pilot.press("f3")
        await pilot.press("enter")
        await pilot.pause()
        assert app.query_one("#tabs").active == "evidence"
        ev = app.query_one(EvidenceView)
        leader = app.valid_evaluation.document["candidates"][0]
        assert ev.cid == leader["id"]
        items = app.query_one("#ev-items", OptionList)
        assert items.has_focus
        # move down to the first finding that has a drawn path
        for _ in range(items.option_count):
            opt = items.get_option_at_index(items.highlighted)
            if opt.id in ev.items and ev.items[opt.id].get("path"):
                break
            await pilot.press("down")
        item = ev.items[items.get_option_at_index(items.highlighted).id]
        assert item["path"], "the leader has no finding with a causal path"
        await pilot.press("enter")
        path = app.query_one("#ev-path", OptionList)
        assert path.has_focus
        assert len(ev.steps) == len(item["path"]) + 1  # the candidate, then each step
        assert ev.steps[-1].node == item["path"][-1]["node"]
        await pilot.press("down")  # step along: the defect's target
        step = ev.steps[path.highlighted]
        assert step.node == item["path"][0]["node"]
        assert step.source and step.source in str(app.query_one("#ev-step").render())
        await pilot.press("enter")  # jump to that node
        assert app.query_one("#tabs").active == "links"
        assert app.query_one(LinksView).current == step.node

    run_app(app, scenario)


def test_browse_from_a_segment_to_a_disorder_and_back(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def follow(app, pilot, label_start: str, group: str) -> None:
        tree = app.query_one("#links-tree", Tree)
        for branch in tree.root.children:
            if str(branch.label).startswith(group):
                branch.expand()
                for leaf in branch.children:
                    if str(leaf.label).startswith(label_start):
                        tree.move_cursor(leaf)
                        await pilot.press("enter")
                        await pilot.pause()
                        return
        raise AssertionError(f"no '{label_start}' under '{group}' at {app.query_one(LinksView).current}")

    async def scenario(app, pilot):
        await pilot.press("f5")
        await pilot.press("slash")
        assert app.query_one("#links-search", Input).has_focus
        await _type(pilot, "DCT1")
        await pilot.pause()
        await pilot.press("enter")
        links = app.query_one(LinksView)
        assert links.current == "dct1"
        await follow(app, pilot, "NCC", "hosts")
        assert links.current == "ncc"
        await follow(app, pilot, "SLC12A3", "encoded by")
        assert links.current == "gene:SLC12A3"
        await follow(app, pilot, "Gitelman", "defective in")
        assert links.current == "gitelman"
        assert app.tables["nodes"][links.current]["kind"] == "disorder"
        await pilot.press("backspace")
        assert links.current == "gene:SLC12A3"

    run_app(app, scenario)


def test_save_and_reload_are_identical(tmp_path, demo_copy):
    original = demo_copy.read_bytes()
    app = make_app(demo_copy, tmp_path)

    async def scenario(app, pilot):
        await _edit_field(app, pilot, "serum.sodium", "139")
        assert app.dirty
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert not app.dirty
        assert read_raw(demo_copy) == app.raw
        assert (demo_copy.parent / (demo_copy.name + ".bak")).read_bytes() == original
        assert not autosave_path(demo_copy).exists()

    run_app(app, scenario)
    reopened = make_app(demo_copy, tmp_path)

    async def again(app, pilot):
        assert app.raw == read_raw(demo_copy)
        assert app.raw["serum"]["sodium"] == "139 mmol/L"
        assert not app.dirty

    run_app(reopened, again)


def test_saving_a_new_workup_asks_for_a_name(tmp_path):
    app = make_app(None, tmp_path, start_view="workup")
    target = tmp_path / "clinic-7.yaml"

    async def scenario(app, pilot):
        await _edit_field(app, pilot, "case", "clinic-7")
        await _edit_field(app, pilot, "serum.potassium", "2.9")
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, AskPath)
        box = app.screen.query_one(Input)
        box.value = str(target)
        await pilot.press("enter")
        await pilot.pause()
        assert read_raw(target) == {"case": "clinic-7", "serum": {"potassium": "2.9 mmol/L"}}
        assert app.path == target and not app.dirty

    run_app(app, scenario)


def test_quit_with_unsaved_changes_asks(tmp_path, demo_copy):
    app = make_app(demo_copy, tmp_path)

    async def scenario(app, pilot):
        await _edit_field(app, pilot, "serum.sodium", "141")
        await pilot.press("ctrl+q")
        await pilot.pause()
        assert isinstance(app.screen, LeaveDialog)
        await pilot.press("escape")  # stay
        await pilot.pause()
        assert not isinstance(app.screen, LeaveDialog) and app.is_running
        await pilot.press("ctrl+q")
        await pilot.pause()
        await pilot.press("d")  # leave without saving
        await pilot.pause()

    run_app(app, scenario)
    assert app.return_value == 0
    assert read_raw(demo_copy)["serum"]["sodium"] == "137 mmol/L"  # nothing was written
    assert not autosave_path(demo_copy).exists()


def test_quit_without_changes_does_not_ask(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        await pilot.press("ctrl+q")
        await pilot.pause()

    run_app(app, scenario)
    assert app.return_value == 0


def test_an_edit_is_written_to_the_recovery_copy_and_offered_next_time(tmp_path, demo_copy):
    app = make_app(demo_copy, tmp_path)

    async def scenario(app, pilot):
        await _edit_field(app, pilot, "serum.magnesium", "0.41")
        await pilot.pause(0.3)  # past the autosave delay
        copy = autosave_path(demo_copy)
        assert copy.exists()
        from tubulo.case import read_case_text

        assert read_case_text(copy.read_text(encoding="utf-8"), "yaml") == app.raw
        # a crash now loses nothing: no save happened
        assert read_raw(demo_copy)["serum"]["magnesium"] == "0.52 mmol/L"

    run_app(app, scenario)
    old = time.time() - 60
    os.utime(demo_copy, (old, old))
    reopened = make_app(demo_copy, tmp_path, check_recovery=True)

    async def recover(app, pilot):
        await pilot.pause()
        assert isinstance(app.screen, RecoverDialog)
        await pilot.press("r")
        await settle(app, pilot)
        await pilot.pause(0.1)
        assert app.raw["serum"]["magnesium"] == "0.41 mmol/L"
        assert app.dirty  # recovered work is not saved work
        sheet = app.query_one("#sheet", DataTable)
        assert sheet.get_row("serum.magnesium")[1].plain == "0.41"

    run_app(reopened, recover)


def test_critical_values_are_impossible_to_miss(tmp_path):
    app = make_app(CRITICAL_DEMO, tmp_path)

    async def scenario(app, pilot):
        strip = app.query_one(CautionStrip)
        assert strip.critical_count >= 1 and strip.has_class("-critical")
        text = screen_text(app)
        assert "!!! CRITICAL VALUE" in text  # words, not colour alone
        assert "Potassium" in text and "critical limit" in text
        for view in ("f2", "f4", "f5", "f6", "f7"):
            await pilot.press(view)
            assert "!!! CRITICAL VALUE" in screen_text(app)
        sheet = app.query_one("#sheet", DataTable)
        assert "!!!" in sheet.get_row("serum.potassium")[3].plain

    run_app(app, scenario)


def test_findings_are_searched_by_synonym_and_listed_with_ids(tmp_path, hpo_names):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        await pilot.press("f2")
        app.query_one(WorkupView).select_field("list:features", edit=False)
        app.query_one("#sheet", DataTable).focus()
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, ListEditor)
        await _type(pilot, "kidney stones")  # a clinic phrase for HP:0000787
        await pilot.pause()
        hits = app.screen.query_one("#list-hits", OptionList)
        assert hits.display and "HP:0000787" in str(hits.get_option_at_index(0).prompt)
        await pilot.press("enter")
        await settle(app, pilot)
        assert app.raw["features"][-1] == f"HP:0000787 {hpo_names['HP:0000787']}"
        await pilot.press("down")  # to the listed items
        items = app.screen.query_one("#list-items", OptionList)
        assert items.has_focus
        await pilot.press("space")  # the first listed finding becomes absent
        await settle(app, pilot)
        assert "HP:0003394 Muscle spasm" in app.raw["absent_features"]
        await pilot.press("escape")
        assert not isinstance(app.screen, ListEditor)

    run_app(app, scenario)


def test_a_medicine_is_completed_and_weighed(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        await pilot.press("f2")
        app.query_one(WorkupView).open_list("medications")
        await pilot.pause()
        await _type(pilot, "frusem")
        await pilot.pause()
        await pilot.press("right")  # accept the completion
        box = app.screen.query_one(Input)
        assert box.value == "frusemide"
        await pilot.press("enter")
        await settle(app, pilot)
        assert app.raw["medications"] == ["frusemide"]
        listed = str(app.screen.query_one("#list-items", OptionList).get_option_at_index(0).prompt)
        assert "furosemide" in listed
        meds = app.valid_evaluation.document["case"]["medications"]
        assert meds[0]["inn"] == "furosemide" and meds[0]["class"]

    run_app(app, scenario)


def test_export_json_writes_the_rank_document(tmp_path, demo_copy):
    app = make_app(demo_copy, tmp_path)
    target = tmp_path / "out.json"

    async def scenario(app, pilot):
        await pilot.press("ctrl+e")
        await pilot.pause()
        assert isinstance(app.screen, AskPath)
        app.screen.query_one(Input).value = str(target)
        await pilot.press("enter")
        await pilot.pause()
        doc = json.loads(target.read_text(encoding="utf-8"))
        assert doc == json.loads(json.dumps(app.valid_evaluation.document))
        assert doc["cautions"][-1]["id"] == "decision_support"

    run_app(app, scenario)


def test_forward_view_marks_the_drug_sites(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        await pilot.press("f6")
        assert "»DCT1«" in screen_text(app)  # the leader's segment, marked in text
        await pilot.press("d")
        await pilot.pause()
        listed = app.screen.query_one(OptionList)
        labels = [str(listed.get_option_at_index(i).prompt) for i in range(listed.option_count)]
        target = next(i for i, label in enumerate(labels) if label.startswith("Loop diuretic"))
        listed.highlighted = target
        await pilot.press("enter")
        await pilot.pause(0.2)
        text = screen_text(app)
        assert "TAL◆" in text and "macula densa◆" in text  # the loop diuretic acts in the thick ascending limb
        assert "forward view: Loop diuretic" in text

    run_app(app, scenario, size=(100, 40))


def test_help_lists_every_key(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        await pilot.press("f1")
        await pilot.pause()
        assert isinstance(app.screen, HelpOverlay)
        text = app.screen.text().plain
        classes = [type(app), DifferentialView, EvidenceView, LinksView, WorkupView, ListEditor,
                   LeaveDialog, RecoverDialog]
        from tubulo.ui.views.nephron_view import NephronView
        from tubulo.ui.widgets import Picker

        classes += [NephronView, Picker]
        for cls in classes:
            for b in cls.BINDINGS:
                b = b if isinstance(b, Binding) else Binding(*b)
                assert key_name(b.key) in text, (cls.__name__, b.key)
                assert (b.tooltip or b.description) in text, (cls.__name__, b.key)
        await pilot.press("escape")
        assert not isinstance(app.screen, HelpOverlay)

    run_app(app, scenario)


def test_monochrome_keeps_every_mark(tmp_path, monkeypatch: pytest.MonkeyPatch):
    monkeypatch.setenv("NO_COLOR", "1")
    app = make_app(CRITICAL_DEMO, tmp_path)

    async def scenario(app, pilot):
        assert app.no_color and app.screen.has_class("-mono")
        text = screen_text(app)
        assert "!!! CRITICAL VALUE" in text and "▲" in text

    run_app(app, scenario)


def test_key_names_read_like_a_keyboard():
    assert key_name("ctrl+s") == "Ctrl+S"
    assert key_name("f2") == "F2"
    assert key_name("left_square_bracket") == "["
    assert key_name("escape,f8") == "Esc / F8"


def test_an_unknown_key_shows_with_its_hint_and_can_be_cleared(tmp_path):
    path = tmp_path / "typo.yaml"
    path.write_text("case: typo\nserum:\n  potasium: 3.0 mmol/L\n  sodium: 139 mmol/L\n", encoding="utf-8")
    app = make_app(path, tmp_path, start_view="workup")

    async def scenario(app, pilot):
        assert not app.evaluation.valid
        sheet = app.query_one("#sheet", DataTable)
        row = sheet.get_row("extra:serum.potasium")
        assert "did you mean serum.potassium?" in row[4].plain  # the command line's hint, on the line
        app.query_one(WorkupView).select_field("extra:serum.potasium", edit=False)
        sheet.focus()
        await pilot.press("delete")
        await settle(app, pilot)
        assert app.raw == {"case": "typo", "serum": {"sodium": "139 mmol/L"}}
        assert app.evaluation.valid

    run_app(app, scenario)


@pytest.mark.parametrize("suffix, marker", [(".html", "<html"), (".md", "# "), (".txt", "Decision support")])
def test_export_report_writes_what_the_report_commands_write(tmp_path, demo_copy, suffix, marker):
    from datetime import date

    from tubulo.output.rank import rank_text
    from tubulo.report import make_report

    app = make_app(demo_copy, tmp_path)
    target = tmp_path / f"out{suffix}"

    async def scenario(app, pilot):
        await pilot.press("ctrl+r")
        await pilot.pause()
        assert isinstance(app.screen, AskPath)
        app.screen.query_one(Input).value = str(target)
        await pilot.press("enter")
        await pilot.pause()
        text = target.read_text(encoding="utf-8")
        result = app.valid_evaluation.result
        if suffix == ".txt":
            assert text == rank_text(result, 8)
        else:  # the same document `tubulo report` builds from this result
            assert text == make_report(result, suffix[1:], date=date.today().isoformat())
        assert marker in text
        assert app.valid_evaluation.document["candidates"][0]["name"] in text
        assert "not a diagnosis" in text

    run_app(app, scenario)


def test_export_report_refuses_an_unknown_suffix(tmp_path, demo_copy):
    app = make_app(demo_copy, tmp_path)
    target = tmp_path / "out.pdf"

    async def scenario(app, pilot):
        await pilot.press("ctrl+r")
        await pilot.pause()
        app.screen.query_one(Input).value = str(target)
        await pilot.press("enter")
        await pilot.pause()
        assert not target.exists()
        assert any(".html, .md or .txt" in str(n.message) for n in app._notifications)

    run_app(app, scenario)


def test_the_mouse_selects_and_opens_a_candidate_and_switches_views(tmp_path):
    app = make_app(DEMO, tmp_path)

    async def scenario(app, pilot):
        table = app.query_one("#diff-table", DataTable)
        view = app.query_one(DifferentialView)
        assert table.cursor_row == 0
        # the first data row sits one line under the header; one click moves there, a second opens it
        assert await pilot.click("#diff-table", offset=(10, 2))
        await pilot.pause()
        assert table.cursor_row == 1 and app.query_one("#tabs").active == "differential"
        assert await pilot.click("#diff-table", offset=(10, 2))
        await pilot.pause()
        assert app.query_one("#tabs").active == "evidence"
        assert app.query_one(EvidenceView).cid == view.rows[1]["id"]
        assert await pilot.click("#--content-tab-nephron")
        await pilot.pause()
        assert app.query_one("#tabs").active == "nephron"

    run_app(app, scenario)
