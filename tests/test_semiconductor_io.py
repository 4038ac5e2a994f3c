"""Semiconductors in the files: circuit keys, the writer's round trip, diode-test rows, meters.

The contract is formats.md section 4 (kinds diode, led, zener, npn, pnp; their
nodes and keys; ``quantity = diode-test``; the meter's diode-test keys).  The
boards are invented: a greenhouse vent controller's sensor supply and relay
driver.  Values are checked against the SI prefixes of the BIPM SI Brochure
(9th edition, table 7); defaults against faultfind.model (whose sources are
stated there); meter arithmetic against the "% of reading + counts" rule of
formats.md section 3.
"""

from __future__ import annotations

import dataclasses
import json

import pytest

from faultfind.errors import CircuitError, InputError, MeterError, ReadingsError
from faultfind.io.circuit_file import PART_KEYS, load_circuit, parse_circuit
from faultfind.io.circuit_writer import circuit_text, same_content
from faultfind.io.junction_keys import IDEALITY_RANGE, KEYS_OF, TERMINALS, key_problem
from faultfind.io.meters_file import DEFAULT_METER, METER_KEYS, parse_meters
from faultfind.io.readings_file import (diode_test_allowance, parse_readings, reading_to_row,
                                        readings_to_frame)
from faultfind.model import JUNCTION_DEFAULTS, KINDS, SEMICONDUCTORS, TRANSISTOR_DEFAULTS

TOP = {"format": 1, "title": "Greenhouse vent controller: sensor supply and relay driver",
       "ground": "0V"}


def board_parts():
    """One part of every semiconductor kind, with and without their keys."""
    return [
        {"ref": "PS1", "kind": "voltage-source", "nodes": ["+12V", "0V"], "value": "12 V"},
        {"ref": "R1", "kind": "resistor", "nodes": ["+12V", "ZK"], "value": "1k"},
        {"ref": "ZD1", "kind": "zener", "nodes": ["0V", "ZK"], "value": "5.1 V",
         "tolerance": "±0.1 V", "test_current": "5 mA", "forward_voltage": "0.72 V",
         "series_resistance": "10", "label": "sensor rail"},
        {"ref": "D1", "kind": "diode", "nodes": ["+12V", "COIL"], "value": "0.62 V",
         "test_current": "1m", "ideality": 1.9, "series_resistance": "R5",
         "reverse_leakage": "25 nA", "label": "flyback"},
        {"ref": "K1", "kind": "resistor", "nodes": ["+12V", "COIL"], "value": "400"},
        {"ref": "Q1", "kind": "npn", "nodes": ["COIL", "B", "0V"], "gain": 150,
         "vbe": "0.66 V"},
        {"ref": "RB", "kind": "resistor", "nodes": ["ZK", "B"], "value": "10k"},
        {"ref": "Q2", "kind": "pnp", "nodes": ["0V", "PB", "ZK"]},
        {"ref": "RP", "kind": "resistor", "nodes": ["PB", "0V"], "value": "47k"},
        {"ref": "LED1", "kind": "led", "nodes": ["ZK", "LK"], "ideality": "2.1"},
        {"ref": "R2", "kind": "resistor", "nodes": ["LK", "0V"], "value": "330"},
        {"ref": "D2", "kind": "diode", "nodes": ["LK", "0V"]},
    ]


def render(parts, top=None):
    """A circuit file as text (JSON strings and numbers are valid TOML values)."""
    top = TOP if top is None else top
    out = [f"{k} = {json.dumps(v, ensure_ascii=False)}" for k, v in top.items()]
    for p in parts:
        out += ["", "[[part]]"] + [f"{k} = {json.dumps(v, ensure_ascii=False)}"
                                   for k, v in p.items()]
    return "\n".join(out) + "\n"


def with_change(target, /, **changes):
    parts = board_parts()
    for p in parts:
        if p["ref"] == target:
            for k, v in changes.items():
                if v is None:
                    p.pop(k, None)
                else:
                    p[k] = v
    return parts


def header_line(text, ref):
    lines = text.split("\n")
    i = lines.index(f'ref = "{ref}"')
    assert lines[i - 1] == "[[part]]"
    return i


def part_error(tmp_path, parts, ref, key, *words):
    """The CircuitError of a bad board: names the file, its [[part]] line, part and key."""
    text = render(parts)
    path = tmp_path / "vent.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(CircuitError) as info:
        load_circuit(path)
    err = info.value
    assert isinstance(err, ValueError) and isinstance(err, InputError)
    assert err.file == str(path) and err.part == ref and err.key == key, str(err)
    assert err.line == header_line(text, ref) and f"{path}:{err.line}:" in str(err)
    for w in words:
        assert w in err.message, (w, err.message)
    return err


