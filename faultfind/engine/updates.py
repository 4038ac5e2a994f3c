"""Readings of a faulted circuit from the healthy circuit's factorization.

A fault changes one part, which changes the network matrix by a rank-one term
(an admittance between two nodes) or changes only the right-hand side (a
source's value).  The meter adds one more rank-one term per reading (its input
conductance across the probes, or its shunt in series with the part).  With
``A' = A + U D U^T`` the Woodbury identity gives every reading of the faulted
circuit from quantities of the healthy one::

    c^T A'^{-1} b' = c^T A^{-1} b' - (c^T A^{-1} U) M (U^T A^{-1} b'),
    M = (D^{-1} + U^T A^{-1} U)^{-1}

so the engine needs, once: the solution ``x``, one forward and one adjoint
solve per reading (``W``, ``Mu``), and one forward solve per fault term
(``A^{-1} u_t``; its self term ``u_t^T A^{-1} u_t`` is the resistance distance
between the part's nodes).  Opens and shorts are exact limits: an open sets
``d = -y``; a short sets ``d = inf``, i.e. ``1/d = 0`` in ``M`` -- never a
large conductance.  Where ``D^{-1} + U^T A^{-1} U`` is singular (a part whose
removal leaves a section floating, with no probe across it) the reading is the
one without that term, since such a part carries no current; where a fault
changes which parts of the power-off network are connected, the evaluation
falls back to re-assembling that network (the same code as the test oracle).

The current through a term's added admittance is the term's entry of
``M (U^T A^{-1} b')``; the current reading through a part with admittance
``y0`` is ``y0 v' + q``, which stays exact when the part is shorted.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from .factor import Factorization
from .mna import ADMITTANCE, BRANCH, INJECTION, assemble

__all__ = ["Group", "Term", "admittance_of"]

_SING = 1e-9
#: Fault terms solved together for their self terms (memory: unknowns x this).
_TERM_BLOCK = 128


def admittance_of(part, value, analysis, omega):
    """Admittance of a two-terminal passive part at ``value`` in an analysis (0: absent)."""
    k = part.kind
    if k in ("resistor", "fuse", "switch"):
        return 1.0 / value
    if k == "capacitor":
        return 1j * omega * value if analysis == "ac" else 0.0
    if k == "inductor":
        rw = part.resistance or 0.0
        if analysis == "ac":
            return 1.0 / (rw + 1j * omega * value)
        return 1.0 / rw if rw > 0 else np.inf
    raise ValueError(f"part {part.ref}: {k} has no admittance")


class Term:
    """A fault on one part, as a change of one analysis' network.

    Attributes
    ----------
    kind : str
        ``"y"`` (admittance between nodes ``a``, ``b``; nominal ``y0``),
        ``"b"`` (right-hand side change: ``rows``, ``per_unit`` per unit of
        source value, nominal ``e0``), ``"none"`` (no effect in this analysis)
        or ``"fallback"`` (exact evaluation needs a re-assembly).
    """

    __slots__ = ("kind", "ref", "a", "b", "y0", "rows", "per_unit", "e0", "col")

    def __init__(self, kind, ref, a=-1, b=-1, y0=0.0, rows=None, per_unit=None, e0=0.0):
        self.kind, self.ref, self.a, self.b, self.y0 = kind, ref, a, b, y0
        self.rows, self.per_unit, self.e0 = rows, per_unit, e0
        self.col = -1


def _at(vec, a, b):
    """``vec[a] - vec[b]`` with index -1 meaning the reference (zero); vec may be 2-D (rows)."""
    va = vec[a] if a >= 0 else 0.0
    vb = vec[b] if b >= 0 else 0.0
    return va - vb


def _side_by_side(vectors, N, dtype, block=16):
    """The length-``N`` ``vectors`` (None: zeros) as the columns of an ``(N, r)`` array.

    Filled a few columns at a time from their transpose: writing one column of a
    row-major array at a time touches every row's cache line once per column.
    """
    out = np.empty((N, len(vectors)), dtype=dtype)
    zero = np.zeros(N, dtype=dtype)
    for a in range(0, len(vectors), block):
        chunk = [zero if v is None else v for v in vectors[a:a + block]]
        out[:, a:a + len(chunk)] = np.array(chunk).T
    return out


class Group:
    """Healthy-circuit quantities of one analysis, for the readings taken on it.

    Parameters
    ----------
    circuit : Circuit
    key : tuple
        ``("dc", None)``, ``("ac", f)`` or ``("off", None)``.
    readings : list of Reading
        The readings of this analysis.
    meters : dict
        Meter profiles (with "default").
    """

    def __init__(self, circuit, key, readings, meters, shared=None, shared_cols=None):
        self.circuit = circuit
        self.key = key
        self.analysis, f = key
        self.omega = 2 * np.pi * f if self.analysis == "ac" else 0.0
        self.stamps = shared     # predict()'s stamp derivatives of this network, if shared
        if shared is not None:   # the same network, already factored by predict()
            self.net = net = shared.net
            self.lu = shared.lu
        else:
            self.net = net = assemble(circuit, self.analysis, f)
            self.lu = Factorization(net.A)
        N = net.size
        dt = net.A.dtype
        if shared is not None and shared.x is not None:
            self.x = shared.x
        else:
            self.x = self.lu.solve(net.b) if self.analysis != "off" else np.zeros(N, dt)
        r = len(readings)
        self.readings = readings
        U = np.zeros((N, r), dtype=dt)
        ent_r, ent_c, ent_v = [], [], []        # U's entries (two at most per reading)

        def put(k, i, v):
            if k >= 0:
                ent_r.append(k)
                ent_c.append(i)
                ent_v.append(v)

        def put_nodes(plus, minus, i):
            put(net.node_index[plus], i, 1.0)
            put(net.node_index[minus], i, -1.0)
        self.d_m = np.zeros(r, dtype=complex)      # the reading's own term (meter) coefficient
        self.scale = np.zeros(r, dtype=complex)    # s in s c^T x'; y0 for admittance currents
        self.rtype = [""] * r                      # "v", "ya", "br", "ohm", "src", "zero", "ol"
        self.elem = [None] * r                     # measured part (current readings)
        self.rs = np.zeros(r)                      # shunt of current readings
        self.top = np.full(r, np.inf)              # a diode test's display top (OL above)
        for i, rd in enumerate(readings):
            meter = meters[rd.meter or "default"]
            if self.analysis == "off":
                plus, minus = (circuit.part(rd.part).nodes[:2] if rd.part is not None
                               else (rd.plus, rd.minus))
                if plus == minus:
                    self.rtype[i] = "zero"
                elif not net.connected(plus, minus):
                    self.rtype[i] = "ol"
                else:
                    put_nodes(plus, minus, i)
                    self.rtype[i] = "ohm"
                    # a diode test on this (linear) network shows I_t R (engine/linpredict.py)
                    self.scale[i] = meter.diode_test_current if rd.quantity == "diode-test" else 1.0
                if rd.quantity == "diode-test":
                    self.top[i] = min(meter.diode_test_max, meter.diode_test_voltage)
                continue
            if rd.quantity == "voltage":
                put_nodes(rd.plus, rd.minus, i)
                self.d_m[i] = 1.0 / meter.input_resistance
                self.scale[i] = 1.0
                self.rtype[i] = "v"
                continue
            self.rs[i] = meter.current_shunt
            self.elem[i] = rd.part
            p = circuit.part(rd.part)
            el = net.element.get(rd.part)
            if el is not None and el[0] == INJECTION:
                self.rtype[i] = "src"
                self.scale[i] = net.inj_i[el[1]]
                continue
            if el is not None and el[0] == BRANCH:
                put(net.n + el[1], i, 1.0)
                self.d_m[i] = -meter.current_shunt
                self.scale[i] = -1.0 if p.kind == "voltage-source" else 1.0
                self.rtype[i] = "br"
                continue
            if p.is_source:  # a source absent from this analysis (e.g. an AC current source at DC)
                self.rtype[i] = "zero"
                continue
            # admittance element, or absent (capacitor at DC, open switch): y0 may be 0
            put_nodes(p.nodes[0], p.nodes[1], i)
            y0 = net.y_val[el[1]] if el is not None else 0.0
            y2 = y0 / (1.0 + y0 * meter.current_shunt) if y0 != 0 else 0.0
            self.d_m[i] = y2 - y0
            self.scale[i] = y0
            self.rtype[i] = "ya"
        er, ec = np.array(ent_r, dtype=np.int64), np.array(ent_c, dtype=np.int64)
        ev_ = np.array(ent_v, dtype=float)
        np.add.at(U, (er, ec), ev_)
        self.U = U
        used = np.zeros(r, dtype=bool)            # columns of U with a nonzero entry
        used[ec[U[er, ec] != 0]] = True
        have = [c for c in (shared_cols or [])]
        if r and len(have) == r and all(c is not None or not used[i] for i, c in enumerate(have)):
            self.W = _side_by_side([None if c is None else c[0] for c in have], N, dt)
            self.Mu = _side_by_side([None if c is None else c[1] for c in have], N, dt)
        else:
            self.W, self.Mu = self.lu.solve_both(U) if r else (U, U)
        # u_i^T W_i and u_i^T x from U's few entries (U itself is mostly zeros)
        self.z = np.zeros(r, dtype=np.result_type(dt, self.W.dtype))
        np.add.at(self.z, ec, ev_ * self.W[er, ec])
        # projections of the right-hand side: x for live readings, the test current for ohms
        if self.analysis != "off":
            self.px = np.zeros(r, dtype=np.result_type(dt, self.x.dtype))
            np.add.at(self.px, ec, ev_ * self.x[er])
        else:
            self.px = self.z.copy()
        self._wt = {}
        self._has_opamp = any(p.kind == "opamp" for p in circuit.parts)
        yabs = np.abs(net.y_val[net.y_val != 0])
        self.zscale = 1.0 / np.median(yabs) if yabs.size else 1.0

    def bridge_senses_control(self, t) -> bool:
        """True when opening ``t`` leaves floating a section holding an op-amp input.

        Such an input's voltage is undefined, and so is the op-amp's output.
        Only asked for parts whose removal splits the network (bridges).
        """
        cache = self.__dict__.setdefault("_senses", {})
        if t.ref in cache:
            return cache[t.ref]
        ctl = [self.net.node_index[n] for p in self.circuit.parts if p.kind == "opamp"
               for n in p.nodes[:2]]
        ctl = [c for c in ctl if c >= 0]
        if not ctl or self.analysis == "off":
            cache[t.ref] = False
            return False
        net = self.net
        n = net.n
        el = net.element.get(t.ref)
        keep = np.ones(len(net.y_a), dtype=bool)
        if el is not None and el[0] == ADMITTANCE:
            keep[el[1]] = False
        ea = np.concatenate([net.y_a[keep], net.br_a])
        eb = np.concatenate([net.y_b[keep], net.br_b])
        ea = np.where(ea < 0, n, ea)
        eb = np.where(eb < 0, n, eb)
        g = sp.coo_matrix((np.ones(ea.size), (ea, eb)), shape=(n + 1, n + 1))
        _, comp = connected_components(g, directed=False)
        cache[t.ref] = bool(np.any(comp[np.array(ctl)] != comp[n]))
        return cache[t.ref]

    # ----------------------------------------------------------------- terms
    def term(self, part, mode, value=None):
        """The :class:`Term` of a fault (``mode`` open/short/drift/dead) on ``part``."""
        net, an = self.net, self.analysis
        if part.kind == "opamp":
            return Term("none", part.ref)
        if part.is_source:
            if an == "off" or mode not in ("drift", "dead"):
                return Term("none", part.ref)
            el = net.element.get(part.ref)
            active = (part.waveform == "ac") == (an == "ac")
            if el is None or not active:
                return Term("none", part.ref)
            kind, k = el
            if kind == BRANCH:
                rows = np.array([net.n + k]); per = np.array([1.0])
                e0 = net.br_e[k]
            else:
                rows = np.array([net.inj_a[k], net.inj_b[k]]); per = np.array([1.0, -1.0])
                keep = rows >= 0
                rows, per = rows[keep], per[keep]
                e0 = net.inj_i[k]
            return Term("b", part.ref, rows=rows, per_unit=per, e0=e0)
        el = net.element.get(part.ref)
        if el is not None and el[0] == BRANCH:
            # an ideal winding (zero-volt branch): only an open changes it
            return Term("fallback" if mode == "open" else "none", part.ref)
        if an != "ac" and part.kind == "capacitor" and mode != "short":
            return Term("none", part.ref)
        if an != "ac" and part.kind == "inductor" and mode == "drift":
            return Term("none", part.ref)
        a, b = net.node_index[part.nodes[0]], net.node_index[part.nodes[1]]
        y0 = net.y_val[el[1]] if el is not None else 0.0
        if el is None and an == "off" and not net.connected(*part.nodes):
            return Term("fallback", part.ref)  # a short joining separate pieces
        if a < 0 and b < 0:
            return Term("none", part.ref)  # both ends on reference nodes
        t = Term("y", part.ref, a, b, y0)
        if mode == "open" and an != "off" and y0 != 0 and self._has_opamp:
            # an open that leaves an op-amp input floating: the floating input sits
            # at 0 V (the oracle's convention), which the rank-one update cannot
            # express; such parts are few (bridges), so re-solve them
            ktt = self_terms(self, [t])[0]
            if abs(1.0 - y0 * ktt) <= 1e-9 and self.bridge_senses_control(t):
                return Term("fallback", part.ref)
        return t

    def new_admittance(self, part, mode, value=None):
        """Admittance of ``part`` in this analysis under a fault (inf for a short)."""
        if mode == "open":
            return 0.0
        if mode == "short":
            return np.inf
        v = part.value if value is None else value
        if part.kind == "switch" and part.state == "open" and mode != "drift":
            return 0.0
        return admittance_of(part, v, self.analysis, self.omega)

    def solve_term(self, t):
        """``A^{-1} u_t`` and ``A^{-T} u_t`` for an admittance term (cached)."""
        if t.ref not in self._wt:
            u = np.zeros(self.net.size, dtype=self.net.A.dtype)
            if t.a >= 0:
                u[t.a] += 1
            if t.b >= 0:
                u[t.b] -= 1
            self._wt[t.ref] = self.lu.solve_both(u)
        return self._wt[t.ref]

    # ------------------------------------------------------------ evaluation
    def nominal(self):
        """The readings of the healthy circuit (complex; ``inf`` for OL), computed once."""
        if getattr(self, "_nominal", None) is None:
            self._nominal = self.evaluate([], [])
        return self._nominal

    def evaluate(self, terms, news):
        """Readings of this group under faults ``terms`` with new admittances / values ``news``.

        Parameters
        ----------
        terms : list of Term
            Kinds "y" and "b" only (one per faulted part).
        news : list
            For a "y" term the new admittance (``inf`` short, 0 open); for a
            "b" term the new source value.

        Returns
        -------
        ndarray of complex, shape (n_readings,)
            ``nan`` where the faulted readings are undefined.
        """
        r = len(self.readings)
        out = np.empty(r, dtype=complex)
        ys = [(t, v) for t, v in zip(terms, news) if t.kind == "y"]
        bs = [(t, v) for t, v in zip(terms, news) if t.kind == "b"]
        # right-hand side change, projected
        db_rows, db_vals = [], []
        for t, v in bs:
            db_rows.append(t.rows); db_vals.append(t.per_unit * (v - t.e0))
        rows = np.concatenate(db_rows) if db_rows else np.zeros(0, int)
        vals = np.concatenate(db_vals) if db_vals else np.zeros(0)
        wt = [self.solve_term(t) for t, _ in ys]
        for i in range(r):
            out[i] = self._one(i, ys, bs, wt, rows, vals)
        return self.clip(out)

    def clip(self, out):
        """Diode tests above the display's top read OL (``inf``); ``out`` (..., n_readings)."""
        if np.isfinite(self.top).any():
            with np.errstate(invalid="ignore"):
                over = np.real(out) > self.top
            out = np.where(over, np.inf, out)
        return out

    def _one(self, i, ys, bs, wt, rows, vals):
        kind = self.rtype[i]
        if kind == "ol":
            return np.inf
        if kind == "zero":
            return 0.0
        if kind == "src":  # an ideal current source's current is its value
            for t, v in bs:
                if t.ref == self.elem[i]:
                    return v
            return self.scale[i]
        Wi, Mi = self.W[:, i], self.Mu[:, i]
        base_x = self.x if self.analysis != "off" else Wi
        db_x = Mi[rows] @ vals if len(rows) else 0.0
        own_d = self.d_m[i]
        ts, dv, cols = [], [], []
        for (t, ynew), wcols in zip(ys, wt):
            if kind == "ya" and self.elem[i] == t.ref:
                # the measured part itself is faulted: one term with the shunt in series
                rs = self.rs[i]
                y2 = (np.inf if rs == 0 else 1.0 / rs) if np.isinf(ynew) else ynew / (1.0 + ynew * rs)
                if y2 == 0:
                    return 0.0  # the measured part is open: no current through it
                own_d = y2 - t.y0
                continue
            if ynew - t.y0 != 0:
                ts.append(t); dv.append(ynew - t.y0); cols.append(wcols)
        has_own = own_d != 0
        k = len(ts)
        m = k + int(has_own)
        p0 = self.px[i] + db_x
        if m == 0:
            v, q = p0, 0.0
        else:
            K = np.zeros((m, m), dtype=complex)
            cx = np.zeros(m, dtype=complex)   # c^T A^{-1} u_t
            kx = np.zeros(m, dtype=complex)   # u_t^T A^{-1} b'
            invd = np.zeros(m, dtype=complex)
            for p, t in enumerate(ts):
                for q_, t2 in enumerate(ts):
                    K[p, q_] = _at(cols[q_][0], t.a, t.b)
                cx[p] = _at(Mi, t.a, t.b)
                kx[p] = _at(base_x, t.a, t.b) + (cols[p][1][rows] @ vals if len(rows) else 0.0)
                invd[p] = 0.0 if np.isinf(dv[p]) else 1.0 / dv[p]
                if has_own:
                    K[p, k] = _at(Wi, t.a, t.b)
                    K[k, p] = cx[p]
            if has_own:
                K[k, k] = self.z[i]
                cx[k] = self.z[i]
                kx[k] = p0
                invd[k] = 0.0 if np.isinf(own_d) else 1.0 / own_d
            E = np.diag(invd) + K
            # a part whose removal leaves a section floating (a bridge): the pivot
            # 1/d + z cancels exactly.  It carries no current; it matters only to a
            # reading whose probes straddle it (then the meter closes the path).
            keep = np.ones(m, dtype=bool)
            for p, t in enumerate(ts):
                coupled = has_own and abs(K[p, k] * K[k, p]) > _SING * abs(E[k, k]) * self.zscale
                if invd[p] == 0 and abs(K[p, p]) <= _SING * self.zscale and not coupled:
                    # a short across nodes already joined by zero impedance (a source, a wire)
                    if abs(kx[p]) > _SING * (1.0 + abs(p0)):
                        return np.nan  # it would short a source: the ideal model has no answer
                    keep[p] = False
                    continue
                if invd[p] != 0 and abs(E[p, p]) <= _SING * (abs(invd[p]) + abs(K[p, p])):
                    straddle = has_own and abs(t.y0 * K[p, k]) > 0.5
                    if not straddle:
                        if self.analysis == "off" and abs(t.y0 * cx[p]) > 0.5:
                            return np.inf  # the test current's only path is cut: OL
                        if abs(t.y0 * kx[p]) > _SING * (1 + abs(t.y0 * kx[p])) and self.analysis != "off":
                            return np.nan  # it carried current into a now-floating section
                        keep[p] = False
            if not keep.all():
                E, cx, kx = E[np.ix_(keep, keep)], cx[keep], kx[keep]
            try:
                sol = np.linalg.solve(E, kx)
            except np.linalg.LinAlgError:
                return np.nan
            v = p0 - cx @ sol
            q = sol[-1] if has_own else 0.0
        if kind == "ya":
            return self.scale[i] * v + q
        return self.scale[i] * v



