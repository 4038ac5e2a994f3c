"""Tests of faultfind.io.readings_file: readings files (CSV) in and out."""

import dataclasses
import io

import pytest

from faultfind.errors import InputError, ReadingsError
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.io.readings_file import (
    COLUMNS,
    load_readings,
    parse_readings,
    reading_to_row,
    readings_to_frame,
    write_readings,
)
from faultfind.model import Circuit, Part, Reading

# The example of formats.md section 2, verbatim.
FORMATS_EXAMPLE = """\
quantity,mode,plus,minus,part,setup,value,label
voltage,dc,A,,,,11.91,TP1
voltage,dc,HTR,0V,,,0.02,TP4
current,dc,,,R1,,2.45 mA,
resistance,,,,F1,,OL,fuse check
resistance,,,,R2,lifted,4.69k,
"""

# The circuit of formats.md section 1 (the defrost sense board), built directly.
DEFROST = Circuit(
    title="Walk-in cooler 3: defrost sense board",
    ground="0V",
    parts=(
        Part("PS1", "voltage-source", ("+24V", "0V"), 24.0, 0.03, 0.03),
        Part("R1", "resistor", ("+24V", "A"), 4700.0, 0.01, 0.01),
        Part("R2", "resistor", ("A", "0V"), 4700.0, 0.01, 0.01),
        Part("F1", "fuse", ("+24V", "HTR"), 0.02, 0.5, 0.5),
        Part("RH1", "resistor", ("HTR", "0V"), 12.0, 0.1, 0.1),
        Part("C3", "capacitor", ("A", "0V"), 100e-9, 0.2, 0.2),
    ),
)

# An invented irrigation valve driver: 24 V supply, fuse, series resistor, the
# valve coil, a divider to a comparator opamp.
VALVE = Circuit(
    title="Greenhouse bay 2 irrigation valve driver",
    ground="GND",
    parts=(
        Part("PS1", "voltage-source", ("V24", "GND"), 24.0, 0.05, 0.05),
        Part("F1", "fuse", ("V24", "VF"), 0.02, 0.5, 0.5),
        Part("R1", "resistor", ("VF", "COIL"), 22.0, 0.05, 0.05),
        Part("L1", "inductor", ("COIL", "GND"), 0.1, 0.2, 0.2, resistance=30.0),
        Part("R2", "resistor", ("COIL", "SENSE"), 10e3, 0.01, 0.01),
        Part("R3", "resistor", ("SENSE", "GND"), 2.2e3, 0.01, 0.01),
        Part("U1", "opamp", ("SENSE", "REF", "OUT")),
        Part("R4", "resistor", ("REF", "GND"), 1e3, 0.01, 0.01),
    ),
)

# An invented AC circuit: a 24 VAC transformer secondary feeding a lamp.
LAMP = Circuit(
    title="Porch lamp transformer",
    ground="N",
    frequency=60.0,
    parts=(
        Part("T1", "voltage-source", ("L", "N"), 24.0, 0.05, 0.05, waveform="ac"),
        Part("RL", "resistor", ("L", "N"), 48.0, 0.1, 0.1),
    ),
)

HEADER = "quantity,mode,plus,minus,part,setup,value,frequency,meter,label\n"


def bad(text, *, circuit=None, meters=None, require_values=True, source="r.csv"):
    """The ReadingsError parsing ``text`` raises."""
    with pytest.raises(ReadingsError) as info:
        parse_readings(text, source, circuit, meters, require_values=require_values)
    return info.value


# -- formats.md example ------------------------------------------------------------------


def test_formats_example_exact_values():
    # formats.md section 2: the example file; values with SI prefixes m and k
    # (SI Brochure, 9th ed., table 7: milli 1e-3, kilo 1e3); OL is an over-range
    # display, a bound and not a number (formats.md section 2).
    got = parse_readings(FORMATS_EXAMPLE, "example.csv")
    assert got == [
        Reading("voltage", "dc", plus="A", value=11.91, raw="11.91", label="TP1", line=2),
        Reading("voltage", "dc", plus="HTR", minus="0V", value=0.02, raw="0.02", label="TP4",
                line=3),
        Reading("current", "dc", part="R1", value=0.00245, raw="2.45 mA", line=4),
        Reading("resistance", None, part="F1", setup="in-circuit", value=None, overrange=1,
                raw="OL", label="fuse check", line=5),
        Reading("resistance", None, part="R2", setup="lifted", value=4690.0, raw="4.69k",
                line=6),
    ]