@pytest.fixture
def board():
    return parse_circuit(render(board_parts()), source="vent.toml")


# -- reading a good board -----------------------------------------------------

def test_keys_in_si(board):
    z, d, q, p = (board.part(r) for r in ("ZD1", "D1", "Q1", "Q2"))
    # formats.md section 4: a zener's value is its breakdown voltage, ±0.1 V of 5.1 V
    assert z.value == 5.1 and z.tol_low == pytest.approx(0.1 / 5.1, rel=1e-12)
    assert (z.test_current, z.forward_voltage, z.series_resistance) == (5e-3, 0.72, 10.0)
    # SI prefixes (BIPM SI Brochure table 7): 1m = 1e-3, 25 nA = 2.5e-8 A, R5 = 0.5 Ω (IEC 60062)
    assert (d.value, d.test_current, d.ideality, d.series_resistance) == (0.62, 1e-3, 1.9, 0.5)
    assert d.reverse_leakage == pytest.approx(25e-9, rel=1e-15)
    assert (q.gain, q.vbe, q.value) == (150.0, 0.66, None)
    assert (p.gain, p.vbe, p.value) == (None, None, None)
    assert board.part("LED1").ideality == 2.1
    assert board.is_nonlinear


def test_defaults_are_the_models(board):
    # a key left out reads as None; Part.junction fills in model.py's defaults
    d2, led, q2 = board.part("D2"), board.part("LED1"), board.part("Q2")
    assert d2.value == KINDS["diode"].default_value == 0.65
    assert (d2.tol_low, d2.tol_high) == KINDS["diode"].default_tolerance
    assert led.value == KINDS["led"].default_value
    assert d2.test_current is None and d2.junction("test_current") == 1e-3
    assert led.junction("test_current") == JUNCTION_DEFAULTS["led"]["test_current"] == 10e-3
    assert q2.junction("gain") == TRANSISTOR_DEFAULTS["gain"]
    assert q2.junction("vbe") == TRANSISTOR_DEFAULTS["vbe"]


def test_node_reached_only_through_junctions_is_not_floating():
    # LK is reached from the supply only through LED1 and from ground only
    # through D2 (R2 removed); B only through Q1 and RB: neither floats.
    parts = [p for p in board_parts() if p["ref"] != "R2"]
    c = parse_circuit(render(parts))
    assert "LK" in c.nodes


def test_every_kind_has_its_keys():
    # formats.md section 4's table, key by key
    assert set(KEYS_OF) == SEMICONDUCTORS
    for kind in ("diode", "led"):
        assert {"test_current", "ideality", "series_resistance", "reverse_leakage", "value",
                "tolerance"} <= set(PART_KEYS[kind])
    assert "forward_voltage" in PART_KEYS["zener"]
    for kind in ("npn", "pnp"):
        assert {"gain", "vbe"} <= set(PART_KEYS[kind])
        assert "value" not in PART_KEYS[kind] and "tolerance" not in PART_KEYS[kind]
    assert TERMINALS["diode"] == ("anode", "cathode")
    assert TERMINALS["npn"] == ("collector", "base", "emitter")


# -- bad input: file, line, part, key -------------------------------------------

def test_unknown_key(tmp_path):
    part_error(tmp_path, with_change("D1", idealty=1.8), "D1", "idealty", "unknown key",
               "did you mean 'ideality'")


@pytest.mark.parametrize("ref,key,value,owner", [
    ("D1", "forward_voltage", "0.7 V", "zeners"), ("Q1", "value", "1", "npn"),
    ("Q1", "tolerance", "5%", "npn"), ("ZD1", "reverse_leakage", "1n", "diodes and LEDs"),
    ("R1", "vbe", "0.6", "transistors"), ("R1", "ideality", 1.5, "diodes"),
    ("D1", "gain", 100, "transistors"), ("Q1", "test_current", "1m", "diodes")])
def test_key_of_another_kind(tmp_path, ref, key, value, owner):
    part_error(tmp_path, with_change(ref, **{key: value}), ref, key, "does not apply", owner)


@pytest.mark.parametrize("ref,nodes,words", [
    ("D1", ["+12V", "COIL", "0V"], ("takes 2 node names [anode, cathode]", "lists 3")),
    ("Q1", ["COIL", "B"], ("takes 3 node names [collector, base, emitter]", "lists 2")),
    ("Q2", ["B", "B", "B"], ("all three terminals",)),
    ("LED1", ["LK", "LK"], ("both ends",))])
