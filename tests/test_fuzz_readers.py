"""Fuzzing the two readers: circuit files (TOML) and readings files (CSV).

cli.md: bad input is exit 2 with one message naming the file and the line or
part, never a traceback or an internal error.  So every mutated file must
either load or raise an :class:`~faultfind.errors.InputError` that names the
file and a place (line, part or key); any other exception fails the test.
Good files -- the bundled field cases as they are, with a UTF-8 byte-order
mark, with CRLF or CR line ends -- must load to the same content.

The mutations start from the bundled field_cases files: truncation at any
byte, junk bytes and wrong-typed values inserted or written over the text,
semicolon separators, decimal commas, stray quotes, duplicated or dropped
lines and columns, empty files.  The cases the fuzzing found are kept as
minimal files in tests/heldout_inputs/ (see its README.md) and tested one by
one below.

Hypothesis runs with ``derandomize=True`` (the same examples on every run, so
CI is repeatable), ``deadline=None`` (a shared CI machine is slow at times)
and bounded ``max_examples`` so that the whole file stays near a minute.
"""

from __future__ import annotations

import csv
import io
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from faultfind.cli.main import main
from faultfind.errors import CircuitError, InputError, ReadingsError
from faultfind.io.circuit_file import circuit_warnings, load_circuit, parse_circuit
from faultfind.io.meters_file import load_meters, meters_with_default
from faultfind.io.readings_file import load_readings, parse_readings

ROOT = Path(__file__).resolve().parent.parent
HELD = Path(__file__).resolve().parent / "heldout_inputs"
CASES = sorted(p.name for p in (ROOT / "field_cases").iterdir() if (p / "circuit.toml").is_file())
CIRCUIT_BYTES = {c: (ROOT / "field_cases" / c / "circuit.toml").read_bytes() for c in CASES}
READINGS_BYTES = {c: (ROOT / "field_cases" / c / "readings.csv").read_bytes() for c in CASES}
METERS = meters_with_default()
CIRCUITS = {c: load_circuit(ROOT / "field_cases" / c / "circuit.toml") for c in CASES}

# An invented board with every semiconductor kind and its keys (formats.md section 4),
# and readings with diode-test rows, mutated with the field cases.
SEMI = "vent_relay_driver"
CIRCUIT_BYTES[SEMI] = """format = 1
title = "Greenhouse vent: relay driver and sensor reference"
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

[[part]]
ref = "D1"
kind = "diode"
nodes = ["COIL", "+12V"]
value = "0.62 V"
test_current = "1 mA"
ideality = 1.9
series_resistance = "R5"
reverse_leakage = "20 nA"

[[part]]
ref = "Q1"
kind = "npn"
nodes = ["COIL", "B", "0V"]
gain = 150
vbe = "0.66 V"

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
forward_voltage = "0.72 V"

[[part]]
ref = "LED1"
kind = "led"
nodes = ["B", "LK"]

[[part]]
ref = "Q2"
kind = "pnp"
nodes = ["0V", "LK", "+12V"]
""".encode()
READINGS_BYTES[SEMI] = b"""quantity,mode,plus,minus,part,setup,value,label
voltage,dc,COIL,,,,0.08,relay on
diode-test,,,,D1,,0.587,flyback forward
diode-test,,+12V,COIL,,,OL,flyback reversed
diode-test,,B,0V,,,0.652,Q1 base-emitter
diode-test,,,,ZD1,,-0.002,shorted?
resistance,,,,RB,,9.95k,
"""
CIRCUITS[SEMI] = parse_circuit(CIRCUIT_BYTES[SEMI].decode(), "vent.toml")

FUZZ = settings(max_examples=200, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])

