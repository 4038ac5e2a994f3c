"""Circuit files: a good file of every kind, every error with its place, warnings.

The circuits are invented: an irrigation-zone valve driver board and small
pieces of it.  Values are checked against the SI prefixes of the BIPM SI
Brochure (9th edition, table 7), the RKM code of IEC 60062 and the TOML 1.0.0
specification; each check names its source.
"""

from __future__ import annotations

import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from faultfind.errors import CircuitError, InputError
from faultfind.io.circuit_file import circuit_warnings, load_circuit, parse_circuit
from faultfind.model import DEFAULT_OPAMP_GAIN, KINDS, Circuit

TOP = {"format": 1, "title": "Irrigation zone 4: valve driver board", "ground": "COM",
       "frequency": "60 Hz"}


def board_parts():
    """The valve driver board, one part of each kind (and both waveforms)."""
    return [
        {"ref": "PS1", "kind": "voltage-source", "nodes": ["+24V", "COM"], "value": "24 V",
         "tolerance": "±0.6 V", "off_state": "open", "label": "plug-in supply"},
        {"ref": "F1", "kind": "fuse", "nodes": ["+24V", "F"]},
        {"ref": "SW1", "kind": "switch", "nodes": ["F", "SW"], "label": "manual override"},
        {"ref": "SW2", "kind": "switch", "nodes": ["SW", "BYP"], "state": "open", "value": "30m"},
        {"ref": "RB1", "kind": "resistor", "nodes": ["BYP", "COM"], "value": "47k"},
        {"ref": "L1", "kind": "inductor", "nodes": ["SW", "COM"], "value": "120 mH",
         "resistance": "28", "tolerance": "10%", "label": "valve solenoid"},
        {"ref": "R1", "kind": "resistor", "nodes": ["SW", "SENSE"], "value": "4k7",
         "tolerance": "1%"},
        {"ref": "R2", "kind": "resistor", "nodes": ["SENSE", "COM"], "value": 2200},
        {"ref": "C1", "kind": "capacitor", "nodes": ["SENSE", "COM"], "value": "100n",
         "tolerance": "-20%/+80%"},
        {"ref": "U1", "kind": "opamp", "nodes": ["SENSE", "BUF", "BUF"], "gain": "2e5"},
        {"ref": "U2", "kind": "opamp", "nodes": ["SENSE", "BUF2", "BUF2"]},
        {"ref": "R3", "kind": "resistor", "nodes": ["BUF", "TP1"], "value": "1k"},
        {"ref": "R4", "kind": "resistor", "nodes": ["BUF2", "COM"], "value": "10k"},
        {"ref": "I1", "kind": "current-source", "nodes": ["LED", "COM"], "value": "10 mA"},
        {"ref": "RL1", "kind": "resistor", "nodes": ["LED", "COM"], "value": "R47"},
        {"ref": "TX1", "kind": "voltage-source", "nodes": ["AC1", "COM"], "value": "24",
         "waveform": "ac", "phase": "-120 deg", "off_state": "short"},
        {"ref": "R5", "kind": "resistor", "nodes": ["AC1", "COM"], "value": "1.5 kΩ"},
        {"ref": "PS2", "kind": "voltage-source", "nodes": ["NEG", "COM"], "value": "-5 V"},
        {"ref": "R6", "kind": "resistor", "nodes": ["NEG", "COM"], "value": "10k"},
    ]


def render(parts, top=None):
    """A circuit file as text.  JSON strings, numbers, booleans and arrays are
    valid TOML values (TOML 1.0.0: basic strings use the same escapes)."""
    top = TOP if top is None else top
    out = [f"{k} = {json.dumps(v, ensure_ascii=False)}" for k, v in top.items()]
    for p in parts:
        out += ["", "[[part]]"] + [f"{k} = {json.dumps(v, ensure_ascii=False)}"
                                   for k, v in p.items()]
    return "\n".join(out) + "\n"


def header_line(text, ref):
    """1-based line of the [[part]] header just above ``ref = "..."``."""
    lines = text.split("\n")
    i = lines.index(f'ref = "{ref}"')
    assert lines[i - 1] == "[[part]]"
    return i          # index of the ref line = 1-based number of the line above it


