"""The quick entry's grammar agrees with the readings file format.

Outside reference: formats.md (the shared specification), section 1's example
circuit (the walk-in cooler's defrost sense board) and section 2's example
readings file.  Each example row, typed in the entry's short form, must give
the same reading as the row read from the example file; RKM values follow
IEC 60062 (``4k61`` is 4.61 kOhm); ``OL`` is an over-range display.
"""

from __future__ import annotations

import pytest

from faultfind.errors import ReadingsError
from faultfind.io.circuit_file import parse_circuit
from faultfind.io.readings_file import parse_readings
from faultfind.model import Reading
from faultfind.tui.entry import (check_cells, complete, describe_cells, entry_text,
                                 parse_entry)

# formats.md section 1, as printed there
COOLER = '''
format = 1
title = "Walk-in cooler 3: defrost sense board"
ground = "0V"
frequency = "60 Hz"

[[part]]
ref = "PS1"
kind = "voltage-source"
nodes = ["+24V", "0V"]
value = "24 V"
tolerance = "3%"
off_state = "open"

[[part]]
ref = "R1"
kind = "resistor"
nodes = ["+24V", "A"]
value = "4k7"
tolerance = "1%"

[[part]]
ref = "R2"
kind = "resistor"
nodes = ["A", "0V"]
value = "4k7"
tolerance = "1%"

[[part]]
ref = "F1"
kind = "fuse"
nodes = ["+24V", "HTR"]

[[part]]
ref = "RH1"
kind = "resistor"
nodes = ["HTR", "0V"]
value = "12"
tolerance = "10%"
label = "defrost heater element"

[[part]]
ref = "C3"
kind = "capacitor"
nodes = ["A", "0V"]
value = "100n"
'''

# formats.md section 2, as printed there
EXAMPLE_CSV = """quantity,mode,plus,minus,part,setup,value,label
voltage,dc,A,,,,11.91,TP1
voltage,dc,HTR,0V,,,0.02,TP4
current,dc,,,R1,,2.45 mA,
resistance,,,,F1,,OL,fuse check
resistance,,,,R2,lifted,4.69k,
"""

# the same rows, typed in the entry's short form
TYPED = [
    "V A 11.91 # TP1",
    "V HTR,0V 0.02 # TP4",
    "I R1 2.45 mA",
    "R F1 OL # fuse check",
    "Rlifted R2 4.69k",
]

_KEYS = ("quantity", "mode", "plus", "minus", "part", "setup", "value", "overrange", "label")


@pytest.fixture(scope="module")
def cooler():
    return parse_circuit(COOLER, "formats.md example")


def _key(rd: Reading):
    return tuple(getattr(rd, k) for k in _KEYS)


def test_typed_rows_match_the_example_file(cooler):
    from_file = parse_readings(EXAMPLE_CSV, "formats.md example", cooler)
    typed = [check_cells(parse_entry(t, cooler), cooler) for t in TYPED]
    assert [_key(r) for r in typed] == [_key(r) for r in from_file]


def test_pasted_file_rows_match_the_example_file(cooler):
    from_file = parse_readings(EXAMPLE_CSV, "formats.md example", cooler)
    rows = EXAMPLE_CSV.splitlines()[1:]
    pasted = [check_cells(parse_entry(row, cooler), cooler) for row in rows]
    assert [_key(r) for r in pasted] == [_key(r) for r in from_file]


def test_words_of_the_file_work_as_kinds(cooler):
    a = check_cells(parse_entry("voltage dc A 11.91", cooler), cooler)
    b = check_cells(parse_entry("resistance lifted R2 4k61", cooler), cooler)
    assert (a.quantity, a.mode, a.plus, a.minus) == ("voltage", "dc", "A", "0V")
    assert b.setup == "lifted" and b.value == pytest.approx(4610.0)  # IEC 60062: 4k61


@pytest.fixture(scope="module")
def paging():
    from faultfind.io.circuit_file import load_circuit

    from .conftest import CASES

    return load_circuit(CASES / "paging_amp_voiceband_filter" / "circuit.toml")


def test_ac_reading_with_its_frequency(paging, cooler):
    node = next(n for n in paging.nodes if n != paging.ground)
    rd = check_cells(parse_entry(f"Vac {node} 0.52 @ 1.5 kHz # swept", paging), paging)
    assert rd.mode == "ac" and rd.frequency == pytest.approx(1500.0) and rd.label == "swept"
    with pytest.raises(ReadingsError) as info:  # formats.md: AC needs an AC source
        check_cells(parse_entry("Vac A 5.2", cooler), cooler)
    assert info.value.key == "mode"