# Bytes a damaged or mistyped file holds: non-numbers, huge numbers, wrong TOML
# types, quotes, separators, control and non-UTF-8 bytes, deep nesting, a
# cell longer than the csv module's field limit.
JUNK = [b"nan", b"inf", b"-inf", b"1e999", b"-1", b"0", b"9" * 400, b"9" * 5000, b"true",
        b"[]", b"{}", b"4,7", b'"', b"'", b"\x00", b"\xff\xfe", b"\xef\xbb\xbf", b";", b"\r",
        b"\r\n", b"\n", b"[[part]]", b"[part]", b"= 1", b"-0.3", b"-5", b"OL", b"-OL", b'"""',
        b"[" * 1500, b"{a=" * 300, b"x" * 140000, b"1979-05-27", b"\t", b",,,,,,,,", b"\\",
        b"1" * 5000 + b" Hz x", b"\xe2\x88\x92", b"\xc2\xb5"]
OPS = ("truncate", "insert", "overwrite", "semicolons", "decimal-commas", "bom-crlf",
       "stray-quote", "duplicate-line", "drop-line", "duplicate-column", "empty")


@st.composite
def mutated(draw, originals):
    """``(case, bytes)``: one of ``originals`` with one to three mutations."""
    case = draw(st.sampled_from(sorted(originals)))
    data = bytearray(originals[case])
    for op in draw(st.lists(st.sampled_from(OPS), min_size=1, max_size=3)):
        at = draw(st.integers(0, len(data)))
        lines = bytes(data).split(b"\n")
        pick = draw(st.integers(0, max(0, len(lines) - 1)))
        if op == "truncate":
            data = data[:at]
        elif op == "insert":
            data[at:at] = draw(st.one_of(st.sampled_from(JUNK), st.binary(max_size=24)))
        elif op == "overwrite":
            data[at:at + draw(st.integers(1, 16))] = draw(st.sampled_from(JUNK))
        elif op == "semicolons":
            data = bytearray(data.replace(b",", b";"))
        elif op == "decimal-commas":
            data = bytearray(data.replace(b".", b","))
        elif op == "bom-crlf":
            data = bytearray(b"\xef\xbb\xbf" + data.replace(b"\n", b"\r\n"))
        elif op == "stray-quote":
            data[at:at] = b'"'
        elif op == "duplicate-line":
            lines.insert(pick, lines[pick])
            data = bytearray(b"\n".join(lines))
        elif op == "drop-line":
            del lines[pick]
            data = bytearray(b"\n".join(lines))
        elif op == "duplicate-column":
            first = lines[0].split(b",")
            lines[0] = b",".join(first + [first[pick % len(first)]])
            data = bytearray(b"\n".join(lines))
        else:
            data = bytearray()
    return case, bytes(data)


def write(directory: Path, name: str, data: bytes) -> Path:
    path = directory / name
    path.write_bytes(data)
    return path


def loads_or_input_error(load, path):
    """``load(path)``, or None after checking the InputError names the file and a place."""
    try:
        return load(path)
    except InputError as err:
        assert err.file == str(path), str(err)
        assert err.line is not None or err.part is not None or err.key is not None, str(err)
        assert err.message and str(err).startswith(f"{path}:"), str(err)
        assert len(str(err)) < 20_000, "a message should not quote megabytes of the file"
        return None


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


# -- mutated field-case files ---------------------------------------------------------------


@FUZZ
@given(mutated(CIRCUIT_BYTES))
def test_mutated_circuit_files(folder, example):
    case, data = example
    path = write(folder, "circuit.toml", data)
    circuit = loads_or_input_error(load_circuit, path)
    if circuit is not None:
        assert circuit.parts and circuit.source == str(path)
        assert all(isinstance(w, str) for w in circuit_warnings(circuit))


@FUZZ
@given(mutated(READINGS_BYTES))
def test_mutated_readings_files(folder, example):
    case, data = example
    path = write(folder, "readings.csv", data)
    readings = loads_or_input_error(lambda p: load_readings(p, CIRCUITS[case], METERS), path)
    if readings is not None:
        assert all(r.line is not None and r.line >= 2 for r in readings)