def test_formats_example_with_its_circuit_defaults_minus_to_ground():
    # formats.md section 2: "minus defaults to ground"; section 1: ground = "0V"
    got = parse_readings(FORMATS_EXAMPLE, "example.csv", DEFROST)
    assert [r.minus for r in got] == ["0V", "0V", None, None, None]
    assert [r.plus for r in got] == ["A", "HTR", None, None, None]


# -- the table: header, blank lines, BOM, quoting ------------------------------------------


def test_bom_case_insensitive_headers_spaces_and_blank_lines(tmp_path):
    # Unicode Standard ch. 23.8: U+FEFF at the start of a UTF-8 file is a
    # byte-order mark, not text (from memory); formats.md section 2: column
    # names are case-insensitive.
    text = (" QUANTITY , Plus ,Value ,LABEL\r\n"
            "\r\n"
            "Voltage,A  ,  11.91 V  ,TP1   \r\n"
            "  ,  ,  ,  \r\n"
            ",,,\r\n"
            "voltage,B,-0.5,\r\n")
    path = tmp_path / "bom.csv"
    path.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    got = load_readings(path)
    # RFC 4180 section 2: CRLF ends a record; blank lines still count as lines
    assert [(r.line, r.plus, r.value, r.label) for r in got] == [
        (3, "A", 11.91, "TP1"), (6, "B", -0.5, "")]
    assert got[0].quantity == "voltage" and got[0].raw == "11.91 V"


def test_na_like_cells_stay_text():
    # pandas.read_csv docs: "NA", "N/A", "null" and "" are NaN by default; a
    # node may be called NA and the value 0 must stay the text written.
    got = parse_readings("quantity,plus,minus,value,label\nvoltage,NA,null,0,N/A\n")
    assert (got[0].plus, got[0].minus, got[0].raw, got[0].value, got[0].label) == (
        "NA", "null", "0", 0.0, "N/A")


def test_quoted_label_with_line_break_shifts_line_numbers():
    # RFC 4180 section 2 rule 6: a quoted field may hold line breaks, commas
    # and doubled quotes.
    text = ('quantity,plus,value,label\n'
            'voltage,A,1,"TP1, near ""K1""\nsecond line"\n'
            'voltage,A,x,\n')
    err = bad(text)
    assert err.line == 4 and "r.csv:4" in str(err)
    got = parse_readings(text.replace(",x,", ",2,"))
    assert got[0].label == 'TP1, near "K1"\nsecond line' and got[1].line == 4


def test_header_only_gives_no_readings():
    # formats.md section 2: a header row is required; none of the rows are
    assert parse_readings("quantity,value\n") == []


def test_missing_file(tmp_path):
    with pytest.raises(ReadingsError) as info:
        load_readings(tmp_path / "nope.csv")
    assert info.value.file == str(tmp_path / "nope.csv") and "no such" in str(info.value)


def test_directory_is_not_a_file(tmp_path):
    with pytest.raises(ReadingsError, match="directory"):
        load_readings(tmp_path)


def test_not_utf8_names_the_line(tmp_path):
    # RFC 3629: 0xB5 alone (Latin-1 micro sign) is not valid UTF-8
    path = tmp_path / "latin1.csv"
    path.write_bytes(b"quantity,value\nvoltage,1\ncurrent,2 \xb5A\n")
    with pytest.raises(ReadingsError) as info:
        load_readings(path)
    assert info.value.line == 3 and "UTF-8" in str(info.value)


@pytest.mark.parametrize("text", ["", "\n\n  \n", ",,,\n"])
def test_empty_file(text):
    err = bad(text)
    assert err.file == "r.csv" and err.line == 1
    assert "empty" in str(err) or "no header" in str(err)


@pytest.mark.parametrize("header, key, words", [
    ("quantity,vlaue\n", "vlaue", "did you mean 'value'"),
    ("quantity,value,probe\n", "probe", "columns are quantity, mode"),
    ("mode,value\n", "quantity", "no 'quantity' column"),
    ("quantity,Value,value\n", "value", "more than once"),
])
def test_header_problems(header, key, words):
    err = bad(header + "voltage,1\n")
    assert (err.file, err.line, err.key) == ("r.csv", 1, key)
    assert words in str(err) and str(err).startswith("r.csv:1:")


def test_no_header_row():
    # formats.md section 2: "A header row is required"
    err = bad("voltage,dc,A,,,,11.91,TP1\n")
    assert err.line == 1 and "no header" in str(err)


def test_semicolon_separated_file_is_explained():
    # RFC 4180 section 2: fields are separated by commas
    err = bad("quantity;plus;value\nvoltage;A;1\n")
    assert err.line == 1 and "semicolons" in str(err)


