"""What a meter would display on a linear circuit, and how that depends on every part.

(The entry point is :func:`faultfind.engine.predict.predict`, which sends a
circuit with semiconductors to engine/semis.py; the pieces here -- the stamp
derivatives, the meter-loaded block solves -- serve both.)

For each reading the prediction is the display of the meter named by the
reading, with the meter's own loading: its input resistance across the probes
for a voltage, its shunt in series with the part for a current.  The loading is
applied exactly as a rank-one change of the network (Sherman-Morrison), so one
factorization per analysis serves every reading:

    A_L = A + alpha u u^T,  r = s u^T x_L = s (u^T x) / (1 + alpha z),
    z = u^T A^{-1} u

where ``u`` selects the probed nodes (or branch), ``alpha`` is the meter's
conductance ``1/R_in`` (voltage), the change of the part's admittance caused by
the shunt (current through an admittance), or ``-r_shunt`` on a branch row, and
``s`` scales a branch or admittance value to a current.  Sensitivities to the
logarithm of every part's value come from one adjoint solve per reading:

    d r / d ln p_j = s lambda_L^T (d b_j - d A_j x_L),  A_L^T lambda_L = u.

A resistance reading is taken on the power-off network: ``R = u^T A^{-1} u``
with ``d R / d ln p_j = -(A^{-T} u)^T dA_j (A^{-1} u)``; probes on parts of the
network that are not connected give ``inf`` (the meter shows OL).  A
diode-test reading on a linear network displays ``I_t R`` (the meter's test
current through the resistance between the probes), OL above the display's
top or the meter's open-circuit voltage.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..model import SEMICONDUCTORS, Circuit, MeterProfile, Reading
from .factor import Factorization
from .offnet import lifted_junction, lifted_junction_sens
from .mna import BRANCH, INJECTION, assemble
from .stamps import Stamps

__all__ = ["Prediction", "Stamps", "parameters", "predict_linear", "analysis_key",
           "lifted_value", "diode_test_limit", "finish"]


@dataclass(frozen=True)
class Prediction:
    """Predicted meter displays and their sensitivities.

    Attributes
    ----------
    value : ndarray, shape (n_readings,)
        What the meter would display: signed for DC voltage and current, the
        RMS magnitude for AC, ohms for resistance (``inf`` where the probes
        have no path between them).
    phasor : ndarray of complex, shape (n_readings,)
        The complex value before the magnitude is taken (equal to ``value``
        for DC and resistance readings).
    sensitivity : ndarray, shape (n_readings, n_params)
        ``d value / d ln(p_j)`` for every parameter ``p_j`` (see
        :func:`parameters`); zero rows where ``value`` is infinite.
    params : tuple of str
        Reference designators of the parameters, in column order.
    operating_point : dict or None
        Circuits with semiconductors: the DC operating point's element
        voltages by (part ref, element name), a warm start for a nearby
        circuit (``predict(..., warm=)``); None for a linear circuit.
    """

    value: np.ndarray
    phasor: np.ndarray
    sensitivity: np.ndarray
    params: tuple
    operating_point: dict | None = None


def parameters(circuit: Circuit) -> tuple[str, ...]:
    """Refs of the parts whose value is a parameter (every part but op-amps)."""
    return tuple(p.ref for p in circuit.parts if p.value is not None and p.kind != "opamp")


def analysis_key(circuit: Circuit, reading: Reading):
    """The network a reading is taken on: ("dc", None), ("ac", f), ("off", None) or ("lifted", None)."""
    if reading.quantity in ("resistance", "diode-test"):
        return ("lifted", None) if reading.setup == "lifted" else ("off", None)
    if reading.mode == "ac":
        f = reading.frequency if reading.frequency is not None else circuit.frequency
        return ("ac", float(f))
    return ("dc", None)


class _Group(Stamps):
    """One analysis of one circuit: network, factors, solution, stamp derivatives."""

    def __init__(self, circuit, key, pindex, overrides=None):
        analysis, f = key
        self.cols = {}   # reading index -> (A^{-1} u, A^{-T} u), kept when shared
        self.circuit = circuit
        self.overrides = dict(overrides or {})
        net = assemble(circuit, analysis, f, overrides)
        self.lu = Factorization(net.A)
        self.x = self.lu.solve(net.b) if analysis != "off" else None
        super().__init__(circuit, net, pindex)


def predict_linear(circuit: Circuit, readings, meters: dict, overrides: dict | None = None, *,
                   share: dict | None = None) -> Prediction:
    """Predict the meter displays of ``readings`` on a healthy linear ``circuit``.

    Parameters
    ----------
    circuit : Circuit
        A validated circuit.
    readings : sequence of Reading
        Validated against the circuit (nodes and parts exist, ``minus``
        resolved).  Their ``value`` is ignored.
    meters : dict
        Meter profile name to :class:`~faultfind.model.MeterProfile`; must
        hold ``"default"``, used where a reading names no meter.
    overrides : dict, optional
        Faults to apply, as for :func:`~faultfind.engine.mna.assemble`
        (ref to a value, ``"open"``, ``"short"`` or ``"dead"``).  This is the
        plain re-assemble-and-solve path: the diagnosis engine's oracle.
    share : dict, optional
        Filled with each analysis' network, factors and per-reading solves
        (analysis key to the internal group object with ``net``, ``lu``,
        ``x`` and ``cols``), so that a caller needing the same network does
        not factor it again.  An analysis already in ``share`` (from an
        earlier call on the same circuit, without overrides) is reused.

    Returns
    -------
    Prediction

    Raises
    ------
    ValueError
        ``meters`` lacks a profile a reading names, or a reading names a node
        or part the circuit lacks.
    SolveError
        The circuit's equations are singular.
    """
    if "default" not in meters:
        raise ValueError("meters: must contain a 'default' profile")
    params = parameters(circuit)
    pindex = {r: j for j, r in enumerate(params)}
    npar = len(params)
    readings = list(readings)
    nr = len(readings)
    value = np.zeros(nr, dtype=complex)
    any_ac = any(rd.quantity not in ("resistance", "diode-test") and rd.mode == "ac" for rd in readings)
    sens = np.zeros((nr, npar), dtype=complex if any_ac else float)   # real work for DC and ohms
    by_key: dict = {}
    for i, rd in enumerate(readings):
        meter: MeterProfile = meters.get(rd.meter or "default")
        if meter is None:
            raise ValueError(f"reading {i}: meter profile {rd.meter!r} is not defined")
        key = analysis_key(circuit, rd)
        if key[0] == "lifted":
            value[i], sens[i] = _lifted(circuit, rd, pindex, npar, overrides or {}, meter)
            continue
        by_key.setdefault(key, []).append(i)
    for key, idx in by_key.items():
        grp = share.get(key) if share is not None and not overrides else None
        fresh = grp is None or grp.circuit is not circuit or grp.overrides
        if fresh:
            grp = _Group(circuit, key, pindex, overrides)
        grp.cols = {}
        grp.keep = share is not None
        if share is not None:
            share[key] = grp
        if key[0] == "off":
            _ohms_block(circuit, grp, readings, idx, npar, value, sens, meters)
        else:
            # a shared network remembers the readings of the call that factored it, so
            # that a later call with some of the same readings (the advice, after the
            # diagnosis) does not solve them again
            memo = grp.__dict__.setdefault("memo", {}) if share is not None else None
            _live_block(circuit, grp, readings, idx, meters, npar, pindex, value, sens, memo, fresh)
    return finish(readings, value, sens, params, any_ac)


def finish(readings, value, sens, params, any_ac, operating_point=None) -> Prediction:
    """Displays from the complex values: magnitudes (and their sensitivities) for AC readings."""
    nr, npar = len(readings), len(params)
    mag = np.where(np.isfinite(value), value, np.inf)
    out_val = np.empty(nr)
    out_sens = sens if not any_ac else np.zeros((nr, npar))
    for i, rd in enumerate(readings):
        v = mag[i]
        if not np.isfinite(v):
            out_val[i] = np.inf
            out_sens[i] = 0.0
            continue
        if rd.quantity not in ("resistance", "diode-test") and rd.mode == "ac":
            out_val[i] = abs(v)
            out_sens[i] = (np.conj(v) * sens[i]).real / abs(v) if abs(v) > 0 else 0.0
        else:
            out_val[i] = v.real
            if any_ac:
                out_sens[i] = sens[i].real
    return Prediction(out_val, value, out_sens, params, operating_point)


#: Readings solved per block (bounds the element-by-reading work arrays).
_BLOCK = 32


def _memo_key(rd, meter, dtype):
    """What a live reading's value, sensitivities and solves depend on, besides the network."""
    if rd.quantity == "voltage":
        return ("v", rd.plus, rd.minus, meter.input_resistance, dtype.char)
    return ("i", rd.part, meter.current_shunt, dtype.char)


