"""Boards unlike benchmarks/circuits.py, for measuring the advice on held-out shapes.

benchmarks/circuits.py hangs tidy blocks (dividers, ladders, bridges...) off
stiff supply rails.  The boards here are built the way control panels and
older hand-wired boards often are, so that the advice is measured on shapes
it was not tuned on:

* one or two DC supplies, each usually behind a fuse, some with a rated
  output current (``current_limit``);
* interlock chains: two to four switches in series feeding a coil (an
  inductor with its winding resistance) and a pilot lamp (a resistor),
  loads straight on a fused rail (a short there draws far more than the
  supply's rating);
* a random resistive mesh: each new node joined to one or two existing ones
  (not ground only), values spread over four decades, so that loops and
  bridges appear by chance rather than as blocks;
* decoupling capacitors on a few nodes (open at DC: only their short shows).

No part sits across two ideal voltage-source nodes (its short would join two
sources, an unsolvable network).  Every board is checked with
:mod:`faultfind.engine.topology` before it is returned.  Everything is drawn
from a seeded :class:`numpy.random.Generator`.  All values are invented.
"""

from __future__ import annotations

import math

import numpy as np

from faultfind.engine.topology import floating_nodes, voltage_loops
from faultfind.eseries import nearest
from faultfind.model import Circuit, Part

__all__ = ["heldout_circuit"]

GROUND = "0V"


class _Board:
    def __init__(self, rng):
        self.rng = rng
        self.parts: list[Part] = []
        self.count: dict[str, int] = {}
        self.n = 0
        self.stiff = {GROUND}
        self.nodes: list[str] = []      # live non-ground nodes a part may hang off

    def ref(self, prefix):
        self.count[prefix] = self.count.get(prefix, 0) + 1
        return f"{prefix}{self.count[prefix]}"

    def node(self):
        self.n += 1
        return f"N{self.n}"

    def add(self, kind, prefix, a, b, value=None, tol=0.0, **kw):
        if kind != "voltage-source" and a in self.stiff and b in self.stiff:
            return None
        p = Part(self.ref(prefix), kind, (a, b), value, tol, tol, **kw)
        self.parts.append(p)
        return p

    def logu(self, lo, hi):
        return float(math.exp(self.rng.uniform(math.log(lo), math.log(hi))))

    def resistor(self, a, b, lo, hi):
        tol = float(self.rng.choice([0.01, 0.02, 0.05, 0.10]))
        series = "E24" if tol <= 0.02 else "E12"
        return self.add("resistor", "R", a, b, nearest(self.logu(lo, hi), series), tol)

    def supply(self, k):
        volts = float(self.rng.choice([5.0, 12.0, 24.0, 24.0, 48.0]))
        rated = float(self.rng.choice([0.5, 1.0, 2.5, 5.0]))
        top = f"+{volts:g}V" + ("" if k == 0 else "B")
        extra = {"current_limit": rated} if self.rng.random() < 0.6 else {}
        tol = float(self.rng.choice([0.01, 0.02, 0.03]))
        fused = self.rng.random() < 0.75
        src = top + "_IN" if fused else top
        self.add("voltage-source", "PS", src, GROUND, volts, tol,
                 off_state="open" if self.rng.random() < 0.8 else "short", **extra)
        self.stiff.add(src)
        if fused:
            self.add("fuse", "F", src, top, float(self.rng.choice([0.05, 0.15, 0.5])), 0.3)
        self.nodes.append(top)
        return top, volts, fused

    def interlock(self, rail):
        k = int(self.rng.integers(2, 5))
        prev = rail
        for _ in range(k):
            nxt = self.node()
            if self.add("switch", "S", prev, nxt, 0.05, 0.5) is None:
                return
            self.nodes.append(nxt)
            prev = nxt
        self.add("inductor", "K", prev, GROUND, nearest(self.logu(0.1, 2.0), "E6"), 0.2,
                 resistance=float(f"{self.logu(50.0, 2000.0):.2g}"))
        if self.rng.random() < 0.6:
            self.add("resistor", "H", prev, GROUND, nearest(self.logu(200.0, 2000.0), "E12"), 0.1)

    def mesh_node(self):
        new = self.node()
        picks = self.rng.choice(len(self.nodes), size=min(len(self.nodes), 1 + int(self.rng.random() < 0.5)),
                                replace=False)
        for i in picks:
            self.resistor(self.nodes[int(i)], new, 100.0, 1e6)
        if self.rng.random() < 0.5:
            self.resistor(new, GROUND, 1e3, 1e6)
        if self.rng.random() < 0.15:
            self.add("capacitor", "C", new, GROUND, nearest(self.logu(1e-9, 1e-5), "E6"), 0.2)
        self.nodes.append(new)


def heldout_circuit(rng, n_parts: int) -> Circuit:
    """A held-out board of about ``n_parts`` parts (at least 4).

    Parameters
    ----------
    rng : numpy.random.Generator
    n_parts : int
        Target count; the board stops at the first block that reaches it.

    Returns
    -------
    Circuit
        A valid circuit (no floating node, no loop of voltage sources).
    """
    b = _Board(rng)
    rails = [b.supply(0)]
    if n_parts >= 15 and rng.random() < 0.4:
        rails.append(b.supply(1))
    while len(b.parts) < n_parts:
        u = rng.random()
        rail = rails[int(rng.integers(len(rails)))]
        if u < 0.2 and len(b.parts) + 4 <= n_parts:
            b.interlock(rail[0])
        elif u < 0.3 and rail[2]:
            b.add("resistor", "H", rail[0], GROUND, nearest(b.logu(200.0, 2000.0), "E12"), 0.1)
        else:
            b.mesh_node()
    circuit = Circuit(f"held-out panel ({len(b.parts)} parts)", GROUND, tuple(b.parts),
                      notes="Invented by benchmarks/heldout_boards.py")
    floating = floating_nodes(circuit)
    loops = voltage_loops(circuit)
    if floating or loops:
        raise RuntimeError(f"generated an invalid board: floating {floating}, loops {loops}")
    return circuit