@pytest.mark.parametrize("text, line", [
    ('quantity,plus,value,label\nvoltage,A,1,ok\nvoltage,A,2,"TP2\nvoltage,A,3,\n', 3),
    # the doubled quote "" inside a quoted field does not close it
    ('quantity,plus,value,label\nvoltage,A,1,"a ""b"" c"\nvoltage,A,2,"TP2 ""x""\n', 3),
])
def test_unclosed_quote_names_its_line(text, line):
    # RFC 4180 section 2 rules 5 and 7: a field that opens with a quote ends
    # with one; a quote inside it is doubled
    err = bad(text)
    assert err.line == line and "never closed" in str(err)


@pytest.mark.parametrize("text", ["quantity,plus,value\nvoltage,A,1,stray\n",
                                  "quantity,,plus,value\nvoltage,stray,A,1\n"])
def test_cells_in_columns_without_a_name(text):
    err = bad(text)
    assert err.line == 2 and "'stray'" in str(err) and "does not name" in str(err)


# -- row problems --------------------------------------------------------------------------


@pytest.mark.parametrize("row, key, words", [
    # formats.md section 2 column table, one rule a case
    (",dc,A,,,,1,,,", "quantity", "no quantity"),
    ("voltag,dc,A,,,,1,,,", "quantity", "did you mean 'voltage'"),
    ("voltage,dv,A,,,,1,,,", "mode", "write dc or ac"),
    ("resistance,dc,,,R1,,1k,,,", "mode", "leave mode empty"),
    ("voltage,dc,A,,,lifted,1,,,", "setup", "resistance readings only"),
    ("current,dc,,,R1,in-circuit,1m,,,", "setup", "resistance readings only"),
    ("resistance,,,,R1,lifed,1k,,,", "setup", "did you mean 'lifted'"),
    ("voltage,dc,A,,,,eleven,,,", "value", "cannot read"),
    ("voltage,dc,A,,,,4,7,,", "frequency", "AC readings only"),
    # units must fit the quantity (formats.md: V for voltage, A current, Ω resistance)
    ("voltage,dc,A,,,,2.45 mA,,,", "value", "expected V"),
    ("current,dc,,,R1,,2.45 mV,,,", "value", "expected A"),
    ("resistance,,,,R1,,4.7 V,,,", "value", "expected Ω"),
    ("voltage,dc,A,,,,1,60 Hz,,", "frequency", "AC readings only"),
    ("resistance,,,,R1,,1k,60,,", "frequency", "AC readings only"),
    ("voltage,ac,A,,,,1,0,,", "frequency", "above 0 Hz"),
    ("voltage,ac,A,,,,1,-60,,", "frequency", "above 0 Hz"),
    ("voltage,ac,A,,,,1,60 V,,", "frequency", "expected Hz"),
    ("voltage,dc,,B,,,1,,,", "plus", "needs plus"),
    ("voltage,dc,A,,R1,,1,,,", "part", "not a part"),
    ("current,dc,,,,,1m,,,", "part", "needs part"),
    ("current,dc,A,,R1,,1m,,,", "plus", "in series"),
    ("resistance,,,,,,1k,,,", "part", "needs part"),
    ("resistance,,A,,R1,,1k,,,", "part", "not both"),
    ("resistance,,,B,R1,,1k,,,", "minus", "only part"),
    ("voltage,dc,A,A,,,0,,,", "minus", "same node"),
    ("voltage,dc,A,,,,,,,", "value", "no value: write the meter's display or OL"),
    # an ohmmeter never reads below zero: a negative display means the
    # circuit is live or a capacitor charged (common practice, no source)
    ("resistance,,,,R1,,-12,,,", "value", "still powered"),
    ("resistance,,,,R1,,-OL,,,", "value", "still powered"),
    # an RMS value is a square root, never negative (definition of RMS)
    ("voltage,ac,A,,,,-3,,,", "value", "RMS"),
    ("voltage,ac,A,,,,-OL,,,", "value", "RMS"),
])
def test_row_problem(row, key, words):
    err = bad(HEADER + "voltage,dc,A,,,,1,,,TP1\n" + row + "\n")
    assert isinstance(err, InputError) and isinstance(err, ValueError)
    assert (err.file, err.line, err.key) == ("r.csv", 3, key)
    assert str(err).startswith("r.csv:3:") and words in str(err)


def test_empty_value_allowed_when_not_required():
    got = parse_readings(HEADER + "voltage,dc,A,,,,,,,\n", require_values=False)
    assert (got[0].value, got[0].overrange, got[0].raw) == (None, 0, "")


