"""Ctrl+N on the bench opens the opening screen again, through the app.

The bench screen does not import the opening screen (that would close an
import circle: tests/test_import_direction.py); it asks the app.  This checks
the UI's plumbing, no outside reference is needed.  The circuit is the
booster pump panel field case (field_cases/booster_pump_panel).
"""

from __future__ import annotations

from .conftest import make_app, run, settle, to_bench, wait_for_screen


def test_ctrl_n_on_the_bench_opens_a_new_opening_screen(tmp_path):
    async def scenario():
        from faultfind.tui.screens.bench import BenchScreen
        from faultfind.tui.screens.opening import OpeningScreen

        app = make_app(tmp_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await to_bench(pilot)
            bench = app.screen
            await pilot.press("ctrl+n")
            await settle(pilot)
            await wait_for_screen(pilot, OpeningScreen)
            assert isinstance(app.screen, OpeningScreen), app.screen
            assert not any(isinstance(s, BenchScreen) for s in app.screen_stack)
            assert bench not in app.screen_stack

    run(scenario)
