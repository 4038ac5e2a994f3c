"""Graph checks of faultfind.engine.topology, cross-checked with networkx.

networkx (a reference graph library) gives the connected components, node
degrees and the circuit rank (cyclomatic number m - n + c: the number of
independent loops of a graph, Kirchhoff's loop count) that the checks must
agree with.  The circuits are invented (a cooler controller, a pump panel).
"""

from __future__ import annotations

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from faultfind.engine.topology import (dangling_nodes, dc_path_edges, floating_nodes,
                                       voltage_loops, zero_impedance_edges)
from faultfind.model import KINDS, Circuit, Part


def P(ref, kind, *nodes, value=1.0, **kw):
    if kind in ("opamp", "npn", "pnp"):
        value = None
    return Part(ref=ref, kind=kind, nodes=tuple(nodes), value=value, **kw)


def C(*parts, ground="0V"):
    return Circuit(title="", ground=ground, parts=tuple(parts))


# -- references built with networkx ---------------------------------------


def nx_graph(edges, nodes=()):
    g = nx.MultiGraph()
    g.add_nodes_from(nodes)
    g.add_edges_from((a, b, {"ref": ref}) for a, b, ref in edges)
    return g


def spec_edges(circuit, zero_impedance):
    """Branches written out from formats.md, independently of the module: DC paths are
    resistors, fuses, closed switches, inductors and voltage sources of any waveform
    ("A DC reading sees capacitors as open and inductors as their winding
    resistance"); zero impedance at DC are voltage sources and inductors without
    winding resistance.  An op-amp output is referred to ground (formats.md kinds
    table): an edge output-ground in both.  Semiconductors (formats.md section 4)
    pass current by their exponential law at any bias, so each junction is a DC path
    (never a zero impedance): a diode, LED or zener joins its two nodes, a transistor
    its collector to its base and its base to its emitter."""
    edges = []
    for p in circuit.parts:
        if p.kind == "opamp":
            edges.append((p.nodes[2], circuit.ground, p.ref))
        elif p.kind in ("npn", "pnp"):
            if not zero_impedance:
                edges += [(p.nodes[0], p.nodes[1], p.ref), (p.nodes[1], p.nodes[2], p.ref)]
        elif p.kind in ("diode", "led", "zener"):
            if not zero_impedance:
                edges.append((*p.nodes, p.ref))
        elif zero_impedance:
            if p.kind == "voltage-source" or (p.kind == "inductor" and p.resistance is None):
                edges.append((*p.nodes, p.ref))
        elif p.kind in ("resistor", "fuse", "inductor", "voltage-source") or (
                p.kind == "switch" and p.state == "closed"):
            edges.append((*p.nodes, p.ref))
    return edges


def nx_floating(circuit):
    """Nodes outside ground's connected component of the DC-path graph (networkx)."""
    g = nx_graph(spec_edges(circuit, zero_impedance=False), circuit.nodes)
    grounded = nx.node_connected_component(g, circuit.ground)
    return [n for n in circuit.nodes if n not in grounded]


def circuit_rank(edges):
    """m - n + c of a multigraph (networkx components): its number of independent loops."""
    g = nx_graph(edges)
    return g.number_of_edges() - g.number_of_nodes() + nx.number_connected_components(g)


def assert_cycle_basis(circuit, loops):
    """Each loop is a simple cycle of the zero-impedance graph, the loops are independent
    (over GF(2)), and there are as many as the circuit rank: a cycle basis."""
    edges = spec_edges(circuit, zero_impedance=True)
    assert edges == zero_impedance_edges(circuit)
    by_ref = {ref: (a, b) for a, b, ref in edges}
    bit = {ref: i for i, ref in enumerate(by_ref)}
    assert len(loops) == circuit_rank(edges)
    basis = []
    for loop in loops:
        assert len(set(loop)) == len(loop)
        g = nx_graph([(*by_ref[r], r) for r in loop])
        # A simple cycle: connected, every node of degree 2 (networkx counts a
        # self-loop twice).
        assert nx.is_connected(g) and all(d == 2 for _, d in g.degree())
        # Consecutive refs share a node (the list walks round the loop).
        for r1, r2 in zip(loop, loop[1:] + loop[:1]):
            assert set(by_ref[r1]) & set(by_ref[r2])
        vec = sum(1 << bit[r] for r in loop)
        for b in basis:                       # Gaussian elimination over GF(2)
            vec = min(vec, vec ^ b)
        assert vec != 0
        basis.append(vec)
        basis.sort(reverse=True)


