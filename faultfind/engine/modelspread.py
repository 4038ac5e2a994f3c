"""Part-to-part spread of the semiconductor model keys that carry no tolerance.

A transistor has no value (formats.md section 4: ``gain`` and ``vbe``, no
tolerance) and a zener's ``forward_voltage`` is not a parameter, yet real
parts of one type differ.  This module names the spread carried for each
such key (:data:`MODEL_SPREAD`) and computes its effect on the displays by
exact re-solves of the healthy board from its operating point: the tolerance
bands (engine/spread.py) move each key over its spread like a junction's
value; the evidence (engine/evidence.py) takes the one-sigma effects as
extra covariance columns (:func:`model_spread_columns`).  These keys are no
fault-hypothesis parameters.  A linear board has none: nothing here runs.
"""

from __future__ import annotations

import copy
from dataclasses import replace

import numpy as np

from ..errors import SolveError
from .bands import log_tolerance
from .junctions import critical_voltage, device, law
from .linpredict import analysis_key
from .semis import LOAD_EXACT
from .nonlinear import Solution
from .offnet import diode_test_adjoint
from .predict import predict

__all__ = ["MODEL_SPREAD", "model_parameters", "model_spread_columns"]

#: Part-to-part spread of the semiconductor model keys no file tolerance
#: covers, as (below, above) relative limits, rectangular on the log scale
#: like a part's tolerance (docs/junction-models.md, "Model spread"):
#:
#: * ``vbe`` +/-8 % (about +/-50 mV at 0.65 V): small-signal silicon
#:   transistors of one type differ by tens of mV in base-emitter voltage at
#:   1 mA (from memory);
#: * ``gain`` -50 %/+100 %: datasheets give hFE as a min..max range of a
#:   factor 2 to 3 within one type, e.g. 100..300 (from memory);
#: * a zener's ``forward_voltage`` +/-10 %, as a diode's forward voltage
#:   (common practice (no source)).
MODEL_SPREAD = {
    ("npn", "vbe"): (0.08, 0.08), ("pnp", "vbe"): (0.08, 0.08),
    ("npn", "gain"): (0.5, 1.0), ("pnp", "gain"): (0.5, 1.0),
    ("zener", "forward_voltage"): (0.10, 0.10),
}


def model_parameters(circuit):
    """The model keys spread on ``circuit``: list of ``(ref, key, below, above)``.

    Empty on a circuit without semiconductors (a linear board is unchanged).
    """
    if not circuit.is_nonlinear:
        return []
    out = []
    for p in circuit.parts:
        for (kind, key), (lo, hi) in MODEL_SPREAD.items():
            if p.kind == kind:
                out.append((p.ref, key, lo, hi))
    return out


def _with_part(part, key, factor):
    """``part`` with its model ``key`` multiplied by ``factor``."""
    return replace(part, **{key: part.junction(key) * float(factor)})


def _with_key(circuit, ref, key, factor):
    """``circuit`` with part ``ref``'s model ``key`` multiplied by ``factor``."""
    parts = tuple(_with_part(p, key, factor) if p.ref == ref else p for p in circuit.parts)
    return replace(circuit, parts=parts)


def _ol_top(readings, meters, P, idx):
    """A diode test driven over the display's top reads OL: put the top there."""
    for i in idx:
        rd = readings[i]
        if rd.quantity == "diode-test":
            m = meters[rd.meter or "default"]
            top = min(m.diode_test_max, m.diode_test_voltage)
            P[:, i] = np.where(np.isinf(P[:, i]), top, P[:, i])
    return P


def _model_resolved(circuit, readings, meters, ref, key, factors, y0, warm, off_warm=None):
    """Displays with model ``key`` of ``ref`` at each factor (exact re-solves; values
    only, power-off readings warm-started from ``off_warm``)."""
    P = np.tile(np.asarray(y0, dtype=float), (len(factors), 1))
    for k, f in enumerate(factors):
        try:
            P[k] = predict(_with_key(circuit, ref, key, f), readings, meters, warm=warm,
                           off_warm=off_warm, sens=False).value
        except SolveError:
            P[k] = np.nan
    return _ol_top(readings, meters, P, range(len(readings)))


#: A display whose linearised model-spread effect (:func:`_linearised`) is below this
#: share of its meter's finest step is taken from the linearisation, without a
#: re-solve: its column entry is then far below anything the meter or the covariance
#: can tell (a transistor's vbe seen through a reversed junction elsewhere on the board).
SCREEN_SHARE = 1e-3


def _element_change(sysm, ref, parts):
    """``(out rows, weighted current changes)`` of part ``ref``'s elements in ``sysm`` at
    its element voltages ``v`` when the part becomes ``parts[0]`` instead of
    ``parts[1]``: the change ``dF`` of the network equations at a fixed solution."""
    ks = np.flatnonzero(np.asarray(sysm.refs) == ref)
    if not ks.size:
        return ks, None
    terms = []
    for p in parts:
        els = device(p).elements
        if len(els) != ks.size:
            return ks, None
        w = np.zeros((ks.size, 3))
        for r, el in enumerate(els):
            for t, (_, wt) in enumerate(el.out):
                w[r, t] = wt
        terms.append((w, np.array([el.log_is for el in els])))
    return ks, terms


