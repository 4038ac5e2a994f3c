"""Nodes a fault cuts off from every source, and the stray voltage read there.

A network node is *driven* when some source reaches it other than through
the reference (ground) node: in the graph of the parts that conduct in the
analysis, with the ground node taken out, its piece holds a terminal of an
active source.  When a fault (an open part, a dead source) cuts a node off
from every source that drives it in the healthy circuit, the model puts it
at the reference's potential exactly, but a meter on it reads whatever the
wiring picks up: capacitive pick-up from live wiring nearby, leakage across
the open part, return-path drops of other circuits sharing the reference.
Those are not in the circuit file, so a reading on such a node is *weakly
defined*: :mod:`.evidence` gives it a stray-voltage allowance
(:data:`STRAY_DC`, :data:`STRAY_AC`; docs/estimate.md).  Nodes that carry
no current in the healthy circuit (a DC test point behind a series resistor)
are driven by this rule and get no allowance: the drawing says where they
sit.

Edges by analysis (formats.md section 1): resistors, fuses, closed switches
and inductors conduct in every analysis, capacitors in AC only; a voltage
source is a wire (and a source when it is active: its waveform matches the
analysis and it is not dead); a current source is an edge only when active;
an op-amp's output is a source referred to ground.  A shorted part conducts,
an open one does not.  Only opens and dead sources can cut nodes off (a
short only joins pieces).

One depth-first search per analysis finds the bridges of the healthy graph
and the sources on each side, so a single open is decided in O(1) per
reading; pairs of faults re-label the pieces with
:func:`scipy.sparse.csgraph.connected_components` (O(parts)).
"""

from __future__ import annotations

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

__all__ = ["Reach", "STRAY_DC", "STRAY_AC", "STRAY_PENALTY", "STRAY_MAX_PARTS", "weak_readings"]

#: Largest stray voltage allowed on a cut-off node, DC readings: 50 mV.  A
#: handheld on a node behind a blown fuse shows a few to tens of millivolts
#: (common practice (no source)).
STRAY_DC = 0.05
#: The same for AC readings: 0.5 V.  Capacitive pick-up on a disconnected
#: conductor read by a 10 MOhm meter ("ghost voltage") is larger than DC
#: offsets (common practice (no source)).
STRAY_AC = 0.5
#: Log-likelihood paid for each reading that uses the allowance: the size of
#: the stray voltage is log-uniform between about the meter's resolution and
#: the allowance, about three decades, so ``ln(ln 1000) ~ 1.9`` (an Occam
#: factor, as for a drift; docs/estimate.md).
STRAY_PENALTY = 1.9
#: Circuits with more parts than this get no allowance: the graph search is
#: plain Python (about 0.1 s per 10,000 parts and analysis on an idle core),
#: and on a large mesh a single open cuts nothing off.
STRAY_MAX_PARTS = 20_000


def _edges(circuit, analysis, faults):
    """(a, b, is_source, ref) of each conducting part under ``faults`` (ref -> mode)."""
    ground = circuit.ground
    out = []
    for p in circuit.parts:
        mode = faults.get(p.ref)
        k = p.kind
        if k == "opamp":
            out.append((p.nodes[2], ground, True, p.ref))
            continue
        if p.is_source:
            active = (p.waveform == "ac") == (analysis == "ac") and mode != "dead"
            if k == "voltage-source":
                out.append((p.nodes[0], p.nodes[1], active, p.ref))
            elif active:
                out.append((p.nodes[0], p.nodes[1], True, p.ref))
            continue
        if mode == "open":
            continue
        if mode == "short":
            out.append((p.nodes[0], p.nodes[1], False, p.ref))
            continue
        if k == "switch" and p.state == "open":
            continue
        if k == "capacitor" and analysis != "ac":
            continue
        out.append((p.nodes[0], p.nodes[1], False, p.ref))
    return out


