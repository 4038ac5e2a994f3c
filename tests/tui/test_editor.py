"""The circuit editor: a circuit built from nothing at the keyboard, marks beside the parts
with ``faultfind check``'s own messages, undo, the warning before a hand-written file's
comments are lost, and a session's circuit edited on the bench.

Outside references: ``faultfind check`` (the command line, run as a separate
process) is the reference for the summary of a saved file and for every
message shown beside a part; the booster pump panel's circuit file (a field
case of this project) is the circuit built.  Ideal voltage source: it holds
``nodes[0]`` at ``value`` above ``nodes[1]`` whatever the load (formats.md
section 1, the shared specification), so a 12 V supply's + node reads 12 V.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

from faultfind.io.circuit_file import load_circuit, parse_circuit
from faultfind.tui.draft import CircuitDraft
from faultfind.tui.screens.bench import BenchScreen
from faultfind.tui.screens.confirm import ConfirmScreen
from faultfind.tui.screens.editor import EditorScreen
from faultfind.tui.screens.opening import OpeningScreen
from faultfind.tui.widgets.part_form import FieldInput
from faultfind.tui.widgets.tables import ReadingsTable

from .conftest import (BOOSTER, CASES, ROOT, acknowledge, logbook_sessions, make_app, run,
                       settle, table_rows, text_of, to_bench, type_reading)


def _cli(*args, cwd=None):
    """``faultfind ARGS`` in a process of its own (this worktree's package)."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.run([sys.executable, "-m", "faultfind", *args], capture_output=True,
                          text=True, env=env, cwd=cwd, timeout=120)


async def _fill(pilot, text: str) -> None:
    """Replace the focused field's text with ``text`` (pasted, as a terminal pastes) and
    press Enter."""
    from textual import events

    await pilot.press("end", "ctrl+u")
    if text:
        pilot.app.focused.post_message(events.Paste(text))
        await pilot.pause()
    await pilot.press("enter")
    await pilot.pause()


def _plain(widget) -> str:
    """A Static's text as shown (markup read), spaces and line breaks folded."""
    from textual.content import Content

    content = widget.content
    text = content if isinstance(content, str) else str(content)
    return " ".join(Content.from_markup(text).plain.split())


def _check_text(app) -> str:
    return _plain(app.screen.query_one("#editor-check"))


def _list_rows(app) -> list[str]:
    ol = app.screen.query_one("#parts-list")
    return [str(ol.get_option_at_index(i).prompt) for i in range(ol.option_count)]


async def _open_file(pilot, name: str) -> EditorScreen:
    """From the opening screen: name the file in the circuit field, F4."""
    await acknowledge(pilot)
    circuit = pilot.app.screen.query_one("#circuit")
    circuit.value = name
    await pilot.press("f4")
    await settle(pilot)
    assert isinstance(pilot.app.screen, EditorScreen), pilot.app.screen
    return pilot.app.screen


async def _select(pilot, ref: str) -> None:
    """Highlight the part ``ref`` in the list and open its form (Enter)."""
    screen = pilot.app.screen
    ol = screen.query_one("#parts-list")
    ol.focus()
    index = 1 + screen.draft.refs().index(ref)
    ol.highlighted = index
    await pilot.pause()
    await pilot.press("enter")
    await pilot.pause()


async def _set(pilot, key: str, value: str, node: int | None = None) -> None:
    """Focus the form's field ``key`` (node ``node``) and type ``value`` into it."""
    fid = f"#f-node-{node}" if key == "nodes" else f"#f-{key}"
    pilot.app.screen.query_one(fid, FieldInput).focus()
    await pilot.pause()
    await _fill(pilot, value)
    await settle(pilot, 1)


# -- building the booster pump panel from nothing -------------------------------------------

# The first letters typed into the kind field; Enter takes the completion.
_KIND_TYPED = {"voltage-source": "volt", "fuse": "fu", "resistor": "res", "switch": "sw",
               "inductor": "ind"}


