"""The canonical circuit-file writer: exact round trips, the layout, comments, safe saving.

Sources named beside the checks: the RKM code of IEC 60062 (letters R, k, M,
G standing for the decimal point: 4k7, R47, 2M2), the SI prefixes of the BIPM
SI Brochure (9th edition, table 7), the TOML 1.0.0 specification (strings,
comments, numbers) read back with Python's own :mod:`tomllib`, and IEEE 754
round-tripping of Python's ``repr`` (the shortest decimal that reads back as
the same double, Python 3.1 "What's New"; from memory).  The circuits built
here are invented.
"""

from __future__ import annotations

import dataclasses
import os
import stat
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from faultfind.errors import CircuitError, InputError
from faultfind.io import circuit_writer
from faultfind.io.circuit_file import load_circuit, parse_circuit
from faultfind.io.circuit_writer import (PART_KEY_ORDER, Comment, circuit_text, lost_comments,
                                         same_content, tolerance_text, value_text, write_circuit)
from faultfind.model import KINDS, Circuit, Part
from faultfind.units import parse_tolerance, parse_value

CASES = sorted(Path(__file__).resolve().parent.parent.glob("field_cases/*/circuit.toml"))


# -- the bundled field cases --------------------------------------------------

def test_there_are_field_cases():
    assert len(CASES) >= 9


@pytest.mark.parametrize("path", CASES, ids=lambda p: p.parent.name)
def test_field_case_round_trip(path):
    original = load_circuit(path)
    text = circuit_text(original)
    again = parse_circuit(text, source="rewritten.toml")
    assert same_content(original, again)
    assert circuit_text(again) == text          # write -> load -> write: the same bytes
    # TOML 1.0.0 read by the standard library gives the same document as the fast reader
    doc = tomllib.loads(text)
    assert [p["ref"] for p in doc["part"]] == [p.ref for p in original.parts]


@pytest.mark.parametrize("path", CASES, ids=lambda p: p.parent.name)
def test_field_case_keys_in_the_fixed_order(path):
    text = circuit_text(load_circuit(path))
    doc = tomllib.loads(text)                   # keeps the file's key order (Python dicts)
    top_keys = [k for k in doc if k != "part"]
    order = ["format", "title", "ground", "frequency", "notes"]
    assert top_keys == [k for k in order if k in top_keys]
    assert top_keys[:1] == ["format"] and "ground" in top_keys
    assert text.index("[[part]]") > max(text.index(f"\n{k} = ") for k in top_keys[1:])
    for table in doc["part"]:
        keys = list(table)
        assert keys == [k for k in PART_KEY_ORDER if k in keys]
        assert keys[:3] == ["ref", "kind", "nodes"]


def test_booster_pump_panel_reads_like_a_hand_written_file():
    text = circuit_text(load_circuit(CASES[0].parent.parent / "booster_pump_panel" /
                                     "circuit.toml"))
    # IEC 60062 RKM codes for resistances, "24 V" for the supply
    assert '[[part]]\nref = "F1"\nkind = "fuse"\nnodes = ["+24V", "24V-F"]\nvalue = "R15"\n' \
           'tolerance = "30%"\n' in text
    assert 'resistance = "1k2"' in text
    assert 'off_state = "open"\ncurrent_limit = "2.5 A"\nlabel = ' in text
    assert 'value = "24 V"\ntolerance = "2%"\noff_state = "open"\n' in text
    # a switch at its default contact resistance: no value, no tolerance, its state shown
    assert '[[part]]\nref = "S1"\nkind = "switch"\nnodes = ["24V-F", "GUARD"]\n' \
           'state = "closed"\n' in text
    assert text.startswith('format = 1\ntitle = "Booster pump panel BP-2: 24 V DC control '
                           'circuit"\nground = "0V"\nnotes = """\nInvented scenario.')
    assert text.endswith('"\n') and not text.endswith("\n\n")


# -- values and tolerances ----------------------------------------------------