def test_wrong_nodes(tmp_path, ref, nodes, words):
    part_error(tmp_path, with_change(ref, nodes=nodes), ref, "nodes", *words)


def test_negative_zener_voltage(tmp_path):
    part_error(tmp_path, with_change("ZD1", value="-5.1 V", tolerance=None), "ZD1", "value",
               "above 0 V", "nodes [anode, cathode]")


def test_zener_without_value(tmp_path):
    part_error(tmp_path, with_change("ZD1", value=None, tolerance=None), "ZD1", "value",
               "missing 'value'", "breakdown")


@pytest.mark.parametrize("ref,key,value,word", [
    ("D1", "value", "0.6 A", "unit 'A'"), ("ZD1", "value", "5.1 Ω", "unit 'Ω'"),
    ("D1", "test_current", "1 mV", "unit 'V'"), ("Q1", "vbe", "0.6 A", "unit 'A'"),
    ("D1", "series_resistance", "2 V", "unit 'V'"), ("ZD1", "forward_voltage", "1 mA", "'A'"),
    ("D1", "ideality", "1.8 V", "'V'"), ("Q1", "gain", "150 dB", "plain number such as 150")])
def test_wrong_unit(tmp_path, ref, key, value, word):
    part_error(tmp_path, with_change(ref, **{key: value}), ref, key, word)


@pytest.mark.parametrize("ref,key,value,word", [
    ("D1", "value", "0", "above 0 V"), ("LED1", "value", "-2 V", "above 0 V"),
    ("D1", "test_current", 0, "above 0 A"), ("D1", "test_current", "-1m", "above 0 A"),
    ("D1", "reverse_leakage", "-1n", "0 A or more"),
    ("D1", "series_resistance", -1, "0 Ω or more"),
    ("D1", "ideality", 0.3, "from 0.5 to 10"), ("D1", "ideality", 12, "from 0.5 to 10"),
    ("D1", "ideality", 0, "from 0.5 to 10"), ("ZD1", "forward_voltage", "0", "above 0 V"),
    ("Q1", "vbe", "-0.6", "above 0 V"), ("Q1", "gain", 0, "above 0"),
    ("Q1", "gain", -100, "above 0"), ("D1", "test_current", "inf", "cannot read test_current"),
    ("D1", "ideality", "1e999", "too large")])
def test_impossible_value(tmp_path, ref, key, value, word):
    part_error(tmp_path, with_change(ref, **{key: value}), ref, key, word)


def test_zero_leakage_and_resistance_are_allowed():
    c = parse_circuit(render(with_change("D1", reverse_leakage=0, series_resistance="0")))
    assert (c.part("D1").reverse_leakage, c.part("D1").series_resistance) == (0.0, 0.0)


def test_ideality_limits_are_inclusive():
    low, high = IDEALITY_RANGE
    assert key_problem("ideality", low) is None and key_problem("ideality", high) is None
    assert key_problem("ideality", low * 0.99) and key_problem("ideality", high * 1.01)


def test_base_behind_a_capacitor_is_not_floating():
    # RB drawn as a capacitor: B is still joined to COIL and 0V through Q1's junctions
    c = parse_circuit(render(with_change("RB", kind="capacitor", value="100n")))
    assert c.part("RB").kind == "capacitor"


def test_floating_through_capacitor_only_names_base():
    # B reached only through a capacitor and Q1's base, Q1's emitter through CE only
    parts = [
        {"ref": "PS1", "kind": "voltage-source", "nodes": ["V", "0V"], "value": "5 V"},
        {"ref": "C1", "kind": "capacitor", "nodes": ["V", "X"], "value": "1u"},
        {"ref": "D1", "kind": "diode", "nodes": ["X", "Y"]},
    ]
    with pytest.raises(CircuitError) as info:
        parse_circuit(render(parts), source="f.toml")
    assert "node 'X'" in info.value.message and "D1 (anode)" in info.value.message


# -- the writer ---------------------------------------------------------------

def test_round_trip(board):
    text = circuit_text(board)
    again = parse_circuit(text)
    assert same_content(board, again)
    assert circuit_text(again) == text
    # what is left out comes back as left out (the defaults stay the model's)
    assert again.part("D2").test_current is None and "vbe" not in text.split("Q2")[1][:80]