def nx_dangling(circuit):
    """Nodes of degree 1, each part a star of its terminals (an op-amp also
    touching ground, its output's reference)."""
    g = nx.MultiGraph()
    for p in circuit.parts:
        terminals = p.nodes + ((circuit.ground,) if p.kind == "opamp" else ())
        for n in terminals:
            g.add_edge(("part", p.ref), ("node", n))
    return [n for n in circuit.nodes if g.degree(("node", n)) == 1]


# -- an ordinary circuit: no false positives ------------------------------


def cooler_controller():
    """Walk-in cooler controller: supply, thermistor divider, buffer, comparator
    with hysteresis, relay coil, indicator fed from a current source, mains sense."""
    return C(
        P("PS1", "voltage-source", "+12V", "0V", value=12.0),
        P("F1", "fuse", "+12V", "F"),
        P("R1", "resistor", "F", "T", value=10e3),
        P("RT1", "resistor", "T", "0V", value=10e3),
        P("C1", "capacitor", "T", "0V", value=100e-9),
        P("U1", "opamp", "T", "BUF", "BUF"),
        P("R2", "resistor", "BUF", "CMP", value=10e3),
        P("R3", "resistor", "CMP", "OUT", value=1e6),
        P("U2", "opamp", "CMP", "REF", "OUT"),
        P("R4", "resistor", "F", "REF", value=10e3),
        P("R5", "resistor", "REF", "0V", value=10e3),
        P("K1", "inductor", "OUT", "COIL", value=0.5, resistance=400.0),
        P("SW1", "switch", "COIL", "0V", value=0.05),
        P("SW2", "switch", "COIL", "0V", value=0.05, state="open"),
        P("I1", "current-source", "+12V", "LED", value=5e-3),
        P("RL1", "resistor", "LED", "0V", value=470.0),
        P("TX1", "voltage-source", "AC", "0V", value=9.0, waveform="ac"),
        P("L2", "inductor", "AC", "AC2", value=1e-3),             # ideal, in series: fine
        P("R6", "resistor", "AC2", "0V", value=1e3),
        P("C2", "capacitor", "AC2", "0V", value=1e-6),
    )


def test_ordinary_circuit_has_no_findings():
    c = cooler_controller()
    assert floating_nodes(c) == [] == nx_floating(c)
    assert voltage_loops(c) == [] and circuit_rank(spec_edges(c, True)) == 0
    assert dangling_nodes(c) == [] and nx_dangling(c) == []


def test_edges_follow_the_kinds_table():
    c = cooler_controller()
    dc = {ref for _, _, ref in dc_path_edges(c)}
    # formats.md: "A DC reading sees capacitors as open"; current sources and
    # open switches pass no set current; op-amp outputs are referred to ground.
    assert {"C1", "C2", "I1", "SW2"}.isdisjoint(dc)
    assert {"PS1", "F1", "R1", "K1", "SW1", "TX1", "L2", "U1", "U2"} <= dc
    assert ("BUF", "0V", "U1") in dc_path_edges(c)
    zero = {ref for _, _, ref in zero_impedance_edges(c)}
    assert zero == {"PS1", "TX1", "L2", "U1", "U2"}     # K1 has winding resistance


# -- floating nodes --------------------------------------------------------


def test_floating_through_capacitor_current_source_open_switch_opamp_input():
    c = C(
        P("PS1", "voltage-source", "V", "0V"),
        P("R1", "resistor", "V", "0V"),
        P("C1", "capacitor", "V", "A"),                   # A: only a capacitor
        P("I1", "current-source", "V", "B"),              # B: current source + capacitor
        P("C2", "capacitor", "B", "0V"),
        P("SW1", "switch", "V", "D", state="open"),       # D: behind an open switch
        P("R2", "resistor", "D", "E"),                    # E: behind D
        P("U1", "opamp", "NIN", "OUT", "OUT"),            # NIN: an op-amp input alone
        P("C3", "capacitor", "NIN", "0V"),
    )
    assert floating_nodes(c) == ["A", "B", "D", "E", "NIN"] == nx_floating(c)


