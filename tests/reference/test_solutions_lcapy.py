"""Node voltages and part currents against lcapy.

Outside reference: lcapy (https://lcapy.readthedocs.io), a symbolic linear
circuit analyser built on SymPy that solves SPICE-like netlists by modified
nodal analysis and keeps DC and AC (phasor) responses apart by superposition.
Its conventions, used below, checked in :func:`test_lcapy_conventions`:

* ``V1 a b dc 12`` holds a 12 V above b; ``V1 a b ac A phi`` is a phasor of
  amplitude A and phase ``phi`` in **radians** at the symbolic angular
  frequency ``omega_0``;
* ``I1 a b dc x`` drives x out of node a into the circuit;
* ``E1 out 0 p n A`` is a voltage-controlled voltage source
  ``v(out) = A (v(p) - v(n))`` -- faultfind's op-amp kind;
* ``cpt.I`` is the current through a component from its first node to its
  second, so for a source it is minus the current the source delivers.

faultfind's AC sources are RMS phasors; the networks are linear, so the same
number given to lcapy as an amplitude gives the same phasors.  An inductor
with winding resistance is given to lcapy as an ideal L in series with an R.
The readings use an ideal meter (no loading), as lcapy has no meter.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from lcapy import Circuit as LCircuit
from lcapy import omega0

from faultfind.engine.predict import predict
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

IDEAL = dataclasses.replace(DEFAULT_METER, name="ideal", input_resistance=1e30, current_shunt=0.0)
METERS = {"default": IDEAL}

# lcapy works in exact rationals; faultfind in double precision.
RTOL = 1e-9


# ------------------------------------------------------------------ helpers

def lcapy_netlist(circuit: Circuit) -> str:
    """The lcapy netlist of a faultfind circuit (ground must be named "0")."""
    assert circuit.ground == "0"
    lines = []
    for p in circuit.parts:
        if p.kind == "resistor":
            lines.append(f"{p.ref} {p.nodes[0]} {p.nodes[1]} {p.value!r}")
        elif p.kind == "capacitor":
            lines.append(f"{p.ref} {p.nodes[0]} {p.nodes[1]} {p.value!r}")
        elif p.kind == "inductor":
            if p.resistance:
                mid = f"{p.nodes[0]}w{p.ref}"
                lines.append(f"{p.ref} {p.nodes[0]} {mid} {p.value!r}")
                lines.append(f"RW{p.ref} {mid} {p.nodes[1]} {p.resistance!r}")
            else:
                lines.append(f"{p.ref} {p.nodes[0]} {p.nodes[1]} {p.value!r}")
        elif p.kind in ("voltage-source", "current-source"):
            name = ("V" if p.kind == "voltage-source" else "I") + p.ref
            if p.waveform == "ac":
                phi = float(np.deg2rad(p.phase))  # lcapy takes radians
                lines.append(f"{name} {p.nodes[0]} {p.nodes[1]} ac {p.value!r} {phi!r}")
            else:
                lines.append(f"{name} {p.nodes[0]} {p.nodes[1]} dc {p.value!r}")
        elif p.kind == "opamp":
            gain = p.gain if p.gain is not None else 1e5
            lines.append(f"E{p.ref} {p.nodes[2]} 0 {p.nodes[0]} {p.nodes[1]} {gain!r}")
        else:  # pragma: no cover - the circuits below use none
            raise AssertionError(p.kind)
    return "\n".join(lines)


def _component(lc, circuit, ref):
    p = circuit.part(ref)
    if p.kind == "voltage-source":
        return getattr(lc, "V" + ref), -1.0
    if p.kind == "current-source":
        return getattr(lc, "I" + ref), -1.0
    return getattr(lc, ref), 1.0


def lcapy_dc(lc, circuit, readings):
    """DC node-voltage differences and part currents from lcapy."""
    out = []
    for r in readings:
        if r.quantity == "voltage":
            v = lc[r.plus].V.dc.fval - (lc[r.minus].V.dc.fval if r.minus != "0" else 0.0)
        else:
            cpt, sign = _component(lc, circuit, r.part)
            v = sign * cpt.I.dc.fval
        out.append(v)
    return np.array(out)


def _phasor(superposition, w):
    """The phasor at angular frequency ``w`` of an lcapy signal (0 if it has none)."""
    ac = superposition.ac  # phasors keyed by angular frequency (omega_0 here)
    if omega0 not in ac:
        return 0j
    return complex(ac[omega0].subs(omega0, w).cval)


def lcapy_ac(lc, circuit, readings):
    """AC phasors (voltages between probes, part currents) from lcapy."""
    out = []
    for r in readings:
        w = 2.0 * np.pi * (r.frequency if r.frequency is not None else circuit.frequency)
        if r.quantity == "voltage":
            v = _phasor(lc[r.plus].V, w) - (_phasor(lc[r.minus].V, w) if r.minus != "0" else 0j)
        else:
            cpt, sign = _component(lc, circuit, r.part)
            v = sign * _phasor(cpt.I, w)
        out.append(v)
    return np.array(out)


def check_dc(circuit, readings):
    lc = LCircuit(lcapy_netlist(circuit))
    ref = lcapy_dc(lc, circuit, readings)
    pred = predict(circuit, readings, METERS)
    np.testing.assert_allclose(pred.value, ref, rtol=RTOL, atol=1e-12 * np.max(np.abs(ref)))
    return pred, ref


def check_ac(circuit, readings):
    lc = LCircuit(lcapy_netlist(circuit))
    ref = lcapy_ac(lc, circuit, readings)
    pred = predict(circuit, readings, METERS)
    scale = np.max(np.abs(ref))
    # The display is the RMS magnitude; the phasor keeps the phase.
    np.testing.assert_allclose(pred.value, np.abs(ref), rtol=RTOL, atol=1e-12 * scale)
    np.testing.assert_allclose(pred.phasor, ref, rtol=RTOL, atol=1e-12 * scale)
    return pred, ref


def V(plus, minus="0", mode="dc", f=None):
    return Reading("voltage", mode, plus, minus, frequency=f)


def I(part, mode="dc", f=None):
    return Reading("current", mode, part=part, frequency=f)


# -------------------------------------------------------------------- tests

def test_lcapy_conventions():
    """The reference's own sign conventions (module docstring), on circuits
    whose answer is Ohm's law: 1 mA out of node 1 into 1 kohm gives +1 V."""
    lc = LCircuit("IS 1 0 dc 1e-3\nR1 1 0 1e3\nVS 2 0 dc 5\nR2 2 0 1e3\n"
                  "VA 3 0 ac 1 0.5\nR3 3 4 1\nC3 4 0 1")
    assert lc[1].V.dc.fval == pytest.approx(1.0)        # Ohm's law
    assert lc.IS.I.dc.fval == pytest.approx(-1e-3)      # through the source, first node to second
    assert lc.R2.I.dc.fval == pytest.approx(5e-3)
    assert lc.VS.I.dc.fval == pytest.approx(-5e-3)
    assert _phasor(lc[3].V, 1.0) == pytest.approx(np.exp(0.5j))  # phase in radians


