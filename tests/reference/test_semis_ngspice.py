"""Semiconductor boards against ngspice (outside reference: ngspice in batch mode).

These tests need ngspice (``ngspice -b``; .ci/run installs it when missing) and
are not skipped.  Every circuit is written as a SPICE deck from faultfind's own
Circuit, with ``.options temp=25 tnom=25`` (ngspice's default is 27 °C) and
models that are faultfind's laws (formats.md section 4):

* diode, LED: ``D(IS= N= RS=)`` with ``IS`` fixed by the value at
  ``test_current`` (engine/junctions.py);
* zener: ``D(IS= N= RS= BV= IBV= NBV=)``, ``BV`` the junction's breakdown
  voltage (value minus the series resistance's drop at ``test_current``),
  ``IBV = test_current``, ``NBV = N``;
* npn, pnp: ``NPN/PNP(IS= BF= BR=1 NF=1 NR=1)`` (no Early effect, no
  high-level injection: the transport model);
* a relay coil: an inductor with its winding resistance (``L`` then ``R``).

Checked: DC operating points and small-signal AC magnitudes of 24 generated
circuits (seeded) within 0.2 % (issue 12's figure), and diode-test and
ohmmeter readings of power-off networks against ngspice driving the meter's
test current (a current source; its clamp is far above every reading here).
"""

from __future__ import annotations

import dataclasses
import math
import re
import subprocess
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from faultfind.engine.junctions import device
from faultfind.engine.meter import ohmmeter_ranges
from faultfind.engine.predict import predict
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

NGSPICE = "ngspice"
IDEAL = {"default": dataclasses.replace(DEFAULT_METER, name="default", input_resistance=1e15,
                                        current_shunt=1e-9)}
_ASSIGN = re.compile(r"^\s*(\S+)\s*=\s*(\S+)\s*$")
RTOL = 2e-3           # issue 12: within 0.2 %


# ---------------------------------------------------------------------------
# decks
# ---------------------------------------------------------------------------

def _model(p: Part) -> str:
    dev = device(p)
    if p.kind in ("diode", "led", "zener"):
        fwd = dev.elements[0]
        rs = p.junction("series_resistance")
        text = f"D(IS={math.exp(fwd.log_is)!r} N={p.junction('ideality')!r} RS={rs!r}"
        if p.kind == "zener":
            it = p.junction("test_current")
            text += f" BV={p.value - it * rs!r} IBV={it!r} NBV={p.junction('ideality')!r}"
        return text + ")"
    el = dev.elements[0]
    kind = "NPN" if p.kind == "npn" else "PNP"
    return f"{kind}(IS={math.exp(el.log_is)!r} BF={p.junction('gain')!r} BR=1 NF=1 NR=1)"


def deck(circuit: Circuit, extra=(), analysis=("op",)) -> str:
    lines = [circuit.title, ".options temp=25 tnom=25 reltol=1e-6 abstol=1e-15 vntol=1e-9"]
    for p in circuit.parts:
        n = " ".join(p.nodes)
        if p.kind == "resistor":
            lines.append(f"R{p.ref} {n} {p.value!r}")
        elif p.kind == "capacitor":
            lines.append(f"C{p.ref} {n} {p.value!r}")
        elif p.kind == "inductor":
            a, b = p.nodes
            lines.append(f"L{p.ref} {a} {p.ref}_w {p.value!r}")
            lines.append(f"R{p.ref}w {p.ref}_w {b} {p.resistance!r}")
        elif p.kind == "voltage-source":
            lines.append(f"V{p.ref} {n} " + (f"DC 0 AC {p.value!r}" if p.waveform == "ac"
                                              else f"DC {p.value!r}"))
        elif p.kind == "current-source":   # ours drives into nodes[0]; SPICE's flows n+ -> n-
            a, b = p.nodes
            lines.append(f"I{p.ref} {b} {a} DC {p.value!r}")
        elif p.kind in ("diode", "led", "zener"):
            lines.append(f"D{p.ref} {n} M{p.ref}")
            lines.append(f".model M{p.ref} {_model(p)}")
            if p.reverse_leakage:
                lines.append(f"R{p.ref}leak {n} {1.0 / p.reverse_leakage!r}")
        elif p.kind in ("npn", "pnp"):
            lines.append(f"Q{p.ref} {n} M{p.ref}")
            lines.append(f".model M{p.ref} {_model(p)}")
        else:
            raise AssertionError(p.kind)
    lines.extend(extra)
    control = [".control", "set numdgt=14", "echo @@op", "op", "print all"]
    for a in analysis[1:]:
        control += ["echo @@ac", f"ac lin 1 {a!r} {a!r}", "print all"]
    lines += control + ["echo @@done", ".endc", ".end", ""]
    return "\n".join(lines)