@pytest.mark.parametrize("raw, sign", [("OL", 1), ("ol", 1), ("O.L", 1), ("O.L.", 1),
                                       ("-OL", -1), ("+OL", 1)])
@pytest.mark.parametrize("quantity, probes", [("voltage", "dc,A,,"), ("current", "dc,,,R1")])
def test_overrange_on_voltage_and_current_is_accepted(raw, sign, quantity, probes):
    # A meter shows OL (O.L on some) when the input exceeds its range, on any
    # function; -OL below the negative end (common practice, no source).
    got = parse_readings(f"{HEADER}{quantity},{probes},,{raw},,,\n")[0]
    assert (got.value, got.overrange, got.raw) == (None, sign, raw)


def test_rkm_and_prefixed_values():
    # IEC 60062 RKM code: 4k61 = 4.61 kΩ; SI Brochure table 7: µ = 1e-6, M = 1e6
    got = parse_readings(HEADER + "resistance,,,,R1,,4k61,,,\n"
                         "current,dc,,,R1,,12 µA,,,\nresistance,,A,B,,,2.2M,,,\n")
    assert [r.value for r in got] == [4610.0, 12e-6, 2.2e6]


def test_all_bad_rows_reported_together():
    text = (HEADER
            + "voltage,dc,A,,,,1,,,\n"         # 2 good
            + "voltage,dc,A,,,,,,,\n"          # 3 no value
            + "voltage,dc,A,,,,2,,,\n"         # 4 good
            + "current,dc,,,,,x,,,\n"          # 5 no part, bad value
            + "\n"                             # 6 blank
            + "resistance,dc,,,R1,,1k,,,\n")   # 7 mode on resistance
    err = bad(text)
    assert err.line == 3 and str(err).startswith("r.csv:3:")
    assert [(e.line, e.key) for e in err.problems] == [
        (3, "value"), (5, "part"), (5, "value"), (7, "mode")]
    for line in (3, 5, 7):
        assert f"line {line} (" in str(err)
    assert "line 2" not in str(err) and "line 4" not in str(err)
    assert all(isinstance(e, ReadingsError) and e.file == "r.csv" for e in err.problems)


def test_single_problem_keeps_its_column():
    err = bad(HEADER + "voltage,dc,A,,,,,,,\n")
    assert err.key == "value" and len(err.problems) == 1


# -- against a circuit -------------------------------------------------------------------


def test_circuit_defaults_and_good_rows():
    text = (HEADER
            + "voltage,dc,SENSE,,,,3.9,,,TP3\n"
            + "voltage,dc,V24,COIL,,,14,,,\n"
            + "current,dc,,,L1,,0.45,,,\n"
            + "resistance,,,,R2,,10k,,,\n"
            + "resistance,,VF,,,,52,,,\n")
    got = parse_readings(text, "valve.csv", VALVE)
    # formats.md section 2: minus defaults to the circuit's ground
    assert [(r.plus, r.minus, r.part) for r in got] == [
        ("SENSE", "GND", None), ("V24", "COIL", None), (None, None, "L1"),
        (None, None, "R2"), ("VF", "GND", None)]


@pytest.mark.parametrize("row, key, words", [
    ("voltage,dc,sense,,,,1,,,", "plus", "did you mean 'SENSE'"),
    ("voltage,dc,SENSE,GDN,,,1,,,", "minus", "did you mean 'GND'"),
    ("voltage,dc,XYZZY,,,,1,,,", "plus", "nodes are GND, V24, VF, COIL, SENSE, REF, OUT"),
    ("current,dc,,,R9,,1m,,,", "part", "parts are PS1, F1, R1"),
    ("current,dc,,,U1,,1m,,,", "part", "two-terminal"),
    ("resistance,,,,U1,,1k,,,", "part", "two-terminal"),
    ("voltage,dc,GND,,,,0,,,", "plus", "ground"),
    ("voltage,ac,COIL,,,,1,,,", "mode", "no AC source"),
])
def test_circuit_problems(row, key, words):
    err = bad(HEADER + row + "\n", circuit=VALVE)
    assert (err.line, err.key) == (2, key) and words in str(err)


def test_ac_reading_on_ac_circuit_keeps_frequency_unset():
    got = parse_readings(HEADER + "voltage,ac,L,,,,23.6,,,\nvoltage,ac,L,,,,23.1,1.5 kHz,,\n",
                         circuit=LAMP)
    # formats.md section 2: empty frequency = the circuit's (left None here)
    assert [(r.minus, r.frequency) for r in got] == [("N", None), ("N", 1500.0)]