def _linearised(sysm, v, lam, ref, parts):
    """``-lambda^T dF / 2`` (the linearised central difference) for adjoints ``lam``
    (size, k) of readings on ``sysm`` at element voltages ``v``; None when the part's
    elements do not match."""
    ks, terms = _element_change(sysm, ref, parts)
    if terms is None:
        return None
    out = sysm.out[ks]
    dF = np.zeros((ks.size, 3))
    for sgn, (w, log_is) in zip((1.0, -1.0), terms):
        i, _ = law(v[ks], log_is, sysm.nvt[ks])
        dF += sgn * w * i[:, None]
    dF = np.where(out >= 0, dF, 0.0)
    lam = np.asarray(lam)
    picked = np.where((out >= 0)[:, :, None], lam[np.maximum(out, 0)], 0.0)   # (ks, 3, k)
    return -0.5 * np.einsum("et,etk->k", dF, picked)


def _screen(circuit, readings, meters, mp, factors, share, off_ops):
    """Per model key, the readings whose displays need exact re-solves (a boolean
    (keys, n) array) and the linearised column entries of the others.

    Screened: DC voltage readings (on the healthy linearisation ``share[("dc",
    None)]``) and diode tests (each at its healthy solution, ``off_ops``) whose
    linearised effect is below :data:`SCREEN_SHARE` of the meter's voltage step; every
    other reading is re-solved."""
    n, k = len(readings), len(mp)
    need = np.ones((k, n), dtype=bool)
    lin = np.zeros((k, n))
    by_ref = {p.ref: p for p in circuit.parts}
    variants = [[_with_part(by_ref[ref], key, f) for f in fs]
                for (ref, key, _, _), fs in zip(mp, factors)]
    thr = np.array([SCREEN_SHARE * meters[rd.meter or "default"].voltage_resolution
                    for rd in readings])
    dc = (share or {}).get(("dc", None))
    live = [i for i, rd in enumerate(readings)
            if rd.quantity == "voltage" and analysis_key(circuit, rd) == ("dc", None)]
    if dc is not None and dc.circuit is circuit and live:
        U = np.column_stack([dc.net.node_vector(readings[i].plus, readings[i].minus)
                             for i in live])
        Lam = dc.lu.solve_adjoint(U)
        for j, (ref, _, _, _) in enumerate(mp):
            d = _linearised(dc.sys, dc.op.v, Lam, ref, variants[j])
            if d is not None:
                lin[j, live] = d
                need[j, live] = ~(np.abs(d) < thr[live])
    for i, rd in enumerate(readings):
        if rd.quantity != "diode-test" or rd.setup == "lifted" or off_ops is None:
            continue
        plus, minus = circuit.part(rd.part).nodes[:2] if rd.part is not None else (rd.plus, rd.minus)
        op = off_ops.get((plus, minus, rd.quantity))
        if op is None:
            continue
        got = diode_test_adjoint(circuit, plus, minus, meters[rd.meter or "default"], op)
        if got is None:
            continue
        sysm, lam = got
        for j, (ref, _, _, _) in enumerate(mp):
            d = _linearised(sysm, op.v, lam[:, None], ref, variants[j])
            if d is not None:
                lin[j, i] = d[0]
                need[j, i] = not abs(d[0]) < thr[i]
    return need, lin


#: Operating points of model variants by (board, part as varied): where the next
#: diagnosis of the same circuit object starts them (one Newton iteration).
_SOLVED: dict = {}


