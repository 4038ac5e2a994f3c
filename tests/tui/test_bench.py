"""Entering readings in the bench workspace: good ones are committed, then shown; bad ones
are refused with the reason; the power state is enforced.

Outside references: the booster pump panel's supply PS1 is drawn as 24 V with
a 2 % tolerance, so a healthy +24V node reads within 24 V x (1 +/- 0.02) =
23.52 V .. 24.48 V (percentage arithmetic); the readings file's rules are
those of formats.md section 2 (the shared specification): a value with an
SI prefix, ``OL``, known nodes and parts, AC only with an AC source.  A
resistance reading needs the circuit isolated (IEC 61010-1 practice, see
docs/safety.md): common practice (no source).
"""

from __future__ import annotations

import pytest

from faultfind.tui.screens.bench import BenchScreen
from faultfind.tui.widgets.tables import ReadingsTable

from .conftest import (logbook_sessions, make_app, run, set_power, settle, table_rows, text_of,
                       to_bench, type_reading)


def _check_line(app) -> str:
    return text_of(app.screen.query_one("#entry-check"))


def test_good_reading_is_committed_and_shown_against_its_band(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, "V +24V 23.91")
            rows = table_rows(app.screen.query_one("#readings-table", ReadingsTable))
            assert len(rows) == 1
            seq, what, shows, band, status, label = rows[0]
            assert (seq, what, shows) == ("1", "V dc +24V to 0V", "23.91")
            # 24 V +/- 2 % = 23.52 .. 24.48 V, written to 3 digits
            assert band == "23.5 V .. 24.5 V"
            assert "in band" in status and "✓" in status
            assert "stored #1" in _check_line(app)
            assert not app.screen.bench.power == "off"
    run(scenario)
    s = logbook_sessions(tmp_path)[0]
    assert len(s.readings) == 1
    lr = s.readings[0]
    assert (lr.reading.quantity, lr.reading.mode, lr.reading.plus, lr.reading.minus) == \
        ("voltage", "dc", "+24V", "0V")
    assert lr.reading.value == pytest.approx(23.91) and lr.origin == "ui"
    assert s.latest_diagnosis is not None and s.latest_diagnosis.reading_count == 1


def test_every_reading_shown_is_in_the_logbook_already(tmp_path, monkeypatch):
    """Each time the readings table is drawn, a second connection to the logbook file
    must already hold every reading in it (committed before it is shown)."""
    from faultfind.io.logbook import Logbook

    drawn = []
    original = ReadingsTable.show

    def checked_show(self, assessed):
        seqs = [a.logged.seq for a in assessed]
        with Logbook(tmp_path / "logbook.sqlite", create=False) as other:
            s = other.get_session(other.latest_session_id())
            stored = {lr.seq for lr in s.readings}
        assert set(seqs) <= stored, f"shown {seqs} but stored {sorted(stored)}"
        drawn.append(seqs)
        return original(self, assessed)

    monkeypatch.setattr(ReadingsTable, "show", checked_show)

    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, "V +24V 23.91")
            await type_reading(pilot, "V 24V-F 0")
    run(scenario)
    assert drawn[-1] == [1, 2]


BAD = [
    ("V XX 1", "plus", "XX"),                       # unknown node
    ("V +24V 2x", "value", "2x"),                   # not a display
    ("Q +24V 1", "quantity", "not a kind"),         # unknown kind
    ("I +24V 1", "part", "+24V"),                   # a node where a part is read
    ("R nowhere 5", "part", "neither a part nor a node"),
    ("Vac +24V 1", "mode", "AC"),                   # AC reading, no AC source
    ("V +24V", "value", "no value"),                # no display typed
]


@pytest.mark.parametrize("text,key,words", BAD)
def test_bad_reading_is_refused_with_the_reason(tmp_path, text, key, words):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, text)
            line = _check_line(app)
            assert "✗" in line and words in line and "nothing stored" in line
            entry = app.screen.query_one("#entry-input")
            assert entry.value == text and entry.has_focus  # kept for correction
            assert app.screen.query_one("#readings-table").row_count == 0
    run(scenario)
    assert logbook_sessions(tmp_path)[0].readings == ()