def test_the_booster_pump_panel_built_from_nothing_checks_like_the_bundled_file(tmp_path):
    with open(BOOSTER / "circuit.toml", "rb") as f:
        wanted = tomllib.load(f)
    saved = tmp_path / "bp2.toml"

    async def scenario():
        app = make_app(tmp_path, circuit=None)
        async with app.run_test(size=(80, 24)) as pilot:
            await acknowledge(pilot)
            assert isinstance(app.screen, OpeningScreen)
            await pilot.press("ctrl+n")
            await settle(pilot)
            screen = app.screen
            assert isinstance(screen, EditorScreen) and screen.draft.parts == []
            assert "the file has no [[part]] tables" in _check_text(app)
            await pilot.press("enter")   # the circuit row: its form
            await pilot.pause()
            assert app.focused.key == "file"
            await _fill(pilot, str(saved))
            await _fill(pilot, wanted["title"])
            await _fill(pilot, wanted["ground"])
            await _fill(pilot, "")   # no frequency: DC only
            assert app.focused.id == "f-notes"
            app.focused.text = wanted["notes"]
            await pilot.press("tab")
            await settle(pilot, 1)
            for part in wanted["part"]:
                await pilot.press("ctrl+n")
                await settle(pilot, 1)
                assert app.focused.key == "kind"
                await pilot.press("end", "ctrl+u", *_KIND_TYPED[part["kind"]], "enter")
                await pilot.pause()
                # Enter from field to field, each filled with what the bundled file says
                while isinstance(app.focused, FieldInput) and app.focused.key != "kind":
                    field = app.focused
                    if field.key == "nodes":
                        text = part["nodes"][field.node]
                    else:
                        text = str(part.get(field.key, ""))
                    last = field.key == "label"
                    await _fill(pilot, text)
                    if last:
                        break
                await settle(pilot, 1)
            assert screen.result.ok, (screen.result.errors, screen.result.general)
            assert all(row.startswith("✓") for row in _list_rows(app)[1:])
            await pilot.press("ctrl+s")
            await settle(pilot)
            assert saved.exists()
            await pilot.press("ctrl+l", "escape")   # leave: back to the opening screen
            await settle(pilot)
            assert isinstance(app.screen, OpeningScreen)
            assert app.screen.query_one("#circuit").value == str(saved)
    run(scenario)

    ours, bundled = _cli("check", str(saved)), _cli("check", str(BOOSTER / "circuit.toml"))
    assert ours.returncode == bundled.returncode == 0, ours.stderr
    # the summary after the first line (which names the file) is the same, line for line
    assert ours.stdout.splitlines()[1:] == bundled.stdout.splitlines()[1:]
    assert "circuit file OK" in ours.stdout
    a = json.loads(_cli("check", str(saved), "--json").stdout)
    b = json.loads(_cli("check", str(BOOSTER / "circuit.toml"), "--json").stdout)
    a.pop("file"), b.pop("file")
    assert a == b
    assert load_circuit(saved).notes == load_circuit(BOOSTER / "circuit.toml").notes


def test_saving_an_unchanged_field_case_reads_back_the_same_circuit(tmp_path):
    # round trip of every bundled case through the editor's draft and its save
    from faultfind.io.circuit_writer import same_content

    for circuit in sorted(CASES.glob("*/circuit.toml")):
        copy = tmp_path / f"{circuit.parent.name}.toml"
        shutil.copy(circuit, copy)
        draft = CircuitDraft.from_file(str(copy))
        assert draft.check().ok and not draft.changed
        first = draft.save()
        assert same_content(load_circuit(copy), load_circuit(circuit)), circuit
        assert CircuitDraft.from_file(str(copy)).save() == first   # stable bytes


# -- marks beside the parts ------------------------------------------------------------------

def _booster_text():
    return (BOOSTER / "circuit.toml").read_text(encoding="utf-8")


def _edit_fuse_unit(text):
    return text.replace('value = "R15"', 'value = "24 V"', 1)


def _edit_duplicate(text):
    return text.replace('ref = "H2"', 'ref = "H1"', 1)


def _edit_floating(text):
    return text.replace('nodes = ["FLOAT", "RUN"]\nstate = "closed"',
                        'nodes = ["FLOAT", "TP7"]\nstate = "open"', 1)


def _edit_loop(text):
    i = text.index("[[part]]\nref = \"F1\"")
    extra = ('[[part]]\nref = "V1"\nkind = "voltage-source"\nnodes = ["+24V", "0V"]\n'
             'value = "24 V"\ntolerance = "2%"\noff_state = "open"\n'
             'label = "DIN-rail power supply 24 V 2.5 A (X1:1 / X1:2)"\n\n')
    return text[:i] + extra + text[i:]


