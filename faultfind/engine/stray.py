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

One depth-first spanning forest per analysis (compiled code, see
:meth:`Reach._tree`) finds the bridges of the healthy graph and the sources
on each side, so a single open is decided in O(1) per reading; pairs of
faults and dead sources re-label the pieces with
:func:`scipy.sparse.csgraph.connected_components` (O(parts)).
"""

from __future__ import annotations

import numpy as np
from scipy.sparse import coo_matrix, csr_matrix
from scipy.sparse.csgraph import connected_components, depth_first_order
from scipy.sparse.linalg import spsolve_triangular

__all__ = ["Reach", "STRAY_DC", "STRAY_AC", "STRAY_PENALTY", "weak_readings"]

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


def _edges(circuit, analysis, faults, index):
    """Node indices ``(a, b)``, source flags and refs of each conducting part under
    ``faults`` (ref -> mode); ``index``: node name -> index."""
    ground = circuit.ground
    A, B, S, R = [], [], [], []
    ac = analysis == "ac"
    for p in circuit.parts:
        k = p.kind
        nodes = p.nodes
        if k == "opamp":
            A.append(nodes[2])
            B.append(ground)
            S.append(True)
            R.append(p.ref)
            continue
        mode = faults.get(p.ref) if faults else None
        if p.is_source:
            active = (p.waveform == "ac") == ac and mode != "dead"
            if k != "voltage-source" and not active:
                continue
        else:
            active = False
            if mode == "open":
                continue
            if mode != "short" and ((k == "switch" and p.state == "open") or (k == "capacitor" and not ac)):
                continue
        A.append(nodes[0])
        B.append(nodes[1])
        S.append(active)
        R.append(p.ref)
    return (np.array([index[n] for n in A], dtype=np.int64), np.array([index[n] for n in B], dtype=np.int64),
            np.array(S, dtype=bool), R)


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
        ia, ib, src_edge, refs = _edges(circuit, analysis, {}, self.index)
        self._all = (ia, ib, src_edge, refs)      # every healthy edge, ground ones included
        src = np.zeros(self.N, dtype=bool)
        src[ia[src_edge]] = True
        src[ib[src_edge]] = True
        src[self.g] = False
        keep = (ia != self.g) & (ib != self.g) & (ia != ib)
        #: ref -> its edge (each conducting part is one edge)
        self.by_ref = dict(zip([r for r, k in zip(refs, keep.tolist()) if k], range(int(keep.sum()))))
        self.ea = ia[keep]
        self.eb = ib[keep]
        self.src = src
        self.label, self.driven = self._pieces(np.ones(self.ea.size, dtype=bool), src)
        self._tree()

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

    def _tree(self):
        """Depth-first spanning forest, its subtree sums and the bridges (all in compiled code).

        One :func:`scipy.sparse.csgraph.depth_first_order` from a chain of
        virtual nodes, each tied to one node of a piece (so every piece is a
        subtree, and no node has many children to rescan), gives each node
        its preorder position ``tin`` and its parent.  In a depth-first tree
        every other edge joins a node to one of its ancestors, so a tree edge
        is a bridge exactly when no such edge leaves the child's subtree:
        with +1 at each non-tree edge's lower end and -1 at its upper end,
        the subtree sum at the child counts the edges that span it.  Subtree
        sums (that count, the subtree's size, its source terminals) are one
        unit upper-triangular solve in preorder: ``s[v] = x[v] + sum of
        s[child]``.
        """
        N, a, b = self.N, self.ea, self.eb
        lab = self.label
        sizes = np.bincount(lab)
        reps = np.unique(lab, return_index=True)[1]
        reps = reps[sizes[lab[reps]] > 1]          # pieces with an edge (lone nodes need no tree)
        k = reps.size
        vn = N + np.arange(k)                       # virtual chain: vn[i] -> reps[i], vn[i] -> vn[i + 1]
        rows = np.concatenate([a, b, vn, reps, vn[:-1], vn[1:]])
        cols = np.concatenate([b, a, reps, vn, vn[1:], vn[:-1]])
        M = N + k
        tin = np.full(N, -1, dtype=np.int64)
        pred = np.full(N, -1, dtype=np.int64)
        size = np.ones(N, dtype=np.int64)
        nsrc = self.src.astype(np.int64)
        cover = np.zeros(N, dtype=np.int64)
        self.bridge_child = np.full(a.size, -1, dtype=np.int64)   # edge -> child node when a bridge
        if k:
            G = csr_matrix((np.ones(rows.size), (rows, cols)), shape=(M, M))
            order, p = depth_first_order(G, int(vn[0]), directed=True, return_predecessors=True)
            pos = np.full(M, -1, dtype=np.int64)
            pos[order] = np.arange(order.size)
            has = p >= 0
            kids = np.flatnonzero(has)
            # tree edges (pred, child) as an upper unit-triangular matrix in preorder
            T = csr_matrix((-np.ones(kids.size), (pos[p[kids]], pos[kids])), shape=(order.size, order.size))
            p_real = np.where(has[:N], p[:N], -1)
            is_tree = np.zeros(a.size, dtype=bool)
            fwd = p_real[b] == a
            bwd = p_real[a] == b
            cand = np.flatnonzero(fwd | bwd)
            child = np.where(fwd, b, a)
            # of parallel edges on a tree pair, one is the tree edge; the others span it
            _, first = np.unique(child[cand], return_index=True)
            is_tree[cand[first]] = True
            other = ~is_tree
            ta, tb = pos[a[other]], pos[b[other]]
            lower = np.where(ta > tb, a[other], b[other])
            upper = np.where(ta > tb, b[other], a[other])
            x = np.zeros((order.size, 3))
            x[pos[:N][pos[:N] >= 0], 0] = 1.0
            x[pos[:N][pos[:N] >= 0], 1] = self.src[pos[:N] >= 0]
            np.add.at(x[:, 2], pos[lower], 1.0)
            np.add.at(x[:, 2], pos[upper], -1.0)
            s = spsolve_triangular(T.tocsr(), x, lower=False, unit_diagonal=True)
            s = np.rint(s).astype(np.int64)
            seen = pos[:N] >= 0
            tin[seen] = pos[:N][seen]
            pred[seen] = p_real[seen]
            size[seen] = s[pos[:N][seen], 0]
            nsrc[seen] = s[pos[:N][seen], 1]
            cover[seen] = s[pos[:N][seen], 2]
            tree = np.flatnonzero(is_tree)
            br = tree[cover[child[tree]] == 0]
            self.bridge_child[br] = child[br]
        # lone nodes: after every tree node, a subtree of their own
        lone = tin < 0
        tin[lone] = (tin.max() + 1 if (~lone).any() else 0) + np.arange(int(lone.sum()))
        self.tin, self.size, self.nsrc = tin, size, nsrc
        self.piece_src = np.bincount(lab, weights=self.src.astype(float), minlength=lab.max() + 1).astype(np.int64)

    # ------------------------------------------------------------------
    def cut_off(self, faults, nodes):
        """Which of ``nodes`` (names) the faults cut off from every source driving them.

        Parameters
        ----------
        faults : dict
            Ref -> mode (``"open"``, ``"short"``, ``"dead"``, ``"drift"``).
        nodes : sequence of str, or ndarray of int
            Node names, or their indices in ``circuit.nodes``.

        Returns
        -------
        ndarray of bool
        """
        if isinstance(nodes, np.ndarray) and nodes.dtype.kind == "i":
            idx = nodes
        else:
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
                e = self.by_ref.get(ref)
                if e is not None:
                    keep[e] = False       # a dead current source is an open
        dead = {r for r, m in cut if m == "dead"}
        if dead:
            # a dead source is no source (a dead voltage source stays a wire, a dead
            # current source is an open, above): the healthy edges without their flags
            ia, ib, se, refs = self._all
            if "_pos" not in self.__dict__:
                self._pos = {r: k for k, r in enumerate(refs)}
            se = se.copy()
            for r in dead:
                k = self._pos.get(r)
                if k is not None and self.circuit.part(r).is_source:
                    se[k] = False
            src[:] = False
            src[ia[se]] = True
            src[ib[se]] = True
            src[self.g] = False
        _, driven = self._pieces(keep, src)
        return self.driven[idx] & ~driven[idx]

    def _single_cut(self, ref, idx):
        out = np.zeros(idx.size, dtype=bool)
        e = self.by_ref.get(ref)
        if e is None or self.bridge_child[e] < 0:
            return out                  # not a bridge: opening it cuts nothing off
        v = int(self.bridge_child[e])
        below = int(self.nsrc[v])
        above = int(self.piece_src[self.label[v]]) - below
        side_below = (self.tin[v] <= self.tin[idx]) & (self.tin[idx] < self.tin[v] + self.size[v])
        left = np.where(side_below, below, above)
        same = (self.label[idx] == self.label[v]) & (idx != self.g)
        return same & (left == 0) & self.driven[idx]


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
    if len(faults) == 1:        # the common case, without building a dict
        f = faults[0]
        if f.mode != "open" and f.mode != "dead":
            return None
        key = ((f.ref, f.mode),)
    else:
        key = tuple(sorted({f.ref: f.mode for f in faults if f.mode in ("open", "dead")}.items()))
        if not key:
            return None
    cache = board.__dict__.get("_weak")
    if cache is None:
        cache = board._weak = {}
    elif key in cache:
        return cache[key]
    if len(cache) > 4096:
        cache.clear()
    reach = board.__dict__.setdefault("_reach", {})
    probes = board.__dict__.get("_weak_probes")
    if probes is None:
        probes = board._weak_probes = {}
        for an in ("dc", "ac"):
            rows = [i for i, rd in enumerate(board.readings) if rd.quantity == "voltage"
                    and (rd.mode == "ac") == (an == "ac")]
            if rows:
                probes[an] = (np.array(rows), [board.readings[i].plus for i in rows]
                              + [board.readings[i].minus or board.circuit.ground for i in rows])
    out = None
    modes = dict(key)
    for an, (rows, names) in probes.items():
        if an not in reach:
            reach[an] = Reach(board.circuit, an)
        r = reach[an]
        if "idx" not in r.__dict__:
            r.idx = np.array([r.index[n] for n in names], dtype=np.int64)
        cut = r.cut_off(modes, r.idx)
        m = rows.size
        hit = cut[:m] | cut[m:]
        if hit.any():
            if out is None:
                out = np.zeros(board.n, dtype=bool)
            out[rows] = hit
    cache[key] = out
    return out