def single(group: Group, t: Term, news) -> np.ndarray:
    """Readings of ``group`` under one fault term, vectorized over candidate values.

    Parameters
    ----------
    group : Group
    t : Term
        Kind "y", "b" or "none".
    news : array_like, shape (k,)
        New admittances ("y"; ``inf`` short, 0 open) or source values ("b").

    Returns
    -------
    ndarray of complex, shape (k, n_readings)
        Same values as :meth:`Group.evaluate` with one term.
    """
    g = group
    news = np.atleast_1d(np.asarray(news, dtype=complex))
    nk, r = news.size, len(g.readings)
    base = g.nominal()
    if t.kind == "none" or r == 0:
        return np.broadcast_to(base, (nk, r)).copy()
    rt = np.array(g.rtype)
    if t.kind == "b":
        delta = (news - t.e0)[:, None]                      # (k, 1)
        dbx = (g.Mu[t.rows, :].T @ t.per_unit)[None, :]    # u_i^T A^{-1} db per unit: (1, r)
        p0 = g.px[None, :] + delta * dbx
        d_m = g.d_m[None, :]
        has = d_m != 0
        v = np.where(has, p0 / np.where(has, 1.0 + d_m * g.z[None, :], 1.0), p0)
        q = np.where(has, d_m * v, 0.0)
        out = np.where(rt == "ya", g.scale * v + q, g.scale * v)
        src = rt == "src"
        if src.any():
            own = np.array([e == t.ref for e in g.elem]) & src
            out[:, own] = news[:, None]
            out[:, src & ~own] = g.scale[src & ~own]
        out[:, rt == "ol"] = np.inf
        out[:, rt == "zero"] = 0.0
        return g.clip(out)
    return batch(g, [t], news[None, :])[0]


