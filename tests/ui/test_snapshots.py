"""Snapshots of the main screens at 80x24 and 120x36 (pytest-textual-snapshot).

They pin the look of the workbench, which depends on the knowledge: after a knowledge change that
moves the demo's ranking, look at the new pictures and accept them with `--snapshot-update`."""

from __future__ import annotations

import pytest

from .conftest import CRITICAL_DEMO, DEMO, make_app, settle

SMALL, LARGE = (80, 24), (120, 36)


def _app(tmp_path, path=DEMO, **kwargs):
    return make_app(path, tmp_path, show_timing=False, **kwargs)


def _keys(*keys):
    async def before(pilot):
        await settle(pilot.app, pilot)
        for k in keys:
            await pilot.press(k)
            await pilot.pause()
        await settle(pilot.app, pilot)

    return before


@pytest.mark.parametrize("size", [SMALL, LARGE], ids=["80x24", "120x36"])
def test_differential(snap_compare, tmp_path, size):
    assert snap_compare(_app(tmp_path), run_before=_keys(), terminal_size=size)


@pytest.mark.parametrize("size", [SMALL, LARGE], ids=["80x24", "120x36"])
def test_evidence_of_the_leader(snap_compare, tmp_path, size):
    assert snap_compare(_app(tmp_path), run_before=_keys("enter", "down", "down", "down"), terminal_size=size)


@pytest.mark.parametrize("size", [SMALL, LARGE], ids=["80x24", "120x36"])
def test_workup_sheet(snap_compare, tmp_path, size):
    assert snap_compare(_app(tmp_path), run_before=_keys("f2", "down"), terminal_size=size)


@pytest.mark.parametrize("size", [SMALL, LARGE], ids=["80x24", "120x36"])
def test_nephron_map(snap_compare, tmp_path, size):
    assert snap_compare(_app(tmp_path), run_before=_keys("f6"), terminal_size=size)


def test_links_from_the_leader(snap_compare, tmp_path):
    assert snap_compare(_app(tmp_path), run_before=_keys("f5"), terminal_size=SMALL)


def test_plan(snap_compare, tmp_path):
    assert snap_compare(_app(tmp_path), run_before=_keys("f7"), terminal_size=SMALL)


def test_help_overlay(snap_compare, tmp_path):
    assert snap_compare(_app(tmp_path), run_before=_keys("f1"), terminal_size=SMALL)


def test_critical_banner(snap_compare, tmp_path):
    assert snap_compare(_app(tmp_path, CRITICAL_DEMO), run_before=_keys(), terminal_size=SMALL)
