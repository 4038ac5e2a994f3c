"""The circuit editor's draft (faultfind/tui/draft.py) without the screen: its text is
read by the circuit file reader, several mistakes are marked at once, changes undo.

Outside references: ``faultfind.io.circuit_file.parse_circuit`` (the reader
``faultfind check`` uses) for every message; Python's ``tomllib`` (TOML 1.0.0)
for the escaping of the draft's strings.
"""

from __future__ import annotations

import tomllib

import pytest

from faultfind.errors import CircuitError
from faultfind.io.circuit_file import parse_circuit
from faultfind.tui.draft import CircuitDraft

from .conftest import BOOSTER

TEXT = (BOOSTER / "circuit.toml").read_text(encoding="utf-8")


def _reader_message(text):
    with pytest.raises(CircuitError) as err:
        parse_circuit(text)
    return err.value.message


def test_two_broken_parts_are_both_marked_with_the_readers_messages():
    d = CircuitDraft.from_text(TEXT)
    d.set_field(1, "value", "24 V")       # F1: a voltage on a fuse
    d.set_field(6, "resistance", "-3")    # K1: a negative winding resistance
    r = d.check()
    assert not r.ok and sorted(r.errors) == [1, 6]
    # each is the reader's message for a file with that one mistake
    one = TEXT.replace('value = "R15"', 'value = "24 V"', 1)
    two = TEXT.replace('resistance = "180"', 'resistance = "-3"', 1)
    assert r.errors[1] == _reader_message(one)
    assert r.errors[6] == _reader_message(two)
    assert "checked once the marked parts read" in r.note


def test_a_floating_node_waits_until_the_other_marks_are_fixed():
    d = CircuitDraft.from_text(TEXT)
    d.set_field(1, "value", "24 V")
    d.set_field(5, "state", "open")
    d.set_field(5, "nodes", ["FLOAT", "TP7"])   # TP7 only through an open switch
    r = d.check()
    assert list(r.errors) == [1]
    d.undo(), d.undo(), d.undo()
    d.set_field(5, "state", "open")
    d.set_field(5, "nodes", ["FLOAT", "TP7"])
    r = d.check()
    assert list(r.errors) == [5] and "node 'TP7' has no DC path" in r.errors[5]


def test_text_escapes_read_back_exactly_by_tomllib():
    d = CircuitDraft.from_text(TEXT)
    label = 'lamp "H1" \\ back\x7f\ttab'
    d.set_field(2, "label", label)
    d.set_head("notes", "two\nlines")
    doc = tomllib.loads(d.text()[0])
    assert doc["part"][2]["label"] == label and doc["notes"] == "two\nlines"
    assert d.check().circuit.part("H1").label == label


def test_unknown_keys_are_kept_marked_and_can_be_dropped():
    t = TEXT.replace('ground = "0V"', 'ground = "0V"\ncolour = "red"', 1)
    t = t.replace('value = "0.6 H"', 'value = "0.6 H"\nstate = "closed"', 1)
    d = CircuitDraft.from_text(t)
    r = d.check()
    assert r.general == [_reader_message(t)]          # the reader stops at the top level
    assert d.set_head("colour", "")
    r = d.check()
    assert r.errors[6] == _reader_message(t.replace('colour = "red"\n', ""))
    assert d.set_field(6, "state", "")
    assert d.check().ok


def test_format_other_than_1_is_refused_and_a_missing_one_is_written():
    with pytest.raises(CircuitError, match="format must be 1"):
        CircuitDraft.from_text(TEXT.replace("format = 1", "format = 2"))
    d = CircuitDraft.from_text(TEXT.replace("format = 1\n", ""))
    assert d.check().ok and d.saved_text().startswith("format = 1\n")


def test_changing_the_kind_resizes_nodes_and_drops_keys_it_does_not_take():
    d = CircuitDraft.from_text(TEXT)
    d.set_field(6, "kind", "opamp")     # K1, an inductor with a winding resistance
    assert d.parts[6]["nodes"] == ["RUN", "0V", ""]
    assert "resistance" not in d.parts[6] and "value" not in d.parts[6]
    d.undo()
    assert d.parts[6]["resistance"] == "180" and d.parts[6]["nodes"] == ["RUN", "0V"]


def test_a_change_to_the_same_text_is_no_change_and_no_undo_step():
    d = CircuitDraft.from_text(TEXT)
    assert not d.set_field(0, "value", "24 V")
    assert not d.set_head("frequency", "")     # absent stays absent
    assert not d.can_undo and not d.changed
    i = d.add_part("resistor")
    assert d.parts[i]["ref"] == "R1" and d.changed
    assert d.undo() == "adding R1" and not d.changed and d.undo() is None


def test_saving_refuses_a_draft_that_does_not_read(tmp_path):
    d = CircuitDraft.from_text(TEXT, str(tmp_path / "c.toml"))
    d.set_field(1, "value", "24 V")
    with pytest.raises(CircuitError, match="unit 'V' does not fit"):
        d.save()
    assert not (tmp_path / "c.toml").exists()
    with pytest.raises(CircuitError, match="name the file"):
        CircuitDraft.from_text(TEXT).save()