class Reach:
    """Which nodes the sources reach, healthy and under faults, in one analysis.

    Parameters
    ----------
    circuit : Circuit
    analysis : str
        ``"dc"`` or ``"ac"``.
    """

    def __init__(self, circuit, analysis):
        self.circuit = circuit
        self.analysis = analysis
        nodes = list(circuit.nodes)
        self.index = {n: i for i, n in enumerate(nodes)}
        self.g = self.index[circuit.ground]
        self.N = len(nodes)
        edges = _edges(circuit, analysis, {})
        self.by_ref = {}
        ea, eb, src = [], [], np.zeros(self.N, dtype=bool)
        for a, b, s, ref in edges:
            ia, ib = self.index[a], self.index[b]
            if s:
                for i in (ia, ib):
                    if i != self.g:
                        src[i] = True
            if ia == self.g or ib == self.g or ia == ib:
                continue
            self.by_ref.setdefault(ref, []).append(len(ea))
            ea.append(ia)
            eb.append(ib)
        self.ea = np.array(ea, dtype=np.int64)
        self.eb = np.array(eb, dtype=np.int64)
        self.src = src
        self.label, self.driven = self._pieces(np.ones(len(ea), dtype=bool), src)
        self._dfs()

    # ------------------------------------------------------------------
    def _pieces(self, keep, src):
        """Component label of each node and whether each node's piece holds a source terminal."""
        a, b = self.ea[keep], self.eb[keep]
        graph = coo_matrix((np.ones(a.size), (a, b)), shape=(self.N, self.N)).tocsr()
        _, lab = connected_components(graph, directed=False)
        has = np.zeros(lab.max() + 1, dtype=bool)
        has[lab[src]] = True
        driven = has[lab]
        driven[self.g] = True
        return lab, driven

    def _dfs(self):
        """Iterative DFS: entry/exit times, and for each bridge the child side's sources."""
        N = self.N
        adj = [[] for _ in range(N)]
        for e, (a, b) in enumerate(zip(self.ea.tolist(), self.eb.tolist())):
            adj[a].append((b, e))
            adj[b].append((a, e))
        tin = np.full(N, -1, dtype=np.int64)
        tout = np.zeros(N, dtype=np.int64)
        low = np.zeros(N, dtype=np.int64)
        nsrc = self.src.astype(np.int64)          # source terminals in the DFS subtree
        root = np.zeros(N, dtype=np.int64)
        self.bridge = {}                          # edge -> child node (the side cut off below it)
        t = 0
        src = self.src.tolist()
        for s in range(N):
            if tin[s] >= 0 or s == self.g:
                continue
            tin[s] = low[s] = t
            t += 1
            root[s] = s
            stack = [(s, -1, iter(adj[s]))]
            while stack:
                v, pe, it = stack[-1]
                advanced = False
                for w, e in it:
                    if e == pe:
                        continue
                    if tin[w] < 0:
                        tin[w] = low[w] = t
                        t += 1
                        root[w] = s
                        stack.append((w, e, iter(adj[w])))
                        advanced = True
                        break
                    low[v] = min(low[v], tin[w])
                if advanced:
                    continue
                stack.pop()
                tout[v] = t
                if stack:
                    u = stack[-1][0]
                    low[u] = min(low[u], low[v])
                    nsrc[u] += nsrc[v]
                    if low[v] > tin[u]:
                        self.bridge[pe] = v
        del src
        self.tin, self.tout, self.nsrc, self.root = tin, tout, nsrc, root

    def _under(self, i, v):
        """Node ``i`` is in the DFS subtree of ``v``."""
        return self.tin[v] <= self.tin[i] < self.tout[v]

    # ------------------------------------------------------------------
    def cut_off(self, faults, nodes):
        """Which of ``nodes`` (names) the faults cut off from every source driving them.

        Parameters
        ----------
        faults : dict
            Ref -> mode (``"open"``, ``"short"``, ``"dead"``, ``"drift"``).
        nodes : sequence of str

        Returns
        -------
        ndarray of bool
        """
        idx = np.array([self.index[n] for n in nodes], dtype=np.int64)
        cut = [(r, m) for r, m in faults.items() if m in ("open", "dead")]
        if not cut:
            return np.zeros(idx.size, dtype=bool)
        if len(cut) == 1 and cut[0][1] == "open":
            return self._single_cut(cut[0][0], idx)
        keep = np.ones(self.ea.size, dtype=bool)
        src = self.src.copy()
        for ref, mode in cut:
            if mode == "open" or (mode == "dead" and self.circuit.part(ref).kind == "current-source"):
                keep[self.by_ref.get(ref, [])] = False   # a dead current source is an open
        if any(m == "dead" for _, m in cut):
            edges = _edges(self.circuit, self.analysis, dict(faults))
            src[:] = False
            for a, b, s, _ in edges:
                if s:
                    for n in (a, b):
                        if self.index[n] != self.g:
                            src[self.index[n]] = True
        _, driven = self._pieces(keep, src)
        return self.driven[idx] & ~driven[idx]

    def _single_cut(self, ref, idx):
        out = np.zeros(idx.size, dtype=bool)
        es = self.by_ref.get(ref, [])
        if len(es) != 1 or es[0] not in self.bridge:
            return out                  # not a bridge: opening it cuts nothing off
        v = self.bridge[es[0]]
        r = self.root[v]
        below = self.nsrc[v]
        above = self.nsrc[r] - below
        for k, i in enumerate(idx.tolist()):
            if i == self.g or self.root[i] != r or self.tin[i] < 0:
                continue
            side_below = self._under(i, v)
            left = below if side_below else above
            out[k] = left == 0 and self.driven[i]
        return out


def weak_readings(board, faults):
    """Voltage readings of ``board`` on nodes ``faults`` cut off from every source.

    Parameters
    ----------
    board : hypotheses.Board
        Its readings and circuit (a cache is kept on it).
    faults : sequence of Fault
        The hypothesis (empty: healthy).

    Returns
    -------
    ndarray of bool (n,) or None
        None when no reading is on a cut-off node.
    """
    modes = {f.ref: f.mode for f in faults if f.mode in ("open", "dead")}
    if not modes or len(board.circuit.parts) > STRAY_MAX_PARTS:
        return None
    cache = board.__dict__.setdefault("_weak", {})
    key = tuple(sorted(modes.items()))
    if key in cache:
        return cache[key]
    if len(cache) > 4096:
        cache.clear()
    reach = board.__dict__.setdefault("_reach", {})
    out = np.zeros(board.n, dtype=bool)
    for an in ("dc", "ac"):
        rows = [i for i, rd in enumerate(board.readings) if rd.quantity == "voltage"
                and (rd.mode == "ac") == (an == "ac")]
        if not rows:
            continue
        if an not in reach:
            reach[an] = Reach(board.circuit, an)
        r = reach[an]
        names = [board.readings[i].plus for i in rows] + [board.readings[i].minus or board.circuit.ground
                                                         for i in rows]
        cut = r.cut_off(modes, names)
        m = len(rows)
        out[rows] = cut[:m] | cut[m:]
    cache[key] = out if out.any() else None
    return cache[key]
