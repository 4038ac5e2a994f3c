"""What a meter would display on a circuit, and how that depends on every part.

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
network that are not connected give ``inf`` (the meter shows OL).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..model import Circuit, MeterProfile, Reading
from .factor import Factorization
from .mna import BRANCH, INJECTION, Network, assemble

__all__ = ["Prediction", "parameters", "predict", "analysis_key"]


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
    """

    value: np.ndarray
    phasor: np.ndarray
    sensitivity: np.ndarray
    params: tuple


def parameters(circuit: Circuit) -> tuple[str, ...]:
    """Refs of the parts whose value is a parameter (every part but op-amps)."""
    return tuple(p.ref for p in circuit.parts if p.value is not None and p.kind != "opamp")


def analysis_key(circuit: Circuit, reading: Reading):
    """The network a reading is taken on: ("dc", None), ("ac", f), ("off", None) or ("lifted", None)."""
    if reading.quantity == "resistance":
        return ("lifted", None) if reading.setup == "lifted" else ("off", None)
    if reading.mode == "ac":
        f = reading.frequency if reading.frequency is not None else circuit.frequency
        return ("ac", float(f))
    return ("dc", None)


def _dstamps(circuit: Circuit, net: Network, pindex: dict):
    """Derivatives of the admittances and sources w.r.t. ln(value) of their part.

    Returns ``(jy, dy, jb, db_rows)``: for admittance element k, parameter
    column ``jy[k]`` (-1 if none) and ``dy[k] = d y_k / d ln p``; and a list of
    ``(column, row, d b)`` for source terms.
    """
    parts = circuit.parts
    w = 2 * np.pi * net.frequency if net.analysis == "ac" else 0.0
    jy = np.full(len(net.y_ref), -1, dtype=np.int64)
    dy = np.zeros(len(net.y_ref), dtype=net.A.dtype)
    for k, pi in enumerate(net.y_ref):
        p = parts[pi]
        j = pindex.get(p.ref, -1)
        y = net.y_val[k]
        if p.kind in ("resistor", "fuse", "switch"):
            jy[k], dy[k] = j, -y
        elif p.kind == "capacitor":
            jy[k], dy[k] = j, y
        elif p.kind == "inductor" and net.analysis == "ac":
            jy[k], dy[k] = j, -y * y * 1j * w * p.value
    src = []
    for k, pi in enumerate(net.br_ref):
        e = net.br_e[k]
        if e != 0:
            src.append((pindex[parts[pi].ref], net.n + k, e))
    for k, pi in enumerate(net.inj_ref):
        i = net.inj_i[k]
        if i != 0:
            j = pindex[parts[pi].ref]
            if net.inj_a[k] >= 0:
                src.append((j, net.inj_a[k], i))
            if net.inj_b[k] >= 0:
                src.append((j, net.inj_b[k], -i))
    return jy, dy, src


def _pair(vec, a, b):
    va = np.where(a >= 0, vec[np.maximum(a, 0)], 0.0)
    vb = np.where(b >= 0, vec[np.maximum(b, 0)], 0.0)
    return va - vb


class _Group:
    """One analysis of one circuit: network, factors, solution, stamp derivatives."""

    def __init__(self, circuit, key, pindex, overrides=None):
        analysis, f = key
        self.net = assemble(circuit, analysis, f, overrides)
        self.lu = Factorization(self.net.A)
        self.x = self.lu.solve(self.net.b) if analysis != "off" else None
        self.jy, self.dy, self.src = _dstamps(circuit, self.net, pindex)

    def grad(self, lam, x, n_params, skip=-1):
        """``lambda^T (db_j - dA_j x)`` for every parameter j (skipping element ``skip``)."""
        net = self.net
        g = np.zeros(n_params, dtype=np.result_type(lam, x))
        term = -self.dy * _pair(lam, net.y_a, net.y_b) * _pair(x, net.y_a, net.y_b)
        ok = self.jy >= 0
        if skip >= 0:
            ok = ok.copy(); ok[skip] = False
        np.add.at(g, self.jy[ok], term[ok])
        for j, row, d in self.src:
            g[j] += lam[row] * d
        return g