async def _ui_fuse_unit(pilot):
    await _select(pilot, "F1")
    await _set(pilot, "value", "24 V")
    return "F1"


async def _ui_duplicate(pilot):
    await _select(pilot, "H2")
    await _set(pilot, "ref", "H1")
    return "H1"


async def _ui_floating(pilot):
    await _select(pilot, "S3")
    await _set(pilot, "nodes", "TP7", node=1)
    await _set(pilot, "state", "open")
    return "S3"


async def _ui_loop(pilot):
    await _select(pilot, "PS1")
    await pilot.press("ctrl+t")   # a copy of the supply, on the same nodes
    await settle(pilot, 1)
    return "V1"


CASES_MARKED = {
    "unit that does not fit the kind": (_edit_fuse_unit, _ui_fuse_unit, "unit 'V'"),
    "duplicate ref": (_edit_duplicate, _ui_duplicate, "duplicate ref 'H1' (first at "),
    "floating node": (_edit_floating, _ui_floating, "node 'TP7' has no DC path"),
    "source loop": (_edit_loop, _ui_loop, "a loop made only of voltage sources"),
}


@pytest.mark.parametrize("case", list(CASES_MARKED))
def test_a_mistake_is_marked_beside_its_part_with_the_check_commands_message(
        tmp_path, monkeypatch, case):
    edit, act, words = CASES_MARKED[case]
    shutil.copy(BOOSTER / "circuit.toml", tmp_path / "circuit.toml")
    (tmp_path / "broken.toml").write_text(edit(_booster_text()), encoding="utf-8")
    cli = _cli("check", "broken.toml", cwd=tmp_path)
    assert cli.returncode == 2 and words in cli.stderr, cli.stderr
    monkeypatch.chdir(tmp_path)
    found = {}

    async def scenario():
        app = make_app(tmp_path, circuit="circuit.toml")
        async with app.run_test(size=(80, 24)) as pilot:
            screen = await _open_file(pilot, "circuit.toml")
            assert screen.result.ok
            marked = await act(pilot)
            await settle(pilot, 1)
            r = screen.result
            assert not r.ok
            index = [i for i, p in enumerate(screen.draft.parts) if p["ref"] == marked][-1]
            found["message"] = r.errors[index]
            rows = _list_rows(app)
            assert rows[index + 1].startswith(f"✗ {marked}")
            assert sum(row.startswith("✗") for row in rows[1:]) == 1
            # the form of the marked part shows the message under it
            screen.query_one("#parts-list").highlighted = index + 1
            await pilot.pause()
            assert " ".join(found["message"].split()) in _check_text(app)
            found["draft"] = screen.draft.text()[0]
    run(scenario)
    # the very message `faultfind check` prints for the same mistake in a file (a place
    # in the file, "first at line 28", is said as the part it is in the editor)
    import re

    said = re.sub(r"\(first at [^)]*\)", "", found["message"])
    assert said.strip() in " ".join(cli.stderr.split())
    assert words in found["message"]


# -- undo ------------------------------------------------------------------------------------

def test_undo_takes_back_the_last_change_then_the_one_before(tmp_path, monkeypatch):
    shutil.copy(BOOSTER / "circuit.toml", tmp_path / "circuit.toml")
    monkeypatch.chdir(tmp_path)

    async def scenario():
        app = make_app(tmp_path, circuit="circuit.toml")
        async with app.run_test(size=(80, 24)) as pilot:
            screen = await _open_file(pilot, "circuit.toml")
            original = json.dumps(screen.draft.parts)
            await _ui_fuse_unit(pilot)
            assert not screen.result.ok and screen.draft.changed
            await _select(pilot, "H1")
            await pilot.press("ctrl+r")   # remove H1
            await settle(pilot, 1)
            assert "H1" not in screen.draft.refs()
            await pilot.press("ctrl+z")   # H1 back, in its place
            await settle(pilot, 1)
            assert screen.draft.refs()[2] == "H1"
            assert screen.draft.parts[1]["value"] == "24 V" and not screen.result.ok
            await pilot.press("ctrl+z")   # the fuse's value back
            await settle(pilot, 1)
            assert json.dumps(screen.draft.parts) == original
            assert screen.result.ok and not screen.draft.changed
            assert all(row.startswith("✓") for row in _list_rows(app)[1:])
            await pilot.press("ctrl+z")   # nothing left to undo: nothing changes
            await settle(pilot, 1)
            assert json.dumps(screen.draft.parts) == original
    run(scenario)
    assert (tmp_path / "circuit.toml").read_bytes() == (BOOSTER / "circuit.toml").read_bytes()


