"""Facts of the trade, each worked by hand, against faultfind's predictions.

Every check names where the fact comes from: "textbook fact" for results of
elementary circuit theory (Ohm's and Kirchhoff's laws, voltage division,
first-order RC response) found in any circuits text, "common practice (no
source)" for what every technician knows from the bench.  The circuits are
invented.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from faultfind.engine.predict import predict
from faultfind.expect import expect
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

IDEAL = dataclasses.replace(DEFAULT_METER, name="ideal", input_resistance=1e30, current_shunt=0.0)
IDEAL_METERS = {"default": IDEAL}


def V(plus, minus="0V", mode="dc"):
    return Reading("voltage", mode, plus, minus)


def bridge(r1, r2, r3, r4, supply=10.0):
    """A resistive sensor bridge: R1 over R2 (left arm, node L), R3 over R4
    (right arm, node R), detector between L and R."""
    return Circuit("cold-room sensor bridge", "0V", (
        Part("PS1", "voltage-source", ("EXC", "0V"), supply),
        Part("R1", "resistor", ("EXC", "L"), r1, 0.01, 0.01),
        Part("R2", "resistor", ("L", "0V"), r2, 0.01, 0.01),
        Part("R3", "resistor", ("EXC", "R"), r3, 0.01, 0.01),
        Part("R4", "resistor", ("R", "0V"), r4, 0.01, 0.01),
    ))


@pytest.mark.parametrize("meters", [IDEAL_METERS, {"default": DEFAULT_METER}])
def test_wheatstone_bridge_balance(meters):
    """R1/R2 = R3/R4 gives 0 V across the detector, whatever the meter's
    input resistance, since no current flows between equal potentials
    (Wheatstone bridge balance; textbook fact)."""
    c = bridge(2200.0, 4700.0, 1100.0, 2350.0)  # 2200/4700 == 1100/2350
    pred = predict(c, [V("L", "R"), V("L")], meters)
    assert abs(pred.value[0]) < 1e-12 * 10.0
    # and the arm itself is an ordinary divider: 10 V * 4700/6900 (textbook fact)
    loaded = meters["default"].input_resistance < 1e20
    expected_arm = 10.0 * 4700.0 / 6900.0
    if not loaded:
        assert pred.value[1] == pytest.approx(expected_arm, rel=1e-12)
    else:  # 10 Mohm across the 4700 ohm arm: 2200 over 4700 || 10M (textbook fact)
        rp = 1.0 / (1.0 / 4700.0 + 1.0 / 10e6)
        assert pred.value[1] == pytest.approx(10.0 * rp / (2200.0 + rp), rel=1e-12)


def test_wheatstone_bridge_out_of_balance():
    """Unbalanced: V(L) - V(R) = Vs (R2/(R1+R2) - R4/(R3+R4)) with an ideal
    detector (voltage division; textbook fact)."""
    c = bridge(1000.0, 1000.0, 1000.0, 1100.0, supply=5.0)
    pred = predict(c, [V("L", "R")], IDEAL_METERS)
    assert pred.value[0] == pytest.approx(5.0 * (0.5 - 1100.0 / 2100.0), rel=1e-12)
    assert pred.value[0] < 0  # the thermistor arm sits higher


def test_ten_megohm_meter_on_ten_megohm_divider_reads_a_third():
    """Two equal 10 Mohm resistors across 30 V: the midpoint is 15 V, but a
    10 Mohm meter in parallel with the lower one makes it 5 Mohm, so the
    meter reads 30 * 5/15 = 10 V, a third of the supply (meter loading;
    common practice (no source))."""
    c = Circuit("high-voltage sense divider", "0V", (
        Part("PS1", "voltage-source", ("HV", "0V"), 30.0),
        Part("R1", "resistor", ("HV", "MID"), 10e6),
        Part("R2", "resistor", ("MID", "0V"), 10e6),
    ))
    assert DEFAULT_METER.input_resistance == 10e6
    loaded = predict(c, [V("MID")], {"default": DEFAULT_METER})
    assert loaded.value[0] == pytest.approx(30.0 / 3.0, rel=1e-12)
    ideal = predict(c, [V("MID")], IDEAL_METERS)
    assert ideal.value[0] == pytest.approx(30.0 / 2.0, rel=1e-12)


def test_rc_low_pass_at_its_corner_frequency():
    """At f = 1/(2 pi R C) an RC low-pass passes 1/sqrt(2) of its input,
    lagging by 45 degrees (first-order low-pass; textbook fact)."""
    r, cap = 4700.0, 33e-9
    fc = 1.0 / (2.0 * math.pi * r * cap)
    c = Circuit("valve driver: PWM smoothing filter", "0V", (
        Part("SG1", "voltage-source", ("IN", "0V"), 3.0, waveform="ac", phase=0.0),
        Part("R1", "resistor", ("IN", "OUT"), r),
        Part("C1", "capacitor", ("OUT", "0V"), cap),
    ), frequency=fc)
    pred = predict(c, [V("OUT", mode="ac"), V("IN", mode="ac")], IDEAL_METERS)
    assert pred.value[0] == pytest.approx(3.0 / math.sqrt(2.0), rel=1e-12)
    assert math.degrees(np.angle(pred.phasor[0] / pred.phasor[1])) == pytest.approx(-45.0, abs=1e-9)
    # an octave above, the magnitude is 1/sqrt(1 + 4) (textbook fact)
    above = predict(c, [Reading("voltage", "ac", "OUT", "0V", frequency=2 * fc)], IDEAL_METERS)
    assert above.value[0] == pytest.approx(3.0 / math.sqrt(5.0), rel=1e-12)


def test_current_meter_burden_in_a_low_resistance_loop():
    """A meter with a 1 ohm shunt in series with a 10 ohm loop across 12 V
    reads 12/11 A, not 12/10 A (meter burden; common practice (no source)).
    The same with an ideal (zero-ohm) shunt reads 1.2 A (Ohm's law)."""
    c = Circuit("glow-plug loop", "0V", (
        Part("BAT", "voltage-source", ("B+", "0V"), 12.0),
        Part("RH", "resistor", ("B+", "0V"), 10.0),
    ))
    one_ohm = dataclasses.replace(DEFAULT_METER, name="clamp-less", current_shunt=1.0)
    for part in ("RH", "BAT"):
        burdened = predict(c, [Reading("current", "dc", part=part)], {"default": one_ohm})
        assert burdened.value[0] == pytest.approx(12.0 / 11.0, rel=1e-12)
        ideal = predict(c, [Reading("current", "dc", part=part)], IDEAL_METERS)
        assert ideal.value[0] == pytest.approx(1.2, rel=1e-12)


def test_inductor_at_dc_is_its_winding_resistance():
    """At DC a coil is only its winding resistance: an ohmmeter reads it, and
    the drop across it is I * R_winding (common practice (no source); Ohm's
    law)."""
    c = Circuit("solenoid valve", "0V", (
        Part("PS1", "voltage-source", ("24V", "0V"), 24.0),
        Part("Q1", "resistor", ("24V", "COIL"), 2.0),          # driver on-resistance
        Part("L1", "inductor", ("COIL", "0V"), 0.25, resistance=46.0),
    ))
    readings = [
        Reading("resistance", None, part="L1", setup="lifted"),
        Reading("resistance", None, part="L1", setup="in-circuit"),  # Q1 hangs off an open supply
        V("COIL"),
        Reading("current", "dc", part="L1"),
    ]
    pred = predict(c, readings, IDEAL_METERS)
    assert pred.value[0] == pytest.approx(46.0, rel=1e-12)
    assert pred.value[1] == pytest.approx(46.0, rel=1e-12)
    assert pred.value[2] == pytest.approx(24.0 * 46.0 / 48.0, rel=1e-12)
    assert pred.value[3] == pytest.approx(0.5, rel=1e-12)


def test_capacitor_is_open_at_dc():
    """At DC no current flows through a capacitor: the whole supply stands
    across it, none across the series resistor, and a lifted capacitor
    reads OL on an ohmmeter once charged (common practice (no source))."""
    c = Circuit("timer capacitor", "0V", (
        Part("PS1", "voltage-source", ("12V", "0V"), 12.0),
        Part("R1", "resistor", ("12V", "T"), 100e3),
        Part("C1", "capacitor", ("T", "0V"), 100e-6),
        Part("R2", "resistor", ("T", "0V"), 10e6),  # bleeder, keeps T on a DC path
    ))
    readings = [Reading("current", "dc", part="C1"), V("12V", "T"), V("T"),
                Reading("resistance", None, part="C1", setup="lifted")]
    pred = predict(c, readings, IDEAL_METERS)
    assert pred.value[0] == 0.0
    # the divider of R1 and R2 alone (textbook fact)
    assert pred.value[2] == pytest.approx(12.0 * 10e6 / 10.1e6, rel=1e-12)
    assert pred.value[1] == pytest.approx(12.0 * 100e3 / 10.1e6, rel=1e-12)
    assert math.isinf(pred.value[3])
    lifted = expect(c, readings[3:], IDEAL_METERS)[0]
    assert lifted.overrange and lifted.expected is None


def test_lifted_resistor_reads_its_own_value():
    """In circuit, a 10 kohm resistor with 10 kohm across it reads 5 kohm;
    with a leg lifted it reads its own 10 kohm (common practice (no
    source))."""
    c = Circuit("fan speed divider", "0V", (
        Part("PS1", "voltage-source", ("5V", "0V"), 5.0, off_state="short"),
        Part("R1", "resistor", ("5V", "S"), 10e3, 0.05, 0.05),
        Part("R2", "resistor", ("S", "0V"), 10e3, 0.05, 0.05),
    ))
    # power off with the supply reading as a short: R1 and R2 are in parallel
    readings = [Reading("resistance", None, part="R1", setup="in-circuit"),
                Reading("resistance", None, part="R1", setup="lifted")]
    pred = predict(c, readings, IDEAL_METERS)
    assert pred.value[0] == pytest.approx(5e3, rel=1e-12)
    assert pred.value[1] == pytest.approx(10e3, rel=1e-12)
    # d R / d ln R1 = R1 for the lifted part alone (calculus)
    assert pred.sensitivity[1, pred.params.index("R1")] == pytest.approx(10e3, rel=1e-12)


def test_open_switch_reads_ol_and_carries_the_supply():
    """Across an open switch that is the only path, an ohmmeter shows OL;
    with power on, a voltmeter across it reads (nearly) the full supply, the
    load pulling its far side to ground (common practice (no source))."""
    c = Circuit("pump interlock", "0V", (
        Part("PS1", "voltage-source", ("24V", "0V"), 24.0),
        Part("S1", "switch", ("24V", "P"), 0.05, state="open"),
        Part("RM", "resistor", ("P", "0V"), 150.0),
    ))
    readings = [Reading("resistance", None, part="S1", setup="in-circuit"),
                Reading("resistance", None, part="S1", setup="lifted"),
                V("24V", "P"), Reading("current", "dc", part="RM")]
    pred = predict(c, readings, {"default": DEFAULT_METER})
    assert math.isinf(pred.value[0]) and math.isinf(pred.value[1])
    # 10 Mohm meter in series with the 150 ohm load: 24 * 10M/(10M + 150)
    assert pred.value[2] == pytest.approx(24.0 * 10e6 / (10e6 + 150.0), rel=1e-12)
    assert pred.value[3] == 0.0
    shown = expect(c, readings[:2], {"default": DEFAULT_METER})
    assert all(e.overrange and e.expected is None for e in shown)