@FUZZ
@given(mutated({SEMI: CIRCUIT_BYTES[SEMI]}), mutated({SEMI: READINGS_BYTES[SEMI]}))
def test_mutated_semiconductor_files(folder, circuit_example, readings_example):
    # the semiconductor board and its diode-test rows alone, so that every example
    # mutates them (the field-case tests above draw them among nine others)
    path = write(folder, "semi.toml", circuit_example[1])
    circuit = loads_or_input_error(load_circuit, path)
    if circuit is not None:
        assert all(isinstance(w, str) for w in circuit_warnings(circuit))
    path = write(folder, "semi.csv", readings_example[1])
    loads_or_input_error(lambda p: load_readings(p, CIRCUITS[SEMI], METERS), path)


def _single_line_values(text):
    """Line numbers of one-line ``key = value`` assignments."""
    return [i for i, line in enumerate(text.split("\n"))
            if re.match(r"^[a-z_]+ = ", line) and '"""' not in line]


# TOML values of every type, huge, non-finite and odd strings.
TOML_VALUES = ["true", "1979-05-27", "07:32:00", "nan", "-inf", "inf", "1e400", "9" * 400,
               "-" + "9" * 400, "0", "-1", "0.0", "[]", "[1, 2]", '["a", ["b"]]', "{a = 1}", '""',
               '" X "', '"nan"', '"inf"', '"1e999"', '"4,7k"', '"-5"', '"0"', "'4k7'",
               '"' + "x" * 10000 + '"', '"\\u0000"', '"1' + "0" * 5000 + '"', '"R47"', '"±"']


@FUZZ
@given(st.sampled_from(CASES + [SEMI]), st.data())
def test_wrong_types_in_circuit_files(folder, case, data):
    text = CIRCUIT_BYTES[case].decode("utf-8")
    lines = text.split("\n")
    at = data.draw(st.sampled_from(_single_line_values(text)))
    key = lines[at].split(" = ")[0]
    lines[at] = f"{key} = {data.draw(st.sampled_from(TOML_VALUES))}"
    path = write(folder, "typed.toml", "\n".join(lines).encode("utf-8"))
    loads_or_input_error(load_circuit, path)


@pytest.mark.parametrize("which", ["circuit", "readings"])
def test_truncation_at_every_byte(folder, which):
    # A small circuit and a field case's readings, cut after every byte (a copy
    # interrupted).
    case = "booster_pump_panel"
    data = ((HELD / "pump_sense.toml").read_bytes() if which == "circuit"
            else READINGS_BYTES[case])
    load = (load_circuit if which == "circuit"
            else lambda p: load_readings(p, CIRCUITS[case], METERS))
    loaded = 0
    for n in range(len(data) + 1):
        path = write(folder, f"cut.{'toml' if which == 'circuit' else 'csv'}", data[:n])
        loaded += loads_or_input_error(load, path) is not None
    assert loaded >= 1  # at least the whole file loads


# -- good files load ------------------------------------------------------------------------


def _variant(data: bytes, how: str) -> bytes:
    if how == "bom":
        return b"\xef\xbb\xbf" + data
    if how == "crlf":
        return data.replace(b"\n", b"\r\n")
    if how == "bom+crlf":
        return b"\xef\xbb\xbf" + data.replace(b"\n", b"\r\n")
    return data.replace(b"\n", b"\r")  # "cr": old Mac line ends


@pytest.mark.parametrize("how", ["bom", "crlf", "bom+crlf", "cr"])
@pytest.mark.parametrize("case", CASES)
def test_bom_and_line_ends_load_the_same(folder, case, how):
    circuit = load_circuit(write(folder, "c.toml", _variant(CIRCUIT_BYTES[case], how)))
    original = CIRCUITS[case]
    assert circuit.parts == original.parts
    assert (circuit.title, circuit.ground, circuit.frequency, circuit.notes) == (
        original.title, original.ground, original.frequency, original.notes)
    got = load_readings(write(folder, "r.csv", _variant(READINGS_BYTES[case], how)), original,
                        METERS)
    assert got == load_readings(ROOT / "field_cases" / case / "readings.csv", original, METERS)