# -- comments of a hand-written file ---------------------------------------------------------

def test_saving_over_a_commented_file_asks_first(tmp_path, monkeypatch):
    text = _booster_text().replace('ground = "0V"',
                                   'ground = "0V"   # X1:2, the 0 V rail', 1)
    text = "# BP-2 drawn from the panel door schematic\n" + text
    (tmp_path / "circuit.toml").write_text(text, encoding="utf-8")
    monkeypatch.chdir(tmp_path)

    async def scenario():
        app = make_app(tmp_path, circuit="circuit.toml")
        async with app.run_test(size=(80, 24)) as pilot:
            screen = await _open_file(pilot, "circuit.toml")
            await _select(pilot, "H1")
            await _set(pilot, "value", "560")
            await pilot.press("ctrl+s")
            await settle(pilot)
            assert isinstance(app.screen, ConfirmScreen)
            shown = " ".join(_plain(w) for w in app.screen.query("#confirm-box Static"))
            # the two comments added here and the bundled file's own
            assert "3 comment(s)" in shown and "line 1: # BP-2 drawn" in shown
            assert "# X1:2, the 0 V rail" in shown
            await pilot.press("escape")   # no: nothing is written
            await settle(pilot)
            assert app.screen is screen
            assert (tmp_path / "circuit.toml").read_text(encoding="utf-8") == text
            await pilot.press("ctrl+s", "y")
            await settle(pilot)
            assert app.screen is screen and not screen.draft.changed
    run(scenario)
    after = (tmp_path / "circuit.toml").read_text(encoding="utf-8")
    assert "#" not in after.replace("# ", "")  # no comment left (labels hold no '#')
    c = parse_circuit(after)
    assert c.part("H1").value == 560.0 and c.part("F1").value == pytest.approx(0.15)


def test_a_file_without_comments_saves_without_asking(tmp_path, monkeypatch):
    from faultfind.io.circuit_writer import circuit_text, lost_comments

    text = circuit_text(load_circuit(BOOSTER / "circuit.toml"))
    assert lost_comments(text) == []
    (tmp_path / "circuit.toml").write_text(text, encoding="utf-8")
    monkeypatch.chdir(tmp_path)

    async def scenario():
        app = make_app(tmp_path, circuit="circuit.toml")
        async with app.run_test(size=(80, 24)) as pilot:
            screen = await _open_file(pilot, "circuit.toml")
            await _select(pilot, "H1")
            await _set(pilot, "value", "560")
            await pilot.press("ctrl+s")
            await settle(pilot)
            assert app.screen is screen and not screen.draft.changed
    run(scenario)
    assert load_circuit(tmp_path / "circuit.toml").part("H1").value == 560.0


# -- on the bench ----------------------------------------------------------------------------

