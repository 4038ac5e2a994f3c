"""Predictions and sensitivities on circuits with semiconductors (the linearization).

:func:`faultfind.engine.predict.predict` sends a circuit whose
``is_nonlinear`` is true here.  What each reading is:

DC readings
    The exact DC operating point (engine/nonlinear.py), read through the
    meter.  The network the meter loads is the *linearized* one: its matrix
    is the Newton Jacobian at the operating point, so a voltmeter's input
    resistance and a linear part's current shunt enter as the same rank-one
    corrections as on a linear board (exact to first order in the loading;
    10 MΩ across a node changes the answer by parts in 10^9 beyond that).
    Where the meter loads a node heavily (more than :data:`LOAD_EXACT` of
    its Thevenin conductance: a node held only by junctions at a tiny
    current), or its shunt changes a linear part's branch by more than that
    share, the reading is an exact re-solve with the meter in place.
    A current reading through a semiconductor (a diode's anode lead, a
    transistor's collector lead) is an exact re-solve with the meter's shunt
    in that lead.
AC readings
    The small-signal response about the DC operating point: every junction
    is its conductance there, a transistor its linearized transport model
    (no junction capacitances in version 1).
Power-off readings
    Diode test and resistance with the junctions in place, exact
    (engine/offnet.py).

Sensitivities ``d reading / d ln p``: the linear parts' come from the
adjoint of the linearized network as on a linear board (at the operating
point ``F(x, p) = 0``, so ``dx/dp = -J^{-1} dF/dp`` and ``dF/dp`` is the
part's ordinary stamp applied to ``x``).  A junction's value ``V`` shifts
its element current at fixed voltage by ``di/d ln V = i * d ln Is / d ln V``
(about ``-g_d V`` for a diode: the law's ``Is`` is fixed by ``V`` at
``test_current``), carried as a current source in the linearized network.
An AC reading also moves with the operating point: its junction
conductances ``g_k(v_k(p))``; that dependence is one extra adjoint solve on
the DC Jacobian per AC reading.  Tolerance bands (bands.py, spread.py) use
these as they use a linear board's.

Overrides (``predict``, ``oracle_readings``, ``operating_point``): linear
parts as engine/mna.py (a value, "open", "short", "dead"); semiconductors:

* diode, led, zener: ``"open"`` (removed), ``"short"`` (a zero-volt wire
  between its leads), a float (a drifted value, volts: forward voltage at
  ``test_current``; a zener's breakdown voltage), ``("leaky", ohms)`` (a leak
  resistance across the junction);
* npn, pnp: ``"open"`` (the collector lead open: no collector current; the
  collector side floats), ``"short"`` (collector-emitter wire inside the
  part), ``"base-emitter-open"`` (the emitter lead open), and
  ``"base-emitter-short"`` (a base-emitter wire inside the part).

A transistor has no value, so no sensitivity column (``parameters``).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..model import SEMICONDUCTORS, Circuit, MeterProfile, Part
from .factor import Factorization
from .junctions import law
from .linpredict import Prediction, _lifted, _live_block, analysis_key, finish, parameters
from .nonlinear import System, junction_grad, shared_stamps
from .offnet import off_reading
from .stamps import Stamps

__all__ = ["predict_nonlinear", "split_overrides", "DCGroup", "ACGroup", "junction_current"]


def split_overrides(circuit: Circuit, overrides: dict | None) -> tuple[Circuit, dict]:
    """Write drifted values into the parts; return the circuit and the other overrides.

    A drifted open switch becomes closed (partly welded).  engine/oracle.py uses it too.
    """
    overrides = overrides or {}
    if not overrides:
        return circuit, {}
    if all(isinstance(ov, (str, tuple)) for ov in overrides.values()):
        return circuit, dict(overrides)     # no value to write: the circuit as it is
    parts, rest = [], {}
    for p in circuit.parts:
        ov = overrides.get(p.ref)
        if ov is None or isinstance(ov, (str, tuple)):
            parts.append(p)
            if ov is not None:
                rest[p.ref] = ov
        else:
            q = replace(p, value=float(ov))
            if q.kind == "switch" and q.state == "open":
                q = replace(q, state="closed")
            parts.append(q)
    return replace(circuit, parts=tuple(parts)), rest


#: DC systems of recent (circuit, variant) pairs: a variant solved again (its full
#: solve after a live-only one, the next diagnosis of the same board) finds its system
#: assembled.  Bounded by count and by unknowns in all.
_SYSTEMS: dict = {}
_SYSTEMS_SIZE = 512
_SYSTEMS_UNKNOWNS = 500_000
_HELD = [0]


def _system(circuit, overrides, floating, probe, pindex, loads):
    """``System(circuit, "dc", None, overrides, floating, probe=, pindex=, loads=)``,
    kept per (circuit, overrides, probe, loads, parameter columns)."""
    key = (id(circuit), tuple(sorted((r, repr(v)) for r, v in (overrides or {}).items())),
           bool(floating), probe, tuple(loads), id(pindex))
    hit = _SYSTEMS.get(key)
    if hit is not None and hit[0] is circuit and hit[1] is pindex:
        return hit[2]
    sysm = System(circuit, "dc", None, overrides, floating, probe=probe, pindex=pindex,
                  loads=loads)
    _HELD[0] += sysm.size
    while _SYSTEMS and (len(_SYSTEMS) >= _SYSTEMS_SIZE or _HELD[0] > _SYSTEMS_UNKNOWNS):
        _HELD[0] -= _SYSTEMS.pop(next(iter(_SYSTEMS)))[2].size
    _SYSTEMS[key] = (circuit, pindex, sysm)
    return sysm


class DCGroup(Stamps):
    """The DC operating point of a circuit and its linearized network.

    Attributes
    ----------
    sys : System
    op : OperatingPoint
    net, lu, x
        The extended network (matrix: the Jacobian at ``op``), its factors,
        the solution: what predict's block solves read.
    """

    def __init__(self, circuit, overrides, pindex, warm=None, floating=False, probe=None,
                 loads=()):
        self.circuit = circuit
        self.overrides = dict(overrides or {})
        self.cols = {}
        self.keep = False
        self.sys = _system(circuit, overrides, floating, probe, pindex, loads)
        self.op = self.sys.solve(warm)
        J, self.lu = self.sys.factors(self.op)
        net = self.sys.linear_network(J)
        self.x = self.op.x
        shared_stamps(self, self.sys, circuit, pindex, net)

    def grad_block(self, Lam, X, n_params, skips):
        G = super().grad_block(Lam, X, n_params, skips)
        return G + junction_grad(self.sys, Lam, self.op.v, n_params)


class ACGroup(Stamps):
    """The small-signal network at one frequency about a :class:`DCGroup`'s operating point."""

    def __init__(self, circuit, overrides, frequency, pindex, dc: DCGroup, probe=None):
        self.circuit = circuit
        self.overrides = dict(overrides or {})
        self.cols = {}
        self.keep = False
        self.dc = dc
        self.sys = System(circuit, "ac", frequency, overrides, probe=probe, pindex=pindex)
        pos = {k: i for i, k in enumerate(dc.sys.keys)}
        self.dc_index = np.array([pos[k] for k in self.sys.keys], dtype=np.int64)
        self.v = dc.op.v[self.dc_index] if len(self.dc_index) else np.zeros(0)
        _, self.g = law(self.v, self.sys.log_is, self.sys.nvt)
        A = self.sys.matrix(self.g)
        net = self.sys.linear_network(A)
        self.lu = Factorization(A)
        self.x = self.lu.solve(self.sys.b)
        super().__init__(circuit, net, pindex)

    def grad_block(self, Lam, X, n_params, skips):
        G = super().grad_block(Lam, X, n_params, skips)
        s = self.sys
        if not len(s.keys):
            return G
        G = G.astype(complex, copy=False)
        Lam = np.asarray(Lam)
        X = np.asarray(X)
        lw = (np.where(s.out[:, :, None] >= 0, Lam[np.maximum(s.out, 0)], 0.0)
              * s.w[:, :, None]).sum(axis=1)                                   # (k, cols)
        xp = np.where(s.p[:, None] >= 0, X[np.maximum(s.p, 0)], 0.0)
        xq = np.where(s.q[:, None] >= 0, X[np.maximum(s.q, 0)], 0.0)
        c = lw * (xp - xq)                                                     # (k, cols)
        # at fixed operating point: g_k scales with Is_k
        ks = np.flatnonzero(s.par >= 0)
        if ks.size:
            np.add.at(G, s.par[ks], -c[ks] * (self.g[ks] * s.dlog_is[ks])[:, None])
        # through the operating point: dg_k = g_k / nVt_k dv_k, v_k = d_k^T x_dc
        d = self.dc.sys
        h = np.zeros((d.size, c.shape[1]), dtype=complex)
        coef = c * (self.g / s.nvt)[:, None]
        kd = self.dc_index
        pm, qm = d.p[kd] >= 0, d.q[kd] >= 0
        np.add.at(h, d.p[kd][pm], coef[pm])
        np.subtract.at(h, d.q[kd][qm], coef[qm])
        mu = self.dc.lu.solve_adjoint(h)
        G = G - self.dc.grad_block(mu, np.repeat(self.dc.x[:, None], c.shape[1], axis=1),
                                   n_params, [-1] * c.shape[1])
        return G


