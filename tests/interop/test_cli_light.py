"""The interop commands register without importing their heavy packages (the CLI must start fast)."""

from __future__ import annotations

import subprocess
import sys

HEAVY = ("pydantic", "fhir", "phenopackets", "google.protobuf", "numpy", "pint", "networkx")


def test_building_the_parser_imports_no_heavy_package():
    code = ("import sys; from tubulo.cli import build_parser; build_parser(); "
            f"print([m for m in sys.modules if m.startswith({HEAVY!r})])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == "[]"


def test_help_lists_both_commands():
    out = subprocess.run([sys.executable, "-m", "tubulo.cli", "--help"], capture_output=True, text=True, check=True).stdout
    assert "import" in out and "export" in out
    for args, word in ((["import", "fhir", "--help"], "--age-at"), (["export", "phenopacket", "--help"], "--top")):
        out = subprocess.run([sys.executable, "-m", "tubulo.cli", *args], capture_output=True, text=True, check=True).stdout
        assert word in out