def test_editing_the_circuit_on_the_bench_diagnoses_the_readings_again(tmp_path):
    from faultfind.diagnose import diagnose, diagnosis_json

    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, "V +24V 23.91 V")
            await type_reading(pilot, "V 24V-F 0 V")
            bench = app.screen
            assert "diagnosed on circuit v1" in _plain(bench.query_one("#findings-body"))
            await pilot.press("e")
            await settle(pilot)
            assert isinstance(app.screen, EditorScreen)
            assert app.screen.draft.path == ""   # the session's file is left as it was
            await _select(pilot, "PS1")
            await _set(pilot, "value", "12 V")
            await pilot.press("ctrl+s")
            await settle(pilot)
            # the session's text is the bundled file's, with its comment: asked first
            assert isinstance(app.screen, ConfirmScreen)
            await pilot.press("y")
            await settle(pilot)
            assert isinstance(app.screen, EditorScreen) and not app.screen.draft.changed
            await pilot.press("ctrl+l", "escape")
            await settle(pilot)
            assert app.screen is bench and isinstance(bench, BenchScreen)
            await settle(pilot)
            rows = table_rows(bench.query_one("#readings-table", ReadingsTable))
            # an ideal 12 V source: its + node reads 12 V, 2 % tolerance -> 11.8 .. 12.2 V
            assert rows[0][3] == "11.8 V .. 12.2 V"
            shown = _plain(bench.query_one("#findings-body"))
            assert "diagnosed on circuit v2" in shown and "changed since" not in shown
    run(scenario)
    s = logbook_sessions(tmp_path)[0]
    assert s.circuit().part("PS1").value == 12.0
    assert (BOOSTER / "circuit.toml").read_text(encoding="utf-8").count('value = "24 V"') == 1
    versions = sorted({(d.circuit_version, d.circuit_sha256) for d in s.diagnoses})
    assert [v for v, _ in versions] == [1, 2]
    latest = s.latest_diagnosis
    assert latest.circuit_version == 2 and latest.circuit_sha256 == s.circuit_sha256
    assert latest.reading_count == 2
    # the stored document is the diagnosis of the same readings on the edited circuit
    direct = diagnosis_json(diagnose(s.circuit(), s.live_readings(), s.meters(), top=5))
    assert latest.document["verdict"] == direct["verdict"]
    assert [h["faults"] for h in latest.document["hypotheses"]] == \
        [h["faults"] for h in direct["hypotheses"]]
    # the diagnoses made on version 1 are kept as they were
    first = [d for d in s.diagnoses if d.circuit_version == 1]
    assert first and all(d.circuit_sha256 != s.circuit_sha256 for d in first)


def test_an_old_diagnosis_says_the_circuit_changed_since(tmp_path):
    """A session resumed after its circuit was revised outside the bench (its latest
    diagnosis made on version 1) is diagnosed again, and says so meanwhile."""
    from faultfind.io.circuit_versions import revise_circuit
    from faultfind.logbook import Logbook
    from faultfind.tui.screens.bench import BenchScreen as _Bench

    with Logbook(tmp_path / "logbook.sqlite") as book:
        s = book.start_session(BOOSTER / "circuit.toml", unit="BP-2")
        book.add_reading(s.id, quantity="voltage", plus="+24V", value="23.91 V")
        book.store_diagnosis(s.id)
        revise_circuit(book, s.id, _booster_text().replace('"470"', '"560"', 1))
    notes = []
    original = _Bench._circuit_note

    def spy(self):
        note = original(self)
        notes.append(note)
        return note

    async def scenario():
        app = make_app(tmp_path, circuit=None)
        async with app.run_test(size=(80, 24)) as pilot:
            _Bench._circuit_note = spy
            try:
                await acknowledge(pilot)
                await settle(pilot)
                ol = app.screen.query_one("#choices")
                ol.focus()
                await pilot.press("enter")   # the open session is the first choice
                await settle(pilot)
                assert isinstance(app.screen, BenchScreen)
                await settle(pilot)
            finally:
                _Bench._circuit_note = original
    run(scenario)
    assert any("diagnosed on circuit v1" in n and "changed since" in n and "now v2" in n
               for n in notes), notes
    assert "diagnosed on circuit v2" in notes[-1]
    s = logbook_sessions(tmp_path)[0]
    assert s.latest_diagnosis.circuit_version == 2


def test_a_session_circuit_saved_under_a_file_name_becomes_the_session_s_circuit(tmp_path):
    target = tmp_path / "booster-12V.toml"

    async def scenario():
        app = make_app(tmp_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await to_bench(pilot)
            await type_reading(pilot, "V +24V 23.91 V")
            await pilot.press("e")
            await settle(pilot)
            await _select(pilot, "PS1")
            await _set(pilot, "value", "12 V")
            ol = app.screen.query_one("#parts-list")   # row 0: the circuit's own form
            ol.focus()
            ol.highlighted = 0
            await pilot.pause()
            await pilot.press("enter")
            await pilot.pause()
            await _set(pilot, "file", str(target))
            await pilot.press("ctrl+s")
            await settle(pilot)
            if isinstance(app.screen, ConfirmScreen):   # the comments of the bundled text
                await pilot.press("y")
                await settle(pilot)
            assert isinstance(app.screen, EditorScreen) and not app.screen.draft.changed
    run(scenario)
    s = logbook_sessions(tmp_path)[0]
    assert s.circuit_name == str(target)
    assert target.read_text(encoding="utf-8") == s.circuit_text
    assert s.circuit().part("PS1").value == 12.0
