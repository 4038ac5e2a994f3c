"""Random DC boards with semiconductors for the benchmarks, and the readings taken on them.

:func:`semi_circuit` draws a board the way small control boards are built: a
DC supply (12 V or 24 V, sometimes behind a fuse and a reverse-polarity
diode; a bleed resistor across its terminals), then blocks hung off the
supply rail: an indicator LED with its
series resistor, a string of two to four LEDs with a ballast resistor, a
zener regulator (dropper, zener, its load and sometimes a divider off the
regulated rail), a series diode feeding a load, a low-side npn switch driven
from a logic output (base resistor, pull-down, a resistive or coil load,
the coil with its flyback diode), a high-side pnp switch biased on, and plain
resistive dividers.  Values are standard values (resistors E24 at 1 % or
5 %, IEC 60063); LED forward voltages by colour (red 1.9 V, green 2.1 V,
white 3.0 V at 10-20 mA, from memory), zener voltages from the E24-like
zener range (3.3 V .. 9.1 V, BZX55 class, from memory).

:func:`semi_readings` picks what a technician would read: most node voltages
(DC), one or two currents, diode tests across about half the junctions
(power off; a transistor's base-emitter junction), and one or two
resistances of resistors, in-circuit or lifted.

Everything is drawn from a seeded :class:`numpy.random.Generator`.
"""

from __future__ import annotations

import math

import numpy as np

from faultfind.engine.topology import floating_nodes, voltage_loops
from faultfind.eseries import nearest
from faultfind.model import Circuit, Part, Reading

from benchmarks.circuits import as_generator

__all__ = ["semi_circuit", "semi_readings", "SEMI_MIN", "SEMI_MAX"]

SEMI_MIN = 8
SEMI_MAX = 40
GROUND = "0V"

#: LED colours: forward voltage and the current it holds at (from memory).
LEDS = (("red", 1.9, 10e-3), ("green", 2.1, 10e-3), ("yellow", 2.0, 10e-3), ("white", 3.0, 20e-3))
#: Zener voltages used (E24 zener range, from memory).
ZENERS = (3.3, 3.9, 4.7, 5.1, 5.6, 6.2, 6.8, 8.2, 9.1)


class _Board:
    def __init__(self, rng):
        self.rng = rng
        self.parts: list[Part] = []
        self.count: dict[str, int] = {}
        self.n_nodes = 0

    def ref(self, prefix):
        self.count[prefix] = self.count.get(prefix, 0) + 1
        return f"{prefix}{self.count[prefix]}"

    def node(self):
        self.n_nodes += 1
        return f"TP{self.n_nodes}"

    def add(self, kind, prefix, nodes, value=None, tol=(0.0, 0.0), label="", **kw):
        p = Part(self.ref(prefix), kind, tuple(nodes), value, tol[0], tol[1], label=label, **kw)
        self.parts.append(p)
        return p

    def resistor(self, a, b, ohms, label=""):
        tol = 0.01 if self.rng.random() < 0.5 else 0.05
        return self.add("resistor", "R", (a, b), nearest(float(ohms), "E24"), (tol, tol), label)

    def pick_led(self):
        return LEDS[int(self.rng.integers(len(LEDS)))]

    def led(self, a, k, pick):
        colour, vf, it = pick
        return self.add("led", "LED", (a, k), vf, (0.05, 0.05), f"{colour} LED", test_current=it)

    def diode(self, a, k, label="silicon diode, 1N4148 class"):
        return self.add("diode", "D", (a, k), float(self.rng.choice([0.6, 0.62, 0.65])), (0.1, 0.1), label)

    # -------------------------------------------------------------- blocks
    def indicator(self, rail, vs):
        a = self.node()
        pick = self.pick_led()
        self.resistor(rail, a, (vs - pick[1]) / (0.6 * pick[2]), "LED series resistor")
        self.led(a, GROUND, pick)

    def string(self, rail, vs):
        picks = [self.pick_led() for _ in range(int(self.rng.integers(2, 5)))]
        while len(picks) > 1 and sum(p[1] for p in picks) > 0.75 * vs:
            picks.pop()
        nodes = [self.node() for _ in picks] + [GROUND]
        it = min(p[2] for p in picks)
        self.resistor(rail, nodes[0], (vs - sum(p[1] for p in picks)) / (0.7 * it),
                      "string ballast resistor")
        for i, pick in enumerate(picks):
            self.led(nodes[i], nodes[i + 1], pick)

    def zener(self, rail, vs):
        opts = [z for z in ZENERS if z < 0.6 * vs]
        vz = float(opts[int(self.rng.integers(len(opts)))])
        reg = self.node()
        self.resistor(rail, reg, (vs - vz) / 20e-3, "zener dropper")
        self.add("zener", "DZ", (GROUND, reg), vz, (0.05, 0.05), "zener regulator")
        self.resistor(reg, GROUND, vz / 8e-3, "load on the regulated rail")
        if self.rng.random() < 0.5:
            mid = self.node()
            r = 10 ** self.rng.uniform(3, 4.5)
            self.resistor(reg, mid, r, "divider top")
            self.resistor(mid, GROUND, r * self.rng.uniform(0.5, 2), "divider bottom")

    def series_diode(self, rail, vs):
        k = self.node()
        self.diode(rail, k, "series diode (OR-ing / reverse polarity)")
        self.resistor(k, GROUND, (vs - 0.7) / 10e-3, "load after the diode")

    def low_side(self, rail, vs):
        drv, b, c = self.node(), self.node(), self.node()
        self.add("voltage-source", "OUT", (drv, GROUND), 5.0, (0.03, 0.03), "logic output, on",
                 off_state="open")
        self.resistor(drv, b, 10 ** self.rng.uniform(3.3, 4), "base resistor")
        self.resistor(b, GROUND, 47e3, "base pull-down")
        self.add("npn", "Q", (c, b, GROUND), None, label="driver transistor", gain=150.0, vbe=0.65)
        if self.rng.random() < 0.5:
            self.add("inductor", "K", (rail, c), 1.0, (0.2, 0.2), "relay coil",
                     resistance=nearest(vs / 40e-3, "E24"))
            self.diode(c, rail, "flyback diode")
        else:
            self.resistor(rail, c, vs / 20e-3, "collector load")

    def high_side(self, rail, vs):
        b, c = self.node(), self.node()
        self.resistor(rail, b, 47e3, "base pull-up")
        self.resistor(b, GROUND, 10 ** self.rng.uniform(4, 4.5), "base resistor to 0V (on)")
        self.add("pnp", "Q", (c, b, rail), None, label="high-side transistor", gain=120.0, vbe=0.65)
        self.resistor(c, GROUND, vs / 15e-3, "high-side load")

    def divider(self, rail, vs):
        mid = self.node()
        r = 10 ** self.rng.uniform(3, 5)
        self.resistor(rail, mid, r, "divider top")
        self.resistor(mid, GROUND, r * self.rng.uniform(0.3, 3), "divider bottom")