def test_the_semiconductor_originals_load():
    # the unmutated semiconductor board and its diode-test rows are good files
    circuit = CIRCUITS[SEMI]
    assert {p.kind for p in circuit.parts} >= {"diode", "led", "zener", "npn", "pnp"}
    got = parse_readings(READINGS_BYTES[SEMI].decode(), "r.csv", circuit, METERS)
    assert [r.quantity for r in got].count("diode-test") == 4


# Labels with the characters CSV quoting exists for (RFC 4180: comma, quote,
# line break), and values written with and without SI prefixes.
LABELS = st.text(st.characters(blacklist_categories=("Cs", "Cc"), blacklist_characters="\ufeff")
                 | st.sampled_from([",", '"', "\n", ";"]), max_size=20)
PREFIX = {"": 1.0, "m": 1e-3, "µ": 1e-6, "k": 1e3}


@FUZZ
@given(st.lists(st.tuples(st.floats(-1e4, 1e4, allow_nan=False), st.sampled_from(sorted(PREFIX)),
                          LABELS, st.booleans()), min_size=1, max_size=30))
def test_good_rows_load_with_their_values(rows):
    """Rows written by the csv module (RFC 4180 quoting) in any case and spacing
    read back with their values: SI Brochure prefixes, m = 1e-3, µ = 1e-6, k = 1e3."""
    buf = io.StringIO()
    out = csv.writer(buf, lineterminator="\r\n")
    out.writerow([" Quantity ", "PLUS", "value", "label"])
    for x, prefix, label, upper in rows:
        out.writerow(["VOLTAGE" if upper else "voltage", "A", f" {x!r} {prefix}V ", label])
    got = parse_readings(buf.getvalue(), "r.csv")
    assert len(got) == len(rows)
    for r, (x, prefix, label, _) in zip(got, rows):
        assert_allclose(r.value, x * PREFIX[prefix], rtol=1e-12, atol=0)
        assert r.label == label.strip()


# -- separators and decimal commas ------------------------------------------------------------


@pytest.mark.parametrize("case", CASES)
def test_semicolon_files_are_refused_saying_so(case):
    text = READINGS_BYTES[case].decode("utf-8").replace(",", ";")
    with pytest.raises(ReadingsError) as info:
        parse_readings(text, "r.csv", CIRCUITS[case], METERS)
    assert info.value.line == 1 and "semicolons" in info.value.message


def _with_decimal_commas(text: str, quoted: bool):
    """The file with every value's decimal point made a comma, the value cell
    quoted (as a spreadsheet would write it) or not; and the first such line."""
    rows = list(csv.reader(io.StringIO(text)))
    at = [c.strip().lower() for c in rows[0]].index("value")
    first = None
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    for line, row in enumerate(rows, 1):
        if line > 1 and re.match(r"^-?\d+\.\d", row[at]):
            row[at] = row[at].replace(".", ",")
            first = first or line
            if not quoted:  # written by hand: no quotes round the value
                cells = [f'"{c}"' if ("," in c or '"' in c) and i != at else c
                         for i, c in enumerate(row)]
                out.write(",".join(cells) + "\n")
                continue
        writer.writerow(row)
    return out.getvalue(), first


@pytest.mark.parametrize("case", [c for c in CASES if _with_decimal_commas(
    READINGS_BYTES[c].decode("utf-8"), True)[1]])
@pytest.mark.parametrize("quoted", [False, True])
def test_decimal_commas_are_refused_saying_so(case, quoted):
    bad, line = _with_decimal_commas(READINGS_BYTES[case].decode("utf-8"), quoted)
    with pytest.raises(ReadingsError) as info:
        parse_readings(bad, "r.csv", CIRCUITS[case], METERS)
    first_problem = info.value.problems[0]
    assert (first_problem.line, first_problem.key) == (line, "value"), str(info.value)
    assert "decimal" in first_problem.message


@pytest.mark.parametrize("case", [c for c in CASES
                                  if re.search(rb'value = "\d+\.\d', CIRCUIT_BYTES[c])])
