"""Semiconductor engine: the laws at their defining points, handbook facts, Newton's
method and its fallbacks, overrides, warm starts, power-off readings.

Outside references named beside each check: the laws of formats.md section 4
(the defining points must come back exactly), handbook facts (from memory), a
root finder of scipy's on the one-unknown equation of a series string
(independent of the engine's Newton), and ngspice where a fault has a plain
SPICE equivalent (tests/reference/test_semis_ngspice.py has the broad
comparison).
"""

from __future__ import annotations

import dataclasses
import math
import subprocess

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from faultfind.engine import nonlinear
from faultfind.engine.junctions import VT, device, forward_voltage_at, law, limit
from faultfind.engine.meter import ohmmeter_ranges, overrange, simulate, standard_uncertainty
from faultfind.engine.nonlinear import System
from faultfind.engine.oracle import oracle_readings
from faultfind.engine.predict import predict
from faultfind.errors import ConvergenceError, InputError, SolveError
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

METERS = {"default": DEFAULT_METER}
IDEAL = {"default": dataclasses.replace(DEFAULT_METER, input_resistance=1e15, current_shunt=0.0)}


def lifted_dt(part, current):
    """Diode-test reading of a part alone with a meter of the given test current."""
    m = dataclasses.replace(DEFAULT_METER, diode_test_current=current, diode_test_max=10.0,
                            diode_test_voltage=12.0)
    c = Circuit("t", part.nodes[1], (part,))
    return predict(c, [Reading("diode-test", None, *part.nodes)], {"default": m}).value[0]


# ---------------------------------------------------------------------------
# the laws at their defining points (formats.md section 4)
# ---------------------------------------------------------------------------

def test_thermal_voltage_is_25_69_mV():
    assert_allclose(VT, 25.69e-3, atol=5e-6)            # formats.md section 4


@pytest.mark.parametrize("kind,value,it,n,rs", [
    ("diode", 0.65, None, None, None), ("diode", 0.71, 10e-3, 1.0, 3.0),
    ("led", 2.0, None, None, 12.0), ("led", 3.1, 20e-3, 2.5, 0.0)])
def test_forward_voltage_at_test_current_comes_back(kind, value, it, n, rs):
    p = Part("D1", kind, ("a", "k"), value, test_current=it, ideality=n, series_resistance=rs)
    i0 = p.junction("test_current")
    assert_allclose(forward_voltage_at(p, i0), value, rtol=1e-12)
    assert_allclose(lifted_dt(p, i0), value, rtol=1e-9)       # through the whole solver


def test_zener_breakdown_and_forward_voltage_at_test_current():
    z = Part("Z1", "zener", ("a", "k"), 5.1, series_resistance=10.0, forward_voltage=0.72)
    it = z.junction("test_current")
    # reverse: the current source pushes It into the cathode; the cathode sits at the value
    c = Circuit("t", "a", (z, Part("I1", "current-source", ("k", "a"), it)))
    v = predict(c, [Reading("voltage", "dc", "k", "a")], IDEAL).value[0]
    assert_allclose(v, 5.1, rtol=1e-9)
    assert_allclose(forward_voltage_at(z, it), 0.72, rtol=1e-12)
    # the reverse law past the knee: It exp((|V| - value)/(n Vt)) at the junction
    dev = device(z)
    brk = dev.elements[1]
    w = 5.1 - it * 10.0 + 0.05
    i, _ = law(w, brk.log_is, brk.nvt)
    assert_allclose(i, it * math.exp(0.05 / VT), rtol=1e-12)


