"""The bench on a board with semiconductors: the canopy LED field case.

Outside reference: the case's answer key (fault.toml, README: LED D4 short)
and formats.md section 4 (a diode test is taken with power off).  A diode
test typed while the board is marked live is refused, as an ohmmeter
reading is; isolated, it is stored and the parts table lists the LEDs.
"""

from __future__ import annotations

from .conftest import (CASES, make_app, run, set_power, settle, table_rows, text_of, to_bench,
                       type_reading)

CANOPY = CASES / "canopy_led_string_board"


def test_diode_test_on_the_bench(tmp_path):
    async def scenario():
        app = make_app(tmp_path, circuit=CANOPY / "circuit.toml")
        async with app.run_test(size=(100, 30)) as pilot:
            await to_bench(pilot, "C4")
            await type_reading(pilot, "V LA3,LA4 0.0001")
            await type_reading(pilot, "D D4 0.000")
            line = text_of(app.screen.query_one("#entry-check"))
            assert "refused" in line and "LIVE" in line, line
            await pilot.press("escape")
            await settle(pilot)
            await set_power(pilot, "off")
            await type_reading(pilot, "D D4 0.000")
            await type_reading(pilot, "D D9 OL")
            rows = table_rows(app.screen.query_one("#readings-table"))
            assert len(rows) == 3, rows
            shown = " ".join(" ".join(r) for r in rows)
            assert "D4" in shown and "D9" in shown and "OL" in shown, rows
            parts = table_rows(app.screen.query_one("#parts-table"))
            text = " ".join(" ".join(r) for r in parts)
            assert "D4" in text and "led" in text.lower(), parts
            doc = app.screen.bench.stored.document
            top = doc["hypotheses"][0]["faults"]
            assert [(f["ref"], f["mode"]) for f in top] == [("D4", "short")], doc["hypotheses"][:2]
    run(scenario)