def test_decimal_comma_in_a_circuit_value_names_the_part(case):
    text = CIRCUIT_BYTES[case].decode("utf-8")
    bad = re.sub(r'(value = "\d+)\.(\d)', r"\1,\2", text, count=1)
    with pytest.raises(CircuitError) as info:
        parse_circuit(bad, "c.toml")
    assert info.value.part is not None and info.value.key == "value"
    assert "decimal point, not a comma" in info.value.message


# -- big files ------------------------------------------------------------------------------


def _ladder(sections: int) -> str:
    """A circuit file of ``2 * sections + 1`` parts: a supply and an R-2R-like ladder."""
    out = ['format = 1', 'title = "Ladder for the reader test"', 'ground = "0V"', '',
           '[[part]]', 'ref = "PS1"', 'kind = "voltage-source"', 'nodes = ["N0", "0V"]',
           'value = "24 V"']
    for i in range(1, sections + 1):
        out += ['', '[[part]]', f'ref = "R{i}"', 'kind = "resistor"',
                f'nodes = ["N{i - 1}", "N{i}"]', 'value = "4k7"', 'tolerance = "1%"',
                '', '[[part]]', f'ref = "RG{i}"', 'kind = "resistor"', f'nodes = ["N{i}", "0V"]',
                'value = "10k"']
    return "\n".join(out) + "\n"


SECTIONS = 10_000


def test_huge_circuit_file_loads_and_its_mistakes_are_placed(folder):
    text = _ladder(SECTIONS)
    circuit = load_circuit(write(folder, "huge.toml", text.encode()))
    assert len(circuit.parts) == 2 * SECTIONS + 1
    assert circuit.part(f"RG{SECTIONS}").line == text.count("\n") - 4
    # a bad value on the very last part: named with its part and line
    bad = text[:text.rindex('value = "10k"')] + 'value = "10q"\n'
    path = write(folder, "huge-bad.toml", bad.encode())
    with pytest.raises(CircuitError) as info:
        load_circuit(path)
    assert (info.value.part, info.value.key) == (f"RG{SECTIONS}", "value")
    # cut in the middle of the last line (a copy interrupted): a TOML syntax error there
    cut = text[:text.rindex('"10k"') + 2]
    with pytest.raises(CircuitError) as info:
        load_circuit(write(folder, "huge-cut.toml", cut.encode()))
    assert info.value.line == cut.count("\n") + 1 and "syntax" in info.value.message


def test_100k_row_readings_file(folder):
    case = "booster_pump_panel"
    body = READINGS_BYTES[case].decode("utf-8").split("\n", 1)[1].splitlines()
    rows = [body[i % len(body)] for i in range(100_000)]
    header = READINGS_BYTES[case].decode("utf-8").split("\n", 1)[0]
    path = write(folder, "big.csv", ("\n".join([header] + rows) + "\n").encode())
    got = load_readings(path, CIRCUITS[case], METERS)
    assert len(got) == 100_000 and got[-1].line == 100_001
    start = 100_000 - len(body)  # the last rows are the case's rows again, in order
    assert [r.raw for r in got[start:]] == [got[(start + j) % len(body)].raw
                                            for j in range(len(body))]
    # in 20,000 of them every 200th row names a node the circuit does not
    # have: all 100 found, the message lists the first 50 and counts the rest
    rows = rows[:20_000]
    for i in range(199, 20_000, 200):
        rows[i] = "voltage,dc,NOWHERE,,,,1 V,"
    path = write(folder, "big-bad.csv", ("\n".join([header] + rows) + "\n").encode())
    with pytest.raises(ReadingsError) as info:
        load_readings(path, CIRCUITS[case], METERS)
    assert [p.line for p in info.value.problems] == list(range(201, 20_002, 200))
    assert info.value.line == 201 and "and 50 more problems" in info.value.message
    assert info.value.message.count("NOWHERE") == 50


# -- what the fuzzing found, one minimal file each ------------------------------------------


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