def ngspice(text: str, tmp_path: Path) -> dict:
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    run = subprocess.run([NGSPICE, "-b", str(path)], capture_output=True, text=True,
                         timeout=120, cwd=tmp_path)
    assert "@@done" in run.stdout and "error" not in run.stderr.lower(), run.stdout + run.stderr
    out = {"op": {}, "ac": {}}
    section = None
    for line in run.stdout.splitlines():
        if line.startswith("@@"):
            section = line[2:].strip()
            continue
        if section in ("op", "ac"):
            m = _ASSIGN.match(line)
            if m and m[1] != "frequency":
                vals = [float(x) for x in m[2].split(",")]
                name = m[1].lower()
                if name.startswith("v(") and name.endswith(")"):
                    name = name[2:-1]
                out[section][name] = vals[0] if section == "op" else abs(complex(vals[0], vals[1]))
    assert out["op"], run.stdout
    return out


# ---------------------------------------------------------------------------
# generated circuits (seeded)
# ---------------------------------------------------------------------------

def _r(rng, lo, hi):
    return float(np.exp(rng.uniform(np.log(lo), np.log(hi))))


def _diode(ref, a, c, rng, kind="diode", value=None, **kw):
    if value is None:
        value = {"diode": rng.uniform(0.6, 0.72), "led": rng.uniform(1.8, 3.2)}[kind]
    return Part(ref, kind, (a, c), value, **kw)


def led_string(rng):
    """LED strings across a supply through a ballast resistor (indicator panels)."""
    v = rng.uniform(9, 24)
    n = int(rng.integers(2, 4))
    parts = [Part("V1", "voltage-source", ("vcc", "0"), v), Part("RB", "resistor", ("vcc", "s0"), _r(rng, 200, 1000))]
    for k in range(n):
        parts.append(_diode(f"D{k + 1}", f"s{k}", f"s{k + 1}" if k < n - 1 else "0", rng, "led",
                            value=rng.uniform(1.8, 2.2), series_resistance=rng.uniform(0, 15)))
    return Circuit("led string", "0", tuple(parts))


def zener_shunt(rng):
    """Zener shunt regulator feeding a sensor load (zener in breakdown)."""
    vz = rng.uniform(3.3, 9.1)
    vin = vz + rng.uniform(4, 12)
    return Circuit("zener shunt", "0", (
        Part("V1", "voltage-source", ("in", "0"), vin),
        Part("RS", "resistor", ("in", "z"), _r(rng, 220, 1000)),
        Part("Z1", "zener", ("0", "z"), vz, series_resistance=rng.uniform(2, 20)),
        Part("RL", "resistor", ("z", "0"), _r(rng, 2e3, 20e3)),
    ))


def zener_forward(rng):
    """A zener forward-biased (a clamp on a negative input) and a reverse one below its knee."""
    return Circuit("zener forward", "0", (
        Part("V1", "voltage-source", ("0", "n"), rng.uniform(3, 10)),
        Part("R1", "resistor", ("x", "n"), _r(rng, 1e3, 10e3)),
        Part("Z1", "zener", ("x", "0"), rng.uniform(5.1, 12), forward_voltage=rng.uniform(0.65, 0.8)),
        Part("V2", "voltage-source", ("p", "0"), rng.uniform(1, 3)),
        Part("R2", "resistor", ("p", "y"), _r(rng, 1e3, 10e3)),
        Part("Z2", "zener", ("0", "y"), rng.uniform(5.1, 12)),
    ))


