"""Close-out in the UI: the outcome is recorded, the report exported, earlier sessions of
the unit browsed; a session is resumed from the opening screen.

Outside references: the booster pump panel's answer key (fault.toml: F1
open); a report written as HTML is a document a browser opens (it starts
with the HTML5 doctype and holds an inline SVG chart, as the report module
documents); a Markdown file is plain text.
"""

from __future__ import annotations

from faultfind.tui.screens.bench import BenchScreen

from .conftest import (acknowledge, logbook_sessions, make_app, run, set_power, settle,
                       start_session, text_of, to_bench, type_reading)


async def _diagnose_fuse(pilot):
    await to_bench(pilot)
    await type_reading(pilot, "V +24V,24V-F 23.89 V")
    await set_power(pilot, "off")
    await type_reading(pilot, "R F1 OL")


def test_close_out_records_the_outcome_and_exports_the_report(tmp_path):
    report = tmp_path / "BP-2-work-order.html"

    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await _diagnose_fuse(pilot)
            await pilot.press("c")
            await settle(pilot, 1)
            assert type(app.screen).__name__ == "CloseoutScreen"
            found = app.screen.query_one("#found")
            assert found.value == "F1:open"  # prefilled from the top finding
            await pilot.press("enter", *"F1 reads OL out of its holder", "enter",
                              *"replaced F1 with 1 A T", "enter", "enter")
            await settle(pilot)
            # closed: the export dialog opens at once, offering a name in export_dir
            assert type(app.screen).__name__ == "ExportScreen"
            path = app.screen.query_one("#export-path")
            assert path.value == str(tmp_path / "BP-2-session1.html")
            path.value = str(report)
            await pilot.press("enter")
            await settle(pilot)
            assert isinstance(app.screen, BenchScreen)
            assert "wrote the HTML report" in text_of(app.screen.query_one("#entry-check"))
            assert "CLOSED" in text_of(app.screen.query_one("#session-info"))
            # a closed session takes no more readings
            await pilot.press("n")
            await settle(pilot, 1)
            assert not app.screen.query_one("#entry-input").has_focus
            # and a Markdown copy
            await pilot.press("x")
            await settle(pilot, 1)
            app.screen.query_one("#export-path").value = str(tmp_path / "report.md")
            await pilot.press("enter")
            await settle(pilot)
    run(scenario)
    s = logbook_sessions(tmp_path)[0]
    assert s.ended_at is not None
    assert s.outcome.faults == (("F1", "open"),)
    assert s.outcome.confirmed_by == "F1 reads OL out of its holder"
    assert s.outcome.action == "replaced F1 with 1 A T"
    html = report.read_text(encoding="utf-8")
    assert html.lstrip().lower().startswith("<!doctype html>") and "<svg" in html
    assert "F1" in html and "BP-2" in html
    md = (tmp_path / "report.md").read_text(encoding="utf-8")
    assert "F1 open" in md and "BP-2" in md


def test_close_out_refuses_a_part_not_in_the_circuit(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await _diagnose_fuse(pilot)
            await pilot.press("c")
            await settle(pilot, 1)
            app.screen.query_one("#found").value = "F9:open"
            await settle(pilot, 1)
            assert "not a part" in text_of(app.screen.query_one("#closeout-check"))
            await pilot.press("ctrl+s")
            await settle(pilot)
            assert type(app.screen).__name__ == "CloseoutScreen"  # still open
            app.screen.query_one("#found").value = "F1:short"  # a fuse cannot short
            await settle(pilot, 1)
            assert "not a fault mode" in text_of(app.screen.query_one("#closeout-check"))
            await pilot.press("escape")
            await settle(pilot)
            assert isinstance(app.screen, BenchScreen)
    run(scenario)
    assert logbook_sessions(tmp_path)[0].ended_at is None


def test_history_lists_earlier_sessions_of_the_unit(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await _diagnose_fuse(pilot)
            await pilot.press("c")
            await settle(pilot, 1)
            await pilot.press("ctrl+s")
            await settle(pilot)
            await pilot.press("escape")  # no export this time
            await settle(pilot)
            await pilot.press("ctrl+n")  # a second visit to the same unit
            await settle(pilot)
            await start_session(pilot, "BP-2")
            await pilot.press("h")
            await settle(pilot)
            listing = app.screen.query_one("#history-list")
            prompts = [str(listing.get_option_at_index(i).prompt)
                       for i in range(listing.option_count)]
            assert len(prompts) == 2
            assert "F1 open" in prompts[0] and "open" in prompts[1]
            assert "●" in prompts[1]  # this session
            detail = text_of(app.screen.query_one("#history-text"))
            assert "Session 2" in detail
            await pilot.press("up")
            await settle(pilot)
            detail = text_of(app.screen.query_one("#history-text"))
            assert "Session 1" in detail and "F1 open" in detail and "2 reading(s)" in detail
    run(scenario)


def test_resume_an_open_session(tmp_path):
    async def first():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, "V 24V-F 0")
            await pilot.press("ctrl+q")

    async def second():
        app = make_app(tmp_path, circuit=None)
        async with app.run_test(size=(80, 24)) as pilot:
            await acknowledge(pilot)
            ol = app.screen.query_one("#choices")
            first_choice = str(ol.get_option_at_index(ol.highlighted).prompt)
            assert "#1 BP-2" in first_choice  # open sessions come first
            await pilot.press("enter")
            await settle(pilot)
            assert isinstance(app.screen, BenchScreen)
            assert app.screen.bench.session_id == 1
            assert app.screen.bench.power == "on"  # live again until said otherwise
            assert app.screen.query_one("#readings-table").row_count == 1
            await type_reading(pilot, "V +24V 23.9")
    run(first)
    run(second)
    s = logbook_sessions(tmp_path)
    assert len(s) == 1 and len(s[0].readings) == 2


def test_history_shows_the_circuit_versions_and_tags_of_a_session(tmp_path):
    from faultfind.io.circuit_versions import circuit_sha256
    from faultfind.io.session_tags import add_tags

    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, "V +24V 23.91 V")
            bench = app.screen.bench
            text = bench.session.circuit_text
            # an invented correction of the drawing: the supply is 12 V
            edited = text.replace('value = "24 V"', 'value = "12 V"', 1)
            bench.revise_circuit(edited)
            add_tags(bench.book, bench.session_id, ["north-pumps"])
            await pilot.press("h")
            await settle(pilot)
            detail = text_of(app.screen.query_one("#history-text"))
            assert f"v2 · {circuit_sha256(edited)[:8]}" in detail
            assert "circuit edited in this session (2 versions):" in detail
            assert f"v1 · {circuit_sha256(text)[:8]}" in detail and "session started" in detail
            assert "edited in the terminal UI" in detail
            assert "tags: north-pumps" in detail
    run(scenario)
