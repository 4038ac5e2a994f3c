"""Netlist import: SPICE syntax, what is mapped, what is reported, bad netlists, the command.

The syntax rules checked here are those of the ngspice manual (chapter 2,
"Circuit description": title line, ``*`` and ``;`` comments, ``+``
continuation, ``.end``, scale factors, ``AC mag phase``, source direction);
tests/test_netlist_ngspice.py checks the same netlists against ngspice
itself.  The circuits are invented.
"""

from __future__ import annotations

import json
import math

import pytest
from numpy.testing import assert_allclose

from faultfind.cli.main import main
from faultfind.io.circuit_file import load_circuit
from faultfind.io.netlist import NetlistError, parse_netlist, spice_number
from faultfind.model import KINDS


def imp(text, **kw):
    return parse_netlist(text, source="board.cir", **kw)


def parts(text, **kw):
    return {p.ref: p for p in imp(text, **kw).circuit.parts}


# -- numbers ---------------------------------------------------------------------

@pytest.mark.parametrize("token, value", [
    # ngspice manual 2.4: T G Meg K mil m u n p f, case-insensitive; letters after ignored
    ("4.7k", 4700.0), ("4.7K", 4700.0), ("1Meg", 1e6), ("1MEG", 1e6), ("1meg", 1e6),
    ("1M", 1e-3), ("1m", 1e-3), ("2.2u", 2.2e-6), ("2.2µ", 2.2e-6), ("100n", 1e-7),
    ("22p", 22e-12), ("3f", 3e-15), ("1g", 1e9), ("2T", 2e12), ("1mil", 25.4e-6),
    ("10uF", 1e-5), ("1kohm", 1e3), ("12.8mA", 0.0128), ("1e3", 1e3), ("1.5E-3", 1.5e-3),
    ("1e3k", 1e6), (".5k", 500.0), ("5.K", 5000.0), ("+5", 5.0), ("-1.5", -1.5),
    # RKM markings are not SPICE: the digits after the scale factor are ignored
    ("4k7", 4000.0), ("1meg5", 1e6),
])
def test_spice_numbers(token, value):
    got = spice_number(token)
    assert got is not None
    assert_allclose(got[0], value, rtol=1e-15)


def test_spice_numbers_are_the_nearest_doubles():
    # decimal scaling: 100n is the double nearest 1e-7, not 100 * 1e-9 (IEEE 754, from memory)
    assert spice_number("100n")[0] == 1e-7
    assert spice_number("4.7u")[0] == 4.7e-6
    assert spice_number("abc") is None and spice_number("1e999") is None
    with pytest.raises(TypeError):
        spice_number(4.7)


# -- lines -----------------------------------------------------------------------

def test_title_comments_continuation_and_end():
    text = "\n".join([
        "R1 a 0 1k",                 # line 1 is the title even when it looks like an element
        "* a comment line",
        "V1 a 0 DC 12 ; the supply",
        "R2 a",
        "* a comment between a line and its continuation",
        "+ 0",
        "+ 2k $ also a comment",
        "",
        ".end",
        "R3 a 0 1k",
    ])
    got = imp(text)
    assert got.circuit.title == "R1 a 0 1k"
    assert [p.ref for p in got.circuit.parts] == ["V1", "R2"]
    assert got.circuit.part("R2").nodes == ("a", "0") and got.circuit.part("R2").value == 2000.0
    assert got.circuit.part("V1").label == "the supply"
    assert any("after .end ignored" in w for w in got.warnings)
    assert "line 1: R1: the first line of a netlist is its title" in got.warnings[0]


def test_title_command_and_case():
    got = imp("first\n.TITLE Pump room PR-1\nv1 Out GND dc 5\nR1 OUT 0 1K\nr2 out 0 1k\n.END\n")
    c = got.circuit
    assert c.title == "Pump room PR-1"
    # SPICE is case-insensitive: OUT and out are one node, spelt as first met; gnd is ground
    assert c.part("v1").nodes == ("Out", "0")
    assert c.part("R1").nodes == ("Out", "0") and c.part("r2").nodes == ("Out", "0")
    assert c.ground == "0"


# -- passive parts -----------------------------------------------------------------

