"""The DC operating point of a circuit with semiconductors (Newton's method on sparse MNA).

A :class:`System` is the circuit's linear network from :func:`.mna.assemble`
(assembled once; semiconductors leave no stamps there) extended by the
devices of :mod:`.junctions`: internal nodes (the junction side of a series
resistance, a lead a fault left floating, a current probe), their linear
conductances, and the exponential elements.  The unknowns are the MNA
unknowns followed by the internal ones.

Newton's method in companion form: at the element voltages ``v`` of the
last iterate, every element is its tangent, a conductance ``g(v)`` in
parallel with a current ``i(v) - g(v) v``; the linear system

    (A + sum_k g_k M_k) x = b - sum_k (i_k - g_k v_k) w_k

is solved (one sparse LU, on a sparsity pattern built once), the new element
voltages are read from ``x`` and limited (SPICE's ``pnjlim``, see
:func:`.junctions.limit`).  The iteration has converged when no voltage was
limited and every element voltage moved less than :data:`VTOL` (or its
current at the new voltage is its tangent's to 1e-9: a junction deep in
reverse behind picosiemens, whose voltage is round-off, settles by its
current); the last ``x`` then satisfies the nonlinear equations (its
linearization point and its solution agree).  Past :data:`DAMP_AFTER` iterations the element voltage
updates are halved (damping).  When plain Newton fails: gmin stepping (a
conductance from every node to the reference, 10 mS down to 1 pS, each step
starting from the last), then source stepping (every source ramped from 0 to
its value, the step halved when a step fails); when that fails too,
:class:`~faultfind.errors.ConvergenceError` names the parts whose junctions
had not settled.

The Jacobian at the operating point is the matrix of the linearized network
the predictions and sensitivities use (engine/semis.py).  A warm start
(``warm=`` an earlier :class:`OperatingPoint` or its :meth:`~OperatingPoint.voltages`)
starts Newton from the element voltages of a nearby solution (matched by
part and element name), so a faulted variant close to the healthy board
settles in a few iterations.  The base-emitter junction of a transistor whose
emitter lead is open starts at 0 V instead (``System.zero_start``): its far
side floats and settles there, and from 0.7 V Newton walks down one ``n Vt``
per iteration.

Linear circuits never come here (``Circuit.is_nonlinear`` is false).
"""

from __future__ import annotations

import copy
import re
from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from ..errors import ConvergenceError
from ..model import SEMICONDUCTORS
from .factor import Factorization
from .junctions import ARG_MAX, Element, critical_voltage, device, law, limit
from .mna import Network, assemble
from .stamps import Stamps

__all__ = ["System", "OperatingPoint", "Solution", "operating_point", "ConvergenceError",
           "VTOL", "MAXITER", "linear_network", "shared_stamps", "junction_grad"]

#: Newton has converged when every element voltage moved less than this (volts).
VTOL = 1e-9
#: ... or when every element's current at its new voltage is its tangent's
#: current to this (relative) plus :data:`ITOL_ABS` (amperes).
ITOL_REL = 1e-9
ITOL_ABS = 1e-15
#: Newton iterations per attempt.
MAXITER = 150
#: After this many iterations the element voltage updates are halved.
DAMP_AFTER = 60
#: gmin stepping: conductances from every node to the reference, siemens.
GMIN_STEPS = tuple(10.0 ** -k for k in range(2, 13))
#: A probe shunt below this (ohms) is a zero-volt branch: a conductance of a
#: million siemens beside milli-siemens would swamp the solution in round-off.
MIN_SHUNT = 1e-6
#: Source stepping: the smallest fraction of a step before giving up.
MIN_SOURCE_STEP = 1e-3

_KEY_TWO = ("diode", "led", "zener")


@dataclass
class OperatingPoint:
    """A solution of a :class:`System`.

    Attributes
    ----------
    x : ndarray
        Every unknown (MNA unknowns, then the system's internal ones).
    v : ndarray
        Control voltage of every element (order of ``System.keys``).
    keys : tuple of (str, str)
        (part ref, element name) of every element.
    iterations : int
        Newton iterations spent (all attempts).
    method : str
        "newton", "gmin stepping" or "source stepping" (what settled it).
    """

    x: np.ndarray
    v: np.ndarray
    keys: tuple
    iterations: int
    method: str

    def voltages(self) -> dict:
        """Element voltages by (part ref, element name): a warm start for a nearby circuit."""
        return dict(zip(self.keys, self.v.tolist()))


class Solution(dict):
    """Element voltages by (part ref, element name) of an earlier solution of the very
    board being solved (the same faulted variant): Newton starts there as they are (no
    junction is put back at 0 V, :attr:`System.zero_start`) and settles in one iteration."""


