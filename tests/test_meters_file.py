"""Tests of faultfind.io.meters_file: the default profile and meter profile files."""

import dataclasses

import pytest

from faultfind.errors import InputError, MeterError
from faultfind.io.meters_file import (
    DEFAULT_METER,
    METER_KEYS,
    load_meters,
    meters_with_default,
    parse_meters,
)
from faultfind.model import Accuracy, MeterProfile

# The example of formats.md section 3, verbatim.
FORMATS_EXAMPLE = '''\
[meter.bench]
counts = 60000
input_resistance = "10M"      # across the probes on voltage ranges
current_shunt = "0.1"         # ohms inserted in series when reading current
dc_voltage = "0.05% + 2"      # ±(% of reading + counts)
ac_voltage = "0.5% + 5"
dc_current = "0.2% + 5"
ac_current = "0.8% + 5"
resistance = "0.1% + 3"
max_resistance = "60M"        # top resistance range; above it the display shows OL
voltage_resolution = "10u"    # finest display step on the lowest range
current_resolution = "0.01u"
resistance_resolution = "0.01"
'''


def test_formats_example_exact_values():
    # formats.md section 3: every key of the example, SI prefixes M, u (for µ)
    got = parse_meters(FORMATS_EXAMPLE, "bench.toml")
    assert list(got) == ["bench"]
    b = got["bench"]
    assert b == MeterProfile(
        name="bench", counts=60000, input_resistance=10e6, current_shunt=0.1,
        dc_voltage=Accuracy(0.05, 2), ac_voltage=Accuracy(0.5, 5),
        dc_current=Accuracy(0.2, 5), ac_current=Accuracy(0.8, 5),
        resistance=Accuracy(0.1, 3), max_resistance=60e6,
        voltage_resolution=10e-6, current_resolution=0.01e-6, resistance_resolution=0.01,
    )
    assert isinstance(b.counts, int)
    assert b.voltage_resolution == pytest.approx(1e-5, rel=1e-15)
    assert b.current_resolution == pytest.approx(1e-8, rel=1e-15)
    assert set(METER_KEYS) == {f.name for f in dataclasses.fields(MeterProfile)} - {"name"}


def test_default_meter_figures():
    # Typical published specifications of 6000-count handheld DMMs (from
    # memory): 10 MΩ input on voltage, ±(0.5 % + 2) DC volts, 60 MΩ top range.
    d = DEFAULT_METER
    assert d.name == "default"
    assert d.counts == 6000
    assert d.input_resistance == 10e6
    assert d.current_shunt == 1.0
    assert d.dc_voltage == Accuracy(0.5, 2) and d.ac_voltage == Accuracy(1.0, 3)
    assert d.dc_current == Accuracy(1.0, 3) and d.ac_current == Accuracy(1.5, 3)
    assert d.resistance == Accuracy(0.5, 2)
    assert d.max_resistance == 60e6
    assert d.voltage_resolution == pytest.approx(1e-4)
    assert d.current_resolution == pytest.approx(1e-7)
    assert d.resistance_resolution == pytest.approx(0.1)
    # 6000 counts at 0.1 mV is a 600.0 mV lowest range (from memory)
    assert d.counts * d.voltage_resolution == pytest.approx(0.6)


def test_missing_keys_take_default():
    # formats.md section 3: "A key left out of a profile takes the default
    # profile's value."
    text = '[meter.clamp]\ncounts = 4000\nac_current = "2% + 5"\n'
    got = parse_meters(text)["clamp"]
    assert got.counts == 4000 and got.ac_current == Accuracy(2.0, 5)
    expected = dataclasses.replace(DEFAULT_METER, name="clamp", counts=4000,
                                   ac_current=Accuracy(2.0, 5))
    assert got == expected
    # an empty table is the default under another name
    assert parse_meters("[meter.spare]\n")["spare"] == dataclasses.replace(
        DEFAULT_METER, name="spare")


def test_missing_keys_take_builtin_default_even_with_file_default():
    # Our documented choice (docs/meter-model.md): gaps are filled from the
    # built-in default, whatever the file's own "default" says.
    text = '[meter.default]\ncounts = 2000\n[meter.other]\ncurrent_shunt = "0.5"\n'
    got = parse_meters(text)
    assert got["default"].counts == 2000
    assert got["other"].counts == DEFAULT_METER.counts