def test_voltage_across_a_part_reads_between_its_nodes(cooler):
    cells = parse_entry("V R1 12.1", cooler)
    assert (cells["plus"], cells["minus"], cells["label"]) == ("+24V", "A", "across R1")
    assert describe_cells(cells) == "V dc +24V to A"


def test_overrange_both_signs(cooler):
    assert check_cells(parse_entry("R F1 OL", cooler), cooler).overrange == 1
    assert check_cells(parse_entry("V A -OL", cooler), cooler).overrange == -1


@pytest.mark.parametrize("text,key", [
    ("", "entry"), ("W A 1", "quantity"), ("V", "plus"), ("I", "part"),
    ("R nowhere 1", "part"), ("V nowhere 1", "plus"), ("V A 1x", "value"),
    ("I A 1", "part"),
])
def test_bad_lines_raise_readings_errors_naming_the_column(cooler, text, key):
    with pytest.raises(ReadingsError) as info:
        check_cells(parse_entry(text, cooler), cooler)
    assert info.value.key == key
    assert isinstance(info.value, ValueError)


def test_wrong_types_are_type_errors(cooler):
    with pytest.raises(TypeError):
        parse_entry(None, cooler)
    with pytest.raises(TypeError):
        parse_entry("V A 1", "not a circuit")


def test_completion_offers_the_circuit_names(cooler):
    nodes = [n for n in cooler.nodes if n != "0V"]
    refs = [p.ref for p in cooler.parts]
    c = complete("V ", cooler)
    assert c.what == "node or part" and set(c.candidates) == set(nodes) | set(refs)
    assert complete("V H", cooler).candidates == ("HTR",)
    assert complete("V h", cooler).completed("V h") == "V HTR"  # any case
    after_comma = complete("V HTR,", cooler)
    assert after_comma.what == "node" and set(after_comma.candidates) == set(cooler.nodes)
    assert complete("I ", cooler).candidates == tuple(refs)
    assert complete("R F1 o", cooler).candidates == ("OL",)
    assert complete("", cooler).candidates[0] == "V"


@pytest.mark.parametrize("which", ["cooler", "paging"])
def test_entry_text_round_trips_every_candidate_reading(which, request):
    """Every reading the advisor can suggest, written into the entry and given a
    value, reads back as the same reading (same probes, kind, setup, frequency)."""
    from faultfind.advise import candidate_readings

    circuit = request.getfixturevalue(which)
    suspects = [p.ref for p in circuit.parts if p.kind in ("resistor", "fuse")][:3]
    cands = candidate_readings(circuit, suspects=suspects)
    assert len(cands) >= 15
    for rd in cands:
        text, cursor = entry_text(rd, circuit.ground)
        line = text[:cursor] + "1.5" + text[cursor:]
        back = check_cells(parse_entry(line, circuit), circuit)
        want = (rd.quantity, rd.mode, rd.plus, rd.minus, rd.part, rd.setup)
        got = (back.quantity, back.mode, back.plus, back.minus, back.part, back.setup)
        assert got == want, line
        if rd.frequency is None:
            assert back.frequency is None
        else:
            assert back.frequency == pytest.approx(rd.frequency, rel=1e-6)


def test_diode_test_entry():
    # formats.md section 4: a diode test names a two-terminal part or its probes (red first)
    from faultfind.model import Circuit, Part
    from faultfind.tui.entry import parse_entry
    c = Circuit("relay driver", "0V", (
        Part("PS1", "voltage-source", ("+24V", "0V"), 24.0, 0.05, 0.05),
        Part("D1", "diode", ("C", "+24V"), 0.6, 0.1, 0.1),
        Part("R1", "resistor", ("C", "0V"), 480.0, 0.05, 0.05)))
    got = parse_entry("D D1 0.612", c)
    assert got["quantity"] == "diode-test" and got["part"] == "D1" and got["value"] == "0.612"
    assert "mode" not in got and "setup" not in got
    got = parse_entry("diode-test C,+24V OL", c)
    assert (got["quantity"], got["plus"], got["minus"], got["value"]) == ("diode-test", "C", "+24V", "OL")