#: Devices built from (part, override) pairs, by the part's identity: every re-solve of a
#: faulted variant builds the same devices again (the parts are immutable).
_DEVICES: dict = {}


def _device(part, override):
    """:func:`~.junctions.device`, cached (the part kept, so its id is not reused)."""
    key = (id(part), override)
    hit = _DEVICES.get(key)
    if hit is not None and hit[0] is part:
        return hit[1]
    dev = device(part, override)
    if len(_DEVICES) >= 4096:
        _DEVICES.clear()
    _DEVICES[key] = (part, dev)
    return dev


#: Linear networks (:func:`.mna.assemble`) of recent circuits, by what they depend on
#: (:func:`_linear_key`): the faulted variants of one board mostly share one (a
#: junction's fault or a model key leaves the linear network as it was).
_LINEAR: dict = {}
#: At most this many networks, holding at most :data:`_LINEAR_ENTRIES` matrix entries
#: in all (a board with semiconductors of thousands of parts keeps fewer).
_LINEAR_SIZE = 512
_LINEAR_ENTRIES = 2_000_000


#: Matrix entries held by each of the caches of networks, by the cache's identity.
_HELD: dict = {}


def _bounded_put(cache, key, value):
    """Put ``value`` (``(parts, (net, rows, cols, vals))``) in ``cache`` under ``key``,
    dropping the oldest entries past :data:`_LINEAR_SIZE` or :data:`_LINEAR_ENTRIES`."""
    total = _HELD.get(id(cache), 0) + value[1][3].size
    if key in cache:
        total -= cache.pop(key)[1][3].size
    while cache and (len(cache) >= _LINEAR_SIZE or total > _LINEAR_ENTRIES):
        total -= cache.pop(next(iter(cache)))[1][3].size
    cache[key] = value
    _HELD[id(cache)] = total


def _linear_key(circuit, analysis, frequency, overrides, floating):
    """What :func:`.mna.assemble` reads: every linear part as an object (with its
    override), every semiconductor by its name, kind, nodes and topology override
    (their values and models stamp nothing there)."""
    joins = analysis == "off" or floating    # a semiconductor's faults change connectivity
    over = []
    for ref, ov in overrides.items():
        if not circuit.has_part(ref):
            continue
        p = circuit.part(ref)
        if p.kind in SEMICONDUCTORS:
            if not isinstance(ov, str) or not (joins or ov == "short" and p.kind in _KEY_TWO):
                continue       # a leak, a drift or (live, not floating) an open: no stamp
        elif ov is None:
            continue
        over.append((ref, ov))
    return (analysis, frequency, bool(floating), _signature(circuit), tuple(sorted(over, key=str)))


#: Circuits' signatures (:func:`_signature`), by the circuit's identity.
_SIGNATURES: dict = {}


def _signature(circuit):
    """The ground, every linear part as an object and every semiconductor by its name,
    kind and nodes (its values and models stamp nothing in the linear network)."""
    hit = _SIGNATURES.get(id(circuit))
    if hit is not None and hit[0] is circuit:
        return hit[1]
    semi = SEMICONDUCTORS
    sig = (circuit.ground,) + tuple((p.ref, p.kind, p.nodes) if p.kind in semi else id(p)
                                    for p in circuit.parts)
    if len(_SIGNATURES) >= 256:
        _SIGNATURES.clear()
    _SIGNATURES[id(circuit)] = (circuit, sig)
    return sig


def linear_network(circuit, analysis, frequency=None, overrides=None, floating=False):
    """``(net, rows, cols, vals)``: :func:`.mna.assemble`'s network and its matrix as
    COO triplets, cached (the network is shared: treat it as read-only)."""
    overrides = overrides or {}
    key = _linear_key(circuit, analysis, frequency, overrides, floating)
    hit = _LINEAR.get(key)
    if hit is not None:
        return hit[1]
    # the same network with other values of some linear parts: its values patched
    skey = (key[0], key[1], key[2], key[4], circuit.ground,
            tuple((p.ref, p.kind, p.nodes) for p in circuit.parts))
    base = _BASES.get(skey)
    got = _revalued(base, circuit, analysis, overrides) if base is not None else None
    if got is None:
        net = assemble(circuit, analysis, frequency, overrides, floating)
        A0 = net.A.tocoo()      # a canonical CSC matrix: its COO triplets in its data's order
        got = (net, A0.row.astype(np.int64), A0.col.astype(np.int64), A0.data)
        _bounded_put(_BASES, skey, (circuit.parts, got))     # the latest of its structure
    # the parts are kept with the entry: the ids in its key stay theirs
    _bounded_put(_LINEAR, key, (circuit.parts, got))
    return got


#: A first assembled network of each structure (parts by name, kind and nodes; the
#: same topology overrides): a network whose linear parts differ only in value is that
#: one with its values patched (:func:`_revalued`).
_BASES: dict = {}