CIRCUIT_FINDINGS = [
    # tomllib recursed into 2000 nested arrays: RecursionError, exit 1
    ("deep_nesting.toml", 2, None, "nested too deeply"),
    # a 5000-digit integer: ValueError of int() (sys.int_info digit limit), exit 1
    ("long_integer.toml", 23, None, "more than 4,300 digits"),
    # a 401-digit integer value: OverflowError of float(), exit 1
    ("huge_integer_value.toml", 19, "R2", "finite number"),
]


@pytest.mark.parametrize("name, line, part, words", CIRCUIT_FINDINGS,
                         ids=[c[0] for c in CIRCUIT_FINDINGS])
def test_circuit_findings_are_exit_2(capsys, name, line, part, words):
    path = HELD / name
    code, out, err = run(capsys, "check", path)
    assert code == 2 and "internal error" not in err, err
    assert f"{path}:{line}:" in err and words in err, err
    if part:
        assert f"part {part}" in err
    assert len(err) < 400  # the 400-digit number is cut in the message


READINGS_FINDINGS = [
    # 5000 digits then junk: the number pattern backtracked for seconds
    # (quadratic), and the message quoted all 5000 digits
    ("long_number_frequency.csv", 2, "frequency", "5,005 characters"),
    # an unquoted decimal comma with an empty label after it was read as 3 V
    ("decimal_comma_unquoted.csv", 2, "value", "decimal comma"),
    # rows (not the header) separated by semicolons: "unknown quantity"
    ("semicolon_rows.csv", 2, "quantity", "semicolons"),
    # a NUL byte in a cell (binary junk) is named with its line
    ("nul_byte.csv", 3, "value", "cannot read value"),
]


@pytest.mark.parametrize("name, line, key, words", READINGS_FINDINGS,
                         ids=[c[0] for c in READINGS_FINDINGS])
def test_readings_findings_are_exit_2(capsys, name, line, key, words):
    path = HELD / name
    code, out, err = run(capsys, "expect", HELD / "pump_sense.toml", "--at", path)
    assert code == 2 and "internal error" not in err, err
    assert f"{path}:{line}: key '{key}'" in err and words in err, err
    assert len(err) < 600


def test_decimal_comma_was_silently_misread_before():
    # the row's cells: value '3', label '83', one empty cell past the header
    with pytest.raises(ReadingsError, match="write 3.83 with a decimal point"):
        parse_readings((HELD / "decimal_comma_unquoted.csv").read_text())
    # a label of digits after a whole-number value, with the row as wide as the
    # header, is not a decimal comma
    got = parse_readings("quantity,plus,value,label\nvoltage,A,3,83\n")
    assert (got[0].value, got[0].label) == (3.0, "83")
    # nor is it with the trailing empty columns a spreadsheet may export in
    # the header and every row alike
    got = parse_readings("quantity,plus,value,label,,\nvoltage,A,3,83,,\n")
    assert (got[0].value, got[0].label) == (3.0, "83")


@pytest.mark.parametrize("name", ["lone_cr_lines.toml", "lone_cr_lines.csv"])
def test_lone_cr_line_ends_load(name):
    # Found: a CSV with CR-only line ends gave "new-line character seen in
    # unquoted field" with no line; the circuit file a TOML syntax error.
    base = load_circuit(HELD / "pump_sense.toml")
    if name.endswith(".toml"):
        assert load_circuit(HELD / name).parts == base.parts
    else:
        got = load_readings(HELD / name, base, METERS)
        assert [(r.plus, r.value, r.label, r.line) for r in got] == [
            ("A", 3.83, "TP1", 2), ("B", 1.22, "TP2", 3)]


def test_cell_over_the_csv_field_limit_names_its_line(folder):
    # Found: "field larger than field limit (131072)" without a line.
    path = write(folder, "long-cell.csv",
                 b"quantity,plus,value,label\nvoltage,A,3.83,TP1\nvoltage,B,1.22,"
                 + b"x" * 200_000 + b"\n")
    with pytest.raises(ReadingsError) as info:
        load_readings(path)
    assert info.value.line == 3 and "longer than" in info.value.message