def test_opamp_output_and_ac_source_give_dc_paths():
    c = C(
        P("U1", "opamp", "0V", "X", "Y"),      # Y held by the output
        P("R1", "resistor", "Y", "X"),         # X reached through R1 from Y
        P("TX1", "voltage-source", "S", "0V", waveform="ac"),
        P("L1", "inductor", "S", "T"),
    )
    assert floating_nodes(c) == [] == nx_floating(c)


def test_island_without_ground():
    # A transformer-isolated secondary drawn without its link to 0V.
    c = C(P("PS1", "voltage-source", "V", "0V"), P("R1", "resistor", "V", "0V"),
          P("PS2", "voltage-source", "S1", "S2"), P("R2", "resistor", "S1", "S2"))
    assert floating_nodes(c) == ["S1", "S2"] == nx_floating(c)


def test_ground_on_no_part_floats_everything():
    c = C(P("R1", "resistor", "A", "B"), ground="GND")
    assert floating_nodes(c) == ["A", "B"]


def test_many_parallel_parts_stay_connected():
    # Duplicate edges must not cancel when the sparse graph sums them.
    parts = [P(f"R{i}", "resistor", "A", "0V") for i in range(300)]
    assert floating_nodes(C(*parts)) == []


# -- zero-impedance loops --------------------------------------------------


def test_two_sources_in_parallel():
    c = C(P("PS1", "voltage-source", "V", "0V"), P("PS2", "voltage-source", "V", "0V"),
          P("R1", "resistor", "V", "0V"))
    assert voltage_loops(c) == [["PS2", "PS1"]]


def test_source_across_ideal_inductor_and_with_resistance():
    ideal = C(P("PS1", "voltage-source", "V", "0V"), P("L1", "inductor", "V", "0V"))
    assert voltage_loops(ideal) == [["L1", "PS1"]]
    wound = C(P("PS1", "voltage-source", "V", "0V"), P("L1", "inductor", "V", "0V",
                                                         resistance=3.3))
    assert voltage_loops(wound) == []


def test_loop_through_opamp_output():
    c = C(P("U1", "opamp", "A", "B", "OUT"), P("U2", "opamp", "A", "B", "OUT"),
          P("R1", "resistor", "OUT", "B"), P("R2", "resistor", "A", "0V"),
          P("R3", "resistor", "B", "0V"))
    assert voltage_loops(c) == [["U2", "U1"]]


def test_longer_loop_in_order():
    # Three sources in series, closed by a fourth: PS4 (A-0V) with PS1..PS3 from
    # A down to 0V.
    c = C(P("PS1", "voltage-source", "A", "B"), P("PS2", "voltage-source", "B", "D"),
          P("PS3", "voltage-source", "D", "0V"), P("R1", "resistor", "A", "0V"),
          P("PS4", "voltage-source", "A", "0V"))
    loops = voltage_loops(c)
    assert len(loops) == 1 and loops[0][0] == "PS4"
    assert sorted(loops[0]) == ["PS1", "PS2", "PS3", "PS4"]
    assert_cycle_basis(c, loops)


def test_self_loop_is_a_loop():
    c = C(P("U1", "opamp", "A", "B", "0V"), P("R1", "resistor", "A", "0V"),
          P("R2", "resistor", "B", "0V"))
    assert voltage_loops(c) == [["U1"]]


def test_resistor_breaks_the_loop():
    c = C(P("PS1", "voltage-source", "V", "0V"), P("R1", "resistor", "V", "W"),
          P("PS2", "voltage-source", "W", "0V"))
    assert voltage_loops(c) == []


# -- dangling nodes --------------------------------------------------------


def test_dangling_test_points():
    c = C(P("PS1", "voltage-source", "V", "0V"), P("R1", "resistor", "V", "0V"),
          P("R9", "resistor", "V", "TP9"), P("U1", "opamp", "V", "OUT", "OUT"),
          P("R2", "resistor", "OUT", "TP2"))
    assert dangling_nodes(c) == [("TP9", "R9"), ("TP2", "R2")]
    assert [n for n, _ in dangling_nodes(c)] == nx_dangling(c)


