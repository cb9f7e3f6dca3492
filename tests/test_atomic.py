"""The one atomic-write helper every writer (UI save, report, export) goes through."""

import os
from pathlib import Path

import pytest

from tubulo.atomic import replace_file


def test_writes_bytes_and_replaces_old_file(tmp_path: Path) -> None:
    target = tmp_path / "case.yaml"
    target.write_text("old\n")
    n = replace_file(target, "neu\n".encode("utf-8"))
    assert n == 4
    assert target.read_text() == "neu\n"
    assert [p.name for p in tmp_path.iterdir()] == ["case.yaml"]  # no temporary file left behind
    assert os.stat(target).st_mode & 0o777 == 0o644


def test_failed_rename_keeps_old_file_and_removes_temporary(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    target = tmp_path / "case.yaml"
    target.write_text("kept\n")

    def broken_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(OSError):
        replace_file(target, b"lost\n")
    assert target.read_text() == "kept\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["case.yaml"]


def test_missing_folder_raises_oserror(tmp_path: Path) -> None:
    with pytest.raises(OSError):
        replace_file(tmp_path / "absent" / "x.txt", b"x")