def test_transistor_transport_current_is_1_mA_at_vbe():
    for kind, s in (("npn", 1), ("pnp", -1)):
        q = Part("Q1", kind, ("c", "b", "e"), None, gain=150.0, vbe=0.66)
        c = Circuit("t", "e", (q, Part("VB", "voltage-source", ("b", "e") if s > 0 else ("e", "b"), 0.66),
                               Part("VC", "voltage-source", ("c", "e") if s > 0 else ("e", "c"), 5.0)))
        ic = predict(c, [Reading("current", "dc", part="Q1")], IDEAL).value[0]
        # Ic = Is exp(vbe/Vt) + Is/BR with Is = 1 mA/(exp(vbe/Vt) - 1): 1 mA to 1e-9,
        # plus gmin (1 pS) across the reversed base-collector junction: 5 pA
        assert_allclose(s * ic, 1e-3, rtol=1e-8)
        ib = predict(c, [Reading("current", "dc", part="VB")], IDEAL).value[0]
        assert_allclose(abs(ib), 1e-3 / 150.0, rtol=1e-6)


# ---------------------------------------------------------------------------
# handbook facts (from memory)
# ---------------------------------------------------------------------------

def test_forward_voltage_falls_n_vt_ln10_per_decade():
    # a silicon junction's Vf falls about 60 mV x n per decade of current (from memory):
    # n Vt ln 10 = 59.2 mV x n at 25 C
    p = Part("D1", "diode", ("a", "k"), 0.65)            # n = 1.8 default
    dv = forward_voltage_at(p, 1e-3) - forward_voltage_at(p, 1e-4)
    assert_allclose(dv, 1.8 * VT * math.log(10), rtol=1e-4)
    assert 0.100 < dv < 0.115


def test_vbe_rises_about_60_mV_per_decade_of_collector_current():
    # Ebers-Moll at 25 C: 59.2 mV per decade (from memory: "about 60 mV/decade")
    vs = []
    for ic in (1e-4, 1e-3, 1e-2):
        q = Part("Q1", "npn", ("c", "b", "0"), None)
        c = Circuit("t", "0", (q, Part("IC", "current-source", ("c", "0"), ic),
                               Part("RBC", "resistor", ("c", "b"), 1.0)))   # diode-connected
        vs.append(predict(c, [Reading("voltage", "dc", "b", "0")], IDEAL).value[0])
    assert_allclose(np.diff(vs), 0.0592, atol=0.0015)


def test_small_signal_diode_reads_about_0_6_to_0_7_V_on_the_diode_test():
    # small-signal silicon diode: ~0.6-0.7 V at 1 mA (from memory); the default diode
    c = Circuit("t", "0", (Part("D1", "diode", ("a", "0"), 0.65),))
    v = predict(c, [Reading("diode-test", None, part="D1")], METERS).value[0]
    assert 0.6 <= v <= 0.7
    # reversed: OL (formats.md section 4)
    assert predict(c, [Reading("diode-test", None, "0", "a")], METERS).value[0] == np.inf


@pytest.mark.parametrize("colour,vf10,shown", [("red", 2.0, True), ("green", 2.2, False),
                                                ("blue", 3.2, False)])
def test_leds_by_colour_on_a_2V_top_diode_test(colour, vf10, shown):
    # at 10 mA: red ~1.8-2.2 V, green ~2-3.2 V, blue ~2.8-3.5 V (from memory); a meter
    # whose diode test tops out at 2 V reads red LEDs but shows OL on blue ones
    # (common practice, no source); at its 1 mA the LED sits n Vt ln 10 lower
    c = Circuit("t", "0", (Part("D1", "led", ("a", "0"), vf10),))
    v = predict(c, [Reading("diode-test", None, part="D1")], METERS).value[0]
    expect = vf10 - 2.0 * VT * math.log(10)
    if shown:
        assert_allclose(v, expect, rtol=1e-6)
    else:
        assert v == np.inf and expect > DEFAULT_METER.diode_test_max


# ---------------------------------------------------------------------------
# Newton's method, its fallbacks, the error
# ---------------------------------------------------------------------------

def diode_string(n, v, r):
    parts = [Part("V1", "voltage-source", ("n0", "0"), v), Part("R1", "resistor", ("n0", "n1"), r)]
    for k in range(n):
        parts.append(Part(f"D{k + 1}", "diode", (f"n{k + 1}", f"n{k + 2}" if k < n - 1 else "0"), 0.65))
    return Circuit("string", "0", tuple(parts))


