"""Every bundled demo case validates (`tubulo check` exits 0)."""

from __future__ import annotations

from pathlib import Path

import pytest

from tubulo.cli import main

CASES = sorted((Path(__file__).resolve().parents[1] / "cases").glob("*.y*ml")) + \
    sorted((Path(__file__).resolve().parents[1] / "cases").glob("*.json"))


def test_there_are_demo_cases():
    assert len(CASES) >= 1


@pytest.mark.parametrize("path", CASES, ids=[p.name for p in CASES])
def test_demo_case_checks(path, capsys):
    assert main(["check", str(path)]) == 0, capsys.readouterr().err
