"""Drills on boards with semiconductors (faultfind/drill/).

The hidden fault may be a junction fault; the simulated meter gives diode-test
readings, which are power-off readings: refused on the live board (a safety
error, as an ohmmeter on a live circuit) and taken once isolated.  Outside
references: a shorted LED reads about 0 V on a diode test and a healthy white
LED OL on a 2 V diode display (common practice, no source); a silicon
junction reads 0.5-0.7 V (from memory).
"""

from __future__ import annotations

import numpy as np

from faultfind.drill import Drill, check_fault, draw_fault
from faultfind.io.meters_file import meters_with_default
from faultfind.model import Circuit, Part, Reading, fault_mode_name

METERS = meters_with_default()


def board():
    """Sign lamp board: 12 V, a series diode, two red LEDs with 470 ohm, an npn switch."""
    return Circuit("sign lamp board (test)", "0V", (
        Part("PS1", "voltage-source", ("+12V", "0V"), 12.0, 0.02, 0.02, off_state="open"),
        Part("D1", "diode", ("+12V", "RAIL"), 0.62, 0.1, 0.1),
        Part("R1", "resistor", ("RAIL", "A"), 470.0, 0.05, 0.05),
        Part("LED1", "led", ("A", "K"), 1.9, 0.05, 0.05),
        Part("LED2", "led", ("K", "0V"), 1.9, 0.05, 0.05),
        Part("R2", "resistor", ("RAIL", "B"), 22e3, 0.05, 0.05),
        Part("R3", "resistor", ("B", "0V"), 10e3, 0.05, 0.05),
        Part("R4", "resistor", ("RAIL", "C"), 1000.0, 0.05, 0.05),
        Part("Q1", "npn", ("C", "B", "0V"), None, gain=150.0, vbe=0.65)))


def test_drawn_faults_include_junction_faults_and_each_shows():
    c = board()
    drawn = [draw_fault(c, seed, METERS) for seed in range(40)]
    kinds = {c.part(f.ref).kind for f in drawn}
    assert kinds & {"diode", "led", "npn"}, drawn
    for f in drawn:
        assert f.mode in c.part(f.ref).fault_modes
        if f.mode == "leaky":
            assert 100 <= f.value <= 5000
        if f.mode == "drift" and c.part(f.ref).is_semiconductor:
            p = c.part(f.ref)   # clearly outside the 5-10 % tolerance
            assert abs(f.value / p.value - 1) > 0.1


def test_diode_test_is_power_off_in_a_drill():
    c = board()
    d = Drill(c, "sam", seed=3, fault=check_fault(c, "LED2", "short"), caution_acknowledged=True)
    step = d.read(Reading("diode-test", None, part="LED2"))
    assert step.kind == "refused" and step.safety_error and "diode test" in step.message.lower()
    assert d.safety_errors == 1
    d.isolate()
    shorted = d.read(Reading("diode-test", None, part="LED2"))
    good = d.read(Reading("diode-test", None, part="D1"))
    assert shorted.kind == "reading" and good.kind == "reading"
    assert shorted.reading.overrange == 0 and shorted.reading.value < 0.05
    assert good.reading.overrange == 0 and 0.5 < good.reading.value < 0.7
    # a live reading on the isolated board shows nothing (not an error)
    assert d.read(Reading("voltage", "dc", "A", "0V")).kind == "refused"


def test_a_leaky_verdict_may_name_its_leak():
    c = board()
    f = check_fault(c, "D1", "leaky", "2k2")
    assert (f.ref, f.mode) == ("D1", "leaky") and np.isclose(f.value, 2200.0)
    assert check_fault(c, "D1", "leaky").value is None
    assert "leaky" in f.describe(c)


def test_diode_test_command_words():
    c = board()
    d = Drill(c, "sam", seed=4, fault=check_fault(c, "D1", "open"), caution_acknowledged=True)
    d.isolate()
    step = d.command("read D D1")
    assert step.kind == "reading" and step.reading.quantity == "diode-test"
    assert step.reading.overrange == 1                      # an open junction: OL
    step = d.command("read D B,0V")                         # Q1's base-emitter junction
    assert step.kind == "reading" and 0.5 < step.reading.value < 0.7
    assert "D B" in step.message


def test_a_diode_test_that_would_have_told_is_a_power_off_reading():
    # the relay driver's output stage sagging (OUT4 at 3.14 V) named as Q1's base-emitter
    # junction open: only a diode test on Q1's base tells the two apart (an open junction
    # reads OL, a healthy one 0.5-0.7 V, from memory), and it is taken isolated
    from pathlib import Path

    from faultfind.io.circuit_file import load_circuit
    case = Path(__file__).resolve().parent.parent / "field_cases" / "irrigation_valve_relay_driver"
    c = load_circuit(case / "circuit.toml")
    d = Drill(c, "sam", seed=5, fault=check_fault(c, "OUT4", "drift", "3.14"),
              caution_acknowledged=True)
    d.isolate()
    d.command("read D D1")
    d.verdict("Q1", "base-emitter-open")
    lines = [x for x in d.result.explanation.verdict if "would have" in x]
    assert lines, d.result.explanation.verdict
    assert "D B" in lines[0] and "(board isolated)" in lines[0]
    assert "energized" not in lines[0]


def test_transistor_modes_as_formats_md_writes_them():
    # formats.md section 4's table writes "base-emitter open"; faultfind's spelling is
    # base-emitter-open (JSON, tables): both, and any case or underscores, are one mode
    c = board()
    for text in ("base-emitter open", "Base_Emitter_Open", " BASE-EMITTER-OPEN "):
        assert check_fault(c, "Q1", text).mode == "base-emitter-open"
    assert fault_mode_name("collector  emitter") == "collector-emitter"
    assert fault_mode_name(None) == ""
    d = Drill(c, "sam", seed=4, fault=check_fault(c, "Q1", "base-emitter-short"),
              caution_acknowledged=True)
    step = d.command("verdict Q1 base-emitter short")
    assert step.kind == "verdict" and d.result.correct


def test_a_logbook_outcome_takes_the_spelled_out_mode(tmp_path):
    from pathlib import Path

    from faultfind.io.logbook import Logbook
    case = Path(__file__).resolve().parent.parent / "field_cases" / "irrigation_valve_relay_driver"
    with Logbook(tmp_path / "book.sqlite") as book:
        s = book.start_session(case / "circuit.toml", unit="zone 4")
        closed = book.close_session(s.id, ["Q1:base-emitter open"])
        assert closed.outcome.faults == (("Q1", "base-emitter-open"),)
