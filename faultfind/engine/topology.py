"""Graph checks on a circuit: floating nodes, zero-impedance loops, dangling nodes.

Each check sees the circuit as a graph whose vertices are nodes and whose
edges are parts, and runs in O(n) or O(n log n) in the number of parts, so a
circuit of a hundred thousand parts is checked in well under a second.

Which parts are edges depends on the question asked (formats.md, section 1:
"A DC reading sees capacitors as open and inductors as their winding
resistance"):

==================  ==================  ==========================
part                DC path             zero impedance at DC
==================  ==================  ==========================
resistor, fuse      yes                 no
switch, closed      yes                 no
switch, open        no                  no
inductor            yes                 only without ``resistance``
capacitor           no                  no
voltage-source      yes (any waveform)  yes (any waveform)
current-source      no                  no
opamp               output to ground    output to ground
diode, led, zener   yes                 no
npn, pnp            joins all three     no
==================  ==================  ==========================

A junction conducts in one direction or the other (and leaks in reverse), so
a node reached only through a diode or a transistor has its DC voltage set
by the circuit (formats.md section 4); no junction is a zero impedance.

An AC voltage source is a 0 V source at DC, so it is a path and a zero
impedance there.  An op-amp's output is a voltage source referred to ground
(formats.md, kinds table), so it contributes an edge from its output node to
the circuit's ground; its inputs draw no current and are no path.
"""

from __future__ import annotations

from collections import deque

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from faultfind.model import Circuit

__all__ = ["dc_path_edges", "zero_impedance_edges", "floating_nodes", "voltage_loops",
           "dangling_nodes"]


def _check_circuit(circuit) -> None:
    if not isinstance(circuit, Circuit):
        raise TypeError(f"circuit must be a faultfind.model.Circuit, not {type(circuit).__name__}")


def _is_ideal_inductor(part) -> bool:
    return part.kind == "inductor" and not part.resistance


def dc_path_edges(circuit: Circuit) -> list[tuple[str, str, str]]:
    """The branches that carry steady (DC) current.

    Parameters
    ----------
    circuit : Circuit
        The circuit as drawn.

    Returns
    -------
    list of tuple (node_a, node_b, ref)
        One edge per resistor, fuse, closed switch, inductor, voltage
        source (any waveform), diode, LED and zener, in the order of
        ``circuit.parts``; an op-amp gives the edge ``(output, ground,
        ref)``; a transistor the two edges ``(collector, base, ref)`` and
        ``(base, emitter, ref)``.  Capacitors, current
        sources, open switches and op-amp inputs give none.
    """
    _check_circuit(circuit)
    ground = circuit.ground
    edges = []
    for p in circuit.parts:
        kind = p.kind
        if kind in ("resistor", "fuse", "inductor", "voltage-source", "diode", "led", "zener"):
            edges.append((p.nodes[0], p.nodes[1], p.ref))
        elif kind in ("npn", "pnp"):        # collector-base and base-emitter junctions
            edges += [(p.nodes[0], p.nodes[1], p.ref), (p.nodes[1], p.nodes[2], p.ref)]
        elif kind == "switch":
            if p.state != "open":
                edges.append((p.nodes[0], p.nodes[1], p.ref))
        elif kind == "opamp":
            edges.append((p.nodes[2], ground, p.ref))
    return edges


def zero_impedance_edges(circuit: Circuit) -> list[tuple[str, str, str]]:
    """The branches with no impedance at DC.

    Parameters
    ----------
    circuit : Circuit
        The circuit as drawn.

    Returns
    -------
    list of tuple (node_a, node_b, ref)
        One edge per voltage source (any waveform) and per inductor without
        a winding ``resistance`` (None or 0: an ideal inductor is a short at
        DC), in the order of ``circuit.parts``; an op-amp gives the edge
        ``(output, ground, ref)``.
    """
    _check_circuit(circuit)
    ground = circuit.ground
    edges = []
    for p in circuit.parts:
        if p.kind == "voltage-source" or _is_ideal_inductor(p):
            edges.append((p.nodes[0], p.nodes[1], p.ref))
        elif p.kind == "opamp":
            edges.append((p.nodes[2], ground, p.ref))
    return edges