def junction_current(circuit, overrides, key, ref, meter, pindex, npar, dc, grads=True):
    """A current reading through a semiconductor's lead: exact re-solve with the meter's shunt there.

    Returns ``(complex value, sensitivity row)``; a lead the fault left open reads 0;
    ``grads`` False: the row is zeros.
    """
    probe = (ref, float(meter.current_shunt))
    pd = DCGroup(circuit, overrides, pindex, warm=dc.op, probe=probe)
    if pd.sys.probe_open:
        return 0.0, np.zeros(npar)
    grp = pd if key[0] == "dc" else ACGroup(circuit, overrides, key[1], pindex, pd, probe=probe)
    u = np.zeros(grp.sys.size, dtype=grp.net.A.dtype)
    for k, cf in grp.sys.probe_u.items():
        u[k] = cf
    if not grads:
        return complex(u @ grp.x), np.zeros(npar)
    lam = grp.lu.solve_adjoint(u)
    G = grp.grad_block(lam[:, None], grp.x[:, None], npar, [-1])
    return complex(u @ grp.x), G[:, 0]


#: A DC voltage reading whose meter takes more than this share of the
#: node's Thevenin conductance (``z / R_in``: the node's resistance over the
#: meter's) is solved with the meter in the circuit, not to first order: a
#: node held only by junctions at a tiny current (pads above an open LED)
#: moves by volts under a 10 Mohm meter.
LOAD_EXACT = 1e-3