def _revalued(base, circuit, analysis, overrides):
    """``base``'s network with the values of ``circuit``'s linear parts that differ from
    its own only in ``value`` (resistors, fuses, closed switches; DC voltage sources;
    parts that stamp nothing in this analysis); None when another change is there (the
    caller assembles)."""
    parts0, (net, rows, cols, vals) = base
    changed = [(p0, p) for p0, p in zip(parts0, circuit.parts) if p0 is not p and p0 != p]
    if len(changed) > 4:
        return None
    vals = vals.copy()
    y_val, b, br_e = net.y_val, net.b, net.br_e
    for p0, p in changed:
        if p.kind in SEMICONDUCTORS or p0 != replace(p, value=p0.value):
            return None           # not a value change of a linear part
        ov = overrides.get(p.ref)
        el = net.element.get(p.ref)
        if ov is not None and not isinstance(ov, str):
            return None
        if el is None or ov in ("open", "short", "dead"):
            continue              # nothing of it in this network
        if el[0] == "y" and p.kind in ("resistor", "fuse", "switch"):
            k = el[1]
            if y_val is net.y_val:
                y_val = y_val.copy()
            dy = 1.0 / p.value - y_val[k]
            y_val[k] += dy
            a, bb = net.y_a[k], net.y_b[k]
            for r, c, sg in ((a, a, 1.0), (bb, bb, 1.0), (a, bb, -1.0), (bb, a, -1.0)):
                if r >= 0 and c >= 0:
                    vals[np.flatnonzero((rows == r) & (cols == c))] += sg * dy
        elif el[0] == "br" and p.kind == "voltage-source" and analysis == "dc" \
                and p.waveform != "ac":
            k = el[1]
            if b is net.b:
                b, br_e = b.copy(), br_e.copy()
            br_e[k] = p.value
            b[net.n + k] = p.value
        else:
            return None
    A = net.A.copy()
    A.data = vals.astype(A.dtype)
    new = replace(net, A=A, b=b, y_val=y_val, br_e=br_e)
    new.indeterminate = getattr(net, "indeterminate", set())
    return new, rows, cols, vals