def string_current(n, v, r):
    """The series string's current from its one-unknown equation (scipy's brentq)."""
    p = Part("D", "diode", ("a", "k"), 0.65)
    return brentq(lambda i: i * r + n * forward_voltage_at(p, i) - v, 1e-12, v / r)


def test_many_diodes_at_a_high_supply_match_the_root_finder():
    c = diode_string(50, 1000.0, 1.0)
    i = predict(c, [Reading("current", "dc", part="R1")], IDEAL).value[0]
    assert_allclose(i, string_current(50, 1000.0, 1.0), rtol=1e-9)


def test_source_stepping_settles_what_plain_newton_cannot_in_the_budget():
    # With the default budget (150 iterations per attempt) plain Newton with pn-junction
    # limiting settled every circuit tried here; with 5 iterations per attempt it cannot
    # do a 50-diode string at 1000 V from its cold start, gmin stepping cannot either,
    # and source stepping (each step starting from the last) can.
    c = diode_string(50, 1000.0, 1.0)
    s = System(c, "dc")
    with pytest.raises(ConvergenceError):
        s.solve(maxiter=5, methods=("newton",))
    op = s.solve(maxiter=5)
    assert op.method == "source stepping"
    i = (op.x[s.net.node_index["n0"]] - op.x[s.net.node_index["n1"]]) / 1.0
    assert_allclose(i, string_current(50, 1000.0, 1.0), rtol=1e-9)


def latch():
    """An npn/pnp pair wired as a thyristor, gate held on: regenerative feedback."""
    return Circuit("latch", "0", (
        Part("V1", "voltage-source", ("a", "0"), 12.0), Part("RA", "resistor", ("a", "an"), 10.0),
        Part("QP", "pnp", ("g", "n", "an"), gain=100.0), Part("QN", "npn", ("n", "g", "0"), gain=100.0),
        Part("RG", "resistor", ("g", "0"), 1e3), Part("VG", "voltage-source", ("gs", "0"), 1.0),
        Part("RGS", "resistor", ("gs", "g"), 1e3)))


def test_gmin_stepping_settles_a_latch_plain_newton_cannot_in_the_budget():
    # a thyristor-like pair: 20 iterations per attempt are too few for plain Newton from
    # the cold start; gmin stepping (10 mS down to 1 pS, each step warm) settles it
    s = System(latch(), "dc")
    full = s.solve()
    with pytest.raises(ConvergenceError):
        s.solve(maxiter=20, methods=("newton",))
    op = s.solve(maxiter=20, methods=("newton", "gmin"))
    assert op.method == "gmin stepping"
    assert_allclose(op.x, full.x, rtol=1e-9, atol=1e-12)
    # the latch is on: the anode current is set by the 10 ohm resistor (Ohm's law)
    ia = (12.0 - op.x[s.net.node_index["an"]]) / 10.0
    assert ia > 0.9


def test_an_impossible_circuit_names_its_parts():
    # a diode straight across a 12 V supply: no physical operating point
    c = Circuit("t", "0", (Part("V1", "voltage-source", ("a", "0"), 12.0),
                           Part("R1", "resistor", ("a", "0"), 100.0),
                           Part("D7", "diode", ("a", "0"), 0.65)))
    with pytest.raises(ConvergenceError) as info:
        predict(c, [Reading("voltage", "dc", "a", "0")], METERS)
    err = info.value
    assert err.parts == ("D7",) and "D7" in str(err)
    assert isinstance(err, InputError) and isinstance(err, ValueError)
    assert isinstance(err, SolveError)        # a faulted variant reads undefined, not a crash
    assert np.isnan(oracle_readings(c, [Reading("voltage", "dc", "a", "0")], METERS)[0])


def test_limiting_is_logarithmic_past_the_critical_voltage():
    v, lim = limit(np.array([5.0, 0.3]), np.array([0.7, 0.2]), 0.046, 0.6)
    assert lim.tolist() == [True, False]
    assert_allclose(v[0], 0.7 + 0.046 * math.log(1 + (5.0 - 0.7) / 0.046))   # SPICE's pnjlim
    assert v[1] == 0.3


