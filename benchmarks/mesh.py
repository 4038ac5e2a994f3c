"""Resistor meshes for the scale benchmarks: a supply through a fuse into one
corner of a square grid of resistors, a load resistor from every grid node to
ground.  Invented (a heater array / power-distribution mesh), E24 values with
1 % tolerance."""

from __future__ import annotations

import math

import numpy as np

from faultfind.model import Circuit, Part

E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 5.1,
       5.6, 6.2, 6.8, 7.5, 8.2, 9.1)


def mesh(n_parts: int, seed: int = 0) -> Circuit:
    """A mesh of about ``n_parts`` parts (3 per grid node: right, down, load)."""
    rng = np.random.default_rng(seed)
    side = max(2, int(math.sqrt(n_parts / 3)))
    parts = [Part("PS1", "voltage-source", ("SUP", "0V"), 48.0, 0.02, 0.02),
             Part("F1", "fuse", ("SUP", "G0_0"), 0.01, 0.3, 0.3)]
    k = 0

    def r(lo, hi):
        dec = rng.integers(lo, hi)
        return float(E24[rng.integers(len(E24))] * 10.0 ** dec)

    for i in range(side):
        for j in range(side):
            a = f"G{i}_{j}"
            if j + 1 < side:
                k += 1
                parts.append(Part(f"R{k}", "resistor", (a, f"G{i}_{j + 1}"), r(-2, 0), 0.01, 0.01))
            if i + 1 < side:
                k += 1
                parts.append(Part(f"R{k}", "resistor", (a, f"G{i + 1}_{j}"), r(-2, 0), 0.01, 0.01))
            k += 1
            parts.append(Part(f"RL{k}", "resistor", (a, "0V"), r(2, 4), 0.01, 0.01))
    return Circuit(f"heater array mesh {side}x{side}", "0V", tuple(parts))


def mesh_toml(c: Circuit) -> str:
    """The circuit as a format-1 circuit file."""
    out = ['format = 1', f'title = "{c.title}"', f'ground = "{c.ground}"', ""]
    for p in c.parts:
        out.append("[[part]]")
        out.append(f'ref = "{p.ref}"')
        out.append(f'kind = "{p.kind}"')
        out.append(f'nodes = ["{p.nodes[0]}", "{p.nodes[1]}"]')
        out.append(f'value = "{p.value!r}"')
        out.append(f'tolerance = "{p.tol_high * 100:g}%"')
        out.append("")
    return "\n".join(out)


def grid(n_parts: int, load_every: int = 5, seed: int = 0) -> Circuit:
    """A k x k grid of links with a load on every ``load_every``-th node: about ``n_parts`` parts.

    Invented (a low-voltage distribution grid: a 24 V supply through a fuse
    into one corner, 0.1-0.91 ohm links, 100-910 ohm loads to ground on a
    fraction of the nodes, 1 % parts).  Nodes are ``N<i>.<j>``, links ``W<k>``, loads
    ``LD<k>``.
    """
    rng = np.random.default_rng(seed)
    # parts ~ 2 k (k - 1) links + k^2 / load_every loads
    per = 2.0 + 1.0 / load_every
    side = max(2, int(round(math.sqrt(n_parts / per))))
    parts = [Part("V1", "voltage-source", ("FEED", "GND"), 24.0, 0.02, 0.02),
             Part("FU1", "fuse", ("FEED", "N0.0"), 0.02, 0.3, 0.3)]

    def r(lo, hi):
        dec = rng.integers(lo, hi)
        return float(E24[rng.integers(len(E24))] * 10.0 ** dec)

    w = ld = 0
    for i in range(side):
        for j in range(side):
            a = f"N{i}.{j}"
            if i + 1 < side:
                w += 1
                parts.append(Part(f"W{w}", "resistor", (a, f"N{i + 1}.{j}"), r(-1, 0), 0.01, 0.01))
            if j + 1 < side:
                w += 1
                parts.append(Part(f"W{w}", "resistor", (a, f"N{i}.{j + 1}"), r(-1, 0), 0.01, 0.01))
            if (i * side + j) % load_every == 0:
                ld += 1
                parts.append(Part(f"LD{ld}", "resistor", (a, "GND"), r(2, 3), 0.01, 0.01))
    return Circuit(f"distribution grid {side}x{side}", "GND", tuple(parts))