def test_long_column_name_is_cut_in_the_message(folder):
    # Found: a 100,000-character unknown column was quoted whole (twice), and
    # its "did you mean" took difflib's quadratic time.
    path = write(folder, "long-column.csv", b"quantity,plus,value," + b"q" * 100_000
                 + b"\nvoltage,A,3.83,x\n")
    with pytest.raises(ReadingsError) as info:
        load_readings(path)
    assert info.value.line == 1 and len(str(info.value)) < 600
    assert "100,000 characters" in str(info.value)


# -- meter profile files (the third reader; same TOML findings) ----------------------------


METERS_TEXT = b"""[meter.bench]
counts = 60000
input_resistance = "10M"
current_shunt = "0.1"
dc_voltage = "0.05% + 2"
resistance = "0.1% + 3"
max_resistance = "60M"
resistance_resolution = "0.01"
"""


@FUZZ
@given(mutated({"bench": METERS_TEXT}))
def test_mutated_meter_files(folder, example):
    _, data = example
    path = write(folder, "meters.toml", data)
    profiles = loads_or_input_error(load_meters, path)
    if profiles is not None:
        assert all(p.counts >= 1 for p in profiles.values())


METER_FINDINGS = [
    # RecursionError and OverflowError (exit 1) before
    ("meters_deep_nesting.toml", 3, "nested too deeply"),
    ("meters_huge_integer.toml", 2, "input_resistance"),
]


@pytest.mark.parametrize("name, line, words", METER_FINDINGS, ids=[c[0] for c in METER_FINDINGS])
def test_meter_file_findings_are_exit_2(capsys, name, line, words):
    path = HELD / name
    code, out, err = run(capsys, "expect", HELD / "pump_sense.toml", "--meters", path)
    assert code == 2 and "internal error" not in err, err
    assert f"{path}:{line}:" in err and words in err and len(err) < 400, err


def test_meter_file_with_bom_and_cr_line_ends_loads():
    # Found: a byte-order mark gave "TOML syntax error: Invalid statement".
    bench = load_meters(HELD / "meters_bom_cr.toml")["bench"]
    assert (bench.counts, bench.resistance.percent, bench.resistance.counts) == (60000, 0.1, 3.0)


# -- through the real command line ----------------------------------------------------------


CLI_CASES = [
    ("check", [HELD / "deep_nesting.toml"], "deep_nesting.toml:2:"),
    ("diagnose", [HELD / "pump_sense.toml", HELD / "long_number_frequency.csv"],
     "long_number_frequency.csv:2:"),
]


@pytest.mark.parametrize("command, files, where", CLI_CASES, ids=[c[0] for c in CLI_CASES])
def test_fuzzed_files_through_python_m_faultfind(command, files, where):
    env = {k: v for k, v in os.environ.items() if k != "FAULTFIND_DEBUG"}
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    proc = subprocess.run([sys.executable, "-m", "faultfind", command, *map(str, files)],
                          capture_output=True, text=True, env=env, timeout=300)
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr and "internal error" not in proc.stderr
    assert where in proc.stderr and proc.stdout == ""


def test_a_mutated_file_through_python_m_faultfind(folder):
    # a field case's readings with junk bytes and a stray quote: exit 2, no traceback
    data = READINGS_BYTES["booster_pump_panel"]
    data = data[:200] + b'\xff\xfe"' + data[200:]
    path = write(folder, "junk.csv", data)
    env = {k: v for k, v in os.environ.items() if k != "FAULTFIND_DEBUG"}
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    proc = subprocess.run([sys.executable, "-m", "faultfind", "diagnose",
                           str(ROOT / "field_cases" / "booster_pump_panel" / "circuit.toml"),
                           str(path)], capture_output=True, text=True, env=env, timeout=300)
    assert proc.returncode == 2 and "Traceback" not in proc.stderr, proc.stderr
    assert f"{path}:" in proc.stderr and "UTF-8" in proc.stderr