def floating_nodes(circuit: Circuit) -> list[str]:
    """Nodes with no DC path to ground.

    A node floats when no chain of DC-path branches (see
    :func:`dc_path_edges`) joins it to ``circuit.ground``: its DC voltage is
    then not set by the circuit and the network equations are singular.

    Parameters
    ----------
    circuit : Circuit
        The circuit as drawn.

    Returns
    -------
    list of str
        The floating nodes in the order of ``circuit.nodes`` (first
        appearance); empty when every node has a DC path.  The ground node
        itself never floats.

    Notes
    -----
    Connected components of the DC-path graph, found with
    :func:`scipy.sparse.csgraph.connected_components`: O(n) in the number of
    parts.
    """
    _check_circuit(circuit)
    nodes = circuit.nodes                       # ground first
    index = {name: i for i, name in enumerate(nodes)}
    edges = dc_path_edges(circuit)
    m = len(edges)
    rows = np.fromiter((index[a] for a, _, _ in edges), dtype=np.int64, count=m)
    cols = np.fromiter((index[b] for _, b, _ in edges), dtype=np.int64, count=m)
    graph = coo_matrix((np.ones(m), (rows, cols)),
                       shape=(len(nodes), len(nodes))).tocsr()
    _, labels = connected_components(graph, directed=False)
    grounded = labels == labels[0]
    return [nodes[i] for i in np.flatnonzero(~grounded)]


def voltage_loops(circuit: Circuit) -> list[list[str]]:
    """Loops made only of branches with no impedance at DC.

    Such a loop (two voltage sources in parallel, a source across an ideal
    inductor, two op-amp outputs tied together...) fixes the same voltage
    twice or shorts a source; the DC network equations have no unique
    solution.

    Parameters
    ----------
    circuit : Circuit
        The circuit as drawn.

    Returns
    -------
    list of list of str
        One independent loop (a fundamental cycle of the graph of
        :func:`zero_impedance_edges`) per list, as the refs met going round
        it, starting with the part that closes it; loops are in the order of
        their closing part in ``circuit.parts``.  Empty when there is none.
        A part whose two ends are on the same node is a loop of its own.

    Notes
    -----
    A spanning forest is grown with union-find (O(n α(n))); each edge that
    joins two nodes already joined closes a loop, traced back through the
    forest to the nearest common ancestor.  The cost is O(n) plus the total
    length of the loops reported.
    """
    _check_circuit(circuit)
    edges = zero_impedance_edges(circuit)
    parent: dict[str, str] = {}

    def find(x: str) -> str:
        root = x
        while parent.get(root, root) != root:
            root = parent[root]
        while x != root:                       # path compression
            parent[x], x = root, parent[x]
        return root

    tree_adj: dict[str, list[tuple[str, str]]] = {}
    closing = []
    for a, b, ref in edges:
        parent.setdefault(a, a)
        parent.setdefault(b, b)
        ra, rb = find(a), find(b)
        if ra == rb:
            closing.append((a, b, ref))
        else:
            parent[ra] = rb
            tree_adj.setdefault(a, []).append((b, ref))
            tree_adj.setdefault(b, []).append((a, ref))
    if not closing:
        return []

    # Root every tree of the forest: parent node, edge to it, depth.
    up: dict[str, tuple[str | None, str | None, int]] = {}
    for start in tree_adj:
        if start in up:
            continue
        up[start] = (None, None, 0)
        queue = deque([start])
        while queue:
            u = queue.popleft()
            depth = up[u][2] + 1
            for v, ref in tree_adj[u]:
                if v not in up:
                    up[v] = (u, ref, depth)
                    queue.append(v)

    loops = []
    for a, b, ref in closing:
        if a == b:
            loops.append([ref])
            continue
        # Walk a and b up to their nearest common ancestor.
        from_a, from_b = [], []
        u, v = a, b
        while up[u][2] > up[v][2]:
            from_a.append(up[u][1])
            u = up[u][0]
        while up[v][2] > up[u][2]:
            from_b.append(up[v][1])
            v = up[v][0]
        while u != v:
            from_a.append(up[u][1])
            u = up[u][0]
            from_b.append(up[v][1])
            v = up[v][0]
        # Round the loop: closing part (a -> b), then b up to the ancestor,
        # then down to a.
        loops.append([ref] + from_b + from_a[::-1])
    return loops


def dangling_nodes(circuit: Circuit) -> list[tuple[str, str]]:
    """Nodes that only one terminal touches.

    Legal (a test point brought out through a resistor) but also what a
    misspelt node name looks like, so worth a warning.  An op-amp's output is
    referred to ground, so each op-amp counts as touching the ground node.

    Parameters
    ----------
    circuit : Circuit
        The circuit as drawn.

    Returns
    -------
    list of tuple (node, ref)
        Each such node with the part that touches it, in the order of
        ``circuit.nodes``.
    """
    _check_circuit(circuit)
    count: dict[str, int] = {}
    first: dict[str, str] = {}
    ground = circuit.ground
    for p in circuit.parts:
        terminals = p.nodes + (ground,) if p.kind == "opamp" else p.nodes
        for n in terminals:
            c = count.get(n, 0)
            count[n] = c + 1
            if c == 0:
                first[n] = p.ref
    return [(n, first[n]) for n in circuit.nodes if count.get(n) == 1]