def test_ground_touched_once_but_for_an_opamp():
    # 0V is touched by PS1 and, as U1's output reference, by U1: not dangling.
    c = C(P("PS1", "voltage-source", "V", "0V"), P("U1", "opamp", "V", "OUT", "OUT"),
          P("R1", "resistor", "V", "OUT"))
    assert dangling_nodes(c) == [] == nx_dangling(c)


def test_node_behind_a_junction_is_not_floating():
    # An LED on a current source's node and a transistor's base fed through a
    # resistor from a node reached only through its emitter: every junction passes
    # current (formats.md section 4: I = Is (exp(V / n Vt) - 1) at any bias), so
    # every node's DC voltage is set; a capacitor still leaves its node floating.
    c = C(P("PS1", "voltage-source", "V", "0V"), P("I1", "current-source", "V", "LED"),
          P("D1", "led", "LED", "0V"), P("Q1", "npn", "V", "B", "E"),
          P("R1", "resistor", "B", "X"), P("D2", "diode", "E", "0V"),
          P("C1", "capacitor", "X", "Y"), P("Z1", "zener", "0V", "V"))
    assert floating_nodes(c) == ["Y"] == nx_floating(c)
    assert ("V", "B", "Q1") in dc_path_edges(c) and ("B", "E", "Q1") in dc_path_edges(c)
    assert not any(ref in ("D1", "D2", "Q1", "Z1") for *_, ref in zero_impedance_edges(c))


def test_type_checked():
    for fn in (floating_nodes, voltage_loops, dangling_nodes):
        with pytest.raises(TypeError, match="circuit"):
            fn("not a circuit")


# -- random circuits against networkx --------------------------------------

NODE_NAMES = ["0V", "A", "B", "D", "E", "G"]
KIND_NAMES = list(KINDS)


@st.composite
def random_circuits(draw):
    n = draw(st.integers(1, 14))
    parts = []
    for i in range(n):
        kind = draw(st.sampled_from(KIND_NAMES))
        k = KINDS[kind].nodes
        nodes = draw(st.lists(st.sampled_from(NODE_NAMES), min_size=k, max_size=k))
        kw = {}
        if kind == "switch":
            kw["state"] = draw(st.sampled_from(["open", "closed"]))
        if kind == "inductor":
            kw["resistance"] = draw(st.sampled_from([None, 2.0]))
        if kind in ("voltage-source", "current-source"):
            kw["waveform"] = draw(st.sampled_from(["dc", "ac"]))
        parts.append(P(f"X{i}", kind, *nodes, **kw))
    return C(*parts)


@settings(max_examples=300, deadline=None)
@given(random_circuits())
def test_random_circuits_agree_with_networkx(c):
    assert floating_nodes(c) == nx_floating(c)
    assert_cycle_basis(c, voltage_loops(c))
    assert [n for n, _ in dangling_nodes(c)] == nx_dangling(c)


# -- a large ladder: linear behaviour exercised, correctness checked ------


def test_large_ladder():
    # A 10,000-rung R-2R style ladder (20,000 resistors) fed by PS1; every
    # 1000th rung node also carries a capacitor-coupled test node (floating),
    # and a chain of 2,000 sources is closed by one more (one long loop).
    n = 10_000
    parts = [P("PS1", "voltage-source", "N0", "0V")]
    for i in range(n):
        parts.append(P(f"RS{i}", "resistor", f"N{i}", f"N{i + 1}"))
        parts.append(P(f"RG{i}", "resistor", f"N{i + 1}", "0V"))
        if i % 1000 == 0:
            parts.append(P(f"CX{i}", "capacitor", f"N{i + 1}", f"X{i}"))
    m = 2000
    for j in range(m):
        parts.append(P(f"PV{j}", "voltage-source", f"V{j}", f"V{j + 1}" if j < m - 1 else "0V"))
    parts.append(P("PVX", "voltage-source", "V0", "0V"))
    c = C(*parts)
    assert len(c.parts) > 20_000
    floating = floating_nodes(c)
    assert floating == [f"X{i}" for i in range(0, n, 1000)] == nx_floating(c)
    loops = voltage_loops(c)
    assert len(loops) == 1 and len(loops[0]) == m + 1 and loops[0][0] == "PVX"
    assert_cycle_basis(c, loops)
    dangling = dangling_nodes(c)
    assert dangling == [(f"X{i}", f"CX{i}") for i in range(0, n, 1000)]
    assert [node for node, _ in dangling] == nx_dangling(c)