def test_linear_boards_never_enter_newton(monkeypatch):
    def boom(*a, **k):
        raise AssertionError("Newton on a linear board")
    monkeypatch.setattr(nonlinear.System, "solve", boom)
    c = Circuit("t", "0", (Part("V1", "voltage-source", ("a", "0"), 10.0),
                           Part("R1", "resistor", ("a", "b"), 1e3), Part("R2", "resistor", ("b", "0"), 1e3)))
    assert not c.is_nonlinear
    v = predict(c, [Reading("voltage", "dc", "b", "0")], IDEAL).value[0]
    assert_allclose(v, 5.0, rtol=1e-12)       # a divider's half (Ohm's law)
    # a diode test across a resistor: the meter's 1 mA through R2 (the supply is open with
    # power off, R1 hangs from it)
    d = predict(c, [Reading("diode-test", None, "b", "0")], METERS).value[0]
    assert_allclose(d, 1e-3 * 1e3, rtol=1e-12)


# ---------------------------------------------------------------------------
# overrides, warm starts
# ---------------------------------------------------------------------------

def driver():
    return Circuit("drv", "0", (
        Part("V1", "voltage-source", ("vcc", "0"), 12.0),
        Part("VIN", "voltage-source", ("ctl", "0"), 5.0),
        Part("RB", "resistor", ("ctl", "b"), 4.7e3),
        Part("RL", "resistor", ("vcc", "c"), 470.0),
        Part("RE", "resistor", ("e", "0"), 10.0),
        Part("Q1", "npn", ("c", "b", "e"), gain=200.0),
        Part("D1", "diode", ("c", "vcc"), 0.65),
        Part("R2", "resistor", ("vcc", "a"), 1e3),
        Part("D2", "led", ("a", "0"), 2.0)))


READ = [Reading("voltage", "dc", n, "0") for n in ("b", "c", "e", "a")] + \
       [Reading("current", "dc", part=r) for r in ("Q1", "D2", "RE", "RB")]


def test_overrides_of_two_terminal_junctions():
    c = driver()
    base = oracle_readings(c, READ, IDEAL).real
    opn = oracle_readings(c, READ, IDEAL, {"D2": "open"}).real
    assert opn[5] == 0.0
    close(opn[3], 12.0)
    sh = oracle_readings(c, READ, IDEAL, {"D2": "short"}).real
    assert abs(sh[3]) < 1e-12
    close(sh[5], 12e-3)        # 12 V across R2 alone
    dr = oracle_readings(c, READ, IDEAL, {"D2": 2.2}).real
    assert_allclose(dr[3] - base[3], 0.2, atol=0.01)                  # ~ the drift (stiff current)
    lk = oracle_readings(c, READ, IDEAL, {"D2": ("leaky", 100.0)}).real
    assert lk[3] < 12e-3 * 100.0 + 1e-9 and lk[5] > base[5]          # the leak takes current


def close(a, b):
    assert_allclose(a, b, rtol=1e-6, atol=1e-9)


def test_overrides_of_transistors():
    c = driver()
    on = oracle_readings(c, READ, IDEAL).real
    assert on[1] - on[2] < 0.3                                         # saturated: relay on
    opn = oracle_readings(c, READ, IDEAL, {"Q1": "open"}).real
    assert opn[4] == 0.0
    close(opn[1], 12.0)               # no collector current
    sh = oracle_readings(c, READ, IDEAL, {"Q1": "short"}).real
    assert_allclose(sh[1], sh[2], atol=1e-12)                          # collector = emitter
    beo = oracle_readings(c, READ, IDEAL, {"Q1": "base-emitter-open"}).real
    assert abs(beo[6]) < 1e-9                                          # no emitter current
    bes = oracle_readings(c, READ, IDEAL, {"Q1": "base-emitter-short"}).real
    assert_allclose(bes[0], bes[2], atol=1e-12)
    close(bes[4], 0.0)