def predict(circuit: Circuit, readings, meters: dict, overrides: dict | None = None) -> Prediction:
    """Predict the meter displays of ``readings`` on a healthy ``circuit``.

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
    sens = np.zeros((nr, npar), dtype=complex)
    groups: dict = {}
    for i, rd in enumerate(readings):
        meter: MeterProfile = meters.get(rd.meter or "default")
        if meter is None:
            raise ValueError(f"reading {i}: meter profile {rd.meter!r} is not defined")
        key = analysis_key(circuit, rd)
        if key[0] == "lifted":
            value[i], sens[i] = _lifted(circuit, rd, pindex, npar, overrides or {})
            continue
        if key not in groups:
            groups[key] = _Group(circuit, key, pindex, overrides)
        grp = groups[key]
        if key[0] == "off":
            value[i], sens[i] = _ohms(circuit, grp, rd, npar)
        else:
            value[i], sens[i] = _live(circuit, grp, rd, meter, npar, pindex)
    mag = np.where(np.isfinite(value), value, np.inf)
    out_val = np.empty(nr)
    out_sens = np.zeros((nr, npar))
    for i, rd in enumerate(readings):
        v = mag[i]
        if not np.isfinite(v):
            out_val[i] = np.inf
            continue
        if rd.quantity != "resistance" and rd.mode == "ac":
            out_val[i] = abs(v)
            out_sens[i] = (np.conj(v) * sens[i]).real / abs(v) if abs(v) > 0 else 0.0
        else:
            out_val[i] = v.real
            out_sens[i] = sens[i].real
    return Prediction(out_val, value, out_sens, params)


def _live(circuit, grp, rd, meter, npar, pindex):
    net, lu, x = grp.net, grp.lu, grp.x
    N = net.size
    skip = -1
    self_term = None
    if rd.quantity == "voltage":
        u = net.node_vector(rd.plus, rd.minus)
        alpha, s = 1.0 / meter.input_resistance, 1.0
    else:
        elem = net.element.get(rd.part)
        if elem is None:  # open in this analysis: no current flows
            return 0.0, np.zeros(npar)
        kind, k = elem
        if kind == INJECTION:
            g = np.zeros(npar, dtype=complex)
            j = pindex[rd.part]
            g[j] = net.inj_i[k]
            return net.inj_i[k], g
        u = np.zeros(N, dtype=net.A.dtype)
        rs = meter.current_shunt
        if kind == BRANCH:
            u[net.n + k] = 1.0
            alpha = -rs
            s = -1.0 if circuit.part(rd.part).kind == "voltage-source" else 1.0
        else:  # ADMITTANCE
            a, b = net.y_a[k], net.y_b[k]
            if a >= 0:
                u[a] += 1.0
            if b >= 0:
                u[b] -= 1.0
            y = net.y_val[k]
            y2 = y / (1.0 + y * rs)
            alpha, s = y2 - y, y2
            skip = k
            self_term = (grp.jy[k], grp.dy[k] / (1.0 + y * rs) ** 2, y2)
    w = lu.solve(u)
    mu = lu.solve_adjoint(u)
    z = u @ w
    ux = u @ x
    den = 1.0 + alpha * z
    x_l = x - w * (alpha * ux / den)
    lam = mu / den
    r = s * ux / den
    g = s * grp.grad(lam, x_l, npar, skip)
    if self_term is not None and self_term[0] >= 0:
        j, dy2, y2 = self_term
        v_l = ux / den
        z_l = z / den
        g[j] += dy2 * v_l * (1.0 - y2 * z_l)
    return r, g


def _ohms(circuit, grp, rd, npar):
    net, lu = grp.net, grp.lu
    if rd.part is not None:
        plus, minus = circuit.part(rd.part).nodes[:2]
    else:
        plus, minus = rd.plus, rd.minus
    if plus == minus:
        return 0.0, np.zeros(npar)
    if not net.connected(plus, minus):
        return np.inf, np.zeros(npar)
    u = net.node_vector(plus, minus)
    w = lu.solve(u)
    mu = lu.solve_adjoint(u)
    r = u @ w
    g = -_minus_grad(grp, mu, w, npar)
    return r, g


def _minus_grad(grp, mu, w, npar):
    net = grp.net
    g = np.zeros(npar)
    term = grp.dy * _pair(mu, net.y_a, net.y_b) * _pair(w, net.y_a, net.y_b)
    ok = grp.jy >= 0
    np.add.at(g, grp.jy[ok], term[ok].real)
    return g


def lifted_value(part, fault=None) -> float:
    """What an ohmmeter reads across ``part`` alone (one leg lifted), optionally faulted.

    ``fault`` is None, "open", "short" or a drifted value.
    """
    if fault == "open":
        return np.inf
    if fault == "short":
        return 0.0
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


def _lifted(circuit, rd, pindex, npar, overrides):
    """A lifted-part reading and its sensitivity (only to the part's own value)."""
    p = circuit.part(rd.part)
    g = np.zeros(npar)
    v = lifted_value(p, overrides.get(p.ref))
    if np.isfinite(v) and v > 0 and p.kind != "inductor" and p.ref in pindex:
        g[pindex[p.ref]] = v
    return v, g