class System:
    """The nonlinear network of one analysis of a circuit.

    Parameters
    ----------
    circuit : Circuit
    analysis : {"dc", "ac", "off"}
        As :func:`.mna.assemble`; for "ac" the linear part is the AC network
        and the system is used linearized (:meth:`small_signal`).
    frequency : float, optional
    overrides : dict, optional
        Linear parts as :func:`.mna.assemble`; semiconductors as in
        engine/semis.py's module docstring ("open", "short", ("leaky",
        ohms), transistors' "open", "short", "base-emitter-open",
        "base-emitter-short").  Drifted values must already be in the parts.
    floating : bool
        Give sections without a connection to ground a reference of their own.
    probe : (str, float), optional
        (part ref, shunt ohms): a current probe in the lead of that
        semiconductor (the anode of a two-terminal part, a transistor's
        collector): a conductance ``1/ohms``, or a zero-volt branch below
        :data:`MIN_SHUNT`.
        :attr:`probe_u` then reads the current through it (into the part).
    source : (str, str, float, float), optional
        (plus, minus, current, knee voltage): the meter's test source for a
        power-off reading, a current source driving ``current`` into
        ``plus`` whose voltage is clamped at the knee (an exponential clamp
        element passing ``current`` at the knee, ``n Vt`` =
        :attr:`CLAMP_NVT`).
    """

    #: Slope of the meter source's compliance clamp (volts per e-fold): 0.5 V
    #: below its knee the clamp takes exp(-20), 2e-9, of the test current.
    CLAMP_NVT = 0.025

    def __init__(self, circuit, analysis, frequency=None, overrides=None, floating=False,
                 probe=None, source=None, pindex=None, loads=()):
        overrides = overrides or {}
        self.circuit = circuit
        self.analysis = analysis
        net, a_rows, a_cols, a_vals = linear_network(circuit, analysis, frequency, overrides,
                                                      floating)
        self.net0 = net
        N0 = net.size
        idx = net.node_index
        nxt = [N0]

        def new():
            nxt[0] += 1
            return nxt[0] - 1

        lr, lc, lv = [], [], []            # extension stamps (rows, cols, values)
        conds = []                         # conductances (a, b, g), stamped together below

        def cond(a, b, g):
            conds.append((a, b, g))

        els: list = []
        #: elements Newton starts at 0 V whatever the warm start says: the base-emitter
        #: junction of a transistor whose emitter lead is open (its far side floats, held
        #: by that junction alone, so it settles at 0 V; from a healthy 0.7 V Newton walks
        #: down one n Vt per iteration, about 30 iterations)
        self.zero_start = set()
        self.devices = {}
        self.probe_u = None
        self.probe_open = False
        node_unknowns = list(range(net.n))
        for p in circuit.parts:
            if p.kind not in SEMICONDUCTORS:
                continue
            ov = overrides.get(p.ref)
            if p.kind in _KEY_TWO:
                if ov in ("open", "short"):
                    continue
                dev = _device(p, ov if isinstance(ov, tuple) else None)
            else:
                dev = _device(p, ov)
            roles = {}
            for role, node in dev.terminals.items():
                if node is None:
                    roles[role] = new(); node_unknowns.append(roles[role])
                elif role == "j":
                    roles[role] = roles["a"]
                else:
                    roles[role] = idx[node]
            if probe is not None and probe[0] == p.ref:
                role = dev.probe
                outer = roles[role]
                if dev.terminals[role] is None:
                    self.probe_open = True    # the lead is open: no current
                else:
                    inner = new(); node_unknowns.append(inner)
                    for r2 in list(roles):
                        if roles[r2] == outer and (r2 == role or (r2 == "j" and role == "a")):
                            roles[r2] = inner
                    u = {}
                    if probe[1] > MIN_SHUNT:
                        cond(outer, inner, 1.0 / probe[1])
                        u = {outer: 1.0 / probe[1], inner: -1.0 / probe[1]}
                    else:
                        k = new()
                        for r, c, s in ((outer, k, 1.0), (inner, k, -1.0), (k, outer, 1.0), (k, inner, -1.0)):
                            if r >= 0 and c >= 0:
                                lr.append(r); lc.append(c); lv.append(s)
                        u = {k: 1.0}
                    self.probe_u = u
            for cd in dev.conductances:
                cond(roles[cd.a], roles[cd.b], cd.g)
            wire = {"short": ("C", "E"), "base-emitter-short": ("B", "E")}.get(ov) \
                if p.kind not in _KEY_TWO else None
            if wire is not None and roles[wire[0]] != roles[wire[1]]:
                ra, rb = roles[wire[0]], roles[wire[1]]     # a zero-volt branch between two leads
                k = new()
                for r, c_, s_ in ((ra, k, 1.0), (rb, k, -1.0), (k, ra, 1.0), (k, rb, -1.0)):
                    if r >= 0 and c_ >= 0:
                        lr.append(r); lc.append(c_); lv.append(s_)
            for el in dev.elements:
                if ov == "base-emitter-open" and el.name == "forward":
                    self.zero_start.add(len(els))
                els.append((p.ref, el, roles))
            self.devices[p.ref] = (dev, roles)
        for na, nb, g in loads:     # a meter's input resistance across two nodes
            cond(idx[na], idx[nb], g)
        b_extra = {}
        if source is not None:
            plus, minus, cur, voc = source
            ip, im = idx[plus], idx[minus]
            clamp = Element("clamp", "+", "-", float(np.log(cur) - voc / self.CLAMP_NVT),
                            self.CLAMP_NVT, (("+", 1.0), ("-", -1.0)), 0.0, float(voc))
            self._src = (idx[plus], idx[minus], cur, voc)
            els.append(("__meter__", clamp, {"+": ip, "-": im}))
            b_extra = {ip: cur, im: -cur}
            self._src = (ip, im, cur, voc)
        N = nxt[0]
        self.size = N
        self.n_nodes = node_unknowns
        # padded linear matrix and right-hand side
        ca, cb, cg = (np.array(t) for t in zip(*conds)) if conds else \
            (np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0))
        cr = np.concatenate([ca, cb, ca, cb]).astype(np.int64)
        cc = np.concatenate([ca, cb, cb, ca]).astype(np.int64)
        cv = np.concatenate([cg, cg, -cg, -cg]).astype(float)
        on = (cr >= 0) & (cc >= 0)
        self.lin_rows = np.concatenate([a_rows, np.array(lr, dtype=np.int64), cr[on]])
        self.lin_cols = np.concatenate([a_cols, np.array(lc, dtype=np.int64), cc[on]])
        self.lin_vals = np.concatenate([a_vals, np.array(lv, dtype=float), cv[on]])
        b = np.zeros(N, dtype=net.b.dtype)
        b[:N0] = net.b
        for k, v in b_extra.items():
            if k >= 0:
                b[k] += v
        self.b = b
        # element arrays
        ne = len(els)
        self.keys = tuple((ref, el.name) for ref, el, _ in els)
        self.refs = tuple(ref for ref, _, _ in els)
        self.p = np.array([roles[el.p] for _, el, roles in els], dtype=np.int64)
        self.q = np.array([roles[el.q] for _, el, roles in els], dtype=np.int64)
        self.out = np.full((ne, 3), -1, dtype=np.int64)
        self.w = np.zeros((ne, 3))
        for k, (_, el, roles) in enumerate(els):
            for t, (role, wt) in enumerate(el.out):
                self.out[k, t] = roles[role]
                self.w[k, t] = wt
        self.w[self.out < 0] = 0.0
        self.log_is = np.array([el.log_is for _, el, _ in els], dtype=float)
        self.nvt = np.array([el.nvt for _, el, _ in els], dtype=float)
        self.dlog_is = np.array([el.dlog_is for _, el, _ in els], dtype=float)
        self.voff = np.array([el.voff for _, el, _ in els], dtype=float)
        self.vcrit = (critical_voltage(self.log_is + self.voff / self.nvt, self.nvt)
                      if ne else np.zeros(0))
        pindex = pindex or {}
        self.par = np.array([pindex.get(ref, -1) if d != 0 else -1
                             for (ref, _, _), d in zip(els, self.dlog_is)], dtype=np.int64)
        self._pattern()
        # the extended network: what predict's machinery reads (A is set per linearization)
        self.net = Network(net.analysis, net.frequency, None, b, net.n, net.node_index,
                           net.reference, net.node_names, net.y_ref, net.y_a, net.y_b, net.y_val,
                           net.br_ref, net.br_a, net.br_b, net.br_e, net.inj_ref, net.inj_a,
                           net.inj_b, net.inj_i, dict(net.element))
        self.net.indeterminate = getattr(net, "indeterminate", set())

    def set_source(self, current, voc):
        """Change the meter source's current and open-circuit voltage (a power-off system)."""
        ip, im, cur, _ = self._src
        for k, sgn in ((ip, 1.0), (im, -1.0)):
            if k >= 0:
                self.b[k] += sgn * (current - cur)
        self.log_is[-1] = np.log(current) - voc / self.CLAMP_NVT
        self.voff[-1] = voc
        self.vcrit[-1] = critical_voltage(np.log(current), self.nvt[-1])
        self._src = (ip, im, current, voc)

    def move_source(self, plus, minus, current, voc):
        """Put the meter source between other probes (a power-off system built with one)."""
        ip, im, cur, _ = self._src
        for k, sgn in ((ip, 1.0), (im, -1.0)):
            if k >= 0:
                self.b[k] -= sgn * cur
        ip, im = self.net.node_index[plus], self.net.node_index[minus]
        for k, sgn in ((ip, 1.0), (im, -1.0)):
            if k >= 0:
                self.b[k] += sgn * cur
        self.p[-1], self.q[-1] = ip, im
        self.out[-1, :2] = (ip, im)
        self.w[-1, :2] = (1.0 if ip >= 0 else 0.0, -1.0 if im >= 0 else 0.0)
        self._src = (ip, im, cur, voc)
        self._J = None
        self._pattern()
        self.set_source(current, voc)

    # ------------------------------------------------------------------ matrix
    def _pattern(self):
        """Sparsity pattern of linear part + element stamps + node diagonal, built once."""
        N = self.size
        ne = len(self.keys)
        # element stamps: out rows x (p, q) columns
        er = np.repeat(self.out, 2, axis=1).reshape(ne, 6) if ne else np.zeros((0, 6), np.int64)
        ec = np.tile(np.stack([self.p, self.q], axis=1), (1, 3)) if ne else np.zeros((0, 6), np.int64)
        self._es = np.tile(np.array([1.0, -1.0]), 3)      # +g at p, -g at q
        self._ew = np.repeat(self.w, 2, axis=1) if ne else np.zeros((0, 6))
        ok = (er >= 0) & (ec >= 0)
        self._emask = ok
        dn = np.asarray(self.n_nodes, dtype=np.int64)
        rows = np.concatenate([self.lin_rows, er[ok], dn])
        cols = np.concatenate([self.lin_cols, ec[ok], dn])
        key = cols * N + rows
        uniq, inv = np.unique(key, return_inverse=True)
        self._inv = inv
        self._nuniq = uniq.size
        self._indices = (uniq % N).astype(np.int32)
        self._indptr = np.concatenate([[0], np.cumsum(np.bincount(uniq // N, minlength=N))]).astype(np.int32)
        self._nlin = self.lin_vals.size
        self._ndev = int(ok.sum())
        self._lin_data = None

    def matrix(self, g, gmin=0.0, lin_vals=None):
        """The linearized matrix: linear part + element conductances ``g`` + ``gmin`` on node diagonals."""
        data = self._values(g, gmin, lin_vals)
        J = getattr(self, "_J", None)
        if J is None or J.dtype != data.dtype:
            J = self._J = sp.csc_matrix((data, self._indices, self._indptr),
                                        shape=(self.size, self.size))
            return J.copy()
        J = J.copy()     # a new matrix object sharing the pattern (no format checks)
        J.data = data
        return J

    def _work_matrix(self, g, gmin=0.0):
        """:meth:`matrix` written into one matrix object kept for Newton's iterations
        (factored at once and not kept: no new object, no format checks, per iteration)."""
        data = self._values(g, gmin)
        J = getattr(self, "_Jw", None)
        if J is None or J.dtype != data.dtype or J.indices is not self._indices:
            J = self._Jw = sp.csc_matrix((data, self._indices, self._indptr),
                                         shape=(self.size, self.size), copy=False)
            J.indices = self._indices
        else:
            J.data[:] = data
        return J

    def _values(self, g, gmin=0.0, lin_vals=None):
        """The matrix's nonzero values in the pattern's order."""
        if lin_vals is None and self.lin_vals.dtype == float:
            # the linear part's sums are the same every iteration: summed once
            base = self.__dict__.get("_lin_data")
            if base is None:
                nl, nd = self._nlin, self._ndev
                base = self._lin_data = np.bincount(self._inv[:nl], weights=self.lin_vals,
                                                    minlength=self._nuniq)
                self._dev_inv = self._inv[nl:nl + nd]
                self._diag_pos = self._inv[nl + nd:]
            data = base.copy()
            if len(g):
                dev = (self._ew * self._es[None, :] * np.asarray(g, dtype=float)[:, None])[self._emask]
                data += np.bincount(self._dev_inv, weights=dev, minlength=self._nuniq)
            if gmin:
                data[self._diag_pos] += gmin
            return data
        lin = self.lin_vals if lin_vals is None else lin_vals
        dev = (self._ew * self._es[None, :] * np.asarray(g)[:, None])[self._emask] if len(g) else np.zeros(0)
        diag = np.full(len(self.n_nodes), gmin)
        vals = np.concatenate([lin, dev.astype(lin.dtype), diag.astype(lin.dtype)])
        if np.iscomplexobj(vals):
            data = (np.bincount(self._inv, weights=vals.real, minlength=self._nuniq)
                    + 1j * np.bincount(self._inv, weights=vals.imag, minlength=self._nuniq))
        else:
            data = np.bincount(self._inv, weights=vals, minlength=self._nuniq)
        return data

    def control(self, x):
        """Element control voltages of a solution ``x``."""
        xp = np.where(self.p >= 0, x[np.maximum(self.p, 0)], 0.0)
        xq = np.where(self.q >= 0, x[np.maximum(self.q, 0)], 0.0)
        return (xp - xq).real

    def companion_rhs(self, b, i, g, v):
        """``b`` minus the elements' tangent currents ``i - g v`` (weighted into their terminals)."""
        rhs = np.array(b, dtype=float, copy=True)
        if len(v):
            c = (self.w * (i - g * v)[:, None])
            m = self.out >= 0
            rhs -= np.bincount(self.out[m], weights=c[m], minlength=rhs.size)
        return rhs

    def element_currents(self, x=None, v=None):
        """Element currents and conductances at a solution (or at voltages ``v``)."""
        if v is None:
            v = self.control(x)
        return law(v, self.log_is, self.nvt)

    # ------------------------------------------------------------------ Newton
    def _initial(self, warm):
        """Forward junctions start at their critical voltage (as SPICE), the rest at 0 V."""
        v = np.where(np.array([k[1] == "forward" for k in self.keys], dtype=bool),
                     self.vcrit, 0.0) if self.keys else np.zeros(0)
        v = np.array(v, dtype=float)
        if warm is not None:
            w = warm.voltages() if isinstance(warm, OperatingPoint) else warm
            for k, key in enumerate(self.keys):
                if key in w:
                    v[k] = w[key]
        if not isinstance(warm, Solution):
            for k in self.zero_start:
                v[k] = 0.0
        return v

    def _newton(self, v, b, gmin=0.0, maxiter=MAXITER):
        """Newton from element voltages ``v``; returns (x, v, iterations, ok, unsettled mask)."""
        v = v.copy()
        bad = np.zeros(len(v), dtype=bool)
        x = None
        for it in range(1, maxiter + 1):
            i, g = law(v, self.log_is, self.nvt)
            J = self._work_matrix(g, gmin)
            rhs = self.companion_rhs(b, i, g, v)
            try:
                lu = splu(J, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.1,
                          options={"SymmetricMode": True})
                x = lu.solve(rhs)
            except RuntimeError:
                return None, v, it, False, np.ones(len(v), dtype=bool)
            if not np.all(np.isfinite(x)):
                return None, v, it, False, np.ones(len(v), dtype=bool)
            vraw = self.control(x)
            vnew, lim = limit(vraw - self.voff, v - self.voff, self.nvt, self.vcrit)
            vnew = vnew + self.voff
            # settled: each element voltage moved less than VTOL, or its current at the
            # new voltage is its tangent's to ITOL (a junction deep in reverse behind
            # picosiemens, whose voltage is round-off, settles by its current)
            moved = np.abs(vraw - v) > VTOL
            if moved.any():
                i_new, _ = law(vraw, self.log_is, self.nvt)
                i_lin = i + g * (vraw - v)
                off = np.abs(i_new - i_lin) > ITOL_REL * np.maximum(np.abs(i_new), np.abs(i_lin)) + ITOL_ABS
                moved &= off
            bad = lim | moved
            if not bad.any():
                if gmin == 0.0:     # the factors of the Jacobian at the solution (v)
                    self._last_lu = (v, lu)
                return x, v, it, True, bad
            if it > DAMP_AFTER:
                vnew = v + 0.5 * (vnew - v)
            v = vnew
        return x, v, maxiter, False, bad

    def solve(self, warm=None, b=None, maxiter=MAXITER,
              methods=("newton", "gmin", "source")) -> OperatingPoint:
        """The operating point (see the module docstring for the method).

        Parameters
        ----------
        warm : OperatingPoint or dict, optional
            Element voltages to start from.
        b : ndarray, optional
            A right-hand side of the system's size instead of the circuit's own.
        maxiter : int, optional
            Newton iterations per attempt (plain Newton, and each gmin or
            source step).
        methods : tuple of str, optional
            The strategies to try, in this order: "newton", "gmin" (gmin
            stepping), "source" (source stepping).

        Raises
        ------
        ConvergenceError
            Nothing settled it; names the parts.
        """
        b = self.b.real.astype(float) if b is None else np.asarray(b, dtype=float)
        if self.analysis == "ac":
            raise ValueError("analysis: an AC system is solved about a DC operating point "
                             "(small_signal), not by Newton")
        unknown = set(methods) - {"newton", "gmin", "source"}
        if unknown:
            raise ValueError(f"methods: unknown {sorted(unknown)}")
        v0 = self._initial(warm)
        total = 0
        worst = np.zeros(len(v0), dtype=bool)
        if "newton" in methods:
            x, v, it, ok, bad = self._newton(v0, b, maxiter=maxiter)
            total += it
            if ok:
                return self._checked(OperatingPoint(x, v, self.keys, total, "newton"))
            worst |= bad
        if "gmin" in methods:
            # gmin stepping: from a heavily loaded network down to none, each step warm
            vg, ok_g = v0, True
            for gm in GMIN_STEPS:
                x, vg2, it, ok_g, bad = self._newton(vg, b, gmin=gm, maxiter=maxiter)
                total += it
                if not ok_g:
                    break
                vg = vg2
            if ok_g:
                x, v, it, ok, bad = self._newton(vg, b, maxiter=maxiter)
                total += it
                if ok:
                    return self._checked(OperatingPoint(x, v, self.keys, total, "gmin stepping"))
            worst |= bad
        if "source" in methods:
            # source stepping: every source ramped from 0, the step halved when one fails
            scale, step = 0.0, 0.1
            vs = self._initial(None)
            while True:
                trial = min(1.0, scale + step)
                x, vs2, it, ok, bad = self._newton(vs, b * trial, maxiter=maxiter)
                total += it
                if ok:
                    scale, vs = trial, vs2
                    if scale >= 1.0:
                        return self._checked(OperatingPoint(x, vs, self.keys, total,
                                                            "source stepping"))
                    step = min(step * 2.0, 0.25)
                else:
                    step /= 2.0
                    if step < MIN_SOURCE_STEP:
                        worst |= bad
                        break
        refs = sorted({self.refs[k] for k in np.flatnonzero(worst)} - {"__meter__"})
        if not refs:
            refs = sorted(set(self.refs) - {"__meter__"})
        refs = sorted(refs, key=_natural)
        raise ConvergenceError(
            "no DC operating point found (Newton's method, gmin stepping and source stepping "
            "all failed); the junctions of " + _names(refs) + " did not settle: check how "
            "they are wired (a junction straight across a supply, a transistor reversed)",
            parts=refs, **self._place(refs))

    def _place(self, refs):
        """The circuit file and the first named part's line, for the error."""
        line = None
        for r in refs:
            if self.circuit.has_part(r):
                line = self.circuit.part(r).line
                break
        return {"file": self.circuit.source, "line": line}

    def _checked(self, op):
        """Refuse an operating point with a junction past 1 kA (its law's tangent continuation)."""
        if len(op.v):
            over = op.v / self.nvt + self.log_is > ARG_MAX
            if over.any():
                refs = sorted({self.refs[k] for k in np.flatnonzero(over)} - {"__meter__"},
                              key=_natural)
                if refs:
                    raise ConvergenceError(
                        "no physical DC operating point: the junctions of " + _names(refs)
                        + " would carry more than 1 kA (a junction straight across a supply "
                        "or a source with nothing to limit its current?)", parts=refs,
                        **self._place(refs))
        return op

    # ------------------------------------------------------------------ linearization
    def jacobian(self, op: OperatingPoint):
        """The Newton matrix at an operating point (the linearized DC network)."""
        _, g = law(op.v, self.log_is, self.nvt)
        return self.matrix(g)

    def factors(self, op: OperatingPoint):
        """``(J, Factorization of J)`` at an operating point: Newton's last factors when it
        ended there (the same matrix, factored with the same options), else new ones."""
        last = getattr(self, "_last_lu", None)
        if last is not None and last[0] is op.v and getattr(self, "_Jw", None) is not None:
            # Newton's work matrix holds that very matrix: handed over (the next Newton
            # solve of this system starts a new one)
            J, self._Jw, self._last_lu = self._Jw, None, None
            return J, Factorization(J, lu=last[1])
        J = self.jacobian(op)
        return J, Factorization(J)

    def linear_network(self, A) -> Network:
        """The extended :class:`Network` with matrix ``A`` (what the predictions read): a
        new object each time (a system can serve several groups, each its own matrix)."""
        net = copy.copy(self.net)
        net.A = A
        return net

    def small_signal(self, g):
        """The AC matrix of this (``"ac"``) system with element conductances ``g``."""
        return self.matrix(g)

    def part_current(self, x, ref):
        """Current into a semiconductor's probe lead (anode; collector) at a solution of this system."""
        if self.probe_u is not None:
            return sum(c * x[k] for k, c in self.probe_u.items())
        raise ValueError("part_current: the system has no probe")


def _natural(ref):
    """Sort key: D2 before D10."""
    return [int(t) if t.isdigit() else t for t in re.split(r"(\d+)", ref)]


def _names(refs, most=8):
    """``D1, D2, ... and 12 more`` (parts in natural order)."""
    refs = sorted(refs, key=_natural)
    text = ", ".join(refs[:most])
    return text + (f" and {len(refs) - most} more" if len(refs) > most else "")


def operating_point(circuit, overrides=None, warm=None, floating=False) -> tuple:
    """The DC operating point of ``circuit`` (with ``overrides``).

    Parameters
    ----------
    circuit : Circuit
    overrides : dict, optional
        As :class:`System` (drifted values must already be in the parts; use
        engine/semis.py's ``solve_dc`` to pass them as overrides).
    warm : OperatingPoint or dict, optional
        A nearby solution to start from.
    floating : bool

    Returns
    -------
    system : System
    op : OperatingPoint

    Raises
    ------
    ConvergenceError
    """
    sysm = System(circuit, "dc", None, overrides, floating)
    return sysm, sysm.solve(warm)


def shared_stamps(st: Stamps, system: System, circuit, pindex, net) -> Stamps:
    """Set up ``st`` (a :class:`~.stamps.Stamps`) on ``net``, a linearised network of
    ``system`` (:meth:`System.linear_network`): the stamp derivatives and the incidence
    map are the linear network's, shared by every system built on it (a junction's
    fault or value, or the meter's source, leaves them as they were), so they are
    worked out once."""
    memo = system.net0.__dict__.setdefault("_stamps", {})
    key = (tuple(pindex), system.size)
    got = memo.get(key)
    if got is None:
        Stamps.__init__(st, circuit, net, pindex)
        if len(memo) > 16:
            memo.clear()
        memo[key] = (st.jy, st.dy, st.src, st.incidence())
    else:
        st.net = net
        st.jy, st.dy, st.src, st._inc = got
    return st


def junction_grad(system: System, Lam, v, n_params):
    """The junction values' part of ``lambda^T (db_j - dA_j x)``: ``-sum_k (w_k . lambda) i_k d ln Is_k / d ln p``.

    Parameters
    ----------
    system : System
    Lam : ndarray (size, k)
        Adjoint vectors (one column per reading).
    v : ndarray
        Element voltages of the operating point.
    n_params : int

    Returns
    -------
    ndarray (n_params, k)
    """
    Lam = np.atleast_2d(np.asarray(Lam).T).T if np.ndim(Lam) == 1 else np.asarray(Lam)
    G = np.zeros((n_params, Lam.shape[1]), dtype=np.result_type(Lam, float))
    ks = np.flatnonzero(system.par >= 0)
    if ks.size:
        i, _ = law(v[ks], system.log_is[ks], system.nvt[ks])
        out = system.out[ks]
        w = system.w[ks]
        lw = (np.where(out[:, :, None] >= 0, Lam[np.maximum(out, 0)], 0.0) * w[:, :, None]).sum(axis=1)
        np.add.at(G, system.par[ks], -lw * (i * system.dlog_is[ks])[:, None])
    return G
