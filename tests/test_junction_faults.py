"""Junction faults in the diagnosis (engine/junction_faults.py and its hooks).

Each board is invented (an LED string of a canopy light, a zener sensor
supply, a relay driver, a series diode feeding a load).  The readings are
simulated the way the field cases are: a healthy board drawn inside the
tolerances, the fault planted, the exact nonlinear re-solve of the engine
(:func:`faultfind.engine.oracle.oracle_readings`) and the default meter's
display and noise (:func:`faultfind.simulate.simulate_readings`), seeded.

Outside references, beside each check:

* a shorted LED in a series string leaves the others more voltage each, so
  the string current rises (common practice, no source);
* a white LED at a meter's 1 mA diode-test current develops about 2.7-2.9 V,
  above a handheld's 2 V diode display: it reads OL (common practice, no
  source); a silicon junction reads 0.5-0.7 V (from memory);
* an open flyback diode is invisible to DC readings with the coil energized:
  it only conducts at switch-off (common practice, no source);
* a transistor with an open base-emitter junction draws no base current, so
  its base rises to the drive divider's voltage and the collector sits at the
  supply (common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from faultfind.advise import suggest
from faultfind.diagnose import diagnose
from faultfind.engine.hypotheses import rank
from faultfind.engine.oracle import oracle_readings
from faultfind.io.meters_file import meters_with_default
from faultfind.model import Circuit, Part, Reading
from faultfind.simulate import fault_overrides, simulate_readings

METERS = meters_with_default()


def res(ref, a, b, value, tol=0.01):
    return Part(ref, "resistor", (a, b), value, tol, tol)


def led(ref, a, k, vf=3.0, it=20e-3, tol=0.05):
    return Part(ref, "led", (a, k), vf, tol, tol, test_current=it)


def supply(ref, plus, volts, tol=0.02):
    return Part(ref, "voltage-source", (plus, "0V"), volts, tol, tol, off_state="open")


def V(plus, minus="0V", label=""):
    return Reading("voltage", "dc", plus, minus, label=label)


def I(part):
    return Reading("current", "dc", part=part)


def DT(part=None, plus=None, minus=None):
    return Reading("diode-test", None, plus, minus, part=part)


def led_string(n=6):
    """Canopy light: 24 V, 300 ohm ballast, ``n`` white LEDs (3.0 V at 20 mA) in series."""
    nodes = ["S"] + [f"P{i}" for i in range(1, n)] + ["0V"]
    parts = [supply("PS1", "+24V", 24.0), res("R1", "+24V", "S", 300.0)]
    parts += [led(f"D{i + 1}", nodes[i], nodes[i + 1]) for i in range(n)]
    return Circuit("canopy LED string (test)", "0V", tuple(parts))


def zener_supply():
    """Greenhouse sensor supply: 24 V, 680 ohm dropper, 5.1 V zener, 1 kohm transmitter load."""
    return Circuit("zener sensor supply (test)", "0V", (
        supply("PS1", "+24V", 24.0), res("R1", "+24V", "TP1", 680.0, 0.05),
        Part("DZ1", "zener", ("0V", "TP1"), 5.1, 0.05, 0.05),
        res("RS1", "TP1", "0V", 1000.0, 0.05)))


def relay_driver(coil=True, drive=True):
    """Irrigation valve relay: 5 V output, 2k2 base resistor, 10k pull-down, npn, 480 ohm coil,
    flyback diode.  ``drive`` False: the output is off (disconnected), the base held down."""
    parts = [supply("PS1", "+24V", 24.0)]
    if drive:
        parts += [supply("OUT4", "DRV", 5.0), res("R1", "DRV", "B", 2200.0, 0.05)]
    parts += [res("R2", "B", "0V", 10e3, 0.05),
              Part("Q1", "npn", ("C", "B", "0V"), None, gain=150.0, vbe=0.65)]
    if coil:
        parts.append(Part("K1", "inductor", ("+24V", "C"), 1.0, 0.2, 0.2, resistance=480.0))
    else:
        parts.append(res("RL", "+24V", "C", 480.0, 0.05))
    parts.append(Part("D1", "diode", ("C", "+24V"), 0.6, 0.1, 0.1))
    return Circuit("valve relay driver (test)", "0V", tuple(parts))


def diode_feed():
    """Series diode feeding a 1 kohm load from 12 V."""
    return Circuit("series diode feed (test)", "0V", (
        supply("PS1", "+12V", 12.0), Part("D1", "diode", ("+12V", "K"), 0.62, 0.1, 0.1),
        res("RL", "K", "0V", 1000.0, 0.05), res("R2", "K", "M", 4700.0), res("R3", "M", "0V", 4700.0)))


def planted(circuit, plan, fault, seed):
    faults = [] if fault is None else [fault]
    return simulate_readings(circuit, plan, METERS, faults, rng=seed)


def top_of(ranking):
    h = ranking.hypotheses[0]
    return [(f.ref, f.mode) for f in h.faults]


# --------------------------------------------------------------------- physics
def test_shorted_led_in_a_string_raises_the_current():
    # common practice: the remaining LEDs hold their forward voltage, so the ballast takes
    # the lost 3 V and the current rises by about 3 V / 300 ohm = 10 mA
    c = led_string()
    plan = [I("R1"), V("P3", "P4")]
    healthy = oracle_readings(c, plan, METERS).real
    short = oracle_readings(c, plan, METERS, fault_overrides([("D4", "short", None)])).real
    assert 0.017 < healthy[0] < 0.023                 # about 20 mA by design
    assert short[0] - healthy[0] > 0.007              # rises by most of 10 mA
    assert abs(short[1]) < 1e-3 < healthy[1]          # the shorted LED drops nothing


def test_diode_test_of_a_white_led_is_ol_and_of_a_silicon_diode_about_0v6():
    c = led_string(2)
    got = oracle_readings(c, [DT("D1")], METERS)
    shown = simulate_readings(c, [DT("D1")], METERS, rng=1)[0]
    assert shown.overrange == 1, got                  # white LED: above the 2 V display
    d = diode_feed()
    v = simulate_readings(d, [DT("D1")], METERS, rng=1)[0]
    assert v.overrange == 0 and 0.5 < v.value < 0.7   # silicon, from memory


# --------------------------------------------------------------------- ranking
@pytest.mark.parametrize("k", [2, 4, 6])
def test_planted_led_short_ranks_first(k):
    c = led_string()
    plan = [V("+24V"), V("S"), V("P3"), I("R1"), DT("D2"), DT(f"D{k}")]
    rd = planted(c, plan, (f"D{k}", "short", None), 100 + k)
    rk = rank(c, rd, METERS)
    assert rk.verdict == "fault"
    assert top_of(rk) == [(f"D{k}", "short")], rk.hypotheses[:3]


def test_planted_led_open_ranks_first_among_what_the_readings_can_tell():
    # an open LED stops the string: every LED of it is then a candidate, and the pad
    # voltages say which one (the pads above an open sit at the supply, below it at 0 V)
    c = led_string()
    plan = [V("S"), V("P2"), V("P3"), V("P4"), I("R1")]
    rd = planted(c, plan, ("D3", "open", None), 7)
    rk = rank(c, rd, METERS)
    assert top_of(rk) == [("D3", "open")], rk.hypotheses[:3]


def test_zener_drift_is_found_with_its_value():
    c = zener_supply()
    plan = [V("+24V"), V("TP1"), I("RS1"), DT(plus="0V", minus="TP1")]
    rd = planted(c, plan, ("DZ1", "drift", 3.9), 11)
    rk = rank(c, rd, METERS)
    h = rk.hypotheses[0]
    assert [(f.ref, f.mode) for f in h.faults] == [("DZ1", "drift")], rk.hypotheses[:3]
    # the fitted zener voltage lands near the planted one; 5 % (the zener's own grade,
    # BZX55 "C", from memory) covers the drawn healthy parts and the meter
    assert h.faults[0].value == pytest.approx(3.9, rel=0.05)


def test_zener_short_is_told_from_a_shorted_load_by_the_load_current():
    c = zener_supply()
    plan = [V("TP1"), I("RS1"), I("R1")]
    rd = planted(c, plan, ("DZ1", "short", None), 12)
    rk = rank(c, rd, METERS)
    assert top_of(rk) == [("DZ1", "short")], rk.hypotheses[:3]


def test_base_emitter_open_driver():
    c = relay_driver()
    plan = [V("+24V"), V("B"), V("C"), V("+24V", "C"), DT(plus="B", minus="C"),
            DT(plus="B", minus="0V")]
    rd = planted(c, plan, ("Q1", "base-emitter-open", None), 21)
    assert rd[5].overrange == 1            # the open base-emitter junction: OL
    # the physics first: no base current, base at the divider, collector at the supply
    assert rd[1].value == pytest.approx(5.0 * 10e3 / 12.2e3, rel=0.06)
    assert rd[2].value > 22.0
    rk = rank(c, rd, METERS)
    assert top_of(rk) == [("Q1", "base-emitter-open")], rk.hypotheses[:3]


def test_collector_emitter_short_driver():
    # output off: a healthy driver leaves the collector at the supply; a C-E short pulls it
    # to 0 V and the load carries the full 24 V / 480 ohm (common practice)
    c = relay_driver(coil=False, drive=False)
    plan = [V("B"), V("C"), I("RL"), DT(plus="B", minus="0V")]
    rd = planted(c, plan, ("Q1", "short", None), 22)
    assert abs(rd[1].value) < 0.01 and rd[2].value == pytest.approx(0.05, rel=0.08)
    rk = rank(c, rd, METERS)
    assert top_of(rk) == [("Q1", "short")], rk.hypotheses[:3]


def test_leaky_series_diode_is_fitted():
    c = diode_feed()
    plan = [V("+12V"), V("K"), V("M"), DT("D1"), Reading("resistance", None, part="RL", setup="lifted")]
    rd = planted(c, plan, ("D1", "leaky", 300.0), 31)
    rk = rank(c, rd, METERS)
    h = rk.hypotheses[0]
    assert [(f.ref, f.mode) for f in h.faults] == [("D1", "leaky")], rk.hypotheses[:3]
    # the diode test reads the leak in parallel with the junction: the fitted leak is
    # within a factor 2 of the planted 300 ohm (the junction shares the test current)
    assert 150.0 < h.faults[0].value < 600.0


@pytest.mark.parametrize("board", [led_string, zener_supply, relay_driver, diode_feed])
def test_healthy_nonlinear_board_gives_no_fault(board):
    c = board()
    plan = [V(n) for n in c.nodes if n != c.ground]
    rd = planted(c, plan, None, 41)
    rk = rank(c, rd, METERS)
    assert rk.verdict == "no-fault", rk.hypotheses[:3]


def test_two_leds_in_series_cannot_be_told_apart_by_the_string_current():
    # only the string current and the supply are read: an open D1 and an open D2 stop the
    # same string; the readings cannot tell them apart (common practice)
    c = led_string(2)
    plan = [V("+24V"), I("R1"), V("S")]
    rd = planted(c, plan, ("D2", "open", None), 51)
    d = diagnose(c, rd, METERS)
    tops = [tuple((f.ref, f.mode) for f in h.faults) for h in d.hypotheses[:2]]
    assert set(tops) == {(("D1", "open"),), (("D2", "open"),)}, d.hypotheses[:3]
    assert d.hypotheses[0].probability == pytest.approx(d.hypotheses[1].probability, rel=0.2)
    assert any({"D1", "D2"} <= set(g) for g in d.ambiguity_groups), d.ambiguity_groups


def test_open_flyback_diode_is_invisible_at_dc():
    # common practice: the flyback diode only conducts at switch-off
    c = relay_driver()
    plan = [V("+24V"), V("B"), V("C"), V("+24V", "C")]
    rd = planted(c, plan, ("D1", "open", None), 61)
    rk = rank(c, rd, METERS)
    assert rk.verdict == "no-fault"


def test_linear_board_never_takes_the_nonlinear_path(monkeypatch):
    from faultfind.engine import junction_faults

    def boom(*a, **k):
        raise AssertionError("nonlinear path on a linear board")

    for name in ("junction_first_pass", "rescore_leaders", "exact_faults", "exact_sensitivity"):
        monkeypatch.setattr(junction_faults, name, boom)
    c = Circuit("divider", "0V", (supply("PS1", "+12V", 12.0), res("R1", "+12V", "A", 10e3),
                                  res("R2", "A", "0V", 10e3)))
    rd = planted(c, [V("A"), I("R1")], ("R2", "open", None), 1)
    assert top_of(rank(c, rd, METERS)) == [("R2", "open")]


# ---------------------------------------------------------------------- advice
def test_diode_test_is_suggested_power_off():
    c = led_string()
    rd = planted(c, [V("+24V"), I("R1")], ("D3", "short", None), 71)
    got = suggest(c, rd, METERS, top=20)
    dts = [s for s in got if s.reading.quantity == "diode-test"]
    assert dts, [s.reading.label for s in got]
    for s in dts:
        assert s.power == "off"
        assert "power off" in s.caution and "isolate" in s.caution


def test_large_board_screens_then_re_solves_the_leaders():
    # a 200-part machine I/O board with 30 semiconductors (benchmarks/speed_semi.py): the
    # large-board path (first pass without the power-off readings, drifts and leaks on the
    # line, the leaders re-solved in full) still names the open base-emitter junction;
    # physics as test_base_emitter_open_driver (common practice)
    import sys
    from pathlib import Path
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
    from benchmarks.speed_semi import board
    from faultfind.engine.junction_faults import FULL_FIT_PARTS, is_exact
    c, plan = board()
    assert len(c.parts) > FULL_FIT_PARTS and sum(p.is_semiconductor for p in c.parts) == 30
    rd = planted(c, plan, ("Q3", "base-emitter-open", None), 1)
    from faultfind.engine.hypotheses import Evaluator, rank_with
    ev = Evaluator(c, rd, METERS)
    rk = rank_with(ev)
    assert rk.verdict == "fault"
    assert top_of(rk) == [("Q3", "base-emitter-open")], rk.hypotheses[:3]
    assert is_exact(ev, rk.hypotheses[0])          # the leader was re-solved in full


# --------------------------------------------------------------------- re-solve speed-ups
def test_base_emitter_open_starts_at_zero_and_settles_where_a_cold_start_does():
    # the emitter lead open: no base current, the base at the divider 5 V * 10k / 12k2
    # (common practice, as test_base_emitter_open_driver); the warm start from the healthy
    # point (0.7 V across the junction) must reach the same point, in few iterations
    from faultfind.engine.nonlinear import System
    from faultfind.engine.semis import split_overrides
    c = relay_driver()
    healthy = System(c, "dc").solve()
    c2, over = split_overrides(c, {"Q1": "base-emitter-open"})
    s = System(c2, "dc", None, over)
    warm = s.solve(healthy)
    cold = s.solve(None)
    n0 = s.net0.size     # the board's own unknowns (the open lead's inner node floats)
    np.testing.assert_allclose(warm.x[:n0], cold.x[:n0], rtol=1e-7, atol=1e-9)
    vb = warm.x[s.net.node_index["B"]]
    np.testing.assert_allclose(vb, 5.0 * 10e3 / 12.2e3, rtol=1e-3)
    assert warm.iterations <= 10


def test_power_off_reading_from_the_healthy_solution_equals_the_cold_one():
    # a diode test across the flyback diode with the driver's base-emitter shorted, from
    # cold and warm-started from the healthy board's solution: the same display (about
    # 0.6 V, a silicon junction forward at 1 mA; common practice) and sensitivities
    from faultfind.engine.offnet import off_reading
    from faultfind.engine.linpredict import parameters
    from faultfind.engine.semis import split_overrides
    c = relay_driver()
    m = METERS["default"]
    pindex = {r: j for j, r in enumerate(parameters(c))}
    keep = {}
    off_reading(c, "C", "+24V", "diode-test", m, {}, pindex, len(pindex), keep=keep)
    c2, over = split_overrides(c, {"Q1": "base-emitter-short"})
    v0, s0 = off_reading(c2, "C", "+24V", "diode-test", m, over, pindex, len(pindex))
    v1, s1 = off_reading(c2, "C", "+24V", "diode-test", m, over, pindex, len(pindex),
                         warm=keep["op"])
    assert 0.4 < v0 < 0.8
    np.testing.assert_allclose(v1, v0, rtol=1e-7)
    # sensitivities at the two (equally settled) points: a few 1e-5 apart
    np.testing.assert_allclose(s1, s0, rtol=1e-4, atol=1e-9)


def test_full_solve_after_a_live_one_equals_a_fresh_full_solve():
    # Exact.solve(sens=False) after solve_live reuses the live rows and solves only the
    # power-off readings: the same displays as a full re-solve from scratch; wanting
    # sensitivities, the full solve gives those of a fresh one
    from faultfind.engine.faults import Fault
    from faultfind.engine.hypotheses import Evaluator
    from faultfind.engine.junction_faults import Exact, _faulted, _key
    c = relay_driver()
    plan = [V("+24V"), V("B"), V("C"), DT(plus="B", minus="0V"), DT(part="D1")]
    rd = planted(c, plan, ("Q1", "base-emitter-open", None), 21)
    for f in (Fault("Q1", "base-emitter-short"), Fault("D1", "leaky", 1e4), Fault("Q1", "open")):
        ev = Evaluator(c, rd, METERS)
        a = Exact(ev)
        live = a.solve_live([f])
        assert not np.isnan(live[0]).any() and live[1] is None
        assert a._from_live(_key([f]), *_faulted(c, [f]), sens=False) is not None   # the path
        vals = a.solve([f], sens=False)
        got = a.solve([f])
        ref = Exact(Evaluator(c, rd, METERS)).solve([f])
        np.testing.assert_allclose(vals[0], ref[0], rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(got[0], ref[0], rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(got[1], ref[1], rtol=1e-7, atol=1e-9)


def test_displays_only_then_sensitivities_equal_a_fresh_full_solve():
    # Exact.solve(sens=False) skips the sensitivities (no adjoint solves); the same
    # displays as a full solve, and a later call wanting sensitivities gives what a
    # fresh full solve gives
    from faultfind.engine.faults import Fault
    from faultfind.engine.hypotheses import Evaluator
    from faultfind.engine.junction_faults import Exact
    c = relay_driver()
    plan = [V("+24V"), V("B"), V("C"), DT(plus="B", minus="0V"), DT(part="D1")]
    rd = planted(c, plan, ("Q1", "base-emitter-open", None), 21)
    for f in (Fault("Q1", "base-emitter-short"), Fault("D1", "leaky", 1e4), Fault("D1", "drift", 0.7)):
        a = Exact(Evaluator(c, rd, METERS))
        ref = Exact(Evaluator(c, rd, METERS)).solve([f])
        vals = a.solve([f], sens=False)
        np.testing.assert_allclose(vals[0], ref[0], rtol=1e-9, atol=1e-12)
        assert vals[1] is None and np.any(ref[1][3:] != 0.0)   # no sensitivities
        got = a.solve([f])
        np.testing.assert_allclose(got[0], ref[0], rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(got[1], ref[1], rtol=1e-7, atol=1e-9)


# ------------------------------------------------------- shared assembly and warm starts
def test_kept_and_patched_linear_networks_equal_a_fresh_assembly():
    # engine/nonlinear.py keeps each board's linear network and patches a linear part's
    # drift into it; every form must equal engine/mna.py's plain assembly of the same
    # circuit (itself checked against ngspice in tests/reference/test_semis_ngspice.py)
    from dataclasses import replace
    from unittest import mock

    import scipy.sparse as sp

    from faultfind.engine.mna import assemble
    from faultfind.engine.nonlinear import linear_network
    from faultfind.engine.semis import split_overrides
    c = relay_driver()
    cases = [("dc", {}), ("off", {}), ("dc", {"Q1": "base-emitter-open"}), ("off", {"Q1": "open"}),
             ("dc", {"D1": "short"}), ("off", {"D1": "open"}), ("dc", {"D1": ("leaky", 1e4)}),
             ("dc", {"R1": 3300.0}), ("off", {"R2": 15e3}), ("dc", {"PS1": 22.0}),
             ("dc", {"R1": 3300.0, "Q1": "short"}), ("dc", {"K1": "open"})]
    for analysis, ov in cases * 2:          # the second round finds them kept
        cc, rest = split_overrides(c, ov)
        net, rows, cols, vals = linear_network(cc, analysis, None, rest)
        ref = assemble(cc, analysis, None, rest)
        np.testing.assert_allclose(net.A.toarray(), ref.A.toarray(), rtol=1e-14, atol=1e-15)
        np.testing.assert_allclose(sp.coo_matrix((vals, (rows, cols)), shape=ref.A.shape).toarray(),
                                   ref.A.toarray(), rtol=1e-14, atol=1e-15)
        np.testing.assert_allclose(net.b, ref.b, rtol=1e-15, atol=0)
        np.testing.assert_allclose(net.y_val, ref.y_val, rtol=1e-15, atol=0)
        np.testing.assert_allclose(net.br_e, ref.br_e, rtol=1e-15, atol=0)
        assert net.node_index == ref.node_index and net.element == ref.element
    # a drift not seen before is the kept network patched: no new assembly
    c2 = replace(c, parts=tuple(replace(p, value=3900.0) if p.ref == "R1" else p for p in c.parts))
    with mock.patch("faultfind.engine.nonlinear.assemble", side_effect=AssertionError("assembled")):
        net = linear_network(c2, "dc")[0]
    np.testing.assert_allclose(net.A.toarray(), assemble(c2, "dc").A.toarray(), rtol=1e-14,
                               atol=1e-15)


def test_a_variant_solved_again_starts_from_its_own_solution():
    # Exact re-solves a variant from its own earlier solution (nonlinear.Solution): one
    # Newton iteration, the same operating point as from the healthy start (including a
    # base-emitter-open transistor, which a healthy warm start puts back at 0 V)
    from faultfind.engine.nonlinear import Solution, System
    c = relay_driver()
    healthy = System(c, "dc").solve()
    for ov in ({"Q1": "base-emitter-open"}, {"D1": "short"}, {"Q1": "open"}):
        s = System(c, "dc", None, ov)
        first = s.solve(healthy)
        again = s.solve(Solution(first.voltages()))
        assert again.iterations == 1 < first.iterations
        np.testing.assert_allclose(again.x, first.x, rtol=1e-12, atol=1e-12)


def test_re_diagnosis_equals_the_first_diagnosis():
    # the kept systems, networks and warm starts change no figure: diagnosing the board
    # again gives the same ranking and probabilities as its first diagnosis, and as a
    # diagnosis of a fresh copy of it (nothing kept); physics as
    # test_base_emitter_open_driver (common practice)
    from dataclasses import replace
    c = relay_driver()
    plan = [V("+24V"), V("B"), V("C"), DT(plus="B", minus="0V"), DT(part="D1")]
    rd = planted(c, plan, ("Q1", "base-emitter-open", None), 21)
    first = diagnose(c, rd, METERS, advise=False)
    again = diagnose(c, rd, METERS, advise=False)
    fresh = diagnose(replace(c, parts=tuple(replace(p) for p in c.parts)), rd, METERS, advise=False)
    for d in (again, fresh):
        assert [h.label for h in d.hypotheses] == [h.label for h in first.hypotheses]
        np.testing.assert_allclose([h.probability for h in d.hypotheses],
                                   [h.probability for h in first.hypotheses], rtol=1e-6, atol=1e-9)
        np.testing.assert_allclose(d.hypotheses[0].predicted, first.hypotheses[0].predicted,
                                   rtol=1e-9, atol=1e-9)
    assert first.hypotheses[0].label == "Q1 base-emitter-open"


def test_displays_only_prediction_equals_the_full_one():
    # predict(..., sens=False) skips every adjoint solve: the same displays as the full
    # prediction (voltages, a current through the diode's lead and through a resistor,
    # diode tests), no sensitivity rows
    from faultfind.engine.predict import predict
    c = relay_driver()
    plan = [V("B"), V("C"), I("D1"), I("R1"), DT(plus="B", minus="0V"), DT(part="D1")]
    for ov in ({}, {"Q1": "open"}, {"D1": ("leaky", 1e3)}, {"R2": 22e3}):
        full = predict(c, plan, METERS, overrides=ov)
        vals = predict(c, plan, METERS, overrides=ov, sens=False)
        np.testing.assert_allclose(vals.value, full.value, rtol=1e-12, atol=1e-15)
        assert not np.any(vals.sensitivity) and np.any(full.sensitivity)