def relay_driver(rng, kind="npn"):
    """A transistor relay driver with its flyback diode (transistor saturated)."""
    v = rng.uniform(5, 24)
    s = 1 if kind == "npn" else -1
    parts = [Part("V1", "voltage-source", ("vcc", "0") if s > 0 else ("0", "vcc"), v),
             Part("VIN", "voltage-source", ("ctl", "0") if s > 0 else ("0", "ctl"), rng.uniform(3.3, 5)),
             Part("RB", "resistor", ("ctl", "b"), _r(rng, 1e3, 4.7e3)),
             Part("K1", "inductor", ("vcc", "c"), 0.1, resistance=_r(rng, 200, 800))]
    if s > 0:
        parts += [Part("D1", "diode", ("c", "vcc"), 0.65), Part("Q1", "npn", ("c", "b", "0"), gain=rng.uniform(80, 300))]
    else:
        parts += [Part("D1", "diode", ("vcc", "c"), 0.65), Part("Q1", "pnp", ("c", "b", "0"), gain=rng.uniform(80, 300))]
    return Circuit("relay driver", "0", tuple(parts))


def ce_stage(rng, kind="npn", ac=True):
    """A common-emitter stage with divider bias and emitter degeneration (active region)."""
    v = rng.uniform(9, 15)
    s = 1 if kind == "npn" else -1
    sup = ("vcc", "0") if s > 0 else ("0", "vcc")
    parts = [Part("V1", "voltage-source", sup, v),
             Part("R1", "resistor", ("vcc", "b"), _r(rng, 47e3, 100e3)),
             Part("R2", "resistor", ("b", "0"), _r(rng, 8e3, 15e3)),
             Part("RC", "resistor", ("vcc", "c"), _r(rng, 2e3, 5e3)),
             Part("RE", "resistor", ("e", "0"), _r(rng, 500, 1500)),
             Part("Q1", kind, ("c", "b", "e"), gain=rng.uniform(80, 300), vbe=rng.uniform(0.6, 0.7))]
    if ac:
        parts += [Part("VS", "voltage-source", ("sig", "0"), 0.01, waveform="ac"),
                  Part("CIN", "capacitor", ("sig", "b"), 1e-6),
                  Part("CE", "capacitor", ("e", "0"), rng.uniform(1e-6, 100e-6)),
                  Part("RL", "resistor", ("out", "0"), _r(rng, 10e3, 50e3)),
                  Part("CO", "capacitor", ("c", "out"), 10e-6)]
    return Circuit("ce stage", "0", tuple(parts), frequency=1000.0 if ac else None)


def diode_network(rng):
    """Diodes with series resistance and leakage: a bridge-like steering network and an OR."""
    return Circuit("diode network", "0", (
        Part("V1", "voltage-source", ("a", "0"), rng.uniform(3, 12)),
        Part("V2", "voltage-source", ("b", "0"), rng.uniform(3, 12)),
        Part("D1", "diode", ("a", "o"), rng.uniform(0.6, 0.72), ideality=rng.uniform(1.0, 2.0),
             series_resistance=rng.uniform(0, 5)),
        Part("D2", "diode", ("b", "o"), rng.uniform(0.6, 0.72), reverse_leakage=1e-8),
        Part("RL", "resistor", ("o", "0"), _r(rng, 500, 5e3)),
        Part("D3", "diode", ("o", "m"), rng.uniform(0.6, 0.72), test_current=10e-3),
        Part("R3", "resistor", ("m", "0"), _r(rng, 1e3, 10e3)),
        Part("I1", "current-source", ("m", "0"), rng.uniform(1e-4, 1e-3)),
    ))


def diode_attenuator(rng):
    """A diode's small-signal resistance as a DC-controlled attenuator (AC through the diode)."""
    return Circuit("diode attenuator", "0", (
        Part("V1", "voltage-source", ("bias", "0"), rng.uniform(2, 10)),
        Part("RB", "resistor", ("bias", "x"), _r(rng, 2e3, 20e3)),
        Part("VS", "voltage-source", ("sig", "0"), 0.01, waveform="ac"),
        Part("CS", "capacitor", ("sig", "in"), 10e-6),
        Part("RS", "resistor", ("in", "x"), _r(rng, 100, 1000)),
        Part("D1", "diode", ("x", "0"), 0.65, series_resistance=rng.uniform(0, 3)),
    ), frequency=1000.0)