def test_predict_agrees_with_the_exact_oracle_under_every_override():
    c = driver()
    for ov in ({}, {"D2": "open"}, {"D2": "short"}, {"D2": 1.9}, {"D2": ("leaky", 1e3)},
               {"Q1": "open"}, {"Q1": "short"}, {"Q1": "base-emitter-open"},
               {"Q1": "base-emitter-short"}, {"RB": 47e3}):
        p = predict(c, READ, METERS, ov).value
        o = oracle_readings(c, READ, METERS, ov)
        # the linearized meter loading (10 Mohm; 1 ohm shunt in a linear part) is exact to
        # first order: parts per million here
        assert_allclose(p, o.real, rtol=2e-5, atol=1e-9, err_msg=str(ov))


def test_sensitivities_match_finite_differences_of_the_exact_solution():
    c = driver()
    rd = READ + [Reading("diode-test", None, part="D2"), Reading("resistance", None, part="R2")]
    p = predict(c, rd, METERS)
    for j, ref in enumerate(p.params):
        h = 1e-6
        up = oracle_readings(c, rd, METERS, {ref: c.part(ref).value * math.exp(h)}).real
        dn = oracle_readings(c, rd, METERS, {ref: c.part(ref).value * math.exp(-h)}).real
        fd = (up - dn) / (2 * h)
        err = np.abs(p.sensitivity[:, j] - fd)
        assert np.all(err <= 1e-3 * np.abs(fd) + 1e-7 * (1 + np.abs(p.value))), (ref, err)


def test_ac_sensitivities_include_the_moving_operating_point():
    c = Circuit("amp", "0", (
        Part("V1", "voltage-source", ("vcc", "0"), 12.0),
        Part("VS", "voltage-source", ("s", "0"), 0.01, waveform="ac"),
        Part("C1", "capacitor", ("s", "b"), 1e-6), Part("R1", "resistor", ("vcc", "b"), 100e3),
        Part("R2", "resistor", ("b", "0"), 12e3), Part("RC", "resistor", ("vcc", "c"), 4.7e3),
        Part("RE", "resistor", ("e", "0"), 1e3), Part("CE", "capacitor", ("e", "0"), 100e-6),
        Part("Q1", "npn", ("c", "b", "e")), Part("D1", "diode", ("c", "x"), 0.65),
        Part("RX", "resistor", ("x", "0"), 47e3)), frequency=1e3)
    rd = [Reading("voltage", "ac", "c", "0", frequency=1e3), Reading("current", "ac", part="D1", frequency=1e3)]
    p = predict(c, rd, METERS)
    for j, ref in enumerate(p.params):
        h = 1e-6
        up = np.abs(oracle_readings(c, rd, METERS, {ref: c.part(ref).value * math.exp(h)}))
        dn = np.abs(oracle_readings(c, rd, METERS, {ref: c.part(ref).value * math.exp(-h)}))
        fd = (up - dn) / (2 * h)
        err = np.abs(p.sensitivity[:, j] - fd)
        assert np.all(err <= 2e-3 * np.abs(fd) + 1e-6 * np.abs(p.value)), (ref, err)


def test_a_warm_re_solve_of_a_faulted_variant_is_cheap():
    c = driver()
    s0 = System(c, "dc")
    healthy = s0.solve()
    s1 = System(c, "dc", overrides={"D1": ("leaky", 5e3)})
    cold = s1.solve()
    warm = s1.solve(warm=healthy)
    assert_allclose(warm.x, cold.x, rtol=1e-9, atol=1e-12)
    assert warm.iterations < cold.iterations
    # and through predict: the healthy prediction's operating point
    p0 = predict(c, READ, METERS)
    p1 = predict(c, READ, METERS, {"RB": 5.6e3}, warm=p0.operating_point)
    assert_allclose(p1.value, predict(c, READ, METERS, {"RB": 5.6e3}).value, rtol=1e-9)


# ---------------------------------------------------------------------------
# the meter: diode test and ohmmeter ranges
# ---------------------------------------------------------------------------