def test_writer_keys():
    text = circuit_text(parse_circuit(render(board_parts())))
    block = text.split('ref = "D1"')[1].split("[[part]]")[0]
    assert 'test_current = "1 mA"' in block and "ideality = 1.9" in block
    assert 'series_resistance = "R5"' in block and 'reverse_leakage = "25 nA"' in block
    q1 = text.split('ref = "Q1"')[1].split("[[part]]")[0]
    assert "gain = 150" in q1 and 'vbe = "660 mV"' in q1 and "value" not in q1


@pytest.mark.parametrize("x", [1e-14, 3.3e-9, 0.0, 1.234567e-3, 2.5])
def test_round_trip_exact(x):
    # (2.5 A through D1's 0.5 ohm would leave its 0.62 V no junction voltage:
    # series_resistance scaled so that the keys stay consistent)
    parts = with_change("D1", reverse_leakage=x, test_current=x or 1e-3,
                        series_resistance=0.5 if x < 1 else 0.05)
    c = parse_circuit(render(parts))
    assert same_content(c, parse_circuit(circuit_text(c)))


def test_writer_refuses_non_finite_key(board):
    bad = dataclasses.replace(board.part("D1"), ideality=float("nan"))
    c = dataclasses.replace(board, parts=(bad,) + board.parts[1:])
    with pytest.raises(CircuitError, match="ideality"):
        circuit_text(c)


# -- diode-test readings ---------------------------------------------------------

GOOD = """quantity,mode,plus,minus,part,setup,value,label
diode-test,,,,D1,,0.587,flyback forward
diode-test,,COIL,+12V,,,OL,flyback reversed
Diode-Test,,B,,,,0.652 V,Q1 base-emitter
diode-test,,,,ZD1,,OL,zener forward? no: anode on 0V
diode-test,,,,D2,,-0.002,shorted
resistance,,,,R2,,330,
"""


def test_diode_test_rows(board):
    rows = parse_readings(GOOD, "r.csv", board)
    assert [r.quantity for r in rows[:5]] == ["diode-test"] * 5
    d1, rev, be = rows[:3]
    assert (d1.part, d1.plus, d1.minus, d1.mode, d1.setup, d1.value) == \
        ("D1", None, None, None, None, 0.587)
    assert (rev.plus, rev.minus, rev.overrange, rev.value) == ("COIL", "+12V", 1, None)
    assert (be.plus, be.minus, be.value) == ("B", "0V", 0.652)   # minus defaults to ground
    assert rows[4].value == -0.002
    assert reading_to_row(d1)["unit"] == "V" and reading_to_row(d1)["mode"] is None
    frame = readings_to_frame(rows)
    assert list(frame["mode"][:5]) == [""] * 5
    again = parse_readings(frame.to_csv(index=False), "again.csv", board)
    assert [dataclasses.replace(r, line=None) for r in again] == \
        [dataclasses.replace(r, line=None, raw=r.raw) for r in rows]


def row_problems(text, circuit=None, meters=None):
    with pytest.raises(ReadingsError) as info:
        parse_readings(text, "bench.csv", circuit, meters)
    err = info.value
    assert err.file == "bench.csv"
    return {(p.line, p.key): p.message for p in err.problems}


def test_diode_test_with_power_on_columns(board):
    text = ("quantity,mode,plus,minus,part,setup,value\n"
            "diode-test,dc,,,D1,,0.6\n"
            "diode-test,ac,,,D1,,0.6\n"
            "diode-test,,,,D1,lifted,0.6\n")
    found = row_problems(text, board)
    assert set(found) == {(2, "mode"), (3, "mode"), (4, "setup")}
    assert all("a diode test is a power-off reading" in m for m in found.values())


def test_diode_test_on_a_transistor_asks_which_junction(board):
    found = row_problems("quantity,part,value\ndiode-test,Q1,0.65\ndiode-test,Q2,0.65\n",
                         board)
    # npn: base is the anode of both junctions; pnp: the cathode
    assert "Base-emitter forward: plus B, minus 0V" in found[(2, "part")]
    assert "Base-emitter forward: plus ZK, minus PB" in found[(3, "part")]