def test_passives_with_parameters():
    p = parts("t\nV1 a 0 1\nR1 a b 1k m=2\nR2 b 0 r=10k\nC1 b 0 1u m=3 ic=0\n"
              "L1 a c 10m scale=2\nR3 c 0 1k tc1=0.001\n")
    # m: that many in parallel (ngspice manual, R/C/L instance parameters)
    assert_allclose(p["R1"].value, 500.0, rtol=1e-15)
    assert_allclose(p["R2"].value, 1e4, rtol=1e-15)
    assert_allclose(p["C1"].value, 3e-6, rtol=1e-15)
    assert_allclose(p["L1"].value, 0.02, rtol=1e-15)
    assert p["R1"].kind == "resistor" and p["C1"].kind == "capacitor"
    assert p["L1"].kind == "inductor" and p["L1"].resistance is None
    got = imp("t\nV1 a 0 1\nR3 a 0 1k tc1=0.001\n")
    assert any("tc1= is ignored" in w for w in got.warnings)


def test_every_part_takes_its_kinds_default_tolerance():
    got = imp("t\nV1 a 0 1\nR1 a b 1k\nC1 b 0 1n\nL1 b 0 1m\nI1 a 0 1m\n")
    for p in got.circuit.parts:
        assert (p.tol_low, p.tol_high) == KINDS[p.kind].default_tolerance
    assert got.defaults == {k: KINDS[k].default_tolerance for k in
                            ("voltage-source", "resistor", "capacitor", "inductor",
                             "current-source")}
    assert "Tolerances are not in a netlist" in got.circuit.notes


@pytest.mark.parametrize("line, words", [
    ("R1 a b 4k7", "reads as 4000"), ("R1 a b 1M", "mega is 'Meg'"),
    ("C1 a b 1F", "femto"), ("R1 a b 1x", "'x' after the number"),
])
def test_value_traps_are_warned(line, words):
    got = imp(f"t\nV1 a 0 1\nR0 b 0 1k\n{line}\n")
    assert any(words in w and w.startswith("line 4:") for w in got.warnings)


def test_digits_then_unit_letters_are_not_warned():
    got = imp("t\nV1 a 0 1\nR1 a 0 4.7kohm\nC1 a 0 10uF\n")
    assert got.warnings == ()


# -- sources -----------------------------------------------------------------------

def test_source_values():
    p = parts("t\nV1 a 0 12\nV2 b 0 DC 5\nV3 c 0 dc=3.3\nV4 d 0 DC 0 AC 1 90\nV5 e 0 AC\n"
              "V6 f 0 AC -2\nR1 a 0 1\nR2 b 0 1\nR3 c 0 1\nR4 d 0 1\nR5 e 0 1\nR6 f 0 1\n"
              ".ac lin 1 60 60\n")
    assert [p[r].value for r in ("V1", "V2", "V3")] == [12.0, 5.0, 3.3]
    assert all(p[r].waveform == "dc" for r in ("V1", "V2", "V3"))
    assert (p["V4"].waveform, p["V4"].value, p["V4"].phase) == ("ac", 1.0, 90.0)
    assert (p["V5"].waveform, p["V5"].value) == ("ac", 1.0)        # AC alone: magnitude 1
    assert (p["V6"].value, p["V6"].phase) == (2.0, 180.0)          # RMS cannot be negative
    assert all(p[r].off_state == "open" for r in p if r.startswith("V"))


def test_ac_frequency_sources():
    text = "t\nV1 a 0 AC 1\nR1 a 0 1k\n"
    with pytest.raises(NetlistError) as err:
        imp(text)
    assert err.value.line == 2 and "--frequency" in err.value.message
    assert imp(text, frequency=400.0).circuit.frequency == 400.0
    assert imp(text + ".ac lin 1 1k 1k\n").circuit.frequency == 1000.0
    with pytest.raises(NetlistError, match="no single frequency"):
        imp(text + ".ac dec 10 10 10k\n")


def test_sin_source_is_an_ac_source_of_its_rms():
    got = imp("t\nV1 L 0 SIN(0 325 50 0 0 30)\nR1 L 0 1k\n")
    v = got.circuit.part("V1")
    # RMS of a sine is its amplitude over sqrt(2) (handbook fact)
    assert_allclose(v.value, 325 / math.sqrt(2), rtol=1e-15)
    assert (v.waveform, v.phase, got.circuit.frequency) == ("ac", 30.0, 50.0)


def test_source_specs_that_are_not_used_are_warned():
    got = imp("t\nV1 a 0 DC 5 AC 1\nV2 b 0 PULSE(0 5 1u 1u 1u 1m 2m)\nV3 c 0\n"
              "R1 a 0 1\nR2 b 0 1\nR3 c 0 1\n")
    p = {x.ref: x for x in got.circuit.parts}
    assert (p["V1"].waveform, p["V1"].value) == ("dc", 5.0)
    assert p["V2"].value == 0.0 and p["V3"].value == 0.0
    text = "\n".join(got.warnings)
    assert "line 2: V1: the AC part (1) is not used" in text
    assert "line 3: V2: the PULSE(...) waveform is ignored" in text
    assert "line 4: V3: no value: taken as 0" in text
    assert "0 V source (an ammeter in SPICE)" in text