_BLOCKS = (("indicator", 3.0), ("string", 2.0), ("zener", 2.0), ("series_diode", 1.5),
           ("low_side", 2.5), ("high_side", 1.0), ("divider", 1.5))


def semi_circuit(rng=None, n_parts=None) -> Circuit:
    """A random valid DC board with semiconductors, of about ``n_parts`` parts.

    Parameters
    ----------
    rng : numpy.random.Generator, int or None
    n_parts : int, optional
        Target size, :data:`SEMI_MIN` to :data:`SEMI_MAX` (default drawn);
        the board stops at the first block that reaches it.

    Returns
    -------
    Circuit
    """
    rng = as_generator(rng)
    target = int(rng.integers(SEMI_MIN, SEMI_MAX + 1)) if n_parts is None else int(n_parts)
    b = _Board(rng)
    vs = float(rng.choice([12.0, 24.0]))
    b.add("voltage-source", "PS", ("+V", GROUND), vs, (0.03, 0.03), "DC supply", off_state="open")
    rail = "+V"
    # a bleed resistor on the supply terminals (a supply's or board's bleeder): with the
    # supply off its side of the board is not joined to the rest through junctions only
    b.resistor("+V", GROUND, 10 ** rng.uniform(4, 5), "supply bleed resistor")
    if rng.random() < 0.5:
        f = "+VF"
        b.add("fuse", "F", (rail, f), 0.1, (0.3, 0.3), "board fuse")
        rail = f
    if rng.random() < 0.4:
        d = "+VD"
        b.diode(rail, d, "reverse-polarity diode")
        rail, vs = d, vs - 0.75
    w = np.array([x[1] for x in _BLOCKS])
    first = True
    while len(b.parts) < target or first:
        name = _BLOCKS[int(rng.choice(len(_BLOCKS), p=w / w.sum()))][0]
        if first and name == "divider":
            continue
        getattr(b, name)(rail, vs)
        first = False
    circuit = Circuit(f"control board with semiconductors (generated, {len(b.parts)} parts)",
                      GROUND, tuple(b.parts), notes="Invented by benchmarks/semi_circuits.py")
    floating, loops = floating_nodes(circuit), voltage_loops(circuit)
    if floating or loops:
        raise RuntimeError(f"generated an invalid circuit: floating {floating}, loops {loops}")
    return circuit


def semi_readings(circuit: Circuit, rng=None) -> list[Reading]:
    """Readings a technician takes on a board from :func:`semi_circuit` (values empty)."""
    rng = as_generator(rng)
    g = circuit.ground
    nodes = [n for n in circuit.nodes if n != g]
    k = max(3, int(round(rng.uniform(0.6, 1.0) * len(nodes))))
    k = min(k, len(nodes))
    out = [Reading("voltage", "dc", nodes[i], g, label=f"node {nodes[i]}")
           for i in sorted(rng.choice(len(nodes), size=k, replace=False))]
    res = [p for p in circuit.parts if p.kind == "resistor"]
    for i in rng.permutation(len(res))[: int(rng.integers(1, 3))]:
        out.append(Reading("current", "dc", part=res[int(i)].ref, label=f"through {res[int(i)].ref}"))
    junctions = [p for p in circuit.parts if p.is_semiconductor]
    for p in junctions:
        if rng.random() < 0.5:
            continue
        if p.kind == "npn":
            out.append(Reading("diode-test", None, p.nodes[1], p.nodes[2], label=f"{p.ref} base-emitter"))
        elif p.kind == "pnp":
            out.append(Reading("diode-test", None, p.nodes[2], p.nodes[1], label=f"{p.ref} emitter-base"))
        else:
            out.append(Reading("diode-test", None, part=p.ref, label=f"diode test across {p.ref}"))
    for i in rng.permutation(len(res))[: int(rng.integers(1, 3))]:
        setup = "lifted" if rng.random() < 0.4 else "in-circuit"
        out.append(Reading("resistance", None, part=res[int(i)].ref, setup=setup,
                           label=f"{res[int(i)].ref} {setup}"))
    return out