def test_ohmmeter_ranges_of_the_default_handheld():
    # 600 ohm at 1 mA ... 60 Mohm at 10 nA: a constant-current handheld (from memory)
    rs = ohmmeter_ranges(DEFAULT_METER)
    assert [r for r, _ in rs] == pytest.approx([600.0, 6e3, 6e4, 6e5, 6e6, 6e7])
    assert [i for _, i in rs] == pytest.approx([1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8])


def test_an_ohmmeter_across_a_diode_reads_what_its_current_develops():
    c = Circuit("t", "0", (Part("D1", "diode", ("a", "0"), 0.65),))
    r = predict(c, [Reading("resistance", None, part="D1")], METERS).value[0]
    # 0.65 V at 1 mA is over the 600 ohm range's 0.6 V; on the 6 kOhm range (100 uA) the
    # diode develops 0.65 - n Vt ln 10 (forward law) and the meter shows that / 100 uA
    v = forward_voltage_at(c.part("D1"), 1e-4)
    assert_allclose(r, v / 1e-4, rtol=1e-9)
    assert 4e3 < r < 6e3
    assert predict(c, [Reading("resistance", None, "0", "a")], METERS).value[0] == np.inf


def test_diode_test_meter_model():
    m = DEFAULT_METER
    assert overrange(m, "diode-test", 2.1) and not overrange(m, "diode-test", 0.65)
    u = standard_uncertainty(m, "diode-test", None, 0.650)
    a = 0.01 * 0.650 + 3 * 1e-3                          # 1 % + 3 counts of 1 mV
    assert_allclose(u, math.hypot(a / math.sqrt(3), 1e-3 / math.sqrt(12)), rtol=1e-12)
    assert simulate(m, "diode-test", None, 2.5, 1) == (None, 1)
    v, ol = simulate(m, "diode-test", None, 0.65, 1)
    assert ol == 0 and abs(v - 0.65) <= a + 0.0005


def test_an_open_diode_test_is_censored_in_the_evidence():
    from faultfind.engine.evidence import Evidence
    rd = [dataclasses.replace(Reading("diode-test", None, "a", "0"), overrange=1, raw="OL")]
    ev = Evidence(rd, METERS, np.array([0.65]), np.zeros((1, 1)), np.array([0.1]), np.array([0.1]))
    assert ev.top[0] == DEFAULT_METER.diode_test_max
    c_open, _ = ev.score(np.array([np.inf]))
    c_good, _ = ev.score(np.array([0.65]))
    assert c_open < 1e-6 < c_good


def test_ngspice_agrees_on_an_open_collector(tmp_path):
    """The "open" transistor (collector lead open) against ngspice with the collector
    node left unconnected (outside reference: ngspice; needs ngspice)."""
    import math as m
    c = driver()
    q = c.part("Q1")
    isat = m.exp(device(q).elements[0].log_is)
    d1 = m.exp(device(c.part("D1")).elements[0].log_is)
    d2 = m.exp(device(c.part("D2")).elements[0].log_is)
    deck = f"""open collector
.options temp=25 tnom=25 reltol=1e-6 abstol=1e-15
V1 vcc 0 12
VIN ctl 0 5
RB ctl b 4700
RL vcc c 470
RE e 0 10
Q1 cfloat b e QM
.model QM NPN(IS={isat!r} BF=200 BR=1 NF=1 NR=1)
D1 c vcc DM1
.model DM1 D(IS={d1!r} N=1.8)
R2 vcc a 1000
D2 a 0 DM2
.model DM2 D(IS={d2!r} N=2)
.control
set numdgt=14
op
print v(b) v(e) v(c)
.endc
.end
"""
    (tmp_path / "d.cir").write_text(deck)
    run = subprocess.run(["ngspice", "-b", str(tmp_path / "d.cir")], capture_output=True,
                         text=True, timeout=120)
    got = {}
    for line in run.stdout.splitlines():
        if "=" in line and line.strip().startswith("v("):
            k, v = line.split("=")
            got[k.strip()[2:-1]] = float(v)
    ours = oracle_readings(c, READ[:3], IDEAL, {"Q1": "open"}).real
    assert_allclose(ours, [got["b"], got["c"], got["e"]], rtol=1e-4, atol=1e-7)