@pytest.mark.parametrize("value, unit, text", [
    # IEC 60062 RKM code: the letter stands where the decimal point would be
    (4700.0, "Ω", "4k7"), (470.0, "Ω", "470"), (4.7, "Ω", "4R7"), (0.47, "Ω", "R47"),
    (0.15, "Ω", "R15"), (2.2e6, "Ω", "2M2"), (1e6, "Ω", "1M"), (22e3, "Ω", "22k"),
    (1200.0, "Ω", "1k2"), (4.7e9, "Ω", "4G7"),
    # below 0.1 ohm: milliohms with the SI prefix m (BIPM SI Brochure table 7)
    (0.0012, "Ω", "1.2 mΩ"), (0.05, "Ω", "50 mΩ"),
    # more than four significant digits: the decimal form reads better (our choice)
    (4701.23, "Ω", "4.70123k"),
    # capacitances with a bare prefix, as on schematics
    (1e-7, "F", "100n"), (4.7e-6, "F", "4.7u"), (22e-12, "F", "22p"), (1e-3, "F", "1 mF"),
    (1.0, "F", "1 F"),
    # everything else: number, space, prefix and unit
    (24.0, "V", "24 V"), (-12.0, "V", "-12 V"), (0.0, "V", "0 V"), (0.0128, "A", "12.8 mA"),
    (2.2e-3, "H", "2.2 mH"), (0.6, "H", "600 mH"), (50.0, "Hz", "50 Hz"),
    (1000.0, "Hz", "1 kHz"),
    # outside p..G: the exponent form (there is no prefix for it in faultfind's grammar)
    (1.5e-15, "F", "1.5e-15 F"), (3e12, "Ω", "3e12 Ω"),
])
def test_value_text(value, unit, text):
    assert value_text(value, unit) == text
    assert parse_value(text, unit) == value


@given(st.floats(min_value=1e-300, max_value=1e300), st.sampled_from(["Ω", "F", "H", "V", "A",
                                                                      "Hz"]),
       st.booleans())
@settings(max_examples=400, derandomize=True)
def test_value_text_reads_back_exactly(x, unit, negative):
    # Exact: repr's shortest decimal reads back as the same double (from memory, Python 3.1)
    value = -x if negative and unit in ("V", "A") else x
    assert parse_value(value_text(value, unit), unit) == value


@pytest.mark.parametrize("below, above, nominal, unit, text", [
    (0.02, 0.02, 24.0, "V", "2%"),
    (0.001, 0.001, 350.0, "Ω", "0.1%"),
    (0.2, 0.8, 1e-7, "F", "-20%/+80%"),
    (0.0, 0.0, 5.0, "V", "0%"),
    # 0.2 V of 24 V is 0.8333...%: written as the amount it came from
    (0.2 / 24, 0.2 / 24, 24.0, "V", "±200 mV"),
])
def test_tolerance_text(below, above, nominal, unit, text):
    assert tolerance_text(below, above, nominal, unit) == text
    assert parse_tolerance(text, nominal, unit) == (below, above)


@given(st.floats(min_value=0, max_value=0.999), st.floats(min_value=0, max_value=50),
       st.floats(min_value=1e-12, max_value=1e9))
@settings(max_examples=300, derandomize=True)
def test_tolerance_text_reads_back_exactly(below, above, nominal):
    for b, a in ((below, above), (below, below)):
        assert parse_tolerance(tolerance_text(b, a, nominal, "Ω"), nominal, "Ω") == (b, a)


def test_bad_values_are_refused_with_the_part():
    with pytest.raises(CircuitError, match="finite"):
        value_text(float("inf"), "Ω")
    with pytest.raises(CircuitError, match="unit"):
        value_text(1.0, "W")
    with pytest.raises(CircuitError, match="100 %"):
        tolerance_text(1.0, 0.1, 10.0, "Ω")
    bad = Circuit("t", "0", (Part("R1", "resistor", ("a", "0"), float("nan"), 0.05, 0.05),))
    with pytest.raises(CircuitError) as err:
        circuit_text(bad)
    assert err.value.part == "R1" and isinstance(err.value, InputError)
    wrong = Circuit("t", "0", (Part("Q1", "transistor", ("a", "b", "0")),))
    with pytest.raises(CircuitError, match="unknown kind"):
        circuit_text(wrong)
    with pytest.raises(CircuitError, match="2 nodes"):
        circuit_text(Circuit("t", "0", (Part("R1", "resistor", ("a", "b", "0"), 1.0),)))
    with pytest.raises(TypeError):
        circuit_text("not a circuit")


def test_every_part_field_is_written():
    # a field added to Part without a place in the writer would be lost on saving
    names = {f.name for f in dataclasses.fields(Part)} - {"line"}
    assert names <= circuit_writer._HANDLED_FIELDS


# -- strings: TOML 1.0.0 escapes ----------------------------------------------

@pytest.mark.parametrize("label", [
    'pump "duty" #2', "back\\slash", "tab\there", "bell\x07", "del\x7f", "Ω µ ±", "",
    "line\nbreak", "ends with a quote\"", "CRLF\r\n",
])
def test_labels_and_titles_survive(label):
    c = Circuit(title=label or "x", ground="0",
                notes=label,
                parts=(Part("R1", "resistor", (label.strip() or "n", "0"), 100.0, 0.05, 0.05,
                            label=label),))
    text = circuit_text(c)
    again = parse_circuit(text)
    assert same_content(c, again)
    assert lost_comments(text) == []            # a '#' in a string is not a comment