def _rows(M, a):
    """``M[a]`` for an index array with -1 meaning the reference (zero rows)."""
    a = np.asarray(a)
    out = M[np.maximum(a, 0)]
    return np.where((a >= 0).reshape((-1,) + (1,) * (out.ndim - 1)), out, 0.0)


def self_terms(g: Group, terms) -> np.ndarray:
    """``u_t^T A^{-1} u_t`` of each admittance term (resistance distance), cached per ref."""
    cache = g.__dict__.setdefault("_ktt", {})
    todo = [t for t in terms if t.ref not in cache]
    N = g.net.size
    for c0 in range(0, len(todo), _TERM_BLOCK):     # blocks: memory N x block, not N x terms
        part = todo[c0:c0 + _TERM_BLOCK]
        U = np.zeros((N, len(part)), dtype=g.net.A.dtype)
        for j, t in enumerate(part):
            if t.a >= 0:
                U[t.a, j] += 1
            if t.b >= 0:
                U[t.b, j] -= 1
        W = g.lu.solve(U)
        for j, t in enumerate(part):
            cache[t.ref] = (W[t.a, j] if t.a >= 0 else 0.0) - (W[t.b, j] if t.b >= 0 else 0.0)
    return np.array([cache[t.ref] for t in terms], dtype=complex)