def _reading_vectors(part, N, dtype):
    """The reading vectors ``u`` of one block of ``(row, entries)`` columns (a node
    pair or one branch each, entries ``(unknown index, +-1)``), as their nonzero
    entries ``(er, ec, ev)`` and as the dense ``N x len(part)`` matrix ``U``."""
    er = np.array([k for _, ent in part for k, _ in ent], dtype=np.int64)
    ec = np.array([q for q, (_, ent) in enumerate(part) for _ in ent], dtype=np.int64)
    ev = np.array([v for _, ent in part for _, v in ent], dtype=float)
    on = er >= 0                      # the ground node has no row
    er, ec, ev = er[on], ec[on], ev[on]
    U = np.zeros((N, len(part)), dtype=dtype)
    np.add.at(U, (er, ec), ev)
    return er, ec, ev, U


def _live_block(circuit, grp, readings, idx, meters, npar, pindex, value, sens, memo=None, store=False,
                grads=True):
    """Live readings of one analysis: block solves, then vectorized gradients.

    Per reading ``i`` (columns of ``U``) this is the Sherman-Morrison formula of
    the module docstring: ``den = 1 + alpha z``, ``x_L = x - w alpha (u^T x) / den``,
    ``lambda_L = mu / den``, ``r = s (u^T x) / den``.  ``memo`` (dict): readings
    already worked out on this network are taken from it; with ``store``, the
    ones worked out here are put in it.  ``grads`` False: the values only (no
    adjoint solves, ``sens`` left as it is; not with ``memo``).
    """
    net, lu, x = grp.net, grp.lu, grp.x
    N = net.size
    cols, alphas, ss, skips, selfs = [], [], [], [], []
    keys = {}
    for i in idx:
        rd = readings[i]
        meter = meters[rd.meter or "default"]
        if memo is not None:
            mk = keys[i] = _memo_key(rd, meter, sens.dtype)
            got = memo.get(mk)
            if got is not None:
                value[i], sens[i] = got[0], got[1]
                if grp.keep:
                    grp.cols[i] = got[2]
                continue
        if rd.quantity == "voltage":
            cols.append((i, ((net.node_index[rd.plus], 1.0), (net.node_index[rd.minus], -1.0))))
            alphas.append(1.0 / meter.input_resistance); ss.append(1.0); skips.append(-1); selfs.append(None)
            continue
        elem = net.element.get(rd.part)
        if elem is None:  # open in this analysis: no current flows
            value[i] = 0.0
            continue
        kind, k = elem
        if kind == INJECTION:
            value[i] = net.inj_i[k]
            sens[i, pindex[rd.part]] = net.inj_i[k]
            continue
        rs = meter.current_shunt
        if kind == BRANCH:
            cols.append((i, ((net.n + k, 1.0),))); alphas.append(-rs)
            ss.append(-1.0 if circuit.part(rd.part).kind == "voltage-source" else 1.0)
            skips.append(-1); selfs.append(None)
            continue
        a, b = net.y_a[k], net.y_b[k]
        y = net.y_val[k]
        y2 = y / (1.0 + y * rs)
        cols.append((i, ((a, 1.0), (b, -1.0)))); alphas.append(y2 - y); ss.append(y2); skips.append(k)
        selfs.append((grp.jy[k], grp.dy[k] / (1.0 + y * rs) ** 2, y2))
    for c0 in range(0, len(cols), _BLOCK):
        part = cols[c0:c0 + _BLOCK]
        rows = [i for i, _ in part]
        er, ec, ev_, U = _reading_vectors(part, N, net.A.dtype)
        if not grads:
            W = lu.solve(U)
            alpha = np.array(alphas[c0:c0 + _BLOCK])
            s = np.array(ss[c0:c0 + _BLOCK])
            z = np.zeros(len(part), dtype=np.result_type(U.dtype, W.dtype, alpha.dtype))
            np.add.at(z, ec, ev_ * W[er, ec])
            ux = np.zeros(len(part), dtype=np.result_type(U.dtype, x.dtype))
            np.add.at(ux, ec, ev_ * x[er])
            value[rows] = s * ux / (1.0 + alpha * z)
            continue
        W, Mu = lu.solve_both(U)
        alpha = np.array(alphas[c0:c0 + _BLOCK], dtype=complex)
        s = np.array(ss[c0:c0 + _BLOCK], dtype=complex)
        if not np.iscomplexobj(W) and not alpha.imag.any() and not s.imag.any():
            alpha, s = alpha.real, s.real   # a real network: stay in real arithmetic
        z = np.zeros(len(part), dtype=np.result_type(U.dtype, W.dtype))
        np.add.at(z, ec, ev_ * W[er, ec])
        ux = np.zeros(len(part), dtype=np.result_type(U.dtype, x.dtype))
        np.add.at(ux, ec, ev_ * x[er])
        den = 1.0 + alpha * z
        XL = x[:, None] - W * (alpha * ux / den)[None, :]
        Lam = Mu / den[None, :]
        value[rows] = s * ux / den
        if grp.keep:
            for q, i in enumerate(rows):
                grp.cols[i] = (W[:, q], Mu[:, q])
        G = grp.grad_block(Lam, XL, npar, skips[c0:c0 + _BLOCK]) * s[None, :]
        for q, i in enumerate(rows):
            st = selfs[c0 + q]
            if st is not None and st[0] >= 0:
                j, dy2, y2 = st
                G[j, q] += dy2 * (ux[q] / den[q]) * (1.0 - y2 * z[q] / den[q])
        sens[rows] = G.T
        if store and memo is not None:
            for q, i in enumerate(rows):
                memo[keys[i]] = (value[i], sens[i], (W[:, q], Mu[:, q]))