def test_preview_shows_the_healthy_band_while_typing(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await pilot.press("n", *"V +24V ")
            await settle(pilot)
            line = _check_line(app)
            assert "healthy 24 V" in line and "23.5 V .. 24.5 V" in line
            assert "type the display" in line
            await pilot.press(*"25.3")
            await settle(pilot)
            line = _check_line(app)
            assert "HIGH" in line and "▲" in line  # 25.3 V > 24.48 V
            assert logbook_sessions(tmp_path)[0].readings == ()  # nothing stored yet
    run(scenario)


def test_tab_completes_node_names(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await pilot.press("n", *"V GU")
            await settle(pilot)
            await pilot.press("tab")
            await settle(pilot)
            inp = app.screen.query_one("#entry-input")
            assert inp.value == "V GUARD "
            hint = text_of(app.screen.query_one("#entry-hint"))
            assert "display" in hint
    run(scenario)


def test_resistance_reading_refused_while_live(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            assert app.screen.bench.power == "on"  # live until said otherwise
            assert "POWER ON" in text_of(app.screen.query_one("#power-badge"))
            await type_reading(pilot, "R F1 OL")
            line = _check_line(app)
            assert "refused" in line and "LIVE" in line and "isolated" in line
            assert app.screen.query_one("#readings-table").row_count == 0
            assert logbook_sessions(tmp_path)[0].readings == ()
            # mark it isolated from the entry (ctrl+o), confirm with y, store it
            await pilot.press("ctrl+o")
            await settle(pilot, 1)
            assert type(app.screen).__name__ == "PowerScreen"
            await pilot.press("y")
            await settle(pilot)
            assert isinstance(app.screen, BenchScreen) and app.screen.bench.power == "off"
            badge = text_of(app.screen.query_one("#power-badge"))
            assert "POWER OFF" in badge and "ISOLATED" in badge and "⊘" in badge
            await pilot.press("enter")
            await settle(pilot)
            assert app.screen.query_one("#readings-table").row_count == 1
            # and now a voltage reading is refused: the circuit is marked isolated
            await type_reading(pilot, "V +24V 23.9")
            line = _check_line(app)
            assert "refused" in line and "ISOLATED" in line
    run(scenario)
    readings = logbook_sessions(tmp_path)[0].readings
    assert [lr.reading.quantity for lr in readings] == ["resistance"]
    assert readings[0].reading.overrange == 1  # OL: formats.md, an over-range display


def test_power_dialog_escape_keeps_the_state(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await pilot.press("o")
            await settle(pilot, 1)
            text = text_of(app.screen)
            for words in ("lock", "verified dead", "proven tester", "discharged"):
                assert words in text
            await pilot.press("enter", "space", "escape")
            await settle(pilot)
            assert app.screen.bench.power == "on"
            await set_power(pilot, "off")
            await set_power(pilot, "on")
    run(scenario)


def test_strike_out_a_mistyped_reading(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, "V +24V 2.391")  # a slip of the decimal point
            await pilot.press("2")
            await settle(pilot, 1)
            await pilot.press("k")
            await settle(pilot, 1)
            await pilot.press(*"decimal point slip", "enter")
            await settle(pilot)
            rows = table_rows(app.screen.query_one("#readings-table"))
            assert "struck" in rows[0][4] and "decimal point slip" in rows[0][5]
            assert app.screen.bench.readings() == []
    run(scenario)
    lr = logbook_sessions(tmp_path)[0].readings[0]
    assert lr.struck and lr.struck_reason == "decimal point slip"


def test_power_state_changes_are_logged(tmp_path):
    """Declaring the circuit isolated, then live again, leaves two events in the
    logbook session (every step of the UI is logged)."""
    from pathlib import Path as _P
    from faultfind.io.logbook import Logbook
    from faultfind.tui.bench import Bench
    case = _P(__file__).resolve().parents[2] / "field_cases" / "booster_pump_panel" / "circuit.toml"
    with Logbook(tmp_path / "lb.sqlite") as book:
        bench = Bench.start(book, case, unit="BP-2")
        bench.set_power("off")
        bench.set_power("off")  # no change, no event
        bench.set_power("on")
        assert [e["kind"] for e in book.events(bench.session_id)] == ["isolated", "energized"]