def _heavy_loads(c, over, grp, readings, idx, meters, pindex, npar, value, sens, grads=True):
    """Voltage readings the meter loads heavily: exact re-solves with its input resistance.

    Returns the readings left for the first-order path.
    """
    volt = [i for i in idx if readings[i].quantity == "voltage"]
    if not volt:
        return _heavy_shunts(c, over, grp, readings, idx, meters, pindex, npar, value, sens, grads)
    U = np.zeros((grp.net.size, len(volt)))
    at = grp.net.node_index
    for q, i in enumerate(volt):
        a, b = at[readings[i].plus], at[readings[i].minus]
        if a >= 0:
            U[a, q] += 1.0
        if b >= 0:
            U[b, q] -= 1.0
    z = np.einsum("ij,ij->j", U, grp.lu.solve(U))
    heavy = set()
    for q, i in enumerate(volt):
        rd = readings[i]
        g = 1.0 / meters[rd.meter or "default"].input_resistance
        if not abs(z[q] * g) > LOAD_EXACT:
            continue
        loaded = DCGroup(c, over, pindex, warm=grp.op, loads=((rd.plus, rd.minus, g),))
        u = loaded.net.node_vector(rd.plus, rd.minus)
        value[i] = u @ loaded.x
        if grads:
            lam = loaded.lu.solve_adjoint(u)
            sens[i] = loaded.grad_block(lam[:, None], loaded.x[:, None], npar, [-1])[:, 0]
        heavy.add(i)
    return _heavy_shunts(c, over, grp, readings, [i for i in idx if i not in heavy], meters,
                         pindex, npar, value, sens, grads)


_SHUNT_NODE = "__shunt_node__"
_SHUNT = "__shunt__"