def test_current_source_direction():
    # ngspice manual: current flows from n+ through the source to n-, i.e. it leaves
    # the source at n-; formats.md: a current source drives its value out of nodes[0]
    p = parts("t\nI1 a 0 2m\nR1 a 0 1k\n")
    assert p["I1"].nodes == ("0", "a") and p["I1"].value == 0.002


# -- controlled sources: op-amps -------------------------------------------------------

def test_vcvs_to_ground_is_an_opamp():
    p = parts("t\nV1 in 0 1\nR0 in 0 1k\nE1 out 0 in fb 2e5\nR1 out fb 10k\nR2 fb 0 10k\n"
              "E2 0 o2 in fb 1e5\nR3 o2 0 1k\nE3 o3 0 in fb -50\nR4 o3 0 1k\n")
    assert (p["E1"].kind, p["E1"].nodes, p["E1"].gain) == ("opamp", ("in", "fb", "out"), 2e5)
    # V(0) - V(o2) = A (V(in) - V(fb))  is  V(o2) = A (V(fb) - V(in))
    assert (p["E2"].nodes, p["E2"].gain) == (("fb", "in", "o2"), 1e5)
    assert (p["E3"].nodes, p["E3"].gain) == (("fb", "in", "o3"), 50.0)


def test_controlled_sources_that_are_not_opamps_are_reported():
    got = imp("t\nV1 a 0 1\nR1 a b 1k\nR2 b 0 1k\nE1 a b b 0 2\nE2 c 0 POLY(1) b 0 0 1\n"
              "R3 c 0 1k\nG1 c 0 b 0 1m\n")
    reasons = {u.element: u.reason for u in got.unmapped}
    assert "not referred to ground" in reasons["E1"]
    assert "non-linear" in reasons["E2"]
    assert "voltage-controlled current source" in reasons["G1"]


# -- subcircuits -------------------------------------------------------------------------

SUB = """t
.subckt half top mid
RA top mid 1k
RB mid 0 1k
D1 mid 0 dmod
.ends
.subckt two top
X1 top m1 half
X2 m1 m2 half
.ends
V1 a 0 10
XA a half2 half
XB a two
"""


def test_subcircuits_are_flattened():
    got = imp(SUB)
    c = got.circuit
    assert [p.ref for p in c.parts] == ["V1", "XA.RA", "XA.RB", "XB.X1.RA", "XB.X1.RB",
                                        "XB.X2.RA", "XB.X2.RB"]
    assert c.part("XA.RA").nodes == ("a", "half2") and c.part("XA.RB").nodes == ("half2", "0")
    assert c.part("XB.X1.RB").nodes == ("XB.m1", "0")
    assert c.part("XB.X2.RA").nodes == ("XB.m1", "XB.m2")
    # the diode inside, once per instance, with the line of its definition
    diodes = [u for u in got.unmapped if u.element and u.element.endswith("D1")]
    assert [(u.line, u.element) for u in diodes] == [(5, "XA.D1"), (5, "XB.X1.D1"),
                                                    (5, "XB.X2.D1")]
    assert "instance XB.X1" in diodes[1].reason
    assert got.elements == 10          # V1, 3 in XA, 3 in each of XB's two halves


@pytest.mark.parametrize("text, line, words", [
    ("t\n.subckt a p\nR1 p 0 1\n", 2, "has no .ends"),
    ("t\nR1 a 0 1\n.ends\n", 3, "no .subckt before"),
    ("t\n.subckt a p\n.subckt b q\n.ends\n.ends\n", 3, "nested"),
    ("t\n.subckt a p\nX1 p a\n.ends\nV1 n 0 1\nX9 n a\n", 3, "contains itself"),
    ("t\n.subckt a p q\nR1 p q 1\n.ends\nV1 n 0 1\nX1 n a\n", 6, "has 2 ports"),
    ("t\n.subckt a p\nR1 p 0 1\n.ends\n.subckt a p\nR1 p 0 1\n.ends\n", 5, "defined twice"),
])
def test_bad_subcircuits(text, line, words):
    with pytest.raises(NetlistError) as err:
        imp(text)
    assert err.value.line == line and words in err.value.message
    assert err.value.file == "board.cir"


