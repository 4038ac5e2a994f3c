"""Hand-written netlists of the bundled field cases, imported and compared part by part.

Each ``tests/netlists/<case>.cir`` was written by hand from
``field_cases/<case>/circuit.toml`` with the conventions of
docs/importing-netlists.md: the SPICE element letter put before a ref that
does not start with it (``PS1`` -> ``VPS1``), ground as node 0, fuses and
closed switches as their resistance, open switches left out, a coil with a
winding resistance as an ideal inductor and a resistor ``R<ref>W`` in series
through node ``<ref>_W``, an op-amp as ``E<ref> out 0 in+ in- 100k``.  The
import must give back exactly those parts, each with its kind's default
tolerance, and the same node voltages as the bundled circuit (worked out by
faultfind for both; the outside reference for them is ngspice, in
tests/test_netlist_ngspice.py).
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from faultfind.expect import expect
from faultfind.io.circuit_file import load_circuit, parse_circuit
from faultfind.io.circuit_writer import circuit_text
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.io.netlist import load_netlist
from faultfind.model import DEFAULT_OPAMP_GAIN, KINDS, Reading

ROOT = Path(__file__).resolve().parent.parent
NETLISTS = Path(__file__).resolve().parent / "netlists"
CASES = sorted(p.stem for p in NETLISTS.glob("*.cir")
               if (ROOT / "field_cases" / p.stem / "circuit.toml").exists())

LETTER = {"resistor": "R", "fuse": "R", "switch": "R", "capacitor": "C", "inductor": "L",
          "voltage-source": "V", "current-source": "I", "opamp": "E"}
# Where the letter rule would give a name already taken (the kiln's heater RH1 and its
# pilot lamp H1), the netlist names the lamp RLH1.
RENAMED = {("kiln_contactor_snubber", "H1"): "RLH1"}

#: A meter that does not load the circuit (10^15 ohm across the probes), so that the
#: node voltages are the circuit's own.
IDEAL = {"default": dataclasses.replace(DEFAULT_METER, name="default", input_resistance=1e15)}


def spice_name(case, ref, kind):
    if (case, ref) in RENAMED:
        return RENAMED[(case, ref)]
    letter = LETTER[kind]
    return ref if ref[0].upper() == letter else letter + ref


def netlist_form(case, circuit):
    """What each bundled part becomes in a netlist: (name, kind, nodes, value, extra)."""
    g = circuit.ground

    def node(n):
        return "0" if n == g else n

    out = []
    for p in circuit.parts:
        nodes = tuple(node(n) for n in p.nodes)
        name = spice_name(case, p.ref, p.kind)
        if p.kind == "switch" and p.state == "open":
            continue
        if p.kind in ("fuse", "switch"):
            out.append((name, "resistor", nodes, p.value, None))
        elif p.kind == "inductor" and p.resistance is not None:
            mid = f"{p.ref}_W"
            out.append((name, "inductor", (nodes[0], mid), p.value, None))
            out.append((f"R{p.ref}W", "resistor", (mid, nodes[1]), p.resistance, None))
        elif p.kind == "opamp":
            out.append((name, "opamp", nodes, None, p.gain or DEFAULT_OPAMP_GAIN))
        elif p.is_source:
            out.append((name, p.kind, nodes, p.value, (p.waveform, p.phase)))
        else:
            out.append((name, p.kind, nodes, p.value, None))
    return out


def test_at_least_five_field_cases_have_netlists():
    assert len(CASES) >= 5
    assert "booster_pump_panel" in CASES


@pytest.mark.parametrize("case", CASES)
def test_imported_parts_match_the_bundled_circuit(case):
    bundled = load_circuit(ROOT / "field_cases" / case / "circuit.toml")
    got = load_netlist(NETLISTS / f"{case}.cir")
    assert got.check_error is None
    assert got.circuit.title == bundled.title
    assert got.circuit.ground == "0"
    assert got.circuit.frequency == bundled.frequency
    expected = netlist_form(case, bundled)
    imported = got.circuit.parts
    assert [p.ref.upper() for p in imported] == [e[0].upper() for e in expected]
    for p, (name, kind, nodes, value, extra) in zip(imported, expected):
        assert p.kind == kind, name
        assert p.nodes == nodes, name
        assert (p.tol_low, p.tol_high) == KINDS[kind].default_tolerance, name
        if kind == "opamp":
            assert p.gain == extra and p.value is None, name
            continue
        # the values are written in SPICE decimals ("4.7k" for the file's "4k7"): exact
        assert_allclose(p.value, value, rtol=1e-15, err_msg=name)
        if p.is_source:
            assert (p.waveform, p.phase) == extra, name
            assert p.off_state == "open", name           # the import's documented default
        if kind == "inductor":
            assert p.resistance is None, name
    # the only things not mapped are simulator commands, not parts
    assert all(u.element is None for u in got.unmapped)


@pytest.mark.parametrize("case", CASES)
def test_imported_circuit_reads_like_the_bundled_one(case):
    bundled = load_circuit(ROOT / "field_cases" / case / "circuit.toml")
    imported = parse_circuit(circuit_text(load_netlist(NETLISTS / f"{case}.cir").circuit))
    modes = ["dc"] + (["ac"] if bundled.has_ac else [])
    nodes = [n for n in bundled.nodes if n != bundled.ground]

    def volts(circuit, ground, rename):
        rds = [Reading("voltage", m, plus=rename(n), minus=ground) for m in modes for n in nodes]
        return [e.expected for e in expect(circuit, rds, IDEAL)]

    want = volts(bundled, bundled.ground, lambda n: n)
    have = volts(imported, "0", lambda n: n)
    # the same network, drawn two ways (a fuse as a resistor, a coil as L + R): the
    # same node voltages to rounding (dense solve, common practice (no source))
    assert_allclose(have, want, rtol=1e-9, atol=1e-12)


def test_the_meg_and_milli_traps_are_what_the_cases_use():
    # m is milli in SPICE (ngspice manual 2.4): the bus bar joints are milliohms
    conveyor = load_netlist(NETLISTS / "conveyor_busbar_48v.cir").circuit
    assert_allclose(conveyor.part("RX1A").value, 0.5e-3, rtol=1e-15)
    greenhouse = load_netlist(NETLISTS / "greenhouse_vent_thermistor_amp.cir").circuit
    assert greenhouse.part("R6").value == 1e6
    assert greenhouse.part("RT1").label == "NTC thermistor at 25 degC"
