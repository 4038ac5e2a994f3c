"""In-circuit (power-off) resistance readings against networkx.

Outside reference: :func:`networkx.resistance_distance` (networkx >= 3.2),
the effective resistance between two vertices of a weighted graph computed
from the pseudo-inverse of its Laplacian (Klein and Randic, "Resistance
distance", J. Math. Chem. 12, 1993).  The installed source builds the
Laplacian from the edge attribute named by ``weight``; with
``invert_weight=True`` it first takes the reciprocal of that attribute, so a
graph whose weights are already conductances (1/R) is passed with
``invert_weight=False``.  On a multigraph the Laplacian sums the weights of
parallel edges, i.e. parallel conductances add.

The ohmmeter's network is the circuit with power off (formats.md section 1:
"every source takes its off_state, capacitors are open"): a source whose
``off_state`` is "short" joins its two nodes (compared with networkx on the
graph with those two vertices contracted), one whose ``off_state`` is "open"
is removed, and probes on two parts that nothing joins give ``inf`` (the meter
shows OL).
"""

from __future__ import annotations

import dataclasses

import networkx as nx
import numpy as np
import pytest

from faultfind.engine.predict import predict
from faultfind.expect import expect
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

# An ideal meter: the reference (networkx) has no meter in it.
IDEAL = dataclasses.replace(DEFAULT_METER, name="ideal", input_resistance=1e30, current_shunt=0.0)
METERS = {"default": IDEAL}

# Relative agreement asked of two double-precision solutions of a resistor
# network whose values span 10 ohm .. 1 Mohm (condition number up to ~1e7).
RTOL = 1e-8


def random_resistor_network(rng, n_nodes, prefix, first_ref=1):
    """A connected random resistor network: a random spanning tree plus extra
    edges (some of them parallel to existing ones), values log-uniform in
    10 ohm .. 1 Mohm.  Returns (node names, list of Part)."""
    nodes = [f"{prefix}{i}" for i in range(n_nodes)]
    edges = [(nodes[i], nodes[int(rng.integers(0, i))]) for i in range(1, n_nodes)]
    for _ in range(int(rng.integers(0, n_nodes + 1))):
        a, b = rng.choice(n_nodes, size=2, replace=False)
        edges.append((nodes[a], nodes[b]))
    parts = []
    for k, (a, b) in enumerate(edges):
        r = float(10.0 ** rng.uniform(1.0, 6.0))
        parts.append(Part(f"R{first_ref + k}", "resistor", (a, b), r, 0.05, 0.05))
    return nodes, parts


def graph_of(nodes, parts):
    """The networkx multigraph of the resistive parts, weight = conductance 1/R.

    Inductors count as their winding resistance; every other kind is absent
    (the caller contracts what is a short)."""
    g = nx.MultiGraph()
    g.add_nodes_from(nodes)
    for p in parts:
        if p.kind == "resistor":
            g.add_edge(p.nodes[0], p.nodes[1], conductance=1.0 / p.value)
        elif p.kind == "inductor" and p.resistance:
            g.add_edge(p.nodes[0], p.nodes[1], conductance=1.0 / p.resistance)
    return g


def nx_ohms(g, a, b):
    if a == b:
        return 0.0
    return nx.resistance_distance(g, a, b, weight="conductance", invert_weight=False)


def random_pairs(rng, nodes, count):
    out = []
    for _ in range(count):
        i, j = rng.choice(len(nodes), size=2, replace=False)
        out.append((nodes[i], nodes[j]))
    return out


def test_networkx_weight_convention():
    """The reference itself: two 2-ohm resistors in parallel, then 1 ohm in
    series, read 2 ohm (series/parallel rules, textbook fact); so the
    conductance-weighted multigraph with ``invert_weight=False`` is the
    right way to call it.  faultfind must agree."""
    parts = (Part("RA", "resistor", ("x", "y"), 2.0), Part("RB", "resistor", ("x", "y"), 2.0),
             Part("RC", "resistor", ("y", "z"), 1.0))
    g = graph_of(["x", "y", "z"], parts)
    assert nx_ohms(g, "x", "z") == pytest.approx(2.0, rel=1e-12)  # textbook: 2||2 + 1 = 2
    circuit = Circuit("two heater elements in parallel", "z", parts)
    pred = predict(circuit, [Reading("resistance", None, "x", "z", setup="in-circuit")], METERS)
    assert pred.value[0] == pytest.approx(2.0, rel=1e-12)


@pytest.mark.parametrize("seed", range(12))
def test_random_networks_match_networkx(seed):
    """Random connected networks of 5-40 nodes: readings between random node
    pairs and across parts equal networkx's resistance distance."""
    rng = np.random.default_rng(1000 + seed)
    n = int(rng.integers(5, 41))
    nodes, parts = random_resistor_network(rng, n, "n")
    circuit = Circuit(f"random network {seed}", nodes[0], tuple(parts))
    g = graph_of(nodes, parts)

    pairs = random_pairs(rng, nodes, 15)
    chosen = rng.choice(len(parts), size=min(10, len(parts)), replace=False)
    across = [parts[int(k)] for k in chosen]
    readings = [Reading("resistance", None, a, b, setup="in-circuit") for a, b in pairs]
    readings += [Reading("resistance", None, part=p.ref, setup="in-circuit") for p in across]
    expected = [nx_ohms(g, a, b) for a, b in pairs]  # networkx.resistance_distance
    expected += [nx_ohms(g, *p.nodes) for p in across]

    pred = predict(circuit, readings, METERS)
    np.testing.assert_allclose(pred.value, expected, rtol=RTOL)


