"""Helpers of the terminal UI's tests: an app on a tmp_path logbook, driven by Pilot.

No asyncio plugin is needed: each test runs its scenario with ``asyncio.run``.
Every test uses a logbook under ``tmp_path``, never the user's.
"""

from __future__ import annotations

import asyncio
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
CASES = ROOT / "field_cases"
BOOSTER = CASES / "booster_pump_panel"


def run(scenario):
    """Run an ``async def scenario()`` to completion."""
    return asyncio.run(scenario())


def make_app(tmp_path, circuit=BOOSTER / "circuit.toml", **kw):
    from faultfind.tui.app import FaultfindApp

    return FaultfindApp(None if circuit is None else str(circuit),
                        logbook=str(tmp_path / "logbook.sqlite"), cases=CASES,
                        export_dir=tmp_path, **kw)


async def settle(pilot, rounds=3):
    """Wait until no worker runs and the messages they posted are handled."""
    app = pilot.app
    for _ in range(rounds):
        await app.workers.wait_for_complete()
        await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()


async def acknowledge(pilot):
    """The deliberate acknowledgement of the caution: ``a`` then ``y``."""
    await pilot.press("a", "y")
    await settle(pilot)


async def wait_for_screen(pilot, screen_type, timeout=20.0):
    """Pause until the app's screen is a ``screen_type`` (at most ``timeout`` s).

    A busy machine can take more than a few message rounds to push a screen;
    the caller's assertion still fails if the screen never comes.
    """
    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    while not isinstance(pilot.app.screen, screen_type) and loop.time() < end:
        await settle(pilot, 1)
        await asyncio.sleep(0.05)


async def start_session(pilot, unit="BP-2"):
    """From the opening screen (circuit already named): type the unit, Enter."""
    from faultfind.tui.screens.bench import BenchScreen

    await pilot.press(*unit, "enter")
    await settle(pilot)
    await wait_for_screen(pilot, BenchScreen)


async def to_bench(pilot, unit="BP-2"):
    await acknowledge(pilot)
    await start_session(pilot, unit)
    from faultfind.tui.screens.bench import BenchScreen

    assert isinstance(pilot.app.screen, BenchScreen), pilot.app.screen


async def type_reading(pilot, text, *, open_key="n", paste=False):
    """Open the entry, type ``text`` (or paste it, as a terminal pastes: faster in a
    test), press Enter, wait for the commit and the diagnosis."""
    from textual import events

    await pilot.press(open_key)
    if paste:
        await settle(pilot, 1)
        pilot.app.focused.post_message(events.Paste(text))
    else:
        await pilot.press(*text)
    await settle(pilot, 1)
    await pilot.press("enter")
    await settle(pilot)


async def set_power(pilot, state):
    """Mark the circuit ``"on"`` (live) or ``"off"`` (isolated) through the dialog."""
    screen = pilot.app.screen
    if screen.bench.power != state:
        await pilot.press("o")
        await settle(pilot, 1)
        await pilot.press("y")
        await settle(pilot)
    assert pilot.app.screen.bench.power == state


def text_of(widget) -> str:
    """What a widget and the Statics in it show, as plain text (markup removed)."""
    from textual.widgets import Static

    found = [widget] if isinstance(widget, Static) else []
    found += list(widget.query(Static))
    out = []
    for w in found:
        v = w.visual
        out.append(getattr(v, "plain", None) or str(w.content))
    return "\n".join(out)


def table_rows(table) -> list[list[str]]:
    """The cells of a DataTable as plain text."""
    rows = []
    for i in range(table.row_count):
        rows.append([getattr(c, "plain", None) or str(c) for c in table.get_row_at(i)])
    return rows


def logbook_sessions(tmp_path):
    """The sessions of the test's logbook, read with a Logbook of its own."""
    from faultfind.io.logbook import Logbook

    path = tmp_path / "logbook.sqlite"
    if not path.exists():
        return []
    with Logbook(path, create=False) as book:
        return [book.get_session(s.id) for s in book.list_sessions()]


def case_fault(case_dir: Path):
    """The planted fault of a field case (its answer key, fault.toml)."""
    with open(case_dir / "fault.toml", "rb") as f:
        doc = tomllib.load(f)
    return doc


@pytest.fixture
def booster():
    return BOOSTER