def _heavy_shunts(c, over, grp, readings, idx, meters, pindex, npar, value, sens, grads=True):
    """Current readings through a linear part, a supply or a wire whose meter shunt matters
    (more than :data:`LOAD_EXACT` of the branch): exact re-solves with the shunt in the circuit.

    Returns the readings left for the first-order path.
    """
    net = grp.net
    cand = []
    for i in idx:
        rd = readings[i]
        if rd.quantity != "current" or rd.part in grp.sys.devices:
            continue
        el = net.element.get(rd.part)
        rs = meters[rd.meter or "default"].current_shunt
        if el is None or el[0] not in ("y", "br") or rs <= 0:
            continue
        cand.append((i, el, rs))
    if not cand:
        return idx
    cols = []
    for i, el, _ in cand:
        if el[0] == "y":
            cols.append(net.node_vector(*c.part(readings[i].part).nodes))
        else:               # a branch (a supply, a wire): its current unknown
            u = np.zeros(net.size)
            u[net.n + el[1]] = 1.0
            cols.append(u)
    U = np.column_stack(cols)
    z = np.einsum("ij,ij->j", U, grp.lu.solve(U))
    heavy = set()
    for q, (i, el, rs) in enumerate(cand):
        if el[0] == "y":
            y = net.y_val[el[1]]
            alpha = y / (1.0 + y * rs) - y
        else:
            alpha = -rs
        if not abs(alpha * z[q]) > LOAD_EXACT:
            continue
        p = c.part(readings[i].part)
        parts = [replace(x, nodes=(x.nodes[0], _SHUNT_NODE)) if x is p else x for x in c.parts]
        parts.append(Part(_SHUNT, "resistor", (_SHUNT_NODE, p.nodes[1]), rs))
        cm = replace(c, parts=tuple(parts))
        loaded = DCGroup(cm, over, pindex, warm=grp.op)
        # through the shunt from the meter node on: through the part (a source delivers the reverse)
        u = loaded.net.node_vector(_SHUNT_NODE, p.nodes[1]) / (-rs if p.is_source else rs)
        value[i] = u @ loaded.x
        if grads:
            lam = loaded.lu.solve_adjoint(u)
            sens[i] = loaded.grad_block(lam[:, None], loaded.x[:, None], npar, [-1])[:, 0]
        heavy.add(i)
    return [i for i in idx if i not in heavy]


def _meter_shifts_operating_point(grp, readings, idx, meters, value):
    """AC voltage readings: the voltmeter's input resistance also loads the DC operating
    point (a handheld's input divider is DC-coupled on its AC ranges, as in the oracle),
    which moves the junction conductances the AC reading sees.  First order:
    ``d r = -sum_k c_k g'_k d_k^T dx_dc`` with ``dx_dc`` the meter's DC loading."""
    volt = [i for i in idx if readings[i].quantity == "voltage"]
    s, dc = grp.sys, grp.dc
    if not volt or not len(s.keys):
        return
    Ua = np.column_stack([grp.net.node_vector(readings[i].plus, readings[i].minus) for i in volt])
    Ud = np.column_stack([dc.net.node_vector(readings[i].plus, readings[i].minus) for i in volt])
    g_in = np.array([1.0 / meters[readings[i].meter or "default"].input_resistance for i in volt])
    Wa, Ma = grp.lu.solve(Ua), grp.lu.solve_adjoint(Ua)
    za = np.einsum("ij,ij->j", Ua, Wa)
    den = 1.0 + g_in * za
    X = grp.x[:, None] - Wa * (g_in * (Ua.T @ grp.x) / den)[None, :]
    Lam = Ma / den[None, :]
    Wd = dc.lu.solve(Ud)
    zd = np.einsum("ij,ij->j", Ud, Wd)
    dxd = -Wd * (g_in * (Ud.T @ dc.x) / (1.0 + g_in * zd))[None, :]      # DC shift by the meter
    lw = (np.where(s.out[:, :, None] >= 0, Lam[np.maximum(s.out, 0)], 0.0) * s.w[:, :, None]).sum(axis=1)
    xp = np.where(s.p[:, None] >= 0, X[np.maximum(s.p, 0)], 0.0)
    xq = np.where(s.q[:, None] >= 0, X[np.maximum(s.q, 0)], 0.0)
    cst = lw * (xp - xq)                                                  # (k, readings)
    d = dc.sys
    kd = grp.dc_index
    dp = np.where(d.p[kd][:, None] >= 0, dxd[np.maximum(d.p[kd], 0)], 0.0)
    dq = np.where(d.q[kd][:, None] >= 0, dxd[np.maximum(d.q[kd], 0)], 0.0)
    dv = dp - dq                                                          # (k, readings)
    delta = -(cst * (grp.g / s.nvt)[:, None] * dv).sum(axis=0)
    value[volt] = value[volt] + delta


#: Parameters and their columns of recent circuits, by the circuit's identity.
_PARAMS: dict = {}


def _parameters(circuit):
    """``(parameters(circuit), {ref: column})``, kept per circuit (read-only)."""
    hit = _PARAMS.get(id(circuit))
    if hit is not None and hit[0] is circuit:
        return hit[1], hit[2]
    params = parameters(circuit)
    pindex = {r: j for j, r in enumerate(params)}
    if len(_PARAMS) >= 256:
        _PARAMS.clear()
    _PARAMS[id(circuit)] = (circuit, params, pindex)
    return params, pindex


