"""The safety caution comes first, nothing is reachable before it, quitting leaves nothing.

Outside references: the issue's item 1 lists what the caution must hold (live
work and the measurement categories of IEC 61010-1, isolation and lock-out /
tag-out before resistance readings, verify dead with a proven tester,
discharge stored energy, one hand away, PPE, decision aid deferring to local
codes, the maker's instructions and licensed practice); the categories CAT
II/III/IV are those of IEC 61010-1 (from memory, as docs/safety.md).
"""

from __future__ import annotations

from datetime import datetime, timezone

import pytest

from faultfind.tui.screens.caution import CAUTION_ITEMS, CautionScreen

from .conftest import (acknowledge, logbook_sessions, make_app, run, settle, start_session,
                       text_of)

# (what the issue asks, words that must be on the screen, any of them, case-insensitive)
REQUIRED = [
    ("live work", ["live work"]),
    ("measurement categories of IEC 61010-1", ["IEC 61010-1"]),
    ("the categories by name", ["CAT II", "CAT III"]),
    ("meter and leads rated", ["leads rated"]),
    ("isolate", ["isolate"]),
    ("lock out / tag out", ["lock out"]),
    ("tag out", ["tag out"]),
    ("before resistance or continuity readings", ["resistance or continuity"]),
    ("verify dead", ["verify dead"]),
    ("with a proven tester", ["proven tester"]),
    ("discharge stored energy (capacitors)", ["discharge capacitors"]),
    ("one hand away", ["one hand away"]),
    ("PPE", ["PPE", "protective equipment", "risk assessment"]),
    ("a decision aid", ["decision aid"]),
    ("local codes", ["local codes"]),
    ("the equipment maker's instructions", ["maker's instructions"]),
    ("licensed practice", ["licensed practice"]),
]


def _files(tmp_path):
    return sorted(p.name for p in tmp_path.rglob("*"))


def test_caution_is_first_and_complete(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await settle(pilot)
            assert isinstance(app.screen, CautionScreen)
            shown = text_of(app.screen)
            for what, words in REQUIRED:
                assert any(w.lower() in shown.lower() for w in words), f"caution lacks {what}"
    run(scenario)


def test_caution_items_each_have_a_heading_and_text():
    assert len(CAUTION_ITEMS) >= 7
    assert all(head and len(text) > 30 for head, text in CAUTION_ITEMS)


# Keys that must not get past the caution: Enter, Space, y alone, Tab, the
# workspace's keys, help, the command palette, digits.
STRAY = ["enter", "space", "y", "tab", "n", "t", "o", "c", "x", "h", "f1", "question_mark",
         "ctrl+p", "ctrl+s", "1", "2", "down", "pagedown", "f5", "ctrl+n", "ctrl+o"]


def test_nothing_is_reachable_before_acknowledging(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await settle(pilot)
            for key in STRAY:
                await pilot.press(key)
                await settle(pilot, 1)
                assert isinstance(app.screen, CautionScreen), f"{key} got past the caution"
                assert len(app.screen_stack) == 2  # the default screen and the caution only
            # a, then any other key, then y: the other key disarms
            for other in ("enter", "space", "b", "tab"):
                await pilot.press("a", other, "y")
                await settle(pilot, 1)
                assert isinstance(app.screen, CautionScreen), f"a {other} y got past"
            assert app.acknowledged_at is None
            assert app.book is None
        assert _files(tmp_path) == []  # no logbook was created
    run(scenario)


@pytest.mark.parametrize("key", ["q", "escape", "ctrl+c", "ctrl+q"])
def test_quitting_from_the_caution_leaves_nothing(tmp_path, key):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await settle(pilot)
            await pilot.press(key)
            await pilot.pause(0.5)
            assert app._exit, f"{key} did not quit"
    run(scenario)
    assert _files(tmp_path) == []
    assert not (tmp_path / "logbook.sqlite").exists()


def test_quitting_from_the_opening_screen_creates_no_logbook(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await acknowledge(pilot)
            assert type(app.screen).__name__ == "OpeningScreen"
            await pilot.press("ctrl+q")
    run(scenario)
    assert _files(tmp_path) == []


def test_acknowledgement_is_recorded_in_the_session(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await settle(pilot)
            before = datetime.now(timezone.utc)
            await acknowledge(pilot)
            after = datetime.now(timezone.utc)
            assert app.acknowledged_at is not None
            await start_session(pilot, "BP-2")
            return before, after, app.acknowledged_at
    before, after, ack = run(scenario)
    sessions = logbook_sessions(tmp_path)
    assert len(sessions) == 1
    recorded = datetime.fromisoformat(sessions[0].caution_acknowledged_at)
    # the moment of the key press (stored to the millisecond), not the session's start
    before = before.replace(microsecond=before.microsecond // 1000 * 1000)
    assert before <= recorded <= after
    assert recorded == datetime.fromisoformat(ack)