def test_value_forms():
    # numbers, prefixed strings and strings with the unit symbol all read
    text = '''[meter.a]
counts = 20000
input_resistance = 1e7
current_shunt = "100 mΩ"
max_resistance = "40 MΩ"
voltage_resolution = "0.1 mV"
current_resolution = "1 nA"
resistance_resolution = 0.1
'''
    a = parse_meters(text)["a"]
    assert a.input_resistance == 1e7
    assert a.current_shunt == pytest.approx(0.1)
    assert a.max_resistance == pytest.approx(40e6)
    assert a.voltage_resolution == pytest.approx(1e-4)
    assert a.current_resolution == pytest.approx(1e-9)
    assert a.resistance_resolution == 0.1


def test_toml_dotted_keys_and_several_meters():
    # TOML v1.0.0 (toml.io, "Keys"/"Table"): dotted keys define the same table
    # as a [meter.x] header.  File order is kept (TOML tables are ordered as
    # written by tomllib; Python dicts keep insertion order).
    text = 'meter.x.counts = 2000\n\n[meter.y]\ncounts = 4000\n[meter."field kit"]\ncounts = 6000\n'
    got = parse_meters(text)
    assert list(got) == ["x", "y", "field kit"]
    assert [p.counts for p in got.values()] == [2000, 4000, 6000]
    assert got["field kit"].name == "field kit"
    assert parse_meters("") == {}
    assert parse_meters("# nothing but a comment\n") == {}


def test_meters_with_default():
    # formats.md section 3: a built-in default profile always exists
    assert meters_with_default(None) == {"default": DEFAULT_METER}
    assert meters_with_default({}) == {"default": DEFAULT_METER}
    mine = parse_meters(FORMATS_EXAMPLE)
    merged = meters_with_default(mine)
    assert merged["default"] is DEFAULT_METER and merged["bench"] == mine["bench"]
    assert "default" not in mine                      # the argument is not changed
    own = parse_meters('[meter.default]\ncounts = 4000\n')
    assert meters_with_default(own)["default"].counts == 4000   # the file's wins
    for bad in (["default"], {"a": 3}, {1: DEFAULT_METER}):
        with pytest.raises(InputError) as info:
            meters_with_default(bad)
        assert info.value.key == "profiles"


def test_load_meters(tmp_path):
    path = tmp_path / "meters.toml"
    path.write_text(FORMATS_EXAMPLE, encoding="utf-8")
    assert load_meters(path) == parse_meters(FORMATS_EXAMPLE)
    assert load_meters(str(path))["bench"].counts == 60000


def test_load_meters_file_errors(tmp_path):
    missing = tmp_path / "nope.toml"
    with pytest.raises(MeterError) as info:
        load_meters(missing)
    assert info.value.file == str(missing) and "cannot read" in str(info.value)
    latin = tmp_path / "latin.toml"
    latin.write_bytes('[meter.a]\n# Ohm sign \u2126 in Latin-1: \xb5\n'.encode("latin-1", "replace"))
    with pytest.raises(MeterError) as info:
        load_meters(latin)
    assert info.value.file == str(latin) and "UTF-8" in str(info.value)
    bad = tmp_path / "bad.toml"
    bad.write_text("[meter.a]\ncounts = 0\n", encoding="utf-8")
    with pytest.raises(MeterError) as info:
        load_meters(bad)
    assert info.value.file == str(bad) and info.value.line == 2
    with pytest.raises(MeterError):
        load_meters(42)