@pytest.mark.parametrize("notes", [
    'a """ run of quotes', 'ends in two quotes ""', "\nstarts with a newline",
    "backslash at the end of a line \\\nnext", "# not a comment\nstill notes", '"',
])
def test_multiline_notes_survive(notes):
    c = Circuit("t", "0", (Part("R1", "resistor", ("a", "0"), 100.0, 0.05, 0.05),),
                notes=notes + "\nsecond line")
    text = circuit_text(c)
    assert '"""' in text
    assert tomllib.loads(text)["notes"] == c.notes
    assert same_content(parse_circuit(text), c)
    assert lost_comments(text) == []


def test_lone_surrogate_is_refused():
    c = Circuit("t", "0", (Part("R1", "resistor", ("a", "0"), 100.0, 0.05, 0.05,
                                label="\ud800"),))
    with pytest.raises(CircuitError, match="surrogate"):
        circuit_text(c)


# -- random circuits ------------------------------------------------------------

_TEXT = st.text(st.characters(blacklist_categories=("Cs",)), max_size=12)
_NAME = st.text(st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=6).filter(
    lambda s: s == s.strip() and not s.startswith("fresh-") and s != "0")
_POSITIVE = st.floats(min_value=1e-15, max_value=1e15)


@st.composite
def _tolerance(draw, value):
    below = draw(st.floats(min_value=0, max_value=0.99))
    shape = draw(st.sampled_from(["symmetric", "asymmetric", "absolute"]))
    if shape == "asymmetric":
        return below, draw(st.floats(min_value=0, max_value=10))
    if shape == "absolute" and abs(value) > 1e-300:      # not subnormal: amount/value exact enough
        amount = draw(st.floats(min_value=1e-3, max_value=0.9)) * abs(value)
        return amount / abs(value), amount / abs(value)
    return below, below


@st.composite
def circuits(draw):
    """A random valid circuit: every node has a resistor to ground; voltage sources,
    ideal inductors and op-amp outputs each on a node of their own (no loops)."""
    pool = draw(st.lists(_NAME, min_size=1, max_size=5, unique=True))
    ends = pool + ["0"]
    parts = []
    fresh = iter(f"fresh-{i}" for i in range(100))

    def ref():
        return f"X{len(parts) + 1}"

    def two(draw_nodes=True):
        a, b = draw(st.lists(st.sampled_from(ends), min_size=2, max_size=2, unique=True))
        return (a, b)

    for n in pool:
        v = draw(_POSITIVE)
        lo, hi = draw(_tolerance(v))
        parts.append(Part(ref(), "resistor", (n, "0"), v, lo, hi, label=draw(_TEXT)))
    has_ac = False
    for kind in draw(st.lists(st.sampled_from(sorted(KINDS)), max_size=8)):
        label = draw(_TEXT)
        if kind in ("resistor", "capacitor"):
            v = draw(_POSITIVE)
            parts.append(Part(ref(), kind, two(), v, *draw(_tolerance(v)), label=label))
        elif kind == "inductor":
            v = draw(_POSITIVE)
            r = draw(st.none() | _POSITIVE)
            nodes = (next(fresh), draw(st.sampled_from(ends))) if r is None else two()
            parts.append(Part(ref(), kind, nodes, v, *draw(_tolerance(v)), resistance=r,
                              label=label))
        elif kind in ("fuse", "switch"):
            default = draw(st.booleans())
            v = KINDS[kind].default_value if default else draw(_POSITIVE)
            tol = KINDS[kind].default_tolerance if default else draw(_tolerance(v))
            state = draw(st.sampled_from(["closed", "open"])) if kind == "switch" else "closed"
            parts.append(Part(ref(), kind, two(), v, *tol, state=state, label=label))
        elif kind in ("voltage-source", "current-source"):
            waveform = draw(st.sampled_from(["dc", "ac"]))
            has_ac = has_ac or waveform == "ac"
            v = draw(st.floats(min_value=0 if waveform == "ac" else -1e6, max_value=1e6))
            phase = draw(st.floats(min_value=-720, max_value=720)) if waveform == "ac" else 0.0
            nodes = (next(fresh), draw(st.sampled_from(ends))) if kind == "voltage-source" \
                else two()
            limit = draw(st.none() | _POSITIVE) if kind == "voltage-source" else None
            parts.append(Part(ref(), kind, nodes, v, *draw(_tolerance(v)),
                              off_state=draw(st.sampled_from(["open", "short"])),
                              waveform=waveform, phase=phase, current_limit=limit, label=label))
        elif kind == "opamp":
            gain = draw(st.none() | st.floats(min_value=1, max_value=1e12))
            ins = draw(st.lists(st.sampled_from(ends), min_size=2, max_size=2))
            parts.append(Part(ref(), kind, (*ins, next(fresh)), gain=gain, label=label))
    frequency = draw(_POSITIVE) if has_ac else draw(st.none() | _POSITIVE)
    return Circuit(title=draw(_TEXT), ground="0", parts=tuple(parts), frequency=frequency,
                   notes=draw(st.text(st.sampled_from('ab #"\\\n\t\r\'Ω'), max_size=30)))


