"""Help lists every key binding; the opening screen lists the bundled field cases.

Outside references: the field cases on disk (each folder's circuit.toml
``title``, read here with the standard library's tomllib, and its README's
text); the bindings declared by the screens themselves (Textual's BINDINGS).
"""

from __future__ import annotations

import tomllib

from textual.binding import Binding

from faultfind.tui.app import FaultfindApp
from faultfind.tui.cases import find_cases, first_paragraph
from faultfind.tui.screens.bench import BenchScreen
from faultfind.tui.screens.help import HelpScreen, key_names
from faultfind.tui.screens.opening import OpeningScreen

from .conftest import CASES, acknowledge, make_app, run, settle, text_of, to_bench


def _bindings(cls):
    return [b if isinstance(b, Binding) else Binding(*b) for b in cls.BINDINGS]


def test_help_lists_every_binding_of_the_bench(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await pilot.press("f1")
            await settle(pilot, 1)
            assert isinstance(app.screen, HelpScreen)
            shown = text_of(app.screen)
            for b in _bindings(BenchScreen) + _bindings(FaultfindApp):
                if not (b.description or b.tooltip) or b.key == "ctrl+c":
                    continue
                assert key_names(b.key) in shown, b.key
                assert (b.tooltip or b.description) in shown, b.action
            for key, text in BenchScreen.HELP_EXTRA:
                assert key in shown and text in shown
            assert "First use" in shown and "NEXT READING" in shown
            await pilot.press("escape")
            await settle(pilot, 1)
            assert isinstance(app.screen, BenchScreen)
    run(scenario)


def test_help_from_the_opening_screen(tmp_path):
    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await acknowledge(pilot)
            await pilot.press("f1")
            await settle(pilot, 1)
            shown = text_of(app.screen)
            for b in _bindings(OpeningScreen):
                assert (b.tooltip or b.description) in shown
    run(scenario)


def test_key_names():
    assert key_names("f1,question_mark") == "F1 / ?"
    assert key_names("o,ctrl+o") == "o / ctrl+o"
    assert key_names("escape") == "Esc"


def test_first_paragraph_skips_headings_and_a_lone_italic_note():
    text = "# Title\n\n*Invented scenario.*\n\n## The equipment\nTwo pumps\nand a panel.\n\nMore."
    assert first_paragraph(text) == "Two pumps and a panel."
    assert first_paragraph("") == ""


def test_opening_lists_every_bundled_case_with_its_title_and_description(tmp_path):
    folders = sorted(p for p in CASES.iterdir() if (p / "circuit.toml").is_file())
    titles = {}
    for p in folders:
        with open(p / "circuit.toml", "rb") as f:
            titles[p.name] = tomllib.load(f)["title"]
    cases = find_cases(CASES)
    assert [c.name for c in cases] == [p.name for p in folders]
    for c in cases:
        assert c.title == titles[c.name]
        readme = (CASES / c.name / "README.md").read_text(encoding="utf-8")
        assert c.description and c.description.split()[0] in readme
        assert not c.description.startswith(("#", "*"))

    async def scenario():
        app = make_app(tmp_path, circuit=None)
        async with app.run_test(size=(100, 30)) as pilot:
            await acknowledge(pilot)
            ol = app.screen.query_one("#choices")
            prompts = [str(ol.get_option_at_index(i).prompt) for i in range(ol.option_count)]
            for title in titles.values():
                assert any(title in p for p in prompts), title
            # Enter on a case names its circuit and moves to the unit
            await pilot.press("enter")
            await settle(pilot, 1)
            first = cases[0]
            assert app.screen.query_one("#circuit").value.endswith(
                f"{first.name}/circuit.toml")
            assert app.screen.query_one("#unit").has_focus
            assert first.description[:30] in text_of(app.screen.query_one("#about"))
    run(scenario)


def test_opening_refuses_to_start_without_a_unit_or_with_a_bad_circuit(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('format = 1\ntitle = "x"\nground = "0V"\n[[part]]\nref = "R1"\n'
                   'kind = "resistor"\nnodes = ["A", "0V"]\nvalue = "4k7x"\n', encoding="utf-8")

    async def scenario():
        app = make_app(tmp_path, circuit=bad)
        async with app.run_test(size=(80, 24)) as pilot:
            await acknowledge(pilot)
            await pilot.press("enter")  # no unit yet
            await settle(pilot)
            assert "unit" in text_of(app.screen.query_one("#opening-message"))
            await pilot.press(*"X-1", "enter")
            await settle(pilot)
            msg = text_of(app.screen.query_one("#opening-message"))
            assert isinstance(app.screen, OpeningScreen)
            assert "bad.toml" in msg and "R1" in msg  # the file and the part named
    run(scenario)


def test_a_logbook_that_is_not_one_is_reported_and_left_alone(tmp_path):
    """A file that is not an SQLite database (its first 16 bytes are not SQLite's
    header string "SQLite format 3\\0", per the SQLite file-format documentation)
    is reported, and neither read nor written."""
    path = tmp_path / "logbook.sqlite"
    junk = b"these are not the bytes of a database " * 10
    path.write_bytes(junk)

    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await acknowledge(pilot)
            msg = text_of(app.screen.query_one("#opening-message"))
            assert "logbook" in msg and "not an SQLite database" in msg
            await pilot.press(*"BP-2", "enter")
            await settle(pilot)
            assert isinstance(app.screen, OpeningScreen)  # nothing started
            assert "not an SQLite database" in text_of(app.screen.query_one("#opening-message"))
    run(scenario)
    assert path.read_bytes() == junk