def diode_test_limit(meter) -> float:
    """The highest diode-test voltage the meter displays: its display top or its open-circuit voltage."""
    return min(meter.diode_test_max, meter.diode_test_voltage)


def _ohms_block(circuit, grp, readings, idx, npar, value, sens, meters=None):
    """In-circuit resistance (and diode-test) readings of the power-off network, in blocks."""
    net, lu = grp.net, grp.lu
    N = net.size
    cols = []
    for i in idx:
        rd = readings[i]
        if rd.part is not None:
            plus, minus = circuit.part(rd.part).nodes[:2]
        else:
            plus, minus = rd.plus, rd.minus
        if plus == minus:
            value[i] = 0.0
        elif not net.connected(plus, minus):
            value[i] = np.inf
        else:
            cols.append((i, ((net.node_index[plus], 1.0), (net.node_index[minus], -1.0))))
    for c0 in range(0, len(cols), _BLOCK):
        part = cols[c0:c0 + _BLOCK]
        rows = [i for i, _ in part]
        er, ec, ev_, U = _reading_vectors(part, N, net.A.dtype)
        W, Mu = lu.solve_both(U)
        z = np.zeros(len(part), dtype=np.result_type(U.dtype, W.dtype))
        np.add.at(z, ec, ev_ * W[er, ec])
        value[rows] = z
        if grp.keep:
            for q, i in enumerate(rows):
                grp.cols[i] = (W[:, q], Mu[:, q])
        sens[rows] = -grp.minus_grad_block(Mu, W, npar).T
    for i in idx:
        rd = readings[i]
        if rd.quantity == "diode-test":    # the meter's test current through that resistance
            meter = meters[rd.meter or "default"]
            it = meter.diode_test_current
            v = value[i] * it if np.isfinite(value[i]) else np.inf
            if not np.isfinite(v) or v.real > diode_test_limit(meter):
                value[i] = np.inf
                sens[i] = 0.0
            else:
                value[i] = v
                sens[i] = sens[i] * it


