"""Modified nodal analysis: assemble the sparse linear system of a circuit.

Three analyses share one assembler:

``"dc"``
    DC steady state: capacitors open, inductors as their winding resistance
    (an ideal winding is a zero-volt branch), DC sources at their value, AC
    sources at zero (a voltage source at 0 V, a current source open).
``"ac"``
    Steady state at one frequency over complex admittances, driven by the AC
    sources alone (phasors of RMS magnitude); DC sources at zero.
``"off"``
    The power-off network an ohmmeter sees: every source in its
    ``off_state`` (open: removed; short: a zero-volt branch), capacitors open,
    op-amps unpowered (removed), inductors as their winding resistance.  It has
    no excitation; resistance readings are computed by injecting a test
    current between the probes.  Parts of it that have no connection to ground
    get a reference node of their own (see :attr:`Network.reference`).

Elements are stamped in one of three ways:

* an *admittance* ``y`` between two nodes (resistor, fuse, closed switch,
  capacitor and inductor at AC, inductor with winding resistance at DC);
* a *branch* with its own current unknown (voltage sources, zero-volt wires:
  an ideal inductor at DC, a source that is ``off_state = "short"``, and an
  op-amp's output, a voltage-controlled voltage source referred to ground).
  A short is an exact zero-volt branch, never a large conductance;
* an *injection* into the right-hand side (current sources).

Semiconductors (diodes, LEDs, zeners, transistors) leave no stamps here:
engine/nonlinear.py adds their junctions to this linear network.  They do
join their nodes for the connectivity of ``"off"`` and ``floating``
networks, and a two-terminal part's ``"short"`` override is a zero-volt
branch here as any part's (a transistor's internal shorts are wires of
engine/nonlinear.py, inside its leads).

The unknown vector is ``[v_0 .. v_{n-1}, i_0 .. i_{m-1}]``: node voltages to
the reference, then branch currents.  A branch current is the current that
enters the branch at its first node (for a voltage source, the current into
its + terminal from the circuit).  Node index ``-1`` is the reference.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from ..model import DEFAULT_OPAMP_GAIN, SEMICONDUCTORS, Circuit

__all__ = ["ANALYSES", "Network", "assemble"]

ANALYSES = ("dc", "ac", "off")

# element stamp kinds
ADMITTANCE, BRANCH, INJECTION = "y", "br", "inj"


@dataclass
class Network:
    """A circuit compiled for one analysis.

    Attributes
    ----------
    analysis : str
        ``"dc"``, ``"ac"`` or ``"off"``.
    frequency : float or None
        Hertz, for ``"ac"``.
    A : scipy.sparse.csc_matrix
        System matrix, ``(n + m) x (n + m)``.
    b : ndarray
        Right-hand side.
    n : int
        Number of node unknowns.
    node_index : dict
        Node name to unknown index; reference nodes map to -1.
    reference : ndarray of int
        For ``"off"``: the component number of every node (name order of
        ``node_names``); two nodes are connected iff they share it.  For the
        other analyses all zeros.
    node_names : tuple of str
        Every node of the circuit, ground first.
    y_ref, y_a, y_b, y_val : ndarrays
        Admittance elements: part index, node indices, admittance.
    br_ref, br_a, br_b, br_e : ndarrays
        Branches: part index, node indices (``br_b`` is -1 for op-amp
        outputs), source value (0 for wires and op-amps).
    inj_ref, inj_a, inj_b, inj_i : ndarrays
        Current injections: part index, node the current is driven into, node
        it is taken from, current.
    element : dict
        Part ref to ``(stamp kind, element number)``; absent parts (open in
        this analysis) are missing.
    indeterminate : set
        Parts in a loop of zero-volt branches whose current the equations do
        not determine (only with ``floating=True`` or ``"off"``).
    """

    analysis: str
    frequency: float | None
    A: sp.csc_matrix
    b: np.ndarray
    n: int
    node_index: dict
    reference: np.ndarray
    node_names: tuple
    y_ref: np.ndarray
    y_a: np.ndarray
    y_b: np.ndarray
    y_val: np.ndarray
    br_ref: np.ndarray
    br_a: np.ndarray
    br_b: np.ndarray
    br_e: np.ndarray
    inj_ref: np.ndarray
    inj_a: np.ndarray
    inj_b: np.ndarray
    inj_i: np.ndarray
    element: dict

    @property
    def size(self) -> int:
        return self.A.shape[0]

    def connected(self, a: str, b: str) -> bool:
        """True when nodes ``a`` and ``b`` are joined by the network's elements."""
        pos = self.__dict__.get("_pos")
        if pos is None:
            pos = self.__dict__["_pos"] = {name: i for i, name in enumerate(self.node_names)}
        return bool(self.reference[pos[a]] == self.reference[pos[b]])

    def node_vector(self, plus: str, minus: str) -> np.ndarray:
        """The vector ``u`` with ``u @ x = v(plus) - v(minus)``."""
        u = np.zeros(self.size, dtype=self.A.dtype)
        ia, ib = self.node_index[plus], self.node_index[minus]
        if ia >= 0:
            u[ia] += 1.0
        if ib >= 0:
            u[ib] -= 1.0
        return u


