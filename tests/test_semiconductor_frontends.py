"""Semiconductors in the command line, the logbook's compact form, the drill's words and the
editor: what each reads and says (the reading side; expected values need the engine).

The contract is formats.md section 4 (kinds and keys; diode-test readings, power off).
The boards are invented: a greenhouse vent controller's relay driver.  Safety facts:
a diode test is a power-off reading (the meter's own test current is the source), as
the ohmmeter is (IEC 61010-1 practice, common practice).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from faultfind.cli.log.compact import compact_of, parse_compact
from faultfind.cli.main import main
from faultfind.errors import InputError, ReadingsError
from faultfind.io.circuit_file import load_circuit, parse_circuit
from faultfind.io.logbook import SAFETY_CAUTION
from faultfind.tui.bench import power_needed
from faultfind.tui.draft import CircuitDraft, terminal_names
from faultfind.tui.entry import check_cells, describe_cells, entry_text, parse_entry
from faultfind.tui.widgets.next_reading import describe_suggestion
from faultfind.tui.widgets.part_form import PART_ROWS

VENT = """format = 1
title = "Greenhouse vent: relay driver"
ground = "0V"

[[part]]
ref = "PS1"
kind = "voltage-source"
nodes = ["+12V", "0V"]
value = "12 V"

[[part]]
ref = "K1"
kind = "resistor"
nodes = ["+12V", "COIL"]
value = "400"
label = "relay coil"

[[part]]
ref = "D1"
kind = "diode"
nodes = ["COIL", "+12V"]
label = "flyback"

[[part]]
ref = "Q1"
kind = "npn"
nodes = ["COIL", "B", "0V"]
gain = 150

[[part]]
ref = "RB"
kind = "resistor"
nodes = ["+12V", "B"]
value = "10k"

