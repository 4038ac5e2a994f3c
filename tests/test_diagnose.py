"""Diagnosis on small invented circuits whose answer Ohm's law gives.

The library call :func:`faultfind.diagnose.diagnose` and its JSON document
(:func:`faultfind.diagnose.diagnosis_json`, cli.md ``diagnose --json``).  The
outside reference for every expected reading is Ohm's law and the voltage
divider rule (any circuit-analysis text, e.g. Horowitz and Hill, *The Art of
Electronics*, 3rd ed., section 1.2 -- from memory), with the meter drawn in as
what it is: 10 Mohm across the probes on voltage (the default profile), 1 ohm
in series on current.  Simulated readings come from
:func:`faultfind.simulate.simulate_readings` with fixed seeds.

The circuits are invented: a walk-in cooler controller's sense divider, an
irrigation valve driver's divider, a car-wash pump interlock.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from faultfind.diagnose import diagnose, diagnosis_json
from faultfind.io.meters_file import meters_with_default
from faultfind.model import Circuit, Part, Reading
from faultfind.simulate import simulate_readings

METERS = meters_with_default()
RIN = 10.0e6       # the default meter's input resistance (faultfind.io.meters_file.DEFAULT_METER)
SHUNT = 1.0        # the default meter's current shunt


def res(ref, a, b, value, tol=0.01):
    return Part(ref, "resistor", (a, b), value, tol, tol)


def supply(ref, plus, volts, tol=0.01):
    return Part(ref, "voltage-source", (plus, "0V"), volts, tol, tol)


def volts(plus, value, minus="0V", label=""):
    return Reading("voltage", "dc", plus, minus, value=value, raw=f"{value} V", label=label)


def amps(part, value, label=""):
    return Reading("current", "dc", part=part, value=value, raw=f"{value} A", label=label)


def cooler():
    """Walk-in cooler controller: 12 V through three 10 kohm 1 % resistors, taps A and B."""
    return Circuit("cooler 3 sense divider", "0V",
                   (supply("PS1", "+12V", 12.0), res("R1", "+12V", "A", 10e3),
                    res("R2", "A", "B", 10e3), res("R3", "B", "0V", 10e3)))


def par(*rs):
    return 1.0 / sum(1.0 / r for r in rs)


def check_estimates(d):
    """Every estimate has low <= value <= high (cli.md: a ~95 % interval around it)."""
    assert d.estimates, "diagnose gave no estimates"
    for ref, e in d.estimates.items():
        if e.value is not None and np.isfinite(e.value):
            assert e.low <= e.value * (1 + 1e-12) and e.value <= e.high * (1 + 1e-12), (ref, e)


def check_json(d):
    doc = diagnosis_json(d)
    probs = [h["probability"] for h in doc["hypotheses"]]
    # cli.md: "Probabilities over the list sum to 1."
    assert math.isclose(sum(probs), 1.0, rel_tol=1e-9, abs_tol=1e-9)
    assert all(0.0 <= p <= 1.0 for p in probs)
    assert probs == sorted(probs, reverse=True)           # most likely first (cli.md)
    assert all(h["readings"] == len(d.readings) for h in doc["hypotheses"])
    return doc


# ---------------------------------------------------------------- open part

def test_open_series_resistor_ranks_first():
    """R2 open: no current flows, so A sits at the supply less R1's drop into the
    meter's 10 Mohm, and B is pulled to 0 V by R3 (Ohm's law)."""
    c = cooler()
    va = 12.0 * RIN / (RIN + 10e3)          # 11.988 V: R1 in series with the meter
    rds = [volts("+12V", 12.00), volts("A", round(va, 3)), volts("B", 0.0)]
    d = diagnose(c, rds, METERS, top=100)
    top = d.hypotheses[0]
    assert d.verdict == "fault"
    assert [(f.ref, f.mode) for f in top.faults] == [("R2", "open")]
    assert top.probability > 0.9
    healthy = [h for h in d.hypotheses if not h.faults]
    assert healthy, "the healthy circuit must be among the hypotheses considered"
    assert healthy[0].probability < 1e-6                   # far behind
    assert healthy[0].chi2 > 100 * max(top.chi2, 1.0)
    # The open part is estimated far above its nominal value.
    assert d.estimates["R2"].value > 100 * 10e3
    check_estimates(d)
    check_json(d)


def test_open_upper_resistor_not_confused_with_lower_short():
    """R1 open and R3 short both put B at 0 V; the current reading tells them
    apart: 0 A through an open R1, 12 V / 20 kohm through a shorted R3."""
    c = cooler()
    rds = [volts("+12V", 12.0), volts("B", 0.0), amps("R1", 0.0)]
    d = diagnose(c, rds, METERS)
    assert [(f.ref, f.mode) for f in d.hypotheses[0].faults] == [("R1", "open")]
    rds = [volts("+12V", 12.0), volts("B", 0.0), amps("R1", round(12.0 / (20e3 + SHUNT), 7))]
    d = diagnose(c, rds, METERS)
    assert [(f.ref, f.mode) for f in d.hypotheses[0].faults] == [("R3", "short")]
    check_estimates(d)


# -------------------------------------------------------------- drifted part

def valve_driver():
    """Irrigation valve driver: 24 V into a 4k7 / 4k7 1 % divider."""
    return Circuit("irrigation zone 4 valve driver", "0V",
                   (supply("PS1", "+24V", 24.0), res("R1", "+24V", "A", 4.7e3),
                    res("R2", "A", "0V", 4.7e3)))


VALVE_READINGS = [Reading("voltage", "dc", "+24V", "0V"), Reading("voltage", "dc", "A", "0V"),
                  Reading("current", "dc", part="R1")]


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_drifted_resistor_value_within_two_percent(seed):
    """R2 drifted 4k7 -> 6k8: V(A) and I(R1) fix R2 = V(A) / I (Ohm's law), so the
    fitted value is within 2 % of the planted one (1 % parts, meter error)."""
    c = valve_driver()
    rds = simulate_readings(c, VALVE_READINGS, METERS, faults=[("R2", "drift", 6.8e3)], rng=seed)
    d = diagnose(c, rds, METERS)
    top = d.hypotheses[0]
    assert d.verdict == "fault"
    assert [(f.ref, f.mode) for f in top.faults] == [("R2", "drift")]
    assert top.faults[0].value == pytest.approx(6.8e3, rel=0.02)
    e = d.estimates["R2"]
    assert e.low <= 6.8e3 * 1.02 and e.high >= 6.8e3 * 0.98   # its interval is near the truth
    check_estimates(d)
    doc = check_json(d)
    assert doc["hypotheses"][0]["faults"][0]["value"] == pytest.approx(6.8e3, rel=0.02)


# ------------------------------------------------------------- dead supply

def test_dead_supply():
    """PS1 dead: every node reads 0 V; no passive fault can pull the supply
    node itself to 0 V (a short across an ideal source has no answer)."""
    c = cooler()
    rds = [volts("+12V", 0.0), volts("A", 0.0), volts("B", 0.0)]
    d = diagnose(c, rds, METERS)
    assert d.verdict == "fault"
    assert [(f.ref, f.mode) for f in d.hypotheses[0].faults] == [("PS1", "dead")]
    assert d.hypotheses[0].probability > 0.9
    check_estimates(d)
    check_json(d)


# ---------------------------------------------------------- healthy board

@pytest.mark.parametrize("signs", [(1, 1, 1), (-1, -1, -1), (0, 1, -1), (1, -1, 1), (0, 0, 1),
                                   (-1, 1, 0)])
def test_one_percent_board_read_point_eight_percent_off_is_no_fault(signs):
    """A 1 %-part board read 0.8 % off nominal is healthy.  The divider rule
    gives V(B) / V = R3 / (R1 + R2 + R3); with 1 % parts it can be ~1.3 %
    off in the worst case, and a 6000-count meter on DC volts is 0.5 % + 2
    counts (the default profile) on top."""
    c = cooler()
    nominal = (12.0, 8.0, 4.0)
    rds = [volts(n, round(v * (1 + 0.008 * s), 4))
           for n, v, s in zip(("+12V", "A", "B"), nominal, signs)]
    d = diagnose(c, rds, METERS)
    assert d.verdict == "no-fault", (d.verdict, [h.label for h in d.hypotheses[:3]])
    assert d.hypotheses[0].faults == ()
    check_estimates(d)
    check_json(d)


def test_mixed_readings_point_eight_percent_off_is_no_fault():
    """The same with a current and an in-circuit resistance reading 0.8 % off."""
    c = cooler()
    rds = [volts("+12V", 12.0), volts("A", 8.0 * 1.008),
           amps("R1", 12.0 / (30e3 + SHUNT) * 0.992),
           # power off, PS1 open (formats.md off_state default): R1 and R3 end at
           # the open supply, so across R2 the ohmmeter sees R2 alone.
           Reading("resistance", None, part="R2", setup="in-circuit", value=10e3 * 1.008)]
    d = diagnose(c, rds, METERS)
    assert d.verdict == "no-fault"
    check_estimates(d)


@pytest.mark.parametrize("seed", [10, 11, 12])
def test_simulated_healthy_board_is_no_fault(seed):
    """Readings simulated on a healthy board (parts drawn within tolerance, meter
    error within its specification) give no-fault."""
    c = valve_driver()
    rds = simulate_readings(c, VALVE_READINGS, METERS, rng=seed)
    d = diagnose(c, rds, METERS)
    assert d.verdict == "no-fault"
    check_json(d)


# ------------------------------------------------------------ inconsistent

def test_voltage_above_the_supply_is_inconsistent():
    """A passive divider cannot put a tap above its supply (Kirchhoff's voltage
    law): no hypothesis explains 15 V at A from a 12 V supply read as 12 V."""
    c = cooler()
    rds = [volts("+12V", 12.0, label="TP1"), volts("A", 15.0, label="TP2"),
           volts("B", 4.0, label="TP3")]
    d = diagnose(c, rds, METERS)
    assert d.verdict == "inconsistent"
    assert d.recheck, "an inconsistent verdict must say what to re-check"
    assert any("TP2" in line for line in d.recheck)
    doc = check_json(d)
    assert doc["recheck"] == d.recheck


@pytest.mark.parametrize("node,label", [("+12V", "TP1"), ("A", "TP2"), ("B", "TP3")])
def test_reversed_probes_get_a_recheck_hint(node, label):
    """A healthy cooler board read with the probes reversed on one test point:
    the reading is minus the expected one.  No passive fault makes a node of
    this board negative, so the readings are inconsistent and the re-check
    line of that reading names reversed probes."""
    c = cooler()
    nominal = {"+12V": 12.0, "A": 8.0, "B": 4.0}
    labels = {"+12V": "TP1", "A": "TP2", "B": "TP3"}
    rds = [volts(n, -v if n == node else v, label=labels[n]) for n, v in nominal.items()]
    d = diagnose(c, rds, METERS)
    assert d.verdict == "inconsistent"
    lines = [line for line in d.recheck if label in line]
    assert lines, f"no re-check line names {label}: {d.recheck}"
    assert any("reversed" in line for line in lines), lines


# --------------------------------------------------------------- ambiguity

def carwash():
    """Car-wash pump interlock: R2 and R3 equal (4k7) in series, M between them
    has no test point."""
    return Circuit("car wash bay 2 pump interlock", "0V",
                   (supply("PS1", "+12V", 12.0), res("R1", "+12V", "A", 10e3),
                    res("R2", "A", "M", 4.7e3), res("R3", "M", "0V", 4.7e3)))


CARWASH_READINGS = [Reading("voltage", "dc", "+12V", "0V"), Reading("voltage", "dc", "A", "0V"),
                    Reading("current", "dc", part="R1")]


@pytest.mark.parametrize("seed", [0, 1])
def test_equal_series_resistors_read_at_the_ends_are_ambiguous(seed):
    """Only R2 + R3 is seen (V(A) / I(R1), Ohm's law): a drift of either gives
    the same readings, so they are one ambiguity group and their drift
    hypotheses are equally probable; R1 is determined and stays out."""
    c = carwash()
    rds = simulate_readings(c, CARWASH_READINGS, METERS, faults=[("R3", "drift", 9.1e3)], rng=seed)
    d = diagnose(c, rds, METERS)
    assert d.verdict == "fault"
    groups = [set(g) for g in d.ambiguity_groups]
    assert any({"R2", "R3"} <= g and "R1" not in g for g in groups), d.ambiguity_groups
    top2 = {(h.faults[0].ref, h.faults[0].mode) for h in d.hypotheses[:2] if len(h.faults) == 1}
    assert top2 == {("R2", "drift"), ("R3", "drift")}
    assert d.hypotheses[0].probability == pytest.approx(d.hypotheses[1].probability, rel=1e-6)
    # The pair's total is what was read: R2 + R3 = 4k7 + 9k1 within parts' and meter's error.
    fitted = d.hypotheses[0].faults[0].value
    assert fitted + 4.7e3 == pytest.approx(4.7e3 + 9.1e3, rel=0.03)
    check_estimates(d)
    doc = check_json(d)
    assert any({"R2", "R3"} <= set(g) for g in doc["ambiguity_groups"])


def test_ambiguity_reported_on_a_healthy_board_too():
    """The readings cannot tell R2 from R3 whatever their values: the group is
    reported even when the verdict is no-fault."""
    c = carwash()
    rds = simulate_readings(c, CARWASH_READINGS, METERS, rng=5)
    d = diagnose(c, rds, METERS)
    assert d.verdict == "no-fault"
    assert any({"R2", "R3"} <= set(g) for g in d.ambiguity_groups)
    check_estimates(d)


# ------------------------------------------------------------ input checks

def test_bad_arguments_raise_value_errors():
    c = cooler()
    rds = [volts("+12V", 12.0)]
    with pytest.raises(ValueError, match="top"):
        diagnose(c, rds, METERS, top=0)
    with pytest.raises(ValueError, match="no value"):
        diagnose(c, [Reading("voltage", "dc", "A", "0V")], METERS)
