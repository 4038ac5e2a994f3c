"""A snapshot of the circuit editor at 80x24 (the smallest size it is designed for), on
the booster pump panel (a field case of this project) with one mistake marked.

Update with ``pytest tests/tui/test_editor_snapshot.py --snapshot-update`` after a
deliberate change of the screen, and look at the picture before committing it.
The file is opened by a relative name from a fixed working folder, so that no
temporary path shows in the picture.
"""

from __future__ import annotations

import shutil

from .conftest import BOOSTER, acknowledge, make_app, settle


async def _quiet(pilot):
    """No blinking cursor and no running worker when the picture is taken."""
    from textual.widgets import Input

    for inp in pilot.app.query(Input):
        inp.cursor_blink = False
    await settle(pilot)
    for inp in pilot.app.query(Input):
        inp._cursor_visible = True
    await pilot.wait_for_scheduled_animations()
    await pilot.pause(0.2)
    await settle(pilot)


def test_editor_with_a_marked_part(snap_compare, tmp_path, monkeypatch):
    shutil.copy(BOOSTER / "circuit.toml", tmp_path / "circuit.toml")
    monkeypatch.chdir(tmp_path)

    async def before(pilot):
        from textual import events

        await acknowledge(pilot)
        pilot.app.screen.query_one("#circuit").value = "circuit.toml"
        await pilot.press("f4")
        await settle(pilot)
        screen = pilot.app.screen
        ol = screen.query_one("#parts-list")
        ol.highlighted = 2   # F1
        await pilot.pause()
        await pilot.press("enter")   # its form
        await pilot.pause()
        screen.query_one("#f-value").focus()
        await pilot.press("end", "ctrl+u")
        pilot.app.focused.post_message(events.Paste("24 V"))
        await pilot.pause()
        await pilot.press("enter")
        await settle(pilot)
        # back to the list (F1 stays selected): no text cursor in the picture
        screen.query_one("#parts-list").focus()
        await _quiet(pilot)

    assert snap_compare(make_app(tmp_path, circuit="circuit.toml"), terminal_size=(80, 24),
                        run_before=before)