[[part]]
ref = "ZD1"
kind = "zener"
nodes = ["0V", "B"]
value = "5.1 V"
tolerance = "±0.1 V"
"""


@pytest.fixture
def vent(tmp_path):
    path = tmp_path / "vent.toml"
    path.write_text(VENT, encoding="utf-8")
    return path


def run(capsys, argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


# -- faultfind check ------------------------------------------------------------------

def test_check_shows_values_with_units(vent, capsys):
    code, out, err = run(capsys, ["check", vent])
    assert code == 0 and "circuit file OK" in out, err
    row = {line.split()[0]: line for line in out.splitlines() if line[:2] in ("D1", "Q1", "ZD")}
    # model.py's defaults: a diode 0.65 V at 1 mA; a zener's value at 5 mA; vbe 0.65 V
    assert "650 mV at 1 mA" in row["D1"] and "±10 %" in row["D1"]
    assert "gain 150, vbe 650 mV" in row["Q1"]
    assert "5.1 V at 5 mA" in row["ZD1"] and "±1.96 %" in row["ZD1"]


def test_check_json_lists_semiconductors(vent, capsys):
    code, out, _ = run(capsys, ["check", vent, "--json"])
    doc = json.loads(out)
    semis = {s["ref"]: s for s in doc["semiconductors"]}
    assert set(semis) == {"D1", "Q1", "ZD1"}
    assert semis["D1"]["test_current"] == 1e-3 and semis["D1"]["ideality"] == 1.8
    assert semis["D1"]["reverse_leakage"] is None and "ideality" in semis["D1"]["defaults"]
    assert semis["Q1"]["gain"] == 150.0 and semis["Q1"]["defaults"] == ["vbe"]
    assert semis["ZD1"]["forward_voltage"] == 0.7


@pytest.mark.parametrize("old,new,part,words", [
    ('kind = "diode"\nnodes = ["COIL", "+12V"]', 'kind = "diode"\nnodes = ["COIL", "+12V", "B"]',
     "D1", "takes 2 node names [anode, cathode]"),
    ('value = "5.1 V"', 'value = "-5.1 V"', "ZD1", "above 0 V"),
    ('value = "5.1 V"\ntolerance = "±0.1 V"', 'tolerance = "5%"', "ZD1", "missing 'value'"),
    ("gain = 150", "gain = 150\nvalue = 1", "Q1", "'value' does not apply to an npn"),
    ('label = "flyback"', 'label = "flyback"\nidealty = 2', "D1", "unknown key 'idealty'"),
    ('label = "flyback"', 'label = "flyback"\ntest_current = "1 mV"', "D1", "unit 'V'"),
])
def test_check_refuses_bad_semiconductors(tmp_path, capsys, old, new, part, words):
    assert old in VENT
    text = VENT.replace(old, new)
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    header = text.split("\n").index(f'ref = "{part}"')     # the [[part]] line, 1-based
    code, out, err = run(capsys, ["check", path])
    assert code == 2 and out == "" and "Traceback" not in err
    assert f"{path}:{header}: part {part}" in err and words in err


def test_readings_errors_through_the_cli(vent, tmp_path, capsys):
    # expect --at reads the readings file first: its errors exit 2 before any computing
    readings = tmp_path / "bench.csv"
    readings.write_text("quantity,mode,plus,minus,part,setup,value\n"
                        "diode-test,dc,,,D1,,0.6\n"
                        "diode-test,,,,Q1,,0.6\n", encoding="utf-8")
    code, out, err = run(capsys, ["expect", vent, "--at", readings])
    assert code == 2 and "Traceback" not in err
    assert f"{readings}:2" in err and "a diode test is a power-off reading" in err
    assert "line 3 (part)" in err and "which junction" not in err and "two junctions" in err


# -- the safety words ------------------------------------------------------------------

def test_caution_names_the_diode_test():
    assert "Before a resistance reading or a diode test" in SAFETY_CAUTION


def test_power_needed():
    c = load_vent()
    rd = check_cells(parse_entry("D D1 0.6", c), c)
    assert power_needed(rd) == "off"


def load_vent():
    return parse_circuit(VENT, source="vent.toml")


# -- the logbook's compact form ---------------------------------------------------------

@pytest.mark.parametrize("tokens,fields,back", [
    (["D", "D1", "0.612"], {"quantity": "diode-test", "part": "D1", "value": "0.612"}, "D D1"),
    (["diode", "B,0V", "OL"], {"quantity": "diode-test", "plus": "B", "minus": "0V",
                               "value": "OL"}, "D B,0V"),
    (["d", "COIL", "0.58", "V"], {"quantity": "diode-test", "plus": "COIL", "minus": "",
                                  "value": "0.58 V"}, "D COIL"),
])
def test_compact_diode_test(tokens, fields, back):
    got = parse_compact(tokens, load_vent())
    assert got == fields and compact_of(got) == back


def test_compact_diode_test_unknown_place():
    with pytest.raises(InputError, match="a diode test is across a part"):
        parse_compact(["D", "NOWHERE", "0.6"], load_vent())


def test_log_add_diode_test(tmp_path, vent, capsys, monkeypatch):
    # the reading is stored; its band needs the engine, so only storing is checked here
    book = tmp_path / "book.sqlite"
    code, out, err = run(capsys, ["log", "start", vent, "--unit", "VENT-1",
                                  "--caution-acknowledged", "--logbook", book])
    assert code == 0, err
    code, out, err = run(capsys, ["log", "add", "--logbook", book, "1", "D", "D1", "0.61"])
    assert "Stored reading 1 of session 1: " in out and "Traceback" not in err
    code, out, err = run(capsys, ["log", "add", "--logbook", book, "1", "D", "D1", "-0.5"])
    assert code == 2 and "negative diode test" in err and "Traceback" not in err


# -- the quick entry and the suggestion box ----------------------------------------------

def test_entry_forms():
    c = load_vent()
    for text, where in [("D D1 0.612", "D(D1)"), ("diode-test B,0V 0.66", "D(B,0V)"),
                        ("D B 0.66 # base", "D(B,0V)"), ("diode-test,,,,D1,,OL,rev", "D(D1)")]:
        rd = check_cells(parse_entry(text, c), c)
        assert rd.quantity == "diode-test" and rd.where() == where and rd.mode is None
    rd = check_cells(parse_entry("D D1 0.6 # flyback", c), c)
    assert entry_text(rd, c.ground) == ("D D1  # flyback", 5)
    assert describe_cells(parse_entry("D D1 1", c)) == "D D1 (diode test)"
    assert describe_suggestion({"quantity": "diode-test", "part": "D1", "plus": None,
                                "minus": None}) == "D D1 (diode test)"


def test_entry_errors():
    c = load_vent()
    with pytest.raises(ReadingsError, match="two junctions"):
        check_cells(parse_entry("D Q1 0.6", c), c)
    with pytest.raises(ReadingsError, match="a diode test is across a part"):
        parse_entry("D nowhere 0.6", c)


# -- the editor ------------------------------------------------------------------------------

def test_terminal_names_and_rows():
    assert terminal_names("diode") == ("anode", "cathode")
    assert terminal_names("npn") == ("collector", "base", "emitter")
    for key in ("test_current", "ideality", "series_resistance", "reverse_leakage",
                "forward_voltage", "vbe"):
        assert key in PART_ROWS


def test_draft_builds_semiconductors():
    draft = CircuitDraft.from_text(VENT)
    i = draft.add_part("zener")
    j = draft.add_part("pnp")
    assert draft.parts[i]["ref"] == "ZD2" and draft.parts[j]["ref"] == "Q2"
    draft.set_field(i, "nodes", ["0V", "COIL"])
    draft.set_field(i, "value", "12 V")
    draft.set_field(i, "forward_voltage", "0.75 V")
    draft.set_field(j, "nodes", ["0V", "B", "COIL"])
    draft.set_field(j, "vbe", "0.62 V")
    check = draft.check()
    assert check.errors == {}, check.errors
    assert check.circuit.part("ZD2").forward_voltage == 0.75
    assert check.circuit.part("Q2").vbe == 0.62
    # a kind change keeps only the keys the new kind takes
    draft.set_field(i, "kind", "diode")
    assert "forward_voltage" not in draft.parts[i]
    draft.set_field(j, "ideality", "5")
    assert j in draft.check().errors and "does not apply to a pnp" in draft.check().errors[j]


def test_editor_hint_units():
    from faultfind.tui.screens.editor import HINTS
    assert "1 mA" in HINTS["vbe"] and "0.5 to 10" in HINTS["ideality"]


def test_docs_mention_every_semiconductor_key():
    docs = (Path(__file__).resolve().parents[1] / "docs" / "circuit-files.md").read_text(
        encoding="utf-8")
    for word in ("`diode`", "`led`", "`zener`", "`npn`", "`pnp`", "`test_current`",
                 "`ideality`", "`series_resistance`", "`reverse_leakage`",
                 "`forward_voltage`", "`vbe`"):
        assert word in docs, word