def darlington_led(rng):
    """A pnp high-side switch driving an LED through an npn stage (pnp and npn together)."""
    return Circuit("led switch", "0", (
        Part("V1", "voltage-source", ("vcc", "0"), rng.uniform(9, 15)),
        Part("VIN", "voltage-source", ("ctl", "0"), rng.uniform(2, 5)),
        Part("RB1", "resistor", ("ctl", "b1"), _r(rng, 10e3, 47e3)),
        Part("Q1", "npn", ("c1", "b1", "0"), gain=rng.uniform(100, 300)),
        Part("RB2", "resistor", ("b2", "c1"), _r(rng, 4.7e3, 22e3)),
        Part("RP", "resistor", ("vcc", "b2"), _r(rng, 10e3, 47e3)),
        Part("Q2", "pnp", ("led", "b2", "vcc"), gain=rng.uniform(80, 200)),
        Part("D1", "led", ("led", "k"), rng.uniform(1.8, 3.2)),
        Part("RL", "resistor", ("k", "0"), _r(rng, 330, 1500)),
    ))


TEMPLATES = [led_string, zener_shunt, zener_forward, relay_driver,
             lambda r: relay_driver(r, "pnp"), ce_stage, lambda r: ce_stage(r, "pnp"),
             diode_network, diode_attenuator, darlington_led, lambda r: ce_stage(r, "npn", ac=False),
             lambda r: ce_stage(r, "pnp", ac=False)]
CASES = [(t, s) for s in (1, 2) for t in range(len(TEMPLATES))]


def test_the_generated_circuits_cover_every_kind():
    kinds = {p.kind for t, s in CASES for p in TEMPLATES[t](np.random.default_rng(s)).parts}
    assert {"diode", "led", "zener", "npn", "pnp"} <= kinds
    assert len(CASES) >= 20


@pytest.mark.parametrize("case", CASES, ids=lambda c: f"t{c[0]}-s{c[1]}")
def test_operating_point_and_ac_match_ngspice(case, tmp_path):
    t, seed = case
    circuit = TEMPLATES[t](np.random.default_rng(1000 * t + seed))
    nodes = [n for n in circuit.nodes if n != "0"]
    freq = circuit.frequency if circuit.has_ac else None
    spice = ngspice(deck(circuit, analysis=("op",) + ((freq,) if freq else ())), tmp_path)
    rd = [Reading("voltage", "dc", n, "0") for n in nodes]
    ours = predict(circuit, rd, IDEAL).value
    theirs = np.array([spice["op"][n.lower()] for n in nodes])
    assert_allclose(ours, theirs, rtol=RTOL, atol=1e-6, err_msg=f"DC {nodes}")
    # and far closer than the figure: the laws are the same
    assert_allclose(ours, theirs, rtol=2e-5, atol=1e-7)
    if freq:
        rd = [Reading("voltage", "ac", n, "0", frequency=freq) for n in nodes]
        ours = predict(circuit, rd, IDEAL).value
        theirs = np.array([spice["ac"][n.lower()] for n in nodes])
        assert_allclose(ours, theirs, rtol=RTOL, atol=1e-9, err_msg=f"AC {nodes}")
    # the region the case is meant to cover is the one ngspice found
    if circuit.title == "zener shunt":
        assert spice["op"]["z"] > 0.97 * circuit.part("Z1").value - 0.1     # in breakdown
    if circuit.title == "relay driver":
        c, e = spice["op"]["c"], 0.0
        assert abs(c - e) < 0.3                                        # saturated
    if circuit.title == "ce stage":
        vce = abs(spice["op"]["c"] - spice["op"]["e"])
        assert vce > 0.5                                                # active