def write(tmp_path, text, name="valve_driver.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def expect_error(tmp_path, text, *, part=None, key=None, line=None, words=()):
    """Load ``text`` and check the CircuitError names file, part, key and line."""
    path = write(tmp_path, text)
    with pytest.raises(CircuitError) as info:
        load_circuit(path)
    err = info.value
    msg = str(err)
    assert isinstance(err, ValueError) and isinstance(err, InputError)
    assert err.file == str(path) and str(path) in msg
    if part is not None:
        assert err.part == part and f"part {part}" in msg
    if key is not None:
        assert err.key == key and f"key '{key}'" in msg
    if line is not None:
        assert err.line == line and f"{path}:{line}:" in msg
    for w in words:
        assert w in err.message, (w, err.message)
    return err


def with_change(target, /, **changes):
    """The board with part ``target`` changed (a value None removes the key)."""
    parts = board_parts()
    for p in parts:
        if p["ref"] == target:
            for k, v in changes.items():
                if v is None:
                    p.pop(k, None)
                else:
                    p[k] = v
    return parts


# --------------------------------------------------------------------------
# A good file


@pytest.fixture
def board(tmp_path):
    text = render(board_parts())
    return load_circuit(write(tmp_path, text)), text


def test_good_file_values_in_si(board):
    c, _ = board
    assert isinstance(c, Circuit)
    assert c.title == "Irrigation zone 4: valve driver board" and c.ground == "COM"
    assert c.frequency == 60.0
    v = {p.ref: p.value for p in c.parts}
    # IEC 60062 RKM code: 4k7 = 4.7 kΩ, R47 = 0.47 Ω.
    assert v["R1"] == 4700.0
    assert v["RL1"] == pytest.approx(0.47)
    # SI prefixes (BIPM SI Brochure, 9th ed., table 7): n = 1e-9, m = 1e-3, k = 1e3.
    assert v["C1"] == pytest.approx(100e-9)
    assert v["L1"] == pytest.approx(0.120)
    assert v["R5"] == 1500.0
    assert v["I1"] == pytest.approx(0.010)
    assert v["SW2"] == pytest.approx(0.030)
    assert v["R2"] == 2200.0                        # a TOML integer taken as ohms
    assert v["PS1"] == 24.0 and v["TX1"] == 24.0
    assert v["PS2"] == -5.0                         # a DC source may be negative
    assert v["U1"] is None and v["U2"] is None      # an opamp has no value


def test_good_file_tolerances(board):
    c, _ = board
    p = c.part
    # A percentage is that fraction of nominal (IEC 60062: "±1 %").
    assert (p("R1").tol_low, p("R1").tol_high) == pytest.approx((0.01, 0.01))
    # Asymmetric -20/+80 % (IEC 60062 letter Z, electrolytics and ceramics).
    assert (p("C1").tol_low, p("C1").tol_high) == pytest.approx((0.20, 0.80))
    # An absolute tolerance becomes relative: 0.6 V of 24 V is 2.5 % (arithmetic).
    assert (p("PS1").tol_low, p("PS1").tol_high) == pytest.approx((0.025, 0.025))
    # Defaults: E24 film resistors are 5 % parts (common practice (no source)),
    # as faultfind.model.KINDS records.
    assert (p("R2").tol_low, p("R2").tol_high) == (0.05, 0.05)
    assert KINDS["resistor"].default_tolerance == (0.05, 0.05)
    assert (p("TX1").tol_low, p("TX1").tol_high) == KINDS["voltage-source"].default_tolerance
    assert (p("F1").tol_low, p("F1").tol_high) == KINDS["fuse"].default_tolerance


def test_good_file_kind_extras(board):
    c, text = board
    p = c.part
    # Fuse and switch values default to a few tens of milliohms (from memory),
    # recorded in KINDS.
    assert p("F1").value == KINDS["fuse"].default_value and 0.001 < p("F1").value < 0.1
    assert p("SW1").value == KINDS["switch"].default_value and 0.001 < p("SW1").value < 0.1
    assert p("SW1").state == "closed" and p("SW2").state == "open"
    assert p("L1").resistance == 28.0 and p("L1").label == "valve solenoid"
    assert p("U1").gain == 2e5 and p("U2").gain is None
    assert DEFAULT_OPAMP_GAIN == 1e5    # 100 dB, a general-purpose op-amp (from memory)
    assert p("TX1").waveform == "ac" and p("TX1").phase == -120.0
    assert p("TX1").off_state == "short" and p("PS1").off_state == "open"
    assert p("PS1").waveform == "dc" and p("PS1").phase == 0.0
    assert p("U1").nodes == ("SENSE", "BUF", "BUF")
    assert all(p_.line == header_line(text, p_.ref) for p_ in c.parts)
    assert c.has_ac


def test_source_is_the_file_name(tmp_path):
    path = write(tmp_path, render(board_parts()), "zone4.toml")
    assert load_circuit(path).source == str(path)
    assert load_circuit(str(path)).source == str(path)
    assert parse_circuit(render(board_parts()), source="zone4 (pasted)").source == "zone4 (pasted)"


def test_top_level_optional_keys():
    parts = [{"ref": "PS1", "kind": "voltage-source", "nodes": ["V", "0"], "value": 5},
             {"ref": "R1", "kind": "resistor", "nodes": ["V", "0"], "value": "1k"}]
    c = parse_circuit(render(parts, {"format": 1, "ground": "0", "notes": "bench copy"}))
    assert c.title == "" and c.notes == "bench copy" and c.frequency is None
    # A number for frequency is in hertz.
    c = parse_circuit(render(parts, {"format": 1, "ground": "0", "frequency": 50}))
    assert c.frequency == 50.0


def test_zero_valued_source_is_allowed():
    # A 0 V source is a short that reports its current: legal (formats.md).
    parts = [{"ref": "PS1", "kind": "voltage-source", "nodes": ["V", "0"], "value": "0 V"},
             {"ref": "R1", "kind": "resistor", "nodes": ["V", "0"], "value": "1k"},
             {"ref": "I1", "kind": "current-source", "nodes": ["V", "0"], "value": 0}]
    c = parse_circuit(render(parts, {"format": 1, "ground": "0"}))
    assert c.part("PS1").value == 0.0 and c.part("I1").value == 0.0


def test_byte_order_mark_and_comments(tmp_path):
    # Windows editors write a UTF-8 byte-order mark; TOML comments start with '#'
    # (TOML 1.0.0, "Comment"), also after a table header.
    text = ('format = 1  # version\nground = "0"\n[[part]]  # supply\nref = "PS1"\n'
            'kind = "voltage-source"\nnodes = ["V", "0"]\nvalue = "12 V"\n'
            '[[part]]\nref = "R1"\nkind = "resistor"\nnodes = ["V", "0"]\nvalue = "1k"\n')
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    c = load_circuit(path)
    assert [p.line for p in c.parts] == [3, 8]


# --------------------------------------------------------------------------
# Errors: the file itself


def test_missing_file(tmp_path):
    path = tmp_path / "nowhere.toml"
    with pytest.raises(CircuitError) as info:
        load_circuit(path)
    assert str(path) in str(info.value) and "no such file" in str(info.value)


def test_directory_is_not_a_file(tmp_path):
    with pytest.raises(CircuitError) as info:
        load_circuit(tmp_path)
    assert str(tmp_path) in str(info.value)


def test_not_utf8(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes('format = 1\nground = "0"\ntitle = "Kühlraum"\n'.encode("latin-1"))
    with pytest.raises(CircuitError) as info:
        load_circuit(path)
    assert info.value.line == 3 and "UTF-8" in info.value.message


def test_toml_syntax_error_has_line(tmp_path):
    # TOML 1.0.0: a key/value pair needs a value ("Keys" section).
    text = 'format = 1\nground = "COM"\n\n[[part]]\nref = "R1"\nvalue =\n'
    err = expect_error(tmp_path, text, line=6, words=("TOML syntax error",))
    assert "(at line" not in err.message


def test_toml_syntax_error_at_end(tmp_path):
    # An array left open (TOML 1.0.0, "Array"): reported at the last line.
    text = 'format = 1\nground = "COM"\nnotes = ["a",\n'
    expect_error(tmp_path, text, line=3, words=("TOML syntax error", "end of the file"))


def test_toml_duplicate_key_is_syntax(tmp_path):
    # TOML 1.0.0: "Defining a key multiple times is invalid."
    text = render(board_parts()).replace('ref = "R2"', 'ref = "R2"\nref = "R2b"')
    line = text.split("\n").index('ref = "R2b"') + 1
    expect_error(tmp_path, text, line=line, words=("TOML syntax error",))


# --------------------------------------------------------------------------
# Errors: top-level keys


def test_unknown_top_level_key(tmp_path):
    top = dict(TOP, voltage="24 V")
    text = render(board_parts(), top)
    expect_error(tmp_path, text, key="voltage", line=5, words=("unknown top-level key",))


def test_unknown_top_level_table_suggests(tmp_path):
    text = render(board_parts()).replace("[[part]]", "[[parts]]", 1)
    text = text.replace("[[part]]", "[[parts]]")
    err = expect_error(tmp_path, text, key="parts", words=("did you mean 'part'",))
    assert err.line == text.split("\n").index("[[parts]]") + 1


@pytest.mark.parametrize("key", ["format", "ground"])
def test_missing_top_level_key(tmp_path, key):
    top = {k: v for k, v in TOP.items() if k != key}
    expect_error(tmp_path, render(board_parts(), top), key=key, words=("missing",))


@pytest.mark.parametrize("fmt", [2, 0, "1", True, 1.0])
def test_format_must_be_1(tmp_path, fmt):
    top = dict(TOP, format=fmt)
    expect_error(tmp_path, render(board_parts(), top), key="format", line=1,
                 words=("format must be 1",))


@pytest.mark.parametrize("ground", ["", " COM", 0, ["COM"]])
def test_ground_must_be_a_name(tmp_path, ground):
    expect_error(tmp_path, render(board_parts(), dict(TOP, ground=ground)), key="ground", line=3)


def test_ground_not_on_any_part(tmp_path):
    text = render(board_parts(), dict(TOP, ground="GND"))
    expect_error(tmp_path, text, key="ground", line=3, words=("'GND'", "not on any part"))


def test_no_parts(tmp_path):
    expect_error(tmp_path, render([], TOP), key="part", words=("no [[part]]",))


def test_part_must_be_array_of_tables(tmp_path):
    text = render([], TOP) + '[part]\nref = "R1"\n'
    expect_error(tmp_path, text, key="part", line=5, words=("[[part]]",))


@pytest.mark.parametrize("freq,words", [("60 V", ("'V'",)), ("0 Hz", ("above 0",)),
                                        (-50, ("above 0",)), ("fast", ("fast",))])
def test_bad_frequency(tmp_path, freq, words):
    expect_error(tmp_path, render(board_parts(), dict(TOP, frequency=freq)),
                 key="frequency", line=4, words=words)


@pytest.mark.parametrize("key,value", [("title", 7), ("notes", ["a"])])
def test_text_keys_must_be_text(tmp_path, key, value):
    expect_error(tmp_path, render(board_parts(), dict(TOP, **{key: value})), key=key)


def test_ac_source_needs_frequency(tmp_path):
    top = {k: v for k, v in TOP.items() if k != "frequency"}
    text = render(board_parts(), top)
    expect_error(tmp_path, text, part="TX1", key="frequency", line=header_line(text, "TX1"),
                 words=("frequency",))


# --------------------------------------------------------------------------
# Errors: parts


def part_error(tmp_path, parts, ref, key, *words, top=None):
    return part_error_text(tmp_path, render(parts, top), ref, key, *words)


def part_error_text(tmp_path, text, ref, key, *words):
    return expect_error(tmp_path, text, part=ref, key=key, line=header_line(text, ref),
                        words=words)


def test_unknown_part_key(tmp_path):
    part_error(tmp_path, with_change("R1", valeu="4k7"), "R1", "valeu",
               "unknown key 'valeu'", "did you mean 'value'")


def test_top_level_key_after_parts_is_explained(tmp_path):
    # TOML 1.0.0 ("Table"): keys after a table header belong to that table.
    text = render(board_parts()) + 'frequency = "50 Hz"\n'
    err = expect_error(tmp_path, text, part="R6", key="frequency")
    assert "before the first [[part]]" in err.message


@pytest.mark.parametrize("ref,key", [
    ("R1", "kind"), ("R1", "nodes"), ("R1", "value"), ("C1", "value"), ("L1", "value"),
    ("PS1", "value"), ("I1", "value"), ("U1", "nodes")])
def test_missing_part_key(tmp_path, ref, key):
    part_error(tmp_path, with_change(ref, **{key: None}), ref, key, "missing")


def test_missing_ref(tmp_path):
    parts = with_change("R2", ref=None)
    text = render(parts)
    lines = text.split("\n")
    below = lines.index("value = 2200")                 # R2's value, unique in the board
    line = max(i for i in range(below) if lines[i] == "[[part]]") + 1
    expect_error(tmp_path, text, key="ref", line=line, words=("no 'ref'",))


@pytest.mark.parametrize("ref", ["", " R2", 12])
def test_bad_ref(tmp_path, ref):
    expect_error(tmp_path, render(with_change("R2", ref=ref)), key="ref")


def test_fuse_and_switch_value_not_required(board):
    c, _ = board
    assert c.part("F1").value > 0 and c.part("SW1").value > 0


@pytest.mark.parametrize("kind", ["triode", "Resistor", "transistor"])
def test_unknown_kind(tmp_path, kind):
    err = part_error(tmp_path, with_change("R1", kind=kind), "R1", "kind", "unknown kind")
    assert "resistor" in err.message          # the known kinds are listed


def test_duplicate_ref(tmp_path):
    parts = board_parts()
    parts.append({"ref": "R2", "kind": "resistor", "nodes": ["SENSE", "COM"], "value": "1k"})
    text = render(parts)
    lines = text.split("\n")
    first = lines.index('ref = "R2"')
    second = lines.index('ref = "R2"', first + 1)
    err = expect_error(tmp_path, text, part="R2", key="ref", line=second,
                       words=("duplicate", f"line {first}"))
    assert err.line != first


@pytest.mark.parametrize("ref,nodes", [("R1", ["SW", "SENSE", "COM"]), ("R1", ["SW"]),
                                       ("U1", ["SENSE", "BUF"]), ("PS1", "+24V"),
                                       ("C1", [])])
def test_wrong_node_count(tmp_path, ref, nodes):
    part_error(tmp_path, with_change(ref, nodes=nodes), ref, "nodes")


@pytest.mark.parametrize("nodes,word", [(["SW", ""], "''"), (["SW", 3], 'write "3" in quotes'),
                                        (["SW", "SENSE "], "'SENSE '"), (["SW", ["A"]], "['A']")])
def test_bad_node_name(tmp_path, nodes, word):
    part_error(tmp_path, with_change("R1", nodes=nodes), "R1", "nodes", word)


def test_both_nodes_the_same(tmp_path):
    part_error(tmp_path, with_change("R1", nodes=["SW", "SW"]), "R1", "nodes", "both ends")


def test_opamp_output_on_ground(tmp_path):
    part_error(tmp_path, with_change("U2", nodes=["SENSE", "BUF2", "COM"]), "U2", "nodes",
               "ground")


@pytest.mark.parametrize("ref,value,word", [
    ("R1", "4k7k", "4k7k"), ("R1", "four", "four"), ("R1", "", "empty"),
    ("R1", True, "True"), ("R1", [1], "[1]"), ("R1", "4,7k", "comma"),
    ("R1", "1e999", "too large"), ("C1", "100 nV", "'V'"), ("L1", "120 mF", "'F'"),
    ("PS1", "24 A", "'A'"), ("I1", "10 mV", "'V'"), ("R1", "47 H", "'H'")])
def test_value_does_not_parse_or_wrong_unit(tmp_path, ref, value, word):
    part_error(tmp_path, with_change(ref, value=value), ref, "value", word)


@pytest.mark.parametrize("ref,value", [("R1", 0), ("R1", "-4.7k"), ("C1", "0"),
                                       ("L1", "-1 mH"), ("F1", 0), ("SW1", "-0.1")])
def test_value_must_be_positive(tmp_path, ref, value):
    part_error(tmp_path, with_change(ref, value=value), ref, "value", "above 0")


def test_toml_infinity_is_not_a_value(tmp_path):
    # TOML 1.0.0 ("Float") allows inf and nan; neither is a part's value.
    for word in ("inf", "nan", "-inf"):
        text = render(board_parts()).replace('value = "4k7"', f"value = {word}")
        part_error_text(tmp_path, text, "R1", "value", "finite")


def test_ac_source_value_not_negative(tmp_path):
    part_error(tmp_path, with_change("TX1", value="-24 V"), "TX1", "value", "RMS")


@pytest.mark.parametrize("ref,key,value", [
    ("R1", "state", "open"), ("R1", "off_state", "open"), ("R1", "waveform", "dc"),
    ("R1", "gain", 1000), ("R1", "resistance", "2"), ("C1", "resistance", "2"),
    ("PS1", "state", "closed"), ("SW1", "off_state", "short"), ("U1", "value", "1"),
    ("U1", "tolerance", "5%"), ("L1", "gain", 5)])
def test_key_does_not_fit_kind(tmp_path, ref, key, value):
    part_error(tmp_path, with_change(ref, **{key: value}), ref, key, "does not apply")


def test_phase_on_dc_source(tmp_path):
    part_error(tmp_path, with_change("PS1", phase="90 deg"), "PS1", "phase", "AC source")


@pytest.mark.parametrize("ref,key,value", [
    ("PS1", "off_state", "closed"), ("PS1", "off_state", "Open"), ("TX1", "waveform", "sine"),
    ("SW2", "state", "shut"), ("SW2", "state", 0)])
def test_bad_enum_value(tmp_path, ref, key, value):
    err = part_error(tmp_path, with_change(ref, **{key: value}), ref, key, "must be")
    assert repr(value) in err.message


@pytest.mark.parametrize("tol,word", [("5", "bare number"), (0.05, "tolerance"),
                                      ("-120%/+10%", "100 %"), ("±0.5 A", "'A'"),
                                      ("lots", "lots")])
def test_bad_tolerance(tmp_path, tol, word):
    part_error(tmp_path, with_change("R1", tolerance=tol), "R1", "tolerance", word)


def test_absolute_tolerance_on_zero_source(tmp_path):
    parts = board_parts() + [{"ref": "PS9", "kind": "voltage-source", "nodes": ["Z", "COM"],
                              "value": 0, "tolerance": "±0.1 V"}]
    part_error(tmp_path, parts, "PS9", "tolerance", "%")


@pytest.mark.parametrize("gain", ["100 dB", 0, -5, True, "inf"])
def test_bad_gain(tmp_path, gain):
    part_error(tmp_path, with_change("U1", gain=gain), "U1", "gain")


@pytest.mark.parametrize("r", [0, "-2", "2 H"])
def test_bad_winding_resistance(tmp_path, r):
    part_error(tmp_path, with_change("L1", resistance=r), "L1", "resistance")


@pytest.mark.parametrize("phase", ["north", "12 V"])
def test_bad_phase(tmp_path, phase):
    part_error(tmp_path, with_change("TX1", phase=phase), "TX1", "phase")


def test_label_must_be_text(tmp_path):
    part_error(tmp_path, with_change("R1", label=5), "R1", "label", "text")


# --------------------------------------------------------------------------
# Errors: the circuit as a whole


def test_floating_node_through_capacitor(tmp_path):
    # Node X reaches the rest only through capacitor C9: no DC path
    # (formats.md: "A DC reading sees capacitors as open").
    parts = board_parts() + [{"ref": "C9", "kind": "capacitor", "nodes": ["SENSE", "X"],
                              "value": "1u"}]
    text = render(parts)
    err = expect_error(tmp_path, text, part="C9", line=header_line(text, "C9"),
                       words=("'X'", "no DC path", "C9"))
    assert err.key is None


def test_floating_node_behind_open_switch_and_current_source(tmp_path):
    parts = board_parts() + [
        {"ref": "SW9", "kind": "switch", "nodes": ["+24V", "Y"], "state": "open"},
        {"ref": "I9", "kind": "current-source", "nodes": ["Y", "COM"], "value": "1 mA"}]
    text = render(parts)
    expect_error(tmp_path, text, part="SW9", line=header_line(text, "SW9"),
                 words=("'Y'", "SW9 (open)", "I9"))


def test_floating_opamp_input(tmp_path):
    parts = with_change("U2", nodes=["NC", "BUF2", "BUF2"])
    text = render(parts)
    expect_error(tmp_path, text, part="U2", words=("'NC'", "U2 (non-inverting input)"))


def test_loop_of_voltage_sources(tmp_path):
    parts = board_parts() + [{"ref": "PS3", "kind": "voltage-source", "nodes": ["+24V", "COM"],
                              "value": "24 V"}]
    text = render(parts)
    err = expect_error(tmp_path, text, part="PS3", line=header_line(text, "PS3"),
                       words=("a loop made only of voltage sources", "PS3", "PS1"))
    assert "(PS3, PS1)" in err.message


def test_loop_with_ac_source_at_dc(tmp_path):
    # An AC source is 0 V at DC: across a DC source it still makes a loop.
    parts = board_parts() + [{"ref": "TX2", "kind": "voltage-source", "nodes": ["NEG", "COM"],
                              "value": "1", "waveform": "ac"}]
    expect_error(tmp_path, render(parts), part="TX2", words=("TX2", "PS2"))


def test_loop_with_ideal_inductor(tmp_path):
    # An inductor without winding resistance is a short at DC.
    text = render(with_change("L1", resistance=None, nodes=["+24V", "COM"]))
    err = expect_error(tmp_path, text, part="L1", key="resistance",
                       line=header_line(text, "L1"), words=("ideal inductor", "resistance"))
    assert "PS1" in err.message


def test_inductor_with_resistance_is_no_loop(tmp_path):
    c = load_circuit(write(tmp_path, render(with_change("L1", nodes=["+24V", "COM"]))))
    assert c.part("L1").resistance == 28.0


def test_opamp_outputs_tied(tmp_path):
    parts = with_change("U2", nodes=["SENSE", "BUF", "BUF"])
    expect_error(tmp_path, render(parts), part="U2", words=("op-amp output", "U1", "U2"))


def test_long_loop_message_is_cut_short(tmp_path):
    parts = [{"ref": f"PV{j}", "kind": "voltage-source", "nodes": [f"V{j}", f"V{j + 1}"],
              "value": 1} for j in range(40)]
    parts += [{"ref": "PV40", "kind": "voltage-source", "nodes": ["V40", "COM"], "value": 1},
              {"ref": "PVX", "kind": "voltage-source", "nodes": ["V0", "COM"], "value": 41}]
    err = expect_error(tmp_path, render(parts), part="PVX", words=("and 30 more",))
    assert len(err.message) < 400


def test_ground_named_only_by_opamp_reference_is_refused(tmp_path):
    # Op-amp outputs are referred to ground, but a ground no part names is
    # taken as a misspelling (docs/circuit-files.md).
    parts = [{"ref": "U1", "kind": "opamp", "nodes": ["A", "B", "OUT"]},
             {"ref": "R1", "kind": "resistor", "nodes": ["OUT", "B"], "value": "10k"},
             {"ref": "R2", "kind": "resistor", "nodes": ["B", "A"], "value": "10k"}]
    expect_error(tmp_path, render(parts, {"format": 1, "ground": "0V"}), key="ground",
                 words=("not on any part",))


def test_user_guide_example_loads():
    # docs/circuit-files.md: its first example must be a valid file with the
    # values and warning it describes.
    from pathlib import Path
    guide = (Path(__file__).parent.parent / "docs" / "circuit-files.md").read_text("utf-8")
    text = guide.split("```toml\n", 1)[1].split("```", 1)[0]
    c = parse_circuit(text, source="vent.toml")
    assert c.part("PS1").tol_low == pytest.approx(0.5 / 24)        # ±0.5 V of 24 V
    assert c.part("F1").value == KINDS["fuse"].default_value
    assert [w.split("'")[1] for w in circuit_warnings(c)] == ["TP3"]


# --------------------------------------------------------------------------
# Warnings


def test_warnings_good_board(board):
    c, _ = board
    warnings = circuit_warnings(c)
    # TP1 is touched only by R3: a test point (formats.md: legal, worth a warning).
    assert warnings == ["node 'TP1' is touched only by R3 (fine for a test point; "
                        "otherwise check the node's spelling)"]


def test_warning_case_only_difference():
    parts = [{"ref": "PS1", "kind": "voltage-source", "nodes": ["Vout", "0"], "value": 5},
             {"ref": "R1", "kind": "resistor", "nodes": ["Vout", "0"], "value": "1k"},
             {"ref": "r1", "kind": "resistor", "nodes": ["VOUT", "0"], "value": "1k"},
             {"ref": "R2", "kind": "resistor", "nodes": ["VOUT", "0"], "value": "1k"}]
    warnings = circuit_warnings(parse_circuit(render(parts, {"format": 1, "ground": "0"})))
    assert any("'Vout' and 'VOUT'" in w for w in warnings)
    assert any("'R1' and 'r1'" in w for w in warnings)


def test_warning_fuse_across_source():
    parts = [{"ref": "PS1", "kind": "voltage-source", "nodes": ["V", "0"], "value": 12},
             {"ref": "F1", "kind": "fuse", "nodes": ["0", "V"]},
             {"ref": "R1", "kind": "resistor", "nodes": ["V", "0"], "value": "1k"}]
    warnings = circuit_warnings(parse_circuit(render(parts, {"format": 1, "ground": "0"})))
    assert len(warnings) == 1 and "F1" in warnings[0] and "PS1" in warnings[0]


def test_warning_frequency_without_ac():
    parts = [{"ref": "PS1", "kind": "voltage-source", "nodes": ["V", "0"], "value": 12},
             {"ref": "R1", "kind": "resistor", "nodes": ["V", "0"], "value": "1k"}]
    c = parse_circuit(render(parts, {"format": 1, "ground": "0", "frequency": "50 Hz"}))
    assert circuit_warnings(c) == ["frequency is 50 Hz but no source has waveform = \"ac\"; "
                                   "every AC reading of this circuit is 0"]


def test_no_warnings_on_tidy_circuit():
    parts = [{"ref": "PS1", "kind": "voltage-source", "nodes": ["V", "0"], "value": 12},
             {"ref": "R1", "kind": "resistor", "nodes": ["V", "A"], "value": "1k"},
             {"ref": "R2", "kind": "resistor", "nodes": ["A", "0"], "value": "1k"}]
    assert circuit_warnings(parse_circuit(render(parts, {"format": 1, "ground": "0"}))) == []


# --------------------------------------------------------------------------
# Arguments and scale


def test_argument_types():
    with pytest.raises(TypeError, match="text"):
        parse_circuit(b"format = 1")
    with pytest.raises(TypeError, match="path"):
        load_circuit(42)
    with pytest.raises(TypeError, match="circuit"):
        circuit_warnings("board.toml")


def test_large_file_lines_and_values():
    # A 5,000-stage resistor chain: every header line maps to its part.
    n = 5000
    parts = [{"ref": "PS1", "kind": "voltage-source", "nodes": ["N0", "0"], "value": "5 V"}]
    parts += [{"ref": f"R{i}", "kind": "resistor", "nodes": [f"N{i}", f"N{i + 1}"],
               "value": "4k7" if i % 2 else "10k"} for i in range(n)]
    parts.append({"ref": "RL", "kind": "resistor", "nodes": [f"N{n}", "0"], "value": "1k"})
    text = render(parts, {"format": 1, "ground": "0"})
    c = parse_circuit(text)
    assert len(c.parts) == n + 2
    lines = text.split("\n")
    assert all(lines[p.line - 1] == "[[part]]" and lines[p.line] == f'ref = "{p.ref}"'
               for p in c.parts)
    assert c.part("R4999").value == 4700.0 and c.part("R4998").value == 10000.0


# --------------------------------------------------------------------------
# Any input: a Circuit or a CircuitError, never another exception

_KEYS = ["ref", "kind", "nodes", "value", "tolerance", "off_state", "waveform", "phase",
         "state", "resistance", "gain", "label", "colour"]
_ATOMS = st.one_of(
    st.sampled_from(["4k7", "R47", "24 V", "10 mA", "100n", "2.2 mH", "5%", "-20%/+80%",
                     "±0.2 V", "ac", "dc", "open", "short", "closed", "-90 deg", "0", "",
                     "resistor", "capacitor", "inductor", "fuse", "switch", "opamp",
                     "voltage-source", "current-source", "COM", "A", "B", "1e5", "x"]),
    st.integers(-3, 3), st.floats(allow_nan=False, allow_infinity=False, width=32),
    st.booleans())
_VALUES = st.one_of(_ATOMS, st.lists(_ATOMS, max_size=4))


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.dictionaries(st.sampled_from(_KEYS), _VALUES, max_size=8), max_size=5))
def test_any_parts_give_circuit_or_circuit_error(tables):
    # Mixed-type arrays are valid TOML 1.0.0; the loader must still answer
    # with a CircuitError (an InputError, hence a ValueError) or a Circuit.
    text = render(tables, {"format": 1, "ground": "COM", "frequency": "50 Hz"})
    try:
        c = parse_circuit(text, source="fuzz.toml")
    except CircuitError as err:
        assert str(err).startswith("fuzz.toml")
    else:
        assert isinstance(c, Circuit) and len(c.parts) == len(tables)