def test_a_voltmeter_on_a_node_held_only_by_junctions_is_solved_in_place():
    # an LED string with one LED open: the pads above the open hang on LEDs passing
    # picoamperes; a 10 Mohm voltmeter pulls them by volts.  The prediction is the
    # re-solve with the meter in the circuit (the oracle), not a first-order correction.
    parts = [Part("V1", "voltage-source", ("vcc", "0"), 24.0), Part("R1", "resistor", ("vcc", "a0"), 470.0)]
    for k in range(6):
        parts.append(Part(f"D{k + 1}", "led", (f"a{k}", f"a{k + 1}" if k < 5 else "0"), 3.0,
                          test_current=20e-3))
    c = Circuit("string", "0", tuple(parts))
    rd = [Reading("voltage", "dc", f"a{k}", "0") for k in range(5)]
    p = predict(c, rd, METERS, {"D4": "open"}).value
    o = oracle_readings(c, rd, METERS, {"D4": "open"}).real
    assert_allclose(p, o, rtol=1e-9, atol=1e-12)
    assert p[3] > 10.0          # volts above the open, not the 0 V of the linearization


def test_a_diode_test_into_a_base_with_its_emitter_open_reads_OL():
    # power off: the meter's 1 mA into a base whose base-emitter junction is open meets a
    # 10 kOhm pull-down (10 V > the 3 V open circuit) and a collector section reached
    # only through the base-collector junction (coil and flyback diode, supply open)
    c = Circuit("relay", "0", (
        Part("PS1", "voltage-source", ("v24", "0"), 24.0), Part("R2", "resistor", ("b", "0"), 10e3),
        Part("Q1", "npn", ("c", "b", "0"), gain=150.0),
        Part("K1", "inductor", ("v24", "c"), 1.0, resistance=480.0),
        Part("D1", "diode", ("c", "v24"), 0.6)))
    rd = [Reading("diode-test", None, "b", "0"), Reading("diode-test", None, "0", "b"),
          Reading("diode-test", None, part="D1")]
    p = predict(c, rd, METERS, {"Q1": "base-emitter-open"}).value
    assert p[0] == np.inf and p[1] == np.inf
    assert 0.4 < p[2] < 0.6       # the flyback diode still reads (its own section)


def test_the_command_line_names_file_line_and_part_of_an_impossible_board(tmp_path, capsys):
    from faultfind.cli.main import main
    f = tmp_path / "bad.toml"
    f.write_text('format = 1\ntitle = "bad"\nground = "0V"\n\n[[part]]\nref = "PS1"\n'
                 'kind = "voltage-source"\nnodes = ["+24V", "0V"]\nvalue = "24 V"\n\n'
                 '[[part]]\nref = "D3"\nkind = "diode"\nnodes = ["+24V", "0V"]\nvalue = "0.65 V"\n',
                 encoding="utf-8")
    assert main(["expect", str(f)]) == 2
    err = capsys.readouterr().err
    assert f"{f}:11: part D3:" in err and "Traceback" not in err


def test_a_current_shunt_that_matters_is_solved_in_place():
    # an LED fed through 10 ohm from 5 V: the meter's 1 ohm shunt is a tenth of the branch;
    # the reading is the re-solve with the shunt in the circuit (the oracle)
    c = Circuit("t", "0", (Part("V1", "voltage-source", ("a", "0"), 5.0),
                           Part("R1", "resistor", ("a", "b"), 10.0),
                           Part("D1", "led", ("b", "0"), 3.0, test_current=0.2)))
    rd = [Reading("current", "dc", part="R1"), Reading("current", "dc", part="D1")]
    p = predict(c, rd, METERS)
    o = oracle_readings(c, rd, METERS).real
    assert_allclose(p.value, o, rtol=1e-9)
    h = 1e-6
    for j, ref in enumerate(p.params):
        up = oracle_readings(c, rd, METERS, {ref: c.part(ref).value * math.exp(h)}).real
        dn = oracle_readings(c, rd, METERS, {ref: c.part(ref).value * math.exp(-h)}).real
        assert_allclose(p.sensitivity[:, j], (up - dn) / (2 * h), rtol=1e-4, atol=1e-9)


