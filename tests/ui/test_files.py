"""Saving, backups, the recovery copy and reading a case back: the workup survives byte for byte."""

from __future__ import annotations

import json
import os
import time
from pathlib import Path

import pytest

from tubulo.errors import CaseError
from tubulo.ui.files import (autosave_path, clear_autosave, dump_case, read_raw, recovery_offer, save_case,
                             write_atomic, write_autosave)

from .conftest import DEMO, ROOT


def test_save_and_read_back_is_identical(tmp_path: Path):
    raw = read_raw(DEMO)
    target = tmp_path / "case.yaml"
    assert save_case(target, raw) is None  # nothing to back up the first time
    assert read_raw(target) == raw
    first = target.read_bytes()
    save_case(target, read_raw(target))
    assert target.read_bytes() == first  # saving what was read changes nothing


def test_the_previous_version_is_kept_as_bak(tmp_path: Path):
    target = tmp_path / "case.yaml"
    save_case(target, {"case": "one"})
    before = target.read_bytes()
    backup = save_case(target, {"case": "two"})
    assert backup == tmp_path / "case.yaml.bak"
    assert backup.read_bytes() == before
    assert read_raw(target) == {"case": "two"}


def test_a_json_case_is_saved_as_json(tmp_path: Path):
    src = ROOT / "cases" / "demo-infant-polyuria.json"
    raw = read_raw(src)
    target = tmp_path / "polyuria.json"
    save_case(target, raw)
    assert json.loads(target.read_text(encoding="utf-8")) == raw


def test_atomic_write_leaves_no_temporary_file(tmp_path: Path):
    target = tmp_path / "x.yaml"
    write_atomic(target, "case: x\n")
    write_atomic(target, "case: y\n")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["x.yaml"]
    assert target.read_text() == "case: y\n"


def test_a_failed_write_keeps_the_old_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    target = tmp_path / "x.yaml"
    write_atomic(target, "case: old\n")

    def broken(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken)
    with pytest.raises(OSError):
        write_atomic(target, "case: new\n")
    assert target.read_text() == "case: old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["x.yaml"]


def test_recovery_copy_is_offered_only_when_newer(tmp_path: Path):
    case = tmp_path / "c.yaml"
    save_case(case, {"case": "c"})
    assert recovery_offer(case) is None
    copy = write_autosave(case, {"case": "c", "onset": "infancy"})
    assert copy == autosave_path(case) == tmp_path / ".c.yaml.autosave"
    old = time.time() - 100
    os.utime(case, (old, old))
    assert recovery_offer(case) == copy
    assert read_raw(case) == {"case": "c"}
    os.utime(copy, (old - 100, old - 100))
    assert recovery_offer(case) is None  # the file was saved after the copy
    clear_autosave(case)
    assert not copy.exists()


def test_an_unsaved_new_case_recovers_from_the_recovery_folder(tmp_path: Path):
    folder = tmp_path / "recovery"
    assert recovery_offer(None, folder) is None
    copy = write_autosave(None, {"case": "new"}, folder)
    assert copy.parent == folder
    assert recovery_offer(None, folder) == copy


def test_unreadable_files_are_case_errors(tmp_path: Path):
    (tmp_path / "bin.yaml").write_bytes(b"\xff\xfe\x00")
    with pytest.raises(CaseError):
        read_raw(tmp_path / "bin.yaml")
    with pytest.raises(CaseError):
        read_raw(tmp_path / "missing.yaml")
    with pytest.raises(CaseError):
        read_raw(tmp_path)


def test_dump_keeps_the_mapping_order():
    text = dump_case({"case": "x", "serum": {"sodium": "140 mmol/L"}, "patient": {"age": "3 y"}})
    assert text.index("serum:") < text.index("patient:")
