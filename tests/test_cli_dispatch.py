"""The command registry: a run naming one command builds only its parser, yet every command stays reachable."""

import subprocess
import sys

import pytest

from tubulo.cli import _COMMAND_MODULES, build_parser, main


def _commands(parser) -> set[str]:
    return set(parser._subparsers._group_actions[0].choices)


def test_full_parser_lists_exactly_the_registered_commands():
    assert _commands(build_parser()) == set(_COMMAND_MODULES)


@pytest.mark.parametrize("command", sorted(_COMMAND_MODULES))
def test_each_command_is_registered_by_its_module(command):
    assert command in _commands(build_parser(command))


def test_one_command_does_not_import_the_others():
    code = ("import sys; from tubulo.cli import build_parser; build_parser('rank'); "
            "print(sorted(m for m in ('tubulo.kb.cli', 'tubulo.report.cli', 'tubulo.screen.cli', 'tubulo.ui_cli', "
            "'tubulo.interop.cli') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == "[]"


def test_unknown_command_lists_every_command(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["rnak", "x.yaml"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    for command in ("rank", "screen", "export", "knowledge"):
        assert command in err


def test_help_wraps_to_the_columns_asked_for():
    env = {**__import__("os").environ, "COLUMNS": "50"}
    out = subprocess.run([sys.executable, "-m", "tubulo.cli", "rank", "--help"], capture_output=True, text=True,
                         env=env, check=True).stdout
    assert "--top" in out
    assert max(len(line) for line in out.splitlines()) <= 48  # argparse's rule: COLUMNS less 2


# A one-shot run pays only for what it uses: no graph library, no dataclass machinery (records are
# NamedTuples: creating ~35 dataclasses cost about a third of a cold start), no shutil for help width.
@pytest.mark.parametrize("command", [["check"], ["rank", "--json"]])
def test_one_shot_run_imports_no_heavy_modules(command):
    from pathlib import Path

    case = str(Path(__file__).resolve().parents[1] / "cases" / "demo-salt-wasting.yaml")
    code = ("import sys, io, contextlib\nfrom tubulo.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    code = main({[command[0], case, *command[1:]]!r})\n"
            "print(code, sorted(m for m in ('networkx', 'dataclasses', 'shutil', 'textual', 'pydantic', 'pint') "
            "if m in sys.modules))")
    subprocess.run([sys.executable, "-c", code], capture_output=True, check=True)  # first use builds the caches
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == "0 []"