def lifted_value(part, fault=None, meter=None, quantity="resistance") -> float:
    """What an ohmmeter (or the diode test) reads across ``part`` alone (one leg lifted).

    ``fault`` is None, "open", "short" or a drifted value (for a diode, LED
    or zener also ``("leaky", ohms)``).  ``meter`` (a MeterProfile) is needed
    for a junction, whose reading depends on the meter's test current
    (engine/semis.py, docs/meter-model.md), and for a diode-test reading.
    """
    if fault == "open":
        return np.inf
    if fault == "short":
        return 0.0
    if part.kind in SEMICONDUCTORS or quantity == "diode-test":
        return lifted_junction(part, fault, meter, quantity)
    p = part
    if fault is not None and not isinstance(fault, str):
        p = replace(p, value=float(fault), state="closed")
    if p.kind in ("resistor", "fuse") or (p.kind == "switch" and p.state == "closed"):
        return p.value
    if p.kind == "inductor":
        return p.resistance or 0.0
    if p.is_source:
        return 0.0 if p.off_state == "short" else np.inf
    return np.inf  # capacitor, open switch


def _lifted(circuit, rd, pindex, npar, overrides, meter=None):
    """A lifted-part reading and its sensitivity (only to the part's own value)."""
    p = circuit.part(rd.part)
    g = np.zeros(npar)
    if p.kind in SEMICONDUCTORS or rd.quantity == "diode-test":
        return lifted_junction_sens(p, overrides.get(p.ref), meter, rd.quantity, pindex, npar)
    v = lifted_value(p, overrides.get(p.ref))
    if np.isfinite(v) and v > 0 and p.kind != "inductor" and p.ref in pindex:
        g[pindex[p.ref]] = v
    return v, g
