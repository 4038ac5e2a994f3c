"""Tests of the drill library (faultfind/drill.py): hidden faults, the simulated meter, safe
habits, scoring and explanations, and the logbook's drill records.

Outside references are named beside each check: hand calculations with Ohm's law and the
voltage-divider rule, the meter accuracy convention ``±(% of reading + counts)`` and the
range rule of formats.md section 3, the field cases' answer keys, the failure-mode priors
of faultfind/engine/priors.py (MIL-HDBK-338B from memory; common practice), and the
drill rules of the issue ("Drill mode") that docs/drill.md records.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from faultfind.advise import suggest
from faultfind.drill import (EFFORT_ALLOWANCE, Drill, DrillFault, check_fault,
                             describe_reading, draw_fault, parse_fault)
from faultfind.errors import InputError
from faultfind.io.circuit_file import load_circuit
from faultfind.io.logbook import Logbook
from faultfind.io.meters_file import DEFAULT_METER

ROOT = Path(__file__).resolve().parent.parent
CASES = ROOT / "field_cases"
BOOSTER = load_circuit(CASES / "booster_pump_panel" / "circuit.toml")
GREENHOUSE = load_circuit(CASES / "greenhouse_vent_thermistor_amp" / "circuit.toml")
PAGING = load_circuit(CASES / "paging_amp_voiceband_filter" / "circuit.toml")


def _value(drill, ref):
    return drill.board.part(ref).value


def _spec(percent, counts, value, resolution):
    """Half-width of ``±(percent % of reading + counts)`` plus half a display step."""
    return percent / 100 * abs(value) + counts * resolution + resolution / 2


def fuse_drill(seed=5, **kw):
    d = Drill(BOOSTER, "Sam Okafor", seed=seed, fault="F1:open", **kw)
    return d


# -- the board and the hidden fault ------------------------------------------------------


def test_healthy_parts_take_values_inside_their_tolerances():
    d = Drill(GREENHOUSE, "Sam", seed=3, fault="none")
    for drawn, drawn_as in zip(d.board.parts, GREENHOUSE.parts):
        if drawn_as.value is None:
            continue
        # formats.md section 1: tolerance "5%" means the actual value lies within ±5 % of nominal
        lo, hi = drawn_as.value * (1 - drawn_as.tol_low), drawn_as.value * (1 + drawn_as.tol_high)
        assert lo * (1 - 1e-12) <= drawn.value <= hi * (1 + 1e-12), drawn.ref


def test_the_same_seed_gives_the_same_drill():
    script = ["ack", "read V +24V", "read V 24V-F", "read I H1", "read V GUARD"]
    a, b = Drill(BOOSTER, "Sam", seed=2026), Drill(BOOSTER, "Ana", seed=2026)
    # the issue: "a seed makes a drill repeatable for a class": same hidden fault, same board
    assert a.hidden_fault == b.hidden_fault
    assert [p.value for p in a.board.parts] == [p.value for p in b.board.parts]
    for cmd in script:
        a.command(cmd)
    for cmd in [script[0], *reversed(script[1:])]:  # the same readings in another order
        b.command(cmd)
    shown_a = {describe_reading(r): r.raw for r in a.readings}
    shown_b = {describe_reading(r): r.raw for r in b.readings}
    assert shown_a == shown_b  # same display for the same reading, whatever the order
    c = Drill(BOOSTER, "Sam", seed=2027)
    # a different seed draws another board: tolerances are continuous, so values differ
    assert [p.value for p in c.board.parts if p.tol_high] != \
        [p.value for p in a.board.parts if p.tol_high]


def test_drawn_faults_follow_the_priors_and_show_on_a_reading():
    counts = {}
    for seed in range(80):
        f = draw_fault(BOOSTER, np.random.default_rng(seed))
        part = BOOSTER.part(f.ref)
        # formats.md kinds table: a mode the kind lacks is never proposed
        assert f.mode in part.fault_modes
        if f.mode == "drift":
            # formats.md: drift is a value out of tolerance; the drill plants it clearly so
            ratio = f.value / part.value
            assert ratio > 1 + part.tol_high or ratio < 1 - part.tol_low
        counts[f.ref] = counts.get(f.ref, 0) + 1
    # engine/priors.py (common practice, no source): a supply is 4x as likely to be the
    # culprit as a film resistor; over 80 draws PS1 comes up more often than lamp H1
    assert counts.get("PS1", 0) > counts.get("H1", 0)
    assert set(counts) <= {p.ref for p in BOOSTER.parts}


def test_trainer_faults_are_checked_against_the_circuit():
    assert parse_fault("F1:open", BOOSTER) == DrillFault("F1", "open")
    assert parse_fault("none", BOOSTER) == DrillFault()
    # IEC 60062 RKM code "1k" read as 1000 ohm
    assert parse_fault("H1:drift:1k", BOOSTER) == DrillFault("H1", "drift", 1000.0)
    bad = ["F9:open", "F1:short", "H1:drift", "F1:open:3", "garbage", "H1:drift:-5",
           "H1:drift:12 V"]
    for text in bad:
        with pytest.raises(InputError) as e:
            parse_fault(text, BOOSTER)
        assert isinstance(e.value, ValueError) and e.value.key == "--fault", text
    # formats.md kinds table: a fuse's modes are open and drift, never short
    with pytest.raises(InputError, match="open, drift"):
        check_fault(BOOSTER, "F1", "short")


def test_bad_drill_arguments_raise_input_errors():
    for kw, key in ((dict(apprentice=""), "apprentice"), (dict(seed=-1), "seed"),
                    (dict(seed="x"), "seed"), (dict(fault=42), "fault"),
                    (dict(costs={"walk": 1}), "costs")):
        args = dict(apprentice="Sam") | kw
        with pytest.raises(InputError) as e:
            Drill(BOOSTER, args.pop("apprentice"), **args)
        assert e.value.key == key
    with pytest.raises(InputError):
        Drill("circuit.toml", "Sam")
    with pytest.raises(InputError):
        Drill(BOOSTER, "Sam", seed=1).command(None)


# -- the simulated meter -----------------------------------------------------------------


def test_readings_come_back_as_the_default_meter_shows_them():
    d = fuse_drill()
    d.command("ack")
    supply = d.command("read V +24V").reading
    # formats.md section 3 range rule: 6000 counts x 10 mV = 60 V > 24 V > 6 V, so a 10 mV step
    step = 0.01
    assert abs(supply.value / step - round(supply.value / step)) < 1e-6
    # DEFAULT_METER's DC volts spec ±(0.5 % + 2 counts): the display lies within it of the
    # supply's actual output (an ideal source holds its node at its own value)
    assert abs(supply.value - _value(d, "PS1")) <= _spec(0.5, 2, _value(d, "PS1"), step)
    dead = d.command("read V 24V-F").reading
    # Ohm's law: with F1 open nothing feeds 24V-F; the lamp and the coils hold it at 0 V;
    # on the finest range (0.1 mV) the display is within 2 counts of zero
    assert abs(dead.value) <= _spec(0.5, 2, 0.0, 1e-4)
    d.command("isolate")
    fuse = d.command("read R F1").reading
    # field case answer key (booster_pump_panel/README.md): the blown fuse reads OL in its
    # holder with the power off, nothing else being in parallel once PS1 is off
    assert fuse.raw == "OL" and fuse.overrange == 1 and fuse.value is None


def test_the_meter_loads_a_high_impedance_node():
    slow = replace(DEFAULT_METER, input_resistance=100e3)  # an old 100 kohm meter
    d = Drill(GREENHOUSE, "Sam", seed=9, fault="none", meters={"default": slow},
              caution_acknowledged=True)
    th = d.command("read V TH").reading
    ps1, r1, rt1 = _value(d, "PS1"), _value(d, "R1"), _value(d, "RT1")
    # voltage-divider rule with the meter's 100 kohm across RT1 (R2 feeds only the op-amp
    # input and C1, which draw no DC current)
    lower = rt1 * 100e3 / (rt1 + 100e3)
    loaded, unloaded = ps1 * lower / (r1 + lower), ps1 * rt1 / (r1 + rt1)
    tol = _spec(0.5, 2, loaded, 1e-3)  # 6000 counts: 1 mV steps below 6 V
    assert abs(th.value - loaded) <= tol
    assert abs(th.value - unloaded) > tol  # the loading is visible, as on site


def test_ac_readings_at_the_chosen_frequency():
    d = Drill(PAGING, "Sam", seed=4, fault="none", caution_acknowledged=True)
    b = {p.ref: p.value for p in d.board.parts if p.value is not None}
    for text, f in (("read V OUT ac", 1000.0), ("read V OUT ac 20k", 20e3)):
        step = d.command(text)
        w = 2 * math.pi * f
        # hand nodal solution of the board (ideal op-amp, gain 1 + R3/R2; meter's 10 Mohm
        # across OUT): high-pass C1 into R1 from the 600 ohm generator, low-pass R4 into
        # C2 || R5
        hp = b["VG1"] * b["R1"] / (b["RG1"] + b["R1"] + 1 / (1j * w * b["C1"]))
        buf = hp * (1 + b["R3"] / b["R2"])
        z = 1 / (1 / b["R5"] + 1j * w * b["C2"] + 1 / 10e6)
        out = abs(buf * z / (b["R4"] + z))
        # ±(1.0 % + 3 counts) AC volts of the default meter, 1 mV steps below 6 V, plus
        # 0.01 % for the op-amp's finite gain (1e5, from memory)
        assert abs(step.reading.value - out) <= _spec(1.0, 3, out, 1e-3) + 1e-4 * out, text
        # docs/advice.md cost model: a voltage costs 1, another generator frequency 1 more
        assert step.effort == (1.0 if f == PAGING.frequency else 2.0)
    hi, lo = d.readings[0].value, d.readings[1].value
    assert lo < hi / 3  # a first-order low-pass at 3.4 kHz: 20 kHz is well down (|H| ~ 0.17)


# -- safe habits -------------------------------------------------------------------------


def test_a_live_resistance_request_is_refused_and_counted():
    d = fuse_drill()
    first = d.command("read V +24V")
    # the issue: readings taken without acknowledging the caution are refused and counted
    assert first.kind == "refused" and first.safety_error and d.safety_errors == 1
    d.command("ack")
    live = d.command("read R F1")
    # common practice (IEC 61010-1 cautions; lock-out/verify-dead before ohmmeter work):
    # an ohmmeter on a live board is refused and is a safety error
    assert live.kind == "refused" and live.safety_error and "live" in live.message
    assert d.safety_errors == 2 and d.readings == [] and d.effort == 0
    iso = d.command("isolate")
    assert iso.kind == "power" and d.power == "off" and iso.effort == 3  # docs/advice.md
    assert d.command("read R F1").kind == "reading"
    dead = d.command("read V +24V")
    # an isolated board has nothing to read: refused, but not unsafe
    assert dead.kind == "refused" and not dead.safety_error and d.safety_errors == 2
    assert d.command("energize").effort == 2  # docs/advice.md: restoring power costs 2
    assert d.command("read V +24V").kind == "reading"
    d.command("verdict F1 open")
    # docs/drill.md: 15 safety points, 10 off per safety error
    assert d.result.score.safety == 0 and d.result.safety_errors == 2


def test_the_caution_warns_of_a_board_above_extra_low_voltage():
    kiln = load_circuit(CASES / "kiln_contactor_snubber" / "circuit.toml")
    # IEC 61140 / IEC 60364-4-41 (from memory): ELV is at most 50 V AC or 120 V ripple-free
    # DC; the kiln's 230 V AC supply is above it, the booster panel's 24 V DC is not
    assert "above extra-low voltage" in Drill(kiln, "Sam", seed=1).caution
    assert "230 V AC" in Drill(kiln, "Sam", seed=1).caution
    assert "extra-low" not in Drill(BOOSTER, "Sam", seed=1).caution


# -- scoring and explanation -------------------------------------------------------------


def test_a_scripted_drill_solved_correctly_scores_full_marks():
    d = fuse_drill()
    for cmd in ("ack", "read V +24V", "read V 24V-F", "verdict F1 open"):
        d.command(cmd)
    r = d.result
    # precondition of the full-marks rule: no more effort than the advice path + 2
    assert r.effort <= r.advice.effort + EFFORT_ALLOWANCE
    assert r.correct and r.safety_errors == 0 and r.hints == 0
    # the issue: a correct verdict, no safety errors, effort within the allowance: full marks
    assert (r.score.total, r.score.correctness, r.score.effort, r.score.safety) == \
        (100, 60, 25, 15)
    # Ohm's law: an open fuse leaves its load side at 0 V, far below the healthy 24 V band
    assert 2 in r.explanation.pointing
    assert r.explanation.verdict[0].startswith("Right")
    assert d.finished and d.command("read V +24V").kind == "error"  # the drill is over


def test_a_wrong_verdict_is_scored_and_explained():
    d = fuse_drill()
    for cmd in ("ack", "read V +24V", "read V 24V-F", "verdict H1 open"):
        d.command(cmd)
    r = d.result
    # docs/drill.md: a wrong part earns no correctness and no effort points
    assert not r.correct and (r.score.correctness, r.score.effort, r.score.safety) == (0, 0, 15)
    assert r.score.total == 15
    lines = r.explanation.verdict
    assert "F1 open" in lines[0] and "H1 open" in lines[0]
    # Ohm's law: with only H1 open the fuse is whole and its load side sits at the supply's
    # ~24 V, so reading #2 (0 V) speaks against the verdict
    against = [x for x in lines if x.startswith("Against")]
    assert against and "#2 V 24V-F" in against[0]
    number = against[0].split("would read ")[1].split(" V")[0]
    assert 23.0 < float(number) < 25.0


def test_a_wrong_verdict_the_readings_could_not_see_names_the_reading_that_would():
    d = fuse_drill()
    for cmd in ("ack", "read V +24V", "verdict S1 open"):
        d.command(cmd)
    lines = d.result.explanation.verdict
    tell = [x for x in lines if x.startswith("None of your readings")]
    # the supply's own terminal reads 24 V whichever of F1 and S1 is open (Kirchhoff: the
    # source holds its node), so the explanation names a reading that separates them
    assert tell and "S1 open" in tell[0] and "F1 open" in tell[0]


def test_a_drift_verdict_needs_its_value_within_twenty_percent():
    def run(verdict):
        d = Drill(BOOSTER, "Sam", seed=8, fault="H1:drift:1k", caution_acknowledged=True)
        d.command("read I H1")
        assert d.command("verdict H1 drift").kind == "error"  # a drift needs its value
        d.command(verdict)
        return d.result

    near, far = run("verdict H1 drift 1k1"), run("verdict H1 drift 1k5")
    # the issue: a drift's value counts when within ±20 % (1.1 k is +10 %, 1.5 k +50 %)
    assert near.value_right and near.score.correctness == 60
    assert not far.value_right and far.mode_right and far.score.correctness == 50


def test_readings_that_pointed_were_wasted_or_confirmed():
    d = fuse_drill(caution_acknowledged=True)
    for cmd in ("read V +24V", "read V +24V", "read V 24V-F", "read V +24V", "isolate",
                "read R F1", "verdict F1 open"):
        d.command(cmd)
    cats = {n.seq: n.category for n in d.result.explanation.readings}
    # the definitions (docs/drill.md): a healthy supply reading rules out a dead or
    # sagging PS1 (it moved the ranking); the same reading again tells nothing new; 0 V after
    # the fuse points to F1 (Ohm's law); the supply once more, after that settled it, is a
    # confirmation; the fuse reading OL points to it too (field case answer key)
    assert cats == {1: "cleared", 2: "wasted", 3: "pointed", 4: "confirmed", 5: "pointed"}
    assert d.result.explanation.wasted == (2,)


def test_the_soonest_reading_is_the_advice_from_the_start():
    d = fuse_drill(caution_acknowledged=True)
    d.command("verdict F1 open")
    first = suggest(BOOSTER, [], d.meters, top=1)[0].reading  # faultfind.advise, the yardstick
    adv = d.result.advice
    assert describe_reading(adv.readings[0]) == describe_reading(first)
    assert describe_reading(first, BOOSTER) in d.result.explanation.settle
    assert adv.readings[0].raw in d.result.explanation.settle
    # a guess with no readings is right but unsupported: the explanation says so
    assert any("did not show it" in x for x in d.result.explanation.verdict)


def test_hints_cost_points_and_none_means_no_fault():
    d = Drill(BOOSTER, "Sam", seed=1, fault="none", caution_acknowledged=True)
    hint = d.command("suggest")
    assert hint.kind == "hint" and hint.reading is not None and d.hints == 1
    d.command(f"read {describe_reading(hint.reading, BOOSTER)}")
    d.command("verdict none")
    # docs/drill.md: 5 points off per hint; "no fault" is the right call on a healthy unit
    assert d.result.correct and d.result.score.hints == 5 and d.result.score.total == 95
    e = Drill(BOOSTER, "Sam", seed=1, fault="none", caution_acknowledged=True)
    e.command("verdict F1 open")
    assert e.result.score.correctness == 0 and not e.result.correct


def test_bad_commands_are_answered_and_the_drill_goes_on():
    d = fuse_drill(caution_acknowledged=True)
    for cmd in ("bogus", "read", "read V NOPE", "read X TP1", "read R F1 ac", "verdict",
                "verdict F9 open", "verdict F1 short", "verdict none now", "isolate now", ""):
        step = d.command(cmd)
        assert step.kind == "error" and step.message, cmd
    assert "did you mean" in d.command("verdict F2 open").message  # F1 is close
    assert not d.finished and d.safety_errors == 0 and d.readings == [] and d.effort == 0
    assert d.command("read V 24V-F").kind == "reading"
    assert d.command("quit").kind == "quit" and d.finished and d.result is None
    with pytest.raises(InputError):
        d.record_fields()  # nothing to record without a verdict


# -- the logbook -------------------------------------------------------------------------


def test_results_are_kept_per_apprentice_with_a_summary(tmp_path):
    path = tmp_path / "book.sqlite"
    with Logbook(path) as book:
        for seed, verdict in ((5, "F1 open"), (6, "H1 open")):
            d = fuse_drill(seed=seed, caution_acknowledged=True)
            d.command("read V 24V-F")
            d.command("read R F1")  # live: a safety error
            d.command(f"verdict {verdict}")
            book.record_drill(**d.record_fields("booster.toml"))
        other = fuse_drill(seed=7, caution_acknowledged=True)
        other.apprentice = "Ana"
        other.command("verdict F1 open")
        book.record_drill(**other.record_fields("booster.toml"))
    with Logbook(path) as book:
        records = book.list_drills("sam okafor")  # any case
        assert [r.seed for r in records] == [5, 6]
        assert records[0].fault == ("F1", "open", None) and records[1].verdict[0] == "H1"
        assert records[0].document["result"]["score"]["total"] == records[0].score
        s = book.drill_summary("Sam Okafor")
    # one right, one wrong: 50 % accuracy; each drill one safety error and one reading
    assert (s.drills, s.correct, s.accuracy, s.safety_errors) == (2, 1, 0.5, 2)
    assert s.mean_readings == 1.0 and sum(w.drills for w in s.weeks) == 2
    assert s.mean_score == (records[0].score + records[1].score) / 2


def test_record_drill_checks_its_fields(tmp_path):
    d = fuse_drill(caution_acknowledged=True)
    d.command("verdict F1 open")
    good = d.record_fields("booster.toml")
    with Logbook(tmp_path / "b.sqlite") as book:
        for change, key in ((dict(score=101), "score"), (dict(apprentice=" "), "apprentice"),
                            (dict(readings=-1), "readings"), (dict(effort=float("nan")), "effort"),
                            (dict(fault=("F1",)), "fault"), (dict(document="x"), "document"),
                            (dict(correct=1), "correct")):
            with pytest.raises(InputError) as e:
                book.record_drill(**(good | change))
            assert e.value.key == key
        assert book.list_drills() == []  # nothing was stored