@pytest.mark.parametrize("row,key,word", [
    ("diode-test,,,,,,0.6", "part", "a diode test needs part"),
    ("diode-test,,B,,D1,,0.6", "part", "either part or plus/minus"),
    ("diode-test,,,0V,D1,,0.6", "minus", "minus goes with plus"),
    ("diode-test,,,,U9,,0.6", "part", "not in the circuit"),
    ("diode-test,,NOWHERE,,,,0.6", "plus", "not in the circuit"),
    ("diode-test,,,,D1,,0.6 A", "value", "unit 'A'"),
    ("diode-test,,,,D1,,-0.3", "value", "negative diode test"),
    ("diode-test,,,,D1,,-OL", "value", "negative diode test"),
    ("diode-test,,,,D1,,", "value", "no value"),
    ("diode test,,,,D1,,0.6", "quantity", "did you mean 'diode-test'"),
])
def test_bad_diode_test_rows(board, row, key, word):
    found = row_problems("quantity,mode,plus,minus,part,setup,value\n" + row + "\n", board)
    assert word in found[(2, key)], found


def test_negative_allowance_is_the_meters_accuracy():
    # formats.md section 3/4: ±(1 % of reading + 3 counts of 1 mV) on the default
    # handheld; plus half a display step: 0.010 V * 1 % + 3 mV + 0.5 mV = 3.6 mV
    assert DEFAULT_METER.diode_test == (1.0, 3.0) or DEFAULT_METER.diode_test.counts == 3.0
    assert diode_test_allowance(DEFAULT_METER, -0.010) == pytest.approx(3.6e-3, rel=1e-6)
    ok = parse_readings("quantity,part,value\ndiode-test,D2,-0.0035\n", "r.csv")
    assert ok[0].value == -0.0035
    found = row_problems("quantity,part,value\ndiode-test,D2,-0.004\n")
    assert "down to -3.54 mV" in found[(2, "value")] or "down to" in found[(2, "value")]
    # a meter with a coarser diode test allows more
    coarse = {"coarse": dataclasses.replace(DEFAULT_METER, name="coarse",
                                            diode_test_resolution=0.01)}
    assert parse_readings("quantity,part,value,meter\ndiode-test,D2,-0.02,coarse\n", "r.csv",
                          meters=coarse)[0].value == -0.02


# -- meter profiles ---------------------------------------------------------------

def test_meter_diode_test_keys():
    assert METER_KEYS[-5:] == ("diode_test_current", "diode_test_voltage", "diode_test_max",
                               "diode_test", "diode_test_resolution")
    m = parse_meters('[meter.bench]\ndiode_test_current = "0.5 mA"\n'
                     'diode_test_voltage = "3.3 V"\ndiode_test_max = "3"\n'
                     'diode_test = "1.5% + 2"\ndiode_test_resolution = "0.1m"\n')["bench"]
    assert (m.diode_test_current, m.diode_test_voltage, m.diode_test_max) == (5e-4, 3.3, 3.0)
    assert (m.diode_test.percent, m.diode_test.counts, m.diode_test_resolution) == \
        (1.5, 2.0, 1e-4)
    assert m.accuracy("diode-test", None) == m.diode_test


def test_meter_defaults():
    # formats.md section 4: 1 mA, 3 V open-circuit, 2 V top
    d = DEFAULT_METER
    assert (d.diode_test_current, d.diode_test_voltage, d.diode_test_max) == (1e-3, 3.0, 2.0)


@pytest.mark.parametrize("text,key,word", [
    ('diode_test_current = "-1 mA"', "diode_test_current", "positive"),
    ('diode_test_current = "1 mV"', "diode_test_current", "unit 'V'"),
    ('diode_test_voltage = "1.5 V"', "diode_test_voltage", "above diode_test_voltage"),
    ('diode_test_max = "3.5 V"', "diode_test_max", "above diode_test_voltage"),
    ('diode_test = "-1% + 2"', "diode_test", "cannot read meter accuracy"),
    ('diode_test = 1', "diode_test", "string"),
    ('diode_test_resolution = "2"', "diode_test_resolution", "not below diode_test_max"),
    ('diode_test_max = 0', "diode_test_max", "positive"),
])
def test_bad_meter_keys(text, key, word):
    with pytest.raises(MeterError) as info:
        parse_meters(f"# bench meter\n[meter.bench]\n{text}\n", "meters.toml")
    err = info.value
    assert (err.file, err.line, err.part, err.key) == ("meters.toml", 3, "bench", key)
    assert word in err.message


def test_fast_reader_reads_semiconductor_files_as_tomllib_does():
    # io/fast_toml has no kind-specific path: a semiconductor board (plain strings,
    # floats such as ideality = 1.9, integers such as gain = 150) is in its subset
    # and gives tomllib's document (TOML 1.0.0, tomllib the reference reader)
    import tomllib

    from faultfind.io.fast_toml import loads_subset
    text = render(board_parts())
    assert loads_subset(text) is not None and loads_subset(text) == tomllib.loads(text)