@given(circuits())
@settings(max_examples=250, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
def test_random_circuits_round_trip(circuit):
    text = circuit_text(circuit)
    loaded = parse_circuit(text, source="random.toml")
    assert same_content(circuit, loaded)
    assert circuit_text(loaded) == text
    assert lost_comments(text) == []


# -- comments -----------------------------------------------------------------

def test_lost_comments_lists_every_comment():
    text = '\n'.join([
        '# board rev B',                                   # 1
        'format = 1',                                      # 2
        'title = "Pump #2 panel"  # as on the door',       # 3
        'ground = "0V"',                                   # 4
        'notes = """',                                     # 5
        'drawn from # the board, "quoted" text',           # 6
        '"""   # after the notes',                         # 7
        '[[part]]',                                        # 8
        "ref = 'R#1'",                                     # 9
        'kind = "resistor"',                               # 10
        'nodes = ["A", "0V"]   # TP1 to ground',           # 11
        'value = "4k7" #',                                 # 12
        'label = "a \\" quote # inside"',                  # 13
    ]) + "\n"
    assert tomllib.loads(text)["part"][0]["ref"] == "R#1"   # the TOML is valid (TOML 1.0.0)
    assert lost_comments(text) == [Comment(1, "# board rev B"), Comment(3, "# as on the door"),
                                   Comment(7, "# after the notes"),
                                   Comment(11, "# TP1 to ground"), Comment(12, "#")]


def test_comments_of_a_bundled_file_are_found():
    text = (CASES[0].parent.parent / "booster_pump_panel" / "circuit.toml").read_text(
        encoding="utf-8")
    found = lost_comments(text)
    assert Comment(next(i for i, line in enumerate(text.split("\n"), 1)
                        if line.startswith("current_limit")),
                   "# rated output current on the nameplate") in found


@pytest.mark.parametrize("path", CASES, ids=lambda p: p.parent.name)
def test_a_written_file_has_no_comments(path):
    assert lost_comments(circuit_text(load_circuit(path))) == []


def test_lost_comments_in_literal_multiline_and_crlf():
    text = "format = 1\r\nnotes = '''\r\n# inside\r\n'''  # out\r\nground = \"0\"\r\n"
    assert tomllib.loads(text)["notes"].strip() == "# inside"
    assert lost_comments(text) == [Comment(4, "# out")]
    with pytest.raises(TypeError):
        lost_comments(b"# bytes")


# -- saving -------------------------------------------------------------------

def _small():
    return Circuit("Vent board", "0V", (
        Part("PS1", "voltage-source", ("+5V", "0V"), 5.0, 0.02, 0.02),
        Part("R1", "resistor", ("+5V", "0V"), 4700.0, 0.01, 0.01),
    ))


def test_write_circuit_saves_and_replaces(tmp_path):
    path = tmp_path / "board.toml"
    write_circuit(_small(), path)
    assert same_content(load_circuit(path), _small())
    os.chmod(path, 0o640)
    bigger = dataclasses.replace(_small(), parts=_small().parts + (
        Part("C1", "capacitor", ("+5V", "0V"), 1e-7, 0.2, 0.2),))
    write_circuit(bigger, str(path))
    assert same_content(load_circuit(path), bigger)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o640      # permissions kept
    assert [p.name for p in tmp_path.iterdir()] == ["board.toml"]   # no temporary left


def test_failed_save_keeps_the_old_file(tmp_path, monkeypatch):
    path = tmp_path / "board.toml"
    write_circuit(_small(), path)
    before = path.read_bytes()

    def full_disk(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(circuit_writer.os, "replace", full_disk)
    with pytest.raises(CircuitError, match="No space left") as err:
        write_circuit(dataclasses.replace(_small(), title="changed"), path)
    assert err.value.file == str(path)
    assert path.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["board.toml"]
    monkeypatch.undo()
    bad = Circuit("t", "0", (Part("R1", "resistor", ("a", "0"), None),))
    with pytest.raises(CircuitError):
        write_circuit(bad, path)                 # refused before the file is touched
    assert path.read_bytes() == before
    with pytest.raises(CircuitError, match="cannot write"):
        write_circuit(_small(), tmp_path / "no-such-folder" / "x.toml")


def test_same_content_ignores_only_the_places():
    a = _small()
    b = parse_circuit(circuit_text(a), source="elsewhere.toml")
    assert b.parts[0].line is not None and same_content(a, b)
    c = dataclasses.replace(a, parts=(a.parts[0], dataclasses.replace(a.parts[1],
                                                                       value=4700.000000000001)))
    assert not same_content(a, c)
    with pytest.raises(TypeError):
        same_content(a, "b")