def _omega(analysis, frequency):
    if analysis != "ac":
        return 0.0
    if frequency is None or not np.isfinite(frequency) or frequency <= 0:
        raise ValueError(f"frequency: an AC analysis needs a positive frequency, got {frequency!r}")
    return 2.0 * np.pi * float(frequency)


def assemble(circuit: Circuit, analysis: str, frequency: float | None = None,
             overrides: dict | None = None, floating: bool = False) -> Network:
    """Assemble the MNA system of ``circuit`` for one analysis.

    Parameters
    ----------
    circuit : Circuit
        A validated circuit (no floating nodes, no voltage-source loops).
    analysis : {"dc", "ac", "off"}
        Which network to build (module docstring).
    frequency : float, optional
        Hertz; required for ``"ac"``.
    overrides : dict, optional
        Part ref to a replacement value (SI), or to the strings ``"open"`` or
        ``"short"`` (for a source, ``"dead"`` sets it to zero).  Used by the
        re-solve path that checks the fast diagnosis engine, and by drills.
        Semiconductors' overrides (engine/semis.py) only change which nodes
        they join here.
    floating : bool, optional
        Give every part of the network that has no connection to ground a
        reference node of its own (always done for ``"off"``).  Voltages
        inside such a section are then relative to its reference; a faulted
        circuit may leave a section floating.

    Returns
    -------
    Network

    Raises
    ------
    ValueError
        ``analysis`` unknown, or ``frequency`` missing for ``"ac"``.
    """
    if analysis not in ANALYSES:
        raise ValueError(f"analysis: expected one of {ANALYSES}, got {analysis!r}")
    w = _omega(analysis, frequency)
    overrides = overrides or {}
    dtype = complex if analysis == "ac" else float
    names = circuit.nodes
    ground = circuit.ground

    y_rows, br_rows, inj_rows, vcvs = [], [], [], []
    semi_edges = []   # node pairs joined by a semiconductor (connectivity only)
    # (part index, node a name, node b name, value)
    for pi, p in enumerate(circuit.parts):
        ov = overrides.get(p.ref)
        kind = p.kind
        if kind in SEMICONDUCTORS:
            # no stamps here: engine/nonlinear.py adds the junctions.  Only
            # the wires a fault puts in are branches of the linear network.
            if len(p.nodes) == 2:
                if ov == "short":
                    br_rows.append((pi, p.nodes[0], p.nodes[1], 0.0))
                elif ov != "open":
                    semi_edges.append((p.nodes[0], p.nodes[1]))
            else:
                # a transistor's internal shorts are wires of its own (inside
                # its leads: a current probe in the collector lead sees them)
                c, b_, e = p.nodes
                if ov == "short":
                    semi_edges.append((c, e))
                if ov != "open":
                    semi_edges.append((c, b_))
                if ov != "base-emitter-open":
                    semi_edges.append((b_, e))
            continue
        if kind == "opamp":
            if analysis != "off":
                gain = p.gain if p.gain is not None else DEFAULT_OPAMP_GAIN
                vcvs.append((pi, p.nodes[2], p.nodes[0], p.nodes[1], gain))
            continue
        a, b = p.nodes
        if ov == "open":
            continue
        if ov == "short":
            br_rows.append((pi, a, b, 0.0))
            continue
        value = p.value if ov is None or isinstance(ov, str) else float(ov)
        if kind in ("resistor", "fuse", "switch"):
            if kind == "switch" and p.state == "open" and ov is None:
                continue
            y_rows.append((pi, a, b, 1.0 / value))
        elif kind == "capacitor":
            if analysis == "ac":
                y_rows.append((pi, a, b, 1j * w * value))
        elif kind == "inductor":
            rw = p.resistance or 0.0
            if analysis == "ac":
                y_rows.append((pi, a, b, 1.0 / (rw + 1j * w * value)))
            elif rw > 0:
                y_rows.append((pi, a, b, 1.0 / rw))
            else:
                br_rows.append((pi, a, b, 0.0))
        elif kind in ("voltage-source", "current-source"):
            if analysis == "off":
                if p.off_state == "short":
                    br_rows.append((pi, a, b, 0.0))
                continue
            active = (p.waveform == "ac") == (analysis == "ac")
            if ov == "dead" or not active:
                value = 0.0
            elif analysis == "ac":
                value = value * np.exp(1j * np.deg2rad(p.phase))
            if kind == "voltage-source":
                br_rows.append((pi, a, b, value))
            else:
                inj_rows.append((pi, a, b, value))
        else:  # pragma: no cover - the loader rejects unknown kinds
            raise ValueError(f"part {p.ref}: unknown kind {kind!r}")

    indeterminate = set()
    if (analysis == "off" or floating) and br_rows:
        # zero-volt branches (wires, 0 V sources) that close a loop of such
        # branches carry an undetermined current and change no node voltage:
        # keep a spanning forest of them, and remember which parts' currents
        # are undetermined.  Parts named "__..." (a meter) are kept first.
        parent = {}

        def find(v):
            while parent.get(v, v) != v:
                parent[v] = parent.get(parent[v], parent[v])
                v = parent[v]
            return v

        order = sorted(range(len(br_rows)),
                       key=lambda i: not circuit.parts[br_rows[i][0]].ref.startswith("__"))
        kept, dropped, wires = [], [], []
        for i in order:
            row = br_rows[i]
            if row[3] != 0:
                kept.append(row)
                continue
            wires.append(row)
            ra, rb = find(row[1]), find(row[2])
            if ra != rb:
                parent[ra] = rb
                kept.append(row)
            else:
                dropped.append(row)
        if dropped:
            bad_roots = {find(r[1]) for r in dropped}
            indeterminate = {circuit.parts[r[0]].ref for r in wires if find(r[1]) in bad_roots}
        br_rows = sorted(kept, key=lambda r: r[0])

    # node numbering: reference(s) get -1
    pos = {name: i for i, name in enumerate(names)}
    n_all = len(names)
    if analysis == "off" or floating:
        ea = ([pos[r[1]] for r in y_rows] + [pos[r[1]] for r in br_rows] + [pos[r[1]] for r in vcvs]
              + [pos[r[0]] for r in semi_edges])
        eb = ([pos[r[2]] for r in y_rows] + [pos[r[2]] for r in br_rows] + [0 for r in vcvs]
              + [pos[r[1]] for r in semi_edges])
        g = sp.coo_matrix((np.ones(len(ea)), (ea, eb)), shape=(n_all, n_all))
        _, comp = connected_components(g, directed=False)
        comp = np.asarray(comp)
        is_ref = np.zeros(n_all, dtype=bool)
        is_ref[0] = True  # ground is names[0] (Circuit.nodes puts it first)
        first_of = {}
        for i, c in enumerate(comp):
            first_of.setdefault(c, i)
        ground_comp = comp[0]
        for c, i in first_of.items():
            if c != ground_comp:
                is_ref[i] = True
    else:
        comp = np.zeros(n_all, dtype=int)
        is_ref = np.zeros(n_all, dtype=bool)
        is_ref[pos[ground]] = True
    idx_of = np.full(n_all, -1, dtype=np.int64)
    idx_of[~is_ref] = np.arange(int((~is_ref).sum()))
    n = int((~is_ref).sum())
    node_index = {name: int(idx_of[i]) for i, name in enumerate(names)}

    def arr(rows, j, dt=np.int64):
        return np.array([r[j] for r in rows], dtype=dt)

    y_ref = arr(y_rows, 0)
    y_a = np.array([idx_of[pos[r[1]]] for r in y_rows], dtype=np.int64)
    y_b = np.array([idx_of[pos[r[2]]] for r in y_rows], dtype=np.int64)
    y_val = arr(y_rows, 3, dtype)

    br_all = [(pi, a, b, e) for (pi, a, b, e) in br_rows] + [(pi, out, None, 0.0) for (pi, out, _, _, _) in vcvs]
    m = len(br_all)
    br_ref = arr(br_all, 0)
    br_a = np.array([idx_of[pos[r[1]]] for r in br_all], dtype=np.int64)
    br_b = np.array([idx_of[pos[r[2]]] if r[2] is not None else -1 for r in br_all], dtype=np.int64)
    br_e = arr(br_all, 3, dtype)

    inj_ref = arr(inj_rows, 0)
    inj_a = np.array([idx_of[pos[r[1]]] for r in inj_rows], dtype=np.int64)
    inj_b = np.array([idx_of[pos[r[2]]] for r in inj_rows], dtype=np.int64)
    inj_i = arr(inj_rows, 3, dtype)

    N = n + m
    rows, cols, vals = [], [], []

    def put(r, c, v):
        keep = (r >= 0) & (c >= 0)
        rows.append(r[keep]); cols.append(c[keep]); vals.append(np.asarray(v, dtype)[keep] if np.ndim(v) else np.full(int(keep.sum()), v, dtype))

    # admittances: y (e_a - e_b)(e_a - e_b)^T
    put(y_a, y_a, y_val); put(y_b, y_b, y_val); put(y_a, y_b, -y_val); put(y_b, y_a, -y_val)
    # branches: KCL columns and KVL rows
    k = n + np.arange(m, dtype=np.int64)
    one = np.ones(m, dtype)
    put(br_a, k, one); put(br_b, k, -one); put(k, br_a, one); put(k, br_b, -one)
    # op-amp outputs: row k also carries -gain * (v_p - v_n)
    if vcvs:
        kv = n + len(br_rows) + np.arange(len(vcvs), dtype=np.int64)
        gp = np.array([idx_of[pos[r[2]]] for r in vcvs], dtype=np.int64)
        gn = np.array([idx_of[pos[r[3]]] for r in vcvs], dtype=np.int64)
        gain = np.array([r[4] for r in vcvs], dtype=dtype)
        put(kv, gp, -gain); put(kv, gn, gain)
    A = sp.coo_matrix((np.concatenate(vals) if vals else np.zeros(0, dtype),
                       (np.concatenate(rows) if rows else np.zeros(0, np.int64),
                        np.concatenate(cols) if cols else np.zeros(0, np.int64))),
                      shape=(N, N)).tocsc()
    A.sum_duplicates()

    rhs = np.zeros(N, dtype=dtype)
    rhs[n:] = br_e
    if len(inj_i):
        np.add.at(rhs, inj_a[inj_a >= 0], inj_i[inj_a >= 0])
        np.subtract.at(rhs, inj_b[inj_b >= 0], inj_i[inj_b >= 0])

    element = {}
    parts = circuit.parts
    for j, pi in enumerate(y_ref):
        element[parts[pi].ref] = (ADMITTANCE, j)
    for j, pi in enumerate(br_ref):
        element[parts[pi].ref] = (BRANCH, j)
    for j, pi in enumerate(inj_ref):
        element[parts[pi].ref] = (INJECTION, j)

    net = Network(analysis, frequency if analysis == "ac" else None, A, rhs, n, node_index,
                  comp, names, y_ref, y_a, y_b, y_val, br_ref, br_a, br_b, br_e,
                  inj_ref, inj_a, inj_b, inj_i, element)
    net.indeterminate = indeterminate
    return net
