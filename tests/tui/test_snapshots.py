"""Snapshots of the terminal UI at fixed sizes: 80x24 (the smallest it is designed for)
and 120x36.  Update them with ``pytest tests/tui --snapshot-update`` after a deliberate
change of the screens, and look at the pictures before committing them.

What is checked is the screen as a person sees it; the readings are those of
the booster pump panel's readings.csv (a field case of this project).
"""

from __future__ import annotations

import pytest

from .conftest import make_app, settle, to_bench, type_reading

SIZES = [(80, 24), (120, 36)]


async def _quiet(pilot):
    """No blinking cursor and no running worker when the picture is taken."""
    from textual.widgets import Input

    for inp in pilot.app.query(Input):
        inp.cursor_blink = False
    await settle(pilot)
    for inp in pilot.app.query(Input):
        inp._cursor_visible = True  # shown, whatever the blink was at
    await settle(pilot)
    # let a layout pass that a late message scheduled finish before the picture
    # (under load an input was once drawn before its width was laid out)
    await pilot.wait_for_scheduled_animations()
    await pilot.pause(0.2)
    await settle(pilot)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_caution_screen(snap_compare, tmp_path, size):
    async def before(pilot):
        await _quiet(pilot)

    assert snap_compare(make_app(tmp_path), terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_bench_with_findings(snap_compare, tmp_path, size):
    async def before(pilot):
        await to_bench(pilot)
        await type_reading(pilot, "V +24V 23.91 V")
        await type_reading(pilot, "V 24V-F 0 V")
        await type_reading(pilot, "V +24V,24V-F 23.89 V")
        await _quiet(pilot)

    assert snap_compare(make_app(tmp_path), terminal_size=size, run_before=before)


def test_bench_refusing_a_resistance_reading_while_live(snap_compare, tmp_path):
    async def before(pilot):
        await to_bench(pilot)
        await type_reading(pilot, "V 24V-F 0 V")
        await type_reading(pilot, "R F1 OL")
        # the refused reading stays in the entry for correction; take the focus
        # away so the picture does not depend on the entry's cursor state
        pilot.app.set_focus(None)
        await _quiet(pilot)

    assert snap_compare(make_app(tmp_path), terminal_size=(80, 24), run_before=before)


def test_power_dialog(snap_compare, tmp_path):
    async def before(pilot):
        await to_bench(pilot)
        await pilot.press("o")
        await _quiet(pilot)

    assert snap_compare(make_app(tmp_path), terminal_size=(80, 24), run_before=before)