@pytest.mark.parametrize("case", CASES[:12], ids=lambda c: f"t{c[0]}")
def test_junction_currents_match_ngspice(case, tmp_path):
    """Current readings through diodes and transistors' collectors, an ideal meter."""
    t, seed = case
    circuit = TEMPLATES[t](np.random.default_rng(1000 * t + seed))
    semis = [p for p in circuit.parts if p.kind in ("diode", "led", "zener", "npn", "pnp")]
    assert semis
    # a 0 V source in the anode / collector lead of each as ngspice's ammeter
    parts = []
    for p in circuit.parts:
        if p in semis:
            parts.append(dataclasses.replace(p, nodes=(f"{p.ref}_am",) + tuple(p.nodes[1:])))
        else:
            parts.append(p)
    extra = [f"VAM{p.ref} {p.nodes[0]} {p.ref}_am DC 0" for p in semis]
    spice = ngspice(deck(dataclasses.replace(circuit, parts=tuple(parts)), extra), tmp_path)
    rd = [Reading("current", "dc", part=p.ref) for p in semis]
    ours = predict(circuit, rd, IDEAL).value
    theirs = np.array([spice["op"][f"vam{p.ref.lower()}#branch"] for p in semis])
    assert_allclose(ours, theirs, rtol=RTOL, atol=1e-9)


# ---------------------------------------------------------------------------
# power off: diode test and ohmmeter with junctions in place
# ---------------------------------------------------------------------------

def off_board(rng):
    """A power-off board: an LED with its resistor, a diode with a parallel
    resistor, a transistor with base resistors, a zener forward."""
    return Circuit("off", "0", (
        Part("R1", "resistor", ("a", "b"), _r(rng, 220, 1000)),
        Part("D1", "led", ("b", "0"), rng.uniform(1.8, 2.1)),
        Part("D2", "diode", ("a", "0"), rng.uniform(0.6, 0.7)),
        Part("R2", "resistor", ("a", "0"), _r(rng, 1e3, 20e3)),
        Part("RB", "resistor", ("a", "q"), _r(rng, 1e3, 10e3)),
        Part("Q1", "npn", ("c", "q", "0"), gain=100.0),
        Part("RC", "resistor", ("c", "a"), _r(rng, 1e3, 10e3)),
        Part("Z1", "zener", ("c", "0"), 5.1),
    ))


PROBES = [("a", "0"), ("b", "0"), ("q", "0"), ("c", "0"), ("0", "a"), ("q", "c")]


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_diode_test_matches_ngspice_current_source(seed, tmp_path):
    """The display is the voltage the meter's 1 mA develops (ngspice: a current source)."""
    circuit = off_board(np.random.default_rng(seed))
    meter = DEFAULT_METER
    it = meter.diode_test_current
    for plus, minus in PROBES:
        rd = [Reading("diode-test", None, plus, minus)]
        ours = predict(circuit, rd, {"default": meter}).value[0]
        spice = ngspice(deck(circuit, [f"IMETER {minus} {plus} DC {it!r}"]), tmp_path)
        v = spice["op"][plus.lower()] if plus != "0" else 0.0
        v -= spice["op"][minus.lower()] if minus != "0" else 0.0
        if v > meter.diode_test_max:
            assert ours == np.inf, (plus, minus, v)
        else:
            assert_allclose(ours, v, rtol=RTOL)
            assert_allclose(ours, v, rtol=1e-5)


@pytest.mark.parametrize("seed", [1, 2])
def test_ohmmeter_across_junctions_matches_ngspice(seed, tmp_path):
    """An ohmmeter's display is V / I at the range it settles on (ngspice: that current)."""
    circuit = off_board(np.random.default_rng(seed))
    meter = DEFAULT_METER
    for plus, minus in PROBES:
        ours = predict(circuit, [Reading("resistance", None, plus, minus)], {"default": meter}).value[0]
        shown = np.inf
        for full, cur in ohmmeter_ranges(meter):
            spice = ngspice(deck(circuit, [f"IMETER {minus} {plus} DC {cur!r}"]), tmp_path)
            v = spice["op"][plus.lower()] if plus != "0" else 0.0
            v -= spice["op"][minus.lower()] if minus != "0" else 0.0
            if v / cur < full:
                shown = v / cur
                break
        if np.isinf(shown):
            assert ours == np.inf
        else:
            assert_allclose(ours, shown, rtol=1e-5)