def _dc_voltages(dc, ref, parts, readings, idx, meters):
    """DC voltage displays ``idx`` with part ``ref`` replaced by each of ``parts`` (its
    model key moved), by Newton on a copy of the healthy system ``dc.sys`` whose elements
    of that part take the new law (the same structure: nothing else is built), from the
    healthy operating point; the voltmeter's loading as :func:`.linpredict._live_block`
    does it.  Rows of NaN where Newton fails; None when the part's elements do not
    match or a meter loads a node heavily (:data:`.semis.LOAD_EXACT`: the caller
    re-solves those with the meter in place)."""
    base = dc.sys
    ks, terms = _element_change(base, ref, parts)
    if terms is None:
        return None
    net = dc.net
    U = np.zeros((base.size, len(idx)))
    at = net.node_index
    for q, i in enumerate(idx):
        a, b = at[readings[i].plus], at[readings[i].minus]
        if a >= 0:
            U[a, q] += 1.0
        if b >= 0:
            U[b, q] -= 1.0
    g_in = np.array([1.0 / meters[readings[i].meter or "default"].input_resistance for i in idx])
    out = np.full((len(parts), len(idx)), np.nan)
    for r, (w, log_is) in enumerate(terms):
        var = copy.copy(base)
        var.log_is = base.log_is.copy()
        var.log_is[ks] = log_is
        var.w = base.w.copy()
        var.w[ks] = np.where(base.out[ks] >= 0, w, 0.0)
        var._ew = np.repeat(var.w, 2, axis=1)
        var.vcrit = base.vcrit.copy()
        var.vcrit[ks] = critical_voltage(log_is + base.voff[ks] / base.nvt[ks], base.nvt[ks])
        var._Jw = None
        var._last_lu = None
        skey = (id(dc.circuit), ref, repr(parts[r]))
        hit = _SOLVED.get(skey)
        warm = hit[1] if hit is not None and hit[0] is dc.circuit else dc.op
        try:
            op = var.solve(warm)
        except SolveError:
            continue
        if len(_SOLVED) >= 1024:
            _SOLVED.clear()
        _SOLVED[skey] = (dc.circuit, Solution(op.voltages()))
        _, lu = var.factors(op)
        W = lu.solve(U)
        z = np.einsum("ij,ij->j", U, W)
        if np.any(np.abs(z * g_in) > LOAD_EXACT):
            return None
        out[r] = (U.T @ op.x) / (1.0 + g_in * z)
    return out


def model_spread_columns(circuit, readings, meters, pred=None, share=None, off_ops=None):
    """One-sigma effects of the model spread on the displays.

    Each column is ``(y(c + s) - y(c - s)) / 2`` for one entry of
    :func:`model_parameters`, with ``c`` and ``s`` the centre and standard
    deviation of its log-value (rectangular over :data:`MODEL_SPREAD`), by
    exact re-solves from the nominal operating point; 0 where a display is
    OL or a re-solve fails.  Given the healthy prediction's ``share`` and its
    power-off solutions ``off_ops`` (``predict(..., share=, off_warm=)``), a
    DC voltage reading or a diode test whose linearised effect (the change of
    the key's element currents at the healthy solution, through the
    linearised network's adjoint) is below :data:`SCREEN_SHARE` of the
    meter's voltage step takes that effect instead of re-solves; a key none
    of whose readings needs one is not re-solved at all.

    Parameters
    ----------
    circuit : Circuit
    readings : list of Reading
    meters : dict
        Meter profiles with "default".
    pred : Prediction, optional
        The healthy prediction (computed when omitted).
    share : dict, optional
        The healthy prediction's factored networks (``predict(..., share=)``).
    off_ops : dict, optional
        The healthy prediction's power-off solutions (``predict(..., off_warm=)``);
        the re-solves of power-off readings start from them.

    Returns
    -------
    ndarray, shape (n, k)
        ``k = len(model_parameters(circuit))`` (0 on a linear board).
    """
    readings = list(readings)
    mp = model_parameters(circuit)
    if not mp or not readings:
        return np.zeros((len(readings), 0))
    if pred is None:
        pred = predict(circuit, readings, meters)
    y0 = np.asarray(pred.value, dtype=float)
    yf = np.where(np.isfinite(y0), y0, 0.0)
    cols = np.zeros((len(readings), len(mp)))
    factors = []
    for ref, key, lo, hi in mp:
        c, h = log_tolerance(lo, hi)
        s = float(h) / np.sqrt(3.0)
        factors.append(np.exp([float(c) + s, float(c) - s]))
    need, lin = _screen(circuit, readings, meters, mp, factors, share, off_ops)
    # power-off readings start from the healthy solution (or the first re-solve's) of
    # the same reading
    off_warm = dict(off_ops or {})
    dc = (share or {}).get(("dc", None))
    if dc is not None and dc.circuit is not circuit:
        dc = None
    volt = np.array([rd.quantity == "voltage" and analysis_key(circuit, rd) == ("dc", None)
                     for rd in readings], dtype=bool)
    by_ref = {p.ref: p for p in circuit.parts}
    for j, (ref, key, lo, hi) in enumerate(mp):
        d = lin[j].copy()
        idx = np.flatnonzero(need[j])
        fast = idx[volt[idx]] if dc is not None else idx[:0]
        if fast.size:
            # DC voltages by Newton on the healthy system with the key's law changed
            Pf = _dc_voltages(dc, ref, [_with_part(by_ref[ref], key, f) for f in factors[j]],
                              readings, fast, meters)
            if Pf is not None:
                d[fast] = (Pf[0] - Pf[1]) / 2.0
                idx = idx[~volt[idx]]
        if idx.size:
            P = _model_resolved(circuit, [readings[i] for i in idx], meters, ref, key, factors[j],
                                yf[idx], pred.operating_point, off_warm)
            d[idx] = (P[0] - P[1]) / 2.0
        cols[:, j] = np.where(np.isfinite(d) & np.isfinite(y0), d, 0.0)
    return cols