def batch(g: Group, terms, news) -> np.ndarray:
    """Readings under each of several single admittance faults, for several values each.

    Parameters
    ----------
    g : Group
    terms : list of Term
        Kind "y" only, T of them.
    news : array_like, shape (T, K)
        New admittance of each term's part for each candidate (``inf`` short).

    Returns
    -------
    ndarray of complex, shape (T, K, n_readings)
    """
    news = np.asarray(news, dtype=complex)
    T, K = news.shape
    r = len(g.readings)
    rt = np.array(g.rtype)
    live = g.analysis != "off"
    a = np.array([t.a for t in terms], dtype=np.int64)
    b = np.array([t.b for t in terms], dtype=np.int64)
    y0 = np.array([t.y0 for t in terms], dtype=complex)[:, None, None]        # (T,1,1)
    ktt = self_terms(g, terms)[:, None, None]                                 # (T,1,1)
    # a real network with real admittances: the same arithmetic in float (half the work)
    real = (not np.iscomplexobj(g.W) and not np.any(news.imag) and not np.any(y0.imag)
            and not np.any(g.d_m.imag) and not np.any(g.scale.imag))
    if real:
        news, y0, ktt = news.real, y0.real, ktt.real
        d_m_all, scale_all, z_all, px_all = g.d_m.real, g.scale.real, g.z.real, g.px.real
        nominal = g.nominal().real
    else:
        d_m_all, scale_all, z_all, px_all = g.d_m, g.scale, g.z, g.px
        nominal = g.nominal()
    kti = (_rows(g.W, a) - _rows(g.W, b))[:, None, :]                         # (T,1,r)
    kit = (_rows(g.Mu, a) - _rows(g.Mu, b))[:, None, :]                       # (T,1,r)
    if live:
        kx0 = (_rows(g.x[:, None], a) - _rows(g.x[:, None], b))[:, :, None]  # (T,1,1)
        kx0 = np.broadcast_to(kx0, (T, 1, r))
    else:
        kx0 = kti
    nw = news[:, :, None]                                                      # (T,K,1)
    d = nw - y0
    inf = np.isinf(nw)
    with np.errstate(divide="ignore", invalid="ignore"):
        invd = np.where(inf, 0.0, 1.0 / np.where(d == 0, 1.0, d))
    e00 = invd + ktt                                                           # (T,K,1)
    d_m = d_m_all[None, None, :]
    has = d_m != 0
    with np.errstate(divide="ignore", invalid="ignore"):
        invm = np.where(has, 1.0 / np.where(has, d_m, 1.0), 0.0)
    z = z_all[None, None, :]
    e11 = invm + z
    p0 = px_all[None, None, :]
    det = e00 * e11 - kti * kit
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        s0 = (e11 * kx0 - kti * p0) / det
        s1 = (-kit * kx0 + e00 * p0) / det
        v2 = p0 - kit * s0 - z * s1
        v1 = p0 - kit * (kx0 / e00)
        s1c = p0 / e11
        v0 = p0 - z * s1c
    v = np.where(has, v2, v1)
    q = np.where(has, s1, 0.0)
    zero_short = inf & (np.abs(ktt) <= _SING * g.zscale)
    bridge = (~inf) & (np.abs(e00) <= _SING * (np.abs(invd) + np.abs(ktt)))
    shape = (T, K, r)
    drop = np.zeros(shape, dtype=bool)
    nan = np.zeros(shape, dtype=bool)
    olm = np.zeros(shape, dtype=bool)
    if zero_short.any():
        # the reading's own term (a meter shunt in series) can make it determinate
        coupled = has & (np.abs(kti * kit) > _SING * np.abs(e11) * g.zscale)
        zs = zero_short & ~coupled
        bad = np.abs(kx0) > _SING * (1.0 + np.abs(p0))
        nan |= zs & bad
        drop |= zs & ~bad
    if bridge.any():
        straddle = has & (np.abs(y0 * kti) > 0.5)
        cut = (not live) & (np.abs(y0 * kit) > 0.5)
        carries = live & (np.abs(y0 * kx0) > _SING * (1 + np.abs(y0 * kx0)))
        bb = bridge & ~straddle
        olm |= bb & cut
        nan |= bb & ~cut & carries
        drop |= bb & ~cut & ~carries
    v = np.where(drop, np.where(has, v0, p0), v)
    q = np.where(drop, np.where(has, s1c, 0.0), q)
    ya = (rt == "ya")[None, None, :]
    with np.errstate(invalid="ignore", over="ignore"):   # inf * 0 in a column the masks below replace
        out = np.where(ya, scale_all * v + q, scale_all * v)
    # the measured part itself faulted: one merged term with the shunt in series
    elem = np.array([e if e is not None else "" for e in g.elem], dtype=object)
    refs = np.array([t.ref for t in terms], dtype=object)
    own = ((elem[None, :] == refs[:, None]) & (rt == "ya")[None, :])[:, None, :]
    if own.any():
        rs = g.rs[None, None, :]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            y2 = np.where(inf, np.where(rs == 0, np.inf, 1.0 / np.where(rs == 0, 1.0, rs)),
                          nw / (1.0 + nw * rs))
            od = y2 - y0
            inv_od = np.where(np.isinf(od), 0.0, 1.0 / np.where(od == 0, 1.0, od))
            sol = np.where(od == 0, 0.0, p0 / (inv_od + z))
            val = y0 * (p0 - z * sol) + sol
        val = np.where(y2 == 0, 0.0, val)
        out = np.where(own, val, out)
        nan &= ~own
        olm &= ~own
    out = np.where(nan, np.nan, out)
    out = np.where(olm, np.inf, out)
    same = (d == 0) & ~inf                     # no change at all: the healthy readings
    if same.any():
        out = np.where(same, nominal[None, None, :], out)
    src = rt == "src"
    out[:, :, src] = scale_all[src]
    out[:, :, rt == "zero"] = 0.0
    out[:, :, rt == "ol"] = np.inf
    return g.clip(out)