def test_subcircuits_not_mapped():
    got = imp("t\n.subckt amp a b params: g=2\nR1 a b 1k\n.ends\n.subckt unused a\nR1 a 0 1\n"
              ".ends\nV1 n 0 1\nR1 n 0 1k\nX1 n m amp\nX2 n m lib_part\n")
    reasons = {u.element: u.reason for u in got.unmapped}
    assert "takes parameters" in reasons["X1"]
    assert "no .subckt lib_part" in reasons["X2"]
    assert any("subcircuit unused is defined but no X line uses it" in w for w in got.warnings)


# -- what is reported ------------------------------------------------------------------------

def test_every_unmapped_line_is_listed_with_its_line():
    text = "\n".join([
        "Valve board",                                # 1
        ".model dmod d(is=1n)",                       # 2
        ".param r=1k",                                # 3
        ".include parts.lib",                         # 4
        "V1 a 0 12",                                  # 5
        "R1 a b 1k",                                  # 6
        "D1 b 0 dmod",                                # 7
        "Q1 a b 0 qmod",                              # 8
        "R2 b 0 {r}",                                 # 9
        "R3 b b 1k",                                  # 10
        "R1 b 0 2k",                                  # 11
        "RM b 0 rmodel",                              # 12
        "S1 a b c 0 smod",                            # 13
        ".control",                                   # 14
        "op",                                         # 15
        ".endc",                                      # 16
        ".op",                                        # 17
        ".foo",                                       # 18
        "R4 b 0 1k",                                  # 19
    ])
    got = imp(text)
    # the diode and its model card are read (formats.md section 4); Q1's model is missing
    assert [p.ref for p in got.circuit.parts] == ["V1", "R1", "D1", "R4"]
    listed = [(u.line, u.element) for u in got.unmapped]
    assert listed == [(3, None), (4, None), (8, "Q1"), (9, "R2"),
                      (10, "R3"), (11, "R1"), (12, "RM"), (13, "S1"), (14, None), (17, None),
                      (18, None)]
    reasons = [u.reason for u in got.unmapped]
    assert ".param is not read" in reasons[0]
    assert "not read" in reasons[1]
    assert "no .model qmod" in reasons[2] and "parameter expression" in reasons[3]
    assert "shorted by its own wiring" in reasons[4] and "second element" in reasons[5]
    assert "no value" in reasons[6] and "switch" in reasons[7]
    assert "lines 14-16" in reasons[8] and "simulator command" in reasons[9]
    assert ".foo command faultfind does not know" in reasons[10]
    assert got.unmapped[2].text == "Q1 a b 0 qmod"
    assert "Not mapped: Q1, R2, R3, R1, RM, S1" in got.circuit.notes.replace("\n", " ")


def test_a_dropped_part_can_leave_the_circuit_unchecked():
    got = imp("t\nV1 a 0 5\nR1 a b 1k\nC1 b c 1u\nD1 c 0 dmod\n")
    # c is reached only through C1 once D1 is dropped: floating (formats.md wiring checks)
    assert got.check_error is not None and "'c' has no DC path" in got.check_error
    assert any("does not pass faultfind's checks" in w for w in got.warnings)


@pytest.mark.parametrize("text, line, words", [
    ("", 1, "empty"),
    ("   \n\n", 1, "empty"),
    ("t\n+ R1 a 0 1k\n", 2, "continuation line"),
    ("t\nR1 a\n", 2, "needs two nodes and a value"),
    ("t\nV1\n", 2, "needs two nodes"),
    ("t\nR1 a 0 1e999\n", 2, "is not a number"),
    ("t\nV1 a 0 DC\n", 2, "DC needs a value"),
    ("t\nE1 o 0 a\n", 2, "takes 4 nodes and a gain"),
    ("t\nD1 a 0 dmod\n.model dmod nmos\n", 2, "nothing in the netlist maps"),
    ("t\nD1 a 0\n", 2, "needs two nodes and a model name"),
    ("t\nQ1 c b e\n", 2, "needs three nodes (collector base emitter) and a model"),
    ("t\n* only comments\n.end\n", 1, "it holds no elements"),
    ("t\n.control\nop\n", 2, ".control has no .endc"),
])
def test_bad_netlists(text, line, words):
    with pytest.raises(NetlistError) as err:
        imp(text)
    assert err.value.line == line and words in err.value.message
    assert str(err.value).startswith(f"board.cir:{line}: ")


# -- the command -------------------------------------------------------------------------

NETLIST = """Sump pump alarm SP-3 (invented)
V1 +12V 0 DC 12      ; alarm supply
R1 +12V SENSE 10k
R2 SENSE 0 4.7k
C1 SENSE 0 100n
D1 SENSE 0 dmod
.model dmod d
.op
.end
"""


def run(capsys, argv):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