# -- meters --------------------------------------------------------------------------------


def test_meter_names():
    bench = dataclasses.replace(DEFAULT_METER, name="bench", counts=60000)
    meters = {"bench": bench}
    got = parse_readings(HEADER + "voltage,dc,A,,,,1,,bench,\nvoltage,dc,A,,,,1,,default,\n"
                         "voltage,dc,A,,,,1,,,\n", meters=meters)
    assert [r.meter for r in got] == ["bench", None, None]
    err = bad(HEADER + "voltage,dc,A,,,,1,,bnech,\n", meters=meters)
    assert (err.line, err.key) == (2, "meter") and "did you mean 'bench'" in str(err)
    # without profiles any name is kept, for a later check
    assert parse_readings(HEADER + "voltage,dc,A,,,,1,,fluke-ish,\n")[0].meter == "fluke-ish"


# -- writing -------------------------------------------------------------------------------


ROUND_TRIP = (HEADER
              + 'voltage,dc,A,,,,11.91 V,,,"TP1, by ""K2"""\n'
              + "voltage,ac,L,,,,OL,1.5 kHz,bench,\n"
              + "voltage,dc,B,C,,,-OL,,,\n"
              + "current,ac,,,R1,,2.45 mA,,,\n"
              + "resistance,,,,R2,lifted,4k7,,,\n"
              + "resistance,,NA,0,,,,,,planned\n")


def test_round_trip_through_a_file(tmp_path):
    first = parse_readings(ROUND_TRIP, require_values=False)
    path = tmp_path / "out.csv"
    write_readings(first, path)
    again = load_readings(path, require_values=False)
    strip = lambda rs: [dataclasses.replace(r, line=None) for r in rs]  # noqa: E731
    assert strip(again) == strip(first)
    # RFC 4180 section 2 rule 7: a quote inside a quoted field is doubled
    assert '"TP1, by ""K2"""' in path.read_text(encoding="utf-8")


def test_round_trip_of_numbers_without_raw():
    # IEEE 754 binary64: 0.1 + 0.2 is 0.30000000000000004, not 0.3; writing
    # the shortest exact decimal must give back the same double.
    made = [Reading("voltage", "dc", plus="A", minus="0V", value=0.1 + 0.2),
            Reading("current", "dc", part="R1", value=1e-7),
            Reading("voltage", "ac", plus="A", minus="0V", value=1.0, frequency=1.0 / 3.0),
            Reading("resistance", None, part="F1", setup="in-circuit", overrange=1)]
    buf = io.StringIO()
    write_readings(made, buf)
    back = parse_readings(buf.getvalue())
    assert [r.value for r in back] == [0.1 + 0.2, 1e-7, 1.0, None]
    assert back[2].frequency == 1.0 / 3.0 and back[3].overrange == 1
    assert "e-" not in buf.getvalue()


def test_frame_columns_and_cells():
    frame = readings_to_frame(parse_readings(FORMATS_EXAMPLE))
    # formats.md section 2 example header, in order
    assert list(frame.columns) == ["quantity", "mode", "plus", "minus", "part", "setup",
                                   "value", "label"]
    assert frame["value"].tolist() == ["11.91", "0.02", "2.45 mA", "OL", "4.69k"]
    assert frame["mode"].tolist() == ["dc", "dc", "dc", "", ""]
    full = readings_to_frame(parse_readings(ROUND_TRIP, require_values=False))
    assert list(full.columns) == list(COLUMNS)


def test_reading_to_row_matches_cli_json_keys():
    # cli.md `expect --json`: quantity, mode, plus, minus, part, setup,
    # frequency, unit describe a reading
    got = [reading_to_row(r) for r in parse_readings(FORMATS_EXAMPLE, circuit=DEFROST)]
    assert got[0] == {"quantity": "voltage", "mode": "dc", "plus": "A", "minus": "0V",
                      "part": None, "setup": None, "frequency": None, "unit": "V"}
    assert [r["unit"] for r in got] == ["V", "V", "A", "Ω", "Ω"]
    assert got[3]["mode"] is None and got[3]["setup"] == "in-circuit"
    # a Reading built with the dataclass default mode still reports none for ohms
    assert reading_to_row(Reading("resistance", part="R1"))["mode"] is None


def test_argument_types_are_checked():
    with pytest.raises(TypeError, match="circuit"):
        parse_readings(HEADER, circuit="valve.toml")
    with pytest.raises(TypeError, match="readings"):
        write_readings([{"quantity": "voltage"}], io.StringIO())
    with pytest.raises(TypeError, match="path"):
        load_readings(3)