def test_the_diagnosis_reads_a_diode_test_on_a_linear_board_as_volts():
    # a diode test across a resistor of a board without junctions: the meter's 1 mA
    # through it (Ohm's law), OL above the 2 V top; the rank-one engine agrees
    from faultfind.diagnose import diagnose
    from faultfind.io.meters_file import meters_with_default
    from faultfind.simulate import simulate_readings
    m = meters_with_default()
    c = Circuit("t", "0", (Part("V1", "voltage-source", ("a", "0"), 10.0, 0.02, 0.02),
                           Part("R1", "resistor", ("a", "b"), 1e3, 0.05, 0.05),
                           Part("R2", "resistor", ("b", "0"), 1e3, 0.05, 0.05)))
    rds = [Reading("voltage", "dc", "b", "0"), Reading("diode-test", None, "b", "0")]
    for fault, top in ((("R2", "drift", 1500.0), "R2 drift"), (("R2", "open", None), "R2 open")):
        sim = simulate_readings(c, rds, m, [fault], rng=1)
        d = diagnose(c, sim, m, advise=False)
        assert d.verdict == "fault" and d.hypotheses[0].label == top, [h.label for h in d.hypotheses]


def test_a_lifted_junction_without_a_meter_uses_the_default_test_currents():
    from faultfind.engine.predict import lifted_value
    p = Part("D1", "diode", ("a", "k"), 0.65)
    assert_allclose(lifted_value(p), forward_voltage_at(p, 1e-4) / 1e-4, rtol=1e-9)


def test_predict_agrees_with_the_oracle_under_every_junction_fault_of_the_reference_boards():
    """Every fault mode of every semiconductor on the ngspice reference boards (one seed):
    the linearized predictions (meter loading to first order, or re-solved where it is
    heavy) against the exact oracle with the meter in the circuit."""
    import sys
    from pathlib import Path
    sys.path.insert(0, str(Path(__file__).resolve().parent / "reference"))
    from test_semis_ngspice import TEMPLATES
    n = 0
    for t, make in enumerate(TEMPLATES):
        c = make(np.random.default_rng(100 * t + 3))
        nodes = [x for x in c.nodes if x != "0"]
        rds = [Reading("voltage", "dc", x, "0") for x in nodes]
        rds += [Reading("current", "dc", part=p.ref) for p in c.parts if p.kind not in ("npn", "pnp")]
        rds += [Reading("diode-test", None, part=p.ref) for p in c.parts if p.kind in ("diode", "led", "zener")]
        if c.has_ac:
            rds += [Reading("voltage", "ac", x, "0", frequency=c.frequency) for x in nodes]
        ac = np.array([r.mode == "ac" for r in rds])
        for p in (q for q in c.parts if q.is_semiconductor):
            modes = (["open", "short", ("leaky", 1e3), p.value * 1.1] if len(p.nodes) == 2 else
                     ["open", "short", "base-emitter-open", "base-emitter-short"])
            for mode in modes:
                ov = {p.ref: mode}
                o = oracle_readings(c, rds, METERS, ov)
                try:
                    pv = predict(c, rds, METERS, ov).value
                except ConvergenceError:      # a fault that puts a junction across two supplies:
                    # no voltage is defined (only a meter's shunt in the loop would limit it)
                    assert np.isnan(o[np.array([r.quantity == "voltage" for r in rds])]).all()
                    continue
                ref = np.where(ac, np.abs(o), o.real)
                same = np.isclose(pv, ref, rtol=1e-4, atol=1e-7) | (np.isinf(pv) & np.isinf(ref))
                assert same.all(), (t, ov, [(rds[k].where(), pv[k], ref[k]) for k in np.flatnonzero(~same)])
                n += 1
    assert n >= 75