# Each bad file: (text, line, part, key, words in the message).  Project rule:
# MeterError names the file, the meter (as part) and the key.
BAD = [
    # TOML v1.0.0: a key needs a value; tomllib reports the line
    ("[meter.a]\ncounts = 6000\ndc_voltage = = 2\n", 3, None, None, "TOML syntax"),
    ("[meter.a]\ncounts = 6000\n[meter.a]\n", 3, None, None, "TOML syntax"),  # table twice
    ("\ncolour = 'red'\n[meter.a]\n", 2, None, "colour", "unknown top-level key"),
    ("meter = 3\n", 1, None, "meter", "[meter.NAME]"),
    ("meter.a = 3\n", 1, "a", None, "must be a table"),
    ("[[meter.a]]\ncounts = 1\n", 1, "a", None, "must be a table"),
    ("[meter.\"\"]\ncounts = 1\n", 1, None, "meter", "empty"),
    ("[meter.a]\n\ncount = 6000\n", 3, "a", "count", "unknown meter key"),
    ("[meter.a]\n[meter.a.extra]\nx = 1\n", 2, "a", "extra", "unknown meter key"),
    ("[meter.a]\ncounts = 0\n", 2, "a", "counts", "positive integer"),
    ("[meter.a]\ncounts = -6000\n", 2, "a", "counts", "positive integer"),
    ("[meter.a]\ncounts = 6000.5\n", 2, "a", "counts", "positive integer"),
    ("[meter.a]\ncounts = true\n", 2, "a", "counts", "positive integer"),
    ("[meter.a]\ncounts = 'many'\n", 2, "a", "counts", "many"),
    ("[meter.a]\ncounts = [6000]\n", 2, "a", "counts", "positive integer"),
    ("[meter.a]\ninput_resistance = 0\n", 2, "a", "input_resistance", "positive"),
    ("[meter.a]\ninput_resistance = '-10M'\n", 2, "a", "input_resistance", "positive"),
    ("[meter.a]\ninput_resistance = '10 MV'\n", 2, "a", "input_resistance", "unit"),
    ("[meter.a]\ninput_resistance = inf\n", 2, "a", "input_resistance", "finite"),
    ("[meter.a]\ncurrent_shunt = '0'\n", 2, "a", "current_shunt", "positive"),
    ("[meter.a]\nmax_resistance = 'lots'\n", 2, "a", "max_resistance", "lots"),
    ("[meter.a]\nmax_resistance = -1\n", 2, "a", "max_resistance", "positive"),
    ("[meter.a]\nvoltage_resolution = 0\n", 2, "a", "voltage_resolution", "positive"),
    ("[meter.a]\nvoltage_resolution = '1 mA'\n", 2, "a", "voltage_resolution", "unit"),
    ("[meter.a]\ncurrent_resolution = '-1n'\n", 2, "a", "current_resolution", "positive"),
    ("[meter.a]\nresistance_resolution = 0.0\n", 2, "a", "resistance_resolution", "positive"),
    ("[meter.a]\nresistance_resolution = {x = 1}\n", 2, "a", "resistance_resolution", "number"),
    ("[meter.a]\ndc_voltage = 0.5\n", 2, "a", "dc_voltage", "0.5% + 2"),
    ("[meter.a]\nac_voltage = 'half a percent'\n", 2, "a", "ac_voltage", "half a percent"),
    ("[meter.a]\nresistance = '-1% + 2'\n", 2, "a", "resistance", "-1% + 2"),
]


@pytest.mark.parametrize("text, line, part, key, words", BAD)
def test_bad_files(text, line, part, key, words):
    with pytest.raises(MeterError) as info:
        parse_meters(text, "shop-meters.toml")
    err = info.value
    assert isinstance(err, ValueError)                  # project rule: InputError is a ValueError
    assert err.file == "shop-meters.toml"
    assert err.line == line
    assert err.part == part
    assert err.key == key
    message = str(err)
    assert message.startswith("shop-meters.toml")
    assert words in message
    if part is not None:
        assert f"part {part}" in message


def test_error_names_the_meter_among_several():
    text = FORMATS_EXAMPLE + '\n[meter.clamp]\ncounts = 4000\nac_current = "2%+"\n'
    with pytest.raises(MeterError) as info:
        parse_meters(text, "m.toml")
    assert info.value.part == "clamp" and info.value.key == "ac_current"
    assert info.value.line == FORMATS_EXAMPLE.count("\n") + 4


def test_not_text():
    with pytest.raises(MeterError) as info:
        parse_meters(b"[meter.a]\n", "raw.toml")
    assert info.value.file == "raw.toml"
