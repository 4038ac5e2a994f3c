"""The parts table on a large circuit: the parts that matter first, the rest counted.

UI plumbing, no outside reference needed.  The circuit is an invented ladder.
"""

from __future__ import annotations

import asyncio

from textual.app import App, ComposeResult

from faultfind.model import Circuit, Part
from faultfind.tui.widgets import tables
from faultfind.tui.widgets.tables import PartsTable


def ladder(n):
    parts = [Part("PS1", "voltage-source", ("N0", "0V"), 24.0, 0.02, 0.02)]
    for i in range(n):
        parts.append(Part(f"R{i}", "resistor", (f"N{i}", f"N{i + 1}"), 100.0, 0.01, 0.01))
    return Circuit("ladder", "0V", tuple(parts))


class _Host(App):
    def compose(self) -> ComposeResult:
        yield PartsTable(id="t")


def test_large_circuit_lists_the_parts_that_matter_and_counts_the_rest(monkeypatch):
    monkeypatch.setattr(tables, "PARTS_SHOWN", 50)
    c = ladder(200)
    doc = {"hypotheses": [{"faults": [{"ref": "R180", "mode": "open", "value": None}]}],
           "estimates": {"R190": {"nominal": 100.0, "value": 150.0, "low": 140.0, "high": 160.0},
                         "R3": {"nominal": 100.0, "value": 100.2, "low": 99.0, "high": 101.0},
                         "R180": {"nominal": 100.0, "value": None, "low": None, "high": None}}}

    async def scenario():
        async with _Host().run_test() as pilot:
            t = pilot.app.query_one(PartsTable)
            t.show(c, doc)
            await pilot.pause()
            keys = [k.value for k in t.rows]
            assert len(keys) == 51                       # 50 parts and the closing row
            assert keys[:2] == ["R180", "R190"]          # the fault and the part out of tolerance first
            assert keys[-1] == "__more__"
            assert "151 more parts within tolerance" in str(t.get_row("__more__"))
            t.show(c, None)                              # before any diagnosis: no claim about tolerance
            await pilot.pause()
            assert "151 more parts" in str(t.get_row("__more__"))
            assert "within tolerance" not in str(t.get_row("__more__"))

    asyncio.run(scenario())


def test_a_board_lists_every_part():
    c = ladder(30)

    async def scenario():
        async with _Host().run_test() as pilot:
            t = pilot.app.query_one(PartsTable)
            t.show(c, None)
            await pilot.pause()
            assert t.row_count == 31

    asyncio.run(scenario())