@pytest.mark.parametrize("seed", range(4))
def test_shorted_source_and_chokes_contract_nodes(seed):
    """A voltage source with off_state="short" and an ideal inductor (no
    winding resistance) join their nodes when the power is off: compare with
    networkx on the graph with those vertices contracted
    (:func:`networkx.contracted_nodes`).  A capacitor is open (removed), an
    inductor with winding resistance is that resistance (formats.md
    section 1).  A source with off_state="open" is removed."""
    rng = np.random.default_rng(2000 + seed)
    n = int(rng.integers(8, 41))
    nodes, parts = random_resistor_network(rng, n, "m")
    a, b, c, d, e, f, h, k = (nodes[int(i)] for i in rng.choice(n, size=8, replace=False))
    extra = [
        Part("PS1", "voltage-source", (a, b), 12.0, 0.05, 0.05, off_state="short"),
        Part("L1", "inductor", (c, d), 10e-3, 0.2, 0.2),                       # ideal winding
        Part("L2", "inductor", (e, f), 47e-3, 0.2, 0.2, resistance=float(rng.uniform(1, 500))),
        Part("C1", "capacitor", (h, k), 1e-6, 0.2, 0.2),
        Part("PS2", "voltage-source", (f, k), 5.0, 0.05, 0.05, off_state="open"),
        Part("IS1", "current-source", (h, a), 0.02, 0.05, 0.05, off_state="open"),
    ]
    circuit = Circuit(f"network with a shorted supply {seed}", nodes[0], tuple(parts + extra))

    g = graph_of(nodes, parts + extra)  # L2 as its winding resistance; C1, PS2, IS1 absent
    g = nx.contracted_nodes(g, a, b, self_loops=False)  # PS1 short: b becomes a
    merged = {b: a}
    cm = merged.get(c, c)
    dm = merged.get(d, d)
    if cm != dm:
        g = nx.contracted_nodes(g, cm, dm, self_loops=False)  # L1 ideal winding: d becomes c
        merged = {x: (cm if y == dm else y) for x, y in merged.items()}
        merged[dm] = cm

    def m(x):
        return merged.get(x, x)

    pairs = random_pairs(rng, nodes, 15) + [(a, b), (c, d), (e, f), (h, k), (f, k)]
    readings = [Reading("resistance", None, p, q, setup="in-circuit") for p, q in pairs]
    expected = [nx_ohms(g, m(p), m(q)) for p, q in pairs]  # networkx.resistance_distance

    pred = predict(circuit, readings, METERS)
    np.testing.assert_allclose(pred.value, expected, rtol=RTOL, atol=1e-9)
    # Across a shorted supply and across an ideal choke the ohmmeter reads 0.
    assert pred.value[-5] == 0.0
    assert pred.value[-4] == 0.0


@pytest.mark.parametrize("seed", range(4))
def test_open_source_leaves_two_networks(seed):
    """Two resistor networks that only a supply (off_state="open"), a
    capacitor and a current source join: with power off they are separate.
    Readings inside each part equal networkx on that part alone; readings
    from one part to the other have no path: ``inf``, and :func:`expect`
    reports them as over range (OL) with no expected value."""
    rng = np.random.default_rng(3000 + seed)
    nodes_a, parts_a = random_resistor_network(rng, int(rng.integers(5, 25)), "p")
    nodes_b, parts_b = random_resistor_network(rng, int(rng.integers(5, 25)), "s",
                                               first_ref=len(parts_a) + 1)
    links = [
        Part("T1", "voltage-source", (nodes_b[0], nodes_a[-1]), 24.0, 0.05, 0.05, waveform="ac",
             off_state="open"),
        Part("C9", "capacitor", (nodes_a[1], nodes_b[-1]), 100e-9, 0.2, 0.2),
        Part("IS9", "current-source", (nodes_b[1], nodes_a[0]), 4e-3, 0.05, 0.05),
    ]
    circuit = Circuit(f"isolated secondary {seed}", nodes_a[0], tuple(parts_a + parts_b + links),
                      frequency=50.0)
    ga, gb = graph_of(nodes_a, parts_a), graph_of(nodes_b, parts_b)

    inside_a = random_pairs(rng, nodes_a, 8)
    inside_b = random_pairs(rng, nodes_b, 8)
    across = [(nodes_a[int(rng.integers(len(nodes_a)))], nodes_b[int(rng.integers(len(nodes_b)))])
              for _ in range(5)]
    readings = [Reading("resistance", None, p, q, setup="in-circuit")
                for p, q in inside_a + inside_b + across]
    readings += [Reading("resistance", None, part=p.ref, setup="in-circuit") for p in links]

    expected = [nx_ohms(ga, p, q) for p, q in inside_a]  # networkx.resistance_distance
    expected += [nx_ohms(gb, p, q) for p, q in inside_b]
    expected += [np.inf] * (len(across) + len(links))

    pred = predict(circuit, readings, METERS)
    np.testing.assert_allclose(pred.value, expected, rtol=RTOL)

    out = expect(circuit, readings, METERS)
    n_finite = len(inside_a) + len(inside_b)
    assert all(not e.overrange and e.expected is not None for e in out[:n_finite])
    assert all(e.overrange and e.expected is None for e in out[n_finite:])