def test_loaded_divider_with_sensor_loop_dc():
    """Valve-driver supply monitor: a two-stage divider with a load, and a
    12 mA sensor loop into its 250 ohm sense resistor tied in by 100 kohm."""
    c = Circuit("irrigation valve driver: supply monitor", "0", (
        Part("PS1", "voltage-source", ("1", "0"), 24.0),
        Part("R1", "resistor", ("1", "2"), 3300.0),
        Part("R2", "resistor", ("2", "0"), 1500.0),
        Part("RL", "resistor", ("2", "0"), 10e3),
        Part("R3", "resistor", ("2", "3"), 4700.0),
        Part("R4", "resistor", ("3", "0"), 2200.0),
        Part("IT", "current-source", ("4", "0"), 12e-3),
        Part("RS", "resistor", ("4", "0"), 250.0),
        Part("R5", "resistor", ("4", "3"), 100e3),
    ))
    readings = [V("1"), V("2"), V("3"), V("4"), V("2", "3"), V("4", "2")]
    readings += [I(r) for r in ("PS1", "R1", "R2", "RL", "R3", "R4", "IT", "RS", "R5")]
    pred, ref = check_dc(c, readings)
    # Not a trivial agreement: the supply delivers current, the loop injects.
    assert ref[6] > 0 and ref[12] == pytest.approx(12e-3)