def predict_nonlinear(circuit: Circuit, readings, meters: dict, overrides: dict | None = None, *,
                      share: dict | None = None, warm=None, off_warm=None,
                      off_sens=True, sens=True, off_keep=None) -> Prediction:
    """:func:`faultfind.engine.predict.predict` for a circuit with semiconductors.

    ``warm``: an earlier prediction's ``operating_point`` (or an
    OperatingPoint) to start Newton from.  ``share`` holds the DC group under
    ``("dc", None)`` and AC groups under ``("ac", f)`` as the linear path does.
    ``off_warm``: a dict of power-off readings' solutions by ``(plus, minus,
    quantity)`` to start their Newton solves from; a reading not in it is
    solved from cold and its solution added (engine/offnet.py).
    ``off_sens`` False: the power-off readings' sensitivity rows are left at
    zero (their values are the same; each row costs a factorization).
    ``sens`` False: every sensitivity row is left at zero (the values only: no
    adjoint solves; implies ``off_sens`` False).  ``off_keep``: a dict filled with
    every power-off reading's solution (its first range's) by the same key.

    Raises
    ------
    ConvergenceError
        No DC operating point (names the parts).
    """
    if "default" not in meters:
        raise ValueError("meters: must contain a 'default' profile")
    off_sens = off_sens and sens
    c, over = split_overrides(circuit, overrides)
    params, pindex = _parameters(circuit)
    npar = len(params)
    readings = list(readings)
    nr = len(readings)
    value = np.zeros(nr, dtype=complex)
    any_ac = any(rd.quantity not in ("resistance", "diode-test") and rd.mode == "ac" for rd in readings)
    rows = np.zeros((nr, npar), dtype=complex if any_ac else float)
    by_key: dict = {}
    for i, rd in enumerate(readings):
        meter: MeterProfile = meters.get(rd.meter or "default")
        if meter is None:
            raise ValueError(f"reading {i}: meter profile {rd.meter!r} is not defined")
        key = analysis_key(circuit, rd)
        if key[0] == "lifted":
            value[i], rows[i] = _lifted(c, rd, pindex, npar, over, meter)
        elif key[0] == "off":
            plus, minus = c.part(rd.part).nodes[:2] if rd.part is not None else (rd.plus, rd.minus)
            okey = (plus, minus, rd.quantity)
            hold = {} if (off_warm is not None and okey not in off_warm) or off_keep is not None \
                else None
            v, s = off_reading(c, plus, minus, rd.quantity, meter, over, pindex,
                               npar if off_sens else 0, warm=(off_warm or {}).get(okey), keep=hold)
            value[i] = v
            if off_sens:
                rows[i] = s
            if hold and "op" in hold:
                if off_warm is not None and okey not in off_warm:
                    off_warm[okey] = hold["op"]
                if off_keep is not None:
                    off_keep[okey] = hold["op"]
        else:
            by_key.setdefault(key, []).append(i)
    dc = None
    usable = share is not None and not overrides

    def shared(key):
        g = share.get(key) if usable else None
        return g if g is not None and g.circuit is c else None

    if by_key:      # power-off readings alone need no operating point
        dc = shared(("dc", None)) or DCGroup(c, over, pindex, warm=warm)
        if share is not None and usable:
            share[("dc", None)] = dc
    for key, idx in by_key.items():
        grp = dc if key[0] == "dc" else (shared(key) or ACGroup(c, over, key[1], pindex, dc))
        if share is not None and usable:
            share[key] = grp
        grp.cols = {}
        grp.keep = share is not None
        plain = []
        for i in idx:
            rd = readings[i]
            if (rd.quantity == "current" and c.part(rd.part).kind in SEMICONDUCTORS
                    and rd.part in dc.sys.devices):
                meter = meters[rd.meter or "default"]
                value[i], rows[i] = junction_current(c, over, key, rd.part, meter, pindex, npar, dc,
                                                     sens)
            else:
                plain.append(i)
        if key[0] == "dc":
            plain = _heavy_loads(c, over, grp, readings, plain, meters, pindex, npar, value, rows,
                                 sens)
        if plain:
            _live_block(c, grp, readings, plain, meters, npar, pindex, value, rows, grads=sens)
        if key[0] == "ac":
            _meter_shifts_operating_point(grp, readings, plain, meters, value)
    return finish(readings, value, rows, params, any_ac,
                  dc.op.voltages() if dc is not None else None)