def test_import_writes_a_circuit_file(tmp_path, capsys):
    src = tmp_path / "sump.cir"
    src.write_text(NETLIST, encoding="utf-8")
    out = tmp_path / "sump.toml"
    code, stdout, stderr = run(capsys, ["import", str(src), "-o", str(out)])
    assert code == 0
    assert f"wrote {out}: 5 part(s) mapped from 5 element line(s)" in stdout
    # the diode and its model card are read (SPICE defaults IS 1e-14 A, N 1)
    assert "D1 SENSE" not in stderr and ".model dmod" not in stderr
    assert f"not mapped: {src}:8: .op" in stderr
    assert "every part takes its kind's default (voltage-source ±5 %, resistor ±5 %, " \
           "capacitor ±20 %, diode ±10 %)" in stderr
    c = load_circuit(out)
    assert [p.ref for p in c.parts] == ["V1", "R1", "R2", "C1", "D1"]
    assert c.part("D1").kind == "diode" and c.part("D1").ideality == 1.0
    assert c.part("V1").label == "alarm supply"
    code, stdout, _ = run(capsys, ["check", str(out)])
    assert code == 0 and "circuit file OK" in stdout


def test_import_never_overwrites_without_force(tmp_path, capsys):
    src = tmp_path / "sump.cir"
    src.write_text(NETLIST, encoding="utf-8")
    out = tmp_path / "sump.toml"
    out.write_text("# my hand-written file\n", encoding="utf-8")
    code, _, stderr = run(capsys, ["import", str(src), "-o", str(out)])
    assert code == 2 and f"{out}: exists already" in stderr and "--force" in stderr
    assert out.read_text(encoding="utf-8") == "# my hand-written file\n"
    code, _, stderr = run(capsys, ["import", str(src), "-o", str(src), "--force"])
    assert code == 2 and "is the netlist itself" in stderr
    assert src.read_text(encoding="utf-8") == NETLIST
    code, _, _ = run(capsys, ["import", str(src), "-o", str(out), "--force"])
    assert code == 0 and load_circuit(out).part("R1").value == 1e4


def test_import_to_stdout_and_json(tmp_path, capsys):
    src = tmp_path / "sump.cir"
    src.write_text(NETLIST, encoding="utf-8")
    code, stdout, stderr = run(capsys, ["import", str(src)])
    assert code == 0 and stdout.startswith("format = 1\ntitle = \"Sump pump alarm SP-3")
    assert "5 part(s) mapped" in stderr
    code, stdout, _ = run(capsys, ["import", str(src), "--json"])
    doc = json.loads(stdout)
    assert code == 0 and doc["parts"] == 5 and doc["elements"] == 5
    assert [u["line"] for u in doc["unmapped"]] == [8]
    assert doc["unmapped"][0]["element"] is None
    assert doc["default_tolerances"]["resistor"] == [0.05, 0.05]
    assert doc["circuit_file"].startswith("format = 1")


@pytest.mark.parametrize("content, argv, words", [
    ("t\nD1 a 0 dmod\n", [], "x.cir:2: nothing in the netlist maps"),
    ("t\nR1 a\n", [], "x.cir:2: R1 needs two nodes"),
    ("t\nV1 a 0 AC 1\nR1 a 0 1\n", [], "x.cir:2: V1 is an AC source"),
    ("t\nV1 a 0 AC 1\nR1 a 0 1\n", ["--frequency", "fast"], "key '--frequency'"),
    (b"t\nR1 a 0 1\xff\n", [], "x.cir:2: the netlist is not UTF-8"),
])
def test_import_refuses_bad_netlists(tmp_path, capsys, content, argv, words):
    src = tmp_path / "x.cir"
    if isinstance(content, bytes):
        src.write_bytes(content)
    else:
        src.write_text(content, encoding="utf-8")
    out = tmp_path / "x.toml"
    code, _, stderr = run(capsys, ["import", str(src), "-o", str(out), *argv])
    assert code == 2 and words in stderr and "Traceback" not in stderr
    assert not out.exists()


def test_import_of_a_missing_netlist(tmp_path, capsys):
    code, _, stderr = run(capsys, ["import", str(tmp_path / "nope.cir")])
    assert code == 2 and "nope.cir: no such file" in stderr


def test_import_with_an_ac_frequency(tmp_path, capsys):
    src = tmp_path / "gen.cir"
    src.write_text("gen\nV1 a 0 AC 1\nR1 a b 600\nC1 b 0 100n\nR2 b 0 10k\n", encoding="utf-8")
    out = tmp_path / "gen.toml"
    code, _, _ = run(capsys, ["import", str(src), "-o", str(out), "--frequency", "1.5 kHz"])
    assert code == 0 and load_circuit(out).frequency == 1500.0