RLC = Circuit("pump motor line filter", "0", (
    Part("VG", "voltage-source", ("1", "0"), 2.5, waveform="ac", phase=30.0),
    Part("R1", "resistor", ("1", "2"), 47.0),
    Part("L1", "inductor", ("2", "3"), 10e-3, resistance=3.3),
    Part("C1", "capacitor", ("3", "0"), 2.2e-6),
    Part("R2", "resistor", ("3", "0"), 220.0),
    Part("C2", "capacitor", ("2", "0"), 470e-9),
    Part("L2", "inductor", ("3", "4"), 1e-3),
    Part("R3", "resistor", ("4", "0"), 68.0),
), frequency=600.0)


@pytest.mark.parametrize("f", [None, 2500.0])
def test_rlc_network_two_frequencies(f):
    """An RLC network (series resonance near 1.07 kHz) at the circuit's own
    600 Hz and at 2.5 kHz given on the readings: node voltages, the voltage
    across L1 and every part's current, in magnitude and phase."""
    readings = [V(n, mode="ac", f=f) for n in ("1", "2", "3", "4")] + [V("2", "3", mode="ac", f=f)]
    readings += [I(r, mode="ac", f=f) for r in ("VG", "R1", "L1", "C1", "R2", "C2", "L2", "R3")]
    pred, ref = check_ac(RLC, readings)
    assert np.all(np.abs(ref[1:]) > 1e-3)  # every reading carries signal


def test_non_inverting_stage_finite_gain_dc():
    """Non-inverting op-amp stage (gain 1 + 47k/4.7k = 11) with the default
    open-loop gain 1e5: the inputs differ by v(out)/1e5, as lcapy's VCVS
    gives."""
    c = Circuit("cooler controller: probe amplifier", "0", (
        Part("VS", "voltage-source", ("in", "0"), 0.25),
        Part("RS", "resistor", ("in", "p"), 1e3),
        Part("RB", "resistor", ("p", "0"), 1e6),
        Part("U1", "opamp", ("p", "n", "out")),
        Part("RF", "resistor", ("out", "n"), 47e3),
        Part("RG", "resistor", ("n", "0"), 4.7e3),
        Part("RL", "resistor", ("out", "0"), 2e3),
    ))
    readings = [V("in"), V("p"), V("n"), V("out"), V("p", "n"), I("RF"), I("RL"), I("VS")]
    pred, ref = check_dc(c, readings)
    assert ref[4] == pytest.approx(ref[3] / 1e5, rel=1e-9)  # lcapy: v(p) - v(n) = v(out)/A


@pytest.mark.parametrize("f", [None, 200.0])
def test_inverting_stage_mid_rail_ac_and_dc(f):
    """Single-supply inverting stage: input coupled through 1 uF, gain
    -100k/10k rolled off by 1 nF, non-inverting input on a 2.5 V reference,
    open-loop gain 2e5.  DC readings (the reference only) and AC readings
    (the signal only) are each compared with lcapy's superposition."""
    c = Circuit("irrigation valve driver: current-sense amplifier", "0", (
        Part("VSIG", "voltage-source", ("sig", "0"), 0.5, waveform="ac", phase=-40.0),
        Part("CIN", "capacitor", ("sig", "x"), 1e-6),
        Part("RIN", "resistor", ("x", "n"), 10e3),
        Part("RF", "resistor", ("n", "out"), 100e3),
        Part("CF", "capacitor", ("n", "out"), 1e-9),
        Part("VREF", "voltage-source", ("ref", "0"), 2.5),
        Part("RB", "resistor", ("ref", "p"), 9.1e3),
        Part("U2", "opamp", ("p", "n", "out"), gain=2e5),
        Part("RL", "resistor", ("out", "0"), 10e3),
    ), frequency=1000.0)
    dc = [V("out"), V("n"), V("x"), V("p"), I("RF"), I("RL"), I("VREF")]
    check_dc(c, dc)
    ac = [V(n, mode="ac", f=f) for n in ("sig", "x", "n", "out")]
    ac += [I(r, mode="ac", f=f) for r in ("VSIG", "CIN", "RF", "CF", "RL")]
    pred, ref = check_ac(c, ac)
    # An inverting stage: output roughly opposite the input (|angle| > 90 deg).
    assert abs(np.angle(ref[3] / ref[0])) > np.pi / 2
