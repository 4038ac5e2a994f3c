"""Sensitivities of the readings on a faulted circuit, from the healthy factors.

The exact re-score of a leading hypothesis and the part-value estimate need
``d reading / d ln p_j`` for every part ``j`` of the *faulted* circuit.
Re-assembling and re-factoring the faulted network gives them (that is
:func:`.predict.predict` with overrides, the reference), but one fault is a
rank-one change ``A' = A + d u u^T`` of each analysis, so the faulted forward
and adjoint vectors of every reading follow from the healthy ones and the two
solves of the fault term (``A^{-1} u``, ``A^{-T} u``) that the hypothesis
already needed.  With the reading's own meter term ``alpha c c^T`` (a rank-one
change of its own):

    A_i^{-1} u = A^{-1} u - W_i alpha (c^T A^{-1} u) / (1 + alpha z_i)
    k_i        = u^T A_i^{-1} u
    x'_i       = x_i   - A_i^{-1} u   * f (u^T x_i),      f = d / (1 + d k_i)
    lambda'_i  = lam_i - A_i^{-T} u   * f (u^T lam_i)

(``f = 1 / k_i`` for a short: the exact limit).  The sensitivities are then
the usual ``lambda'^T (db_j - dA_j x')`` over every element
(:class:`.predict.Stamps`).  Readings this does not cover (a current through
an admittance part, whose meter shunt changes the measured part's own term;
a part whose removal isolates a section) return None: the caller re-solves.
"""

from __future__ import annotations

import numpy as np

from .predict import Stamps, _lifted
from .shorts import short_admittance
from .updates import _SING, _at, admittance_of

__all__ = ["faulted_sensitivity"]

_BLOCK = 32


def faulted_sensitivity(board, fault):
    """Sensitivities ``(n_readings, n_params)`` of the displays with one fault applied.

    Parameters
    ----------
    board : :class:`~.hypotheses.Board`
        The healthy circuit, factored, for the readings.
    fault : Fault
        One fault (``mode`` open, short or drift with its ``value``).

    Returns
    -------
    ndarray or None
        None where this path does not apply (the caller re-solves).
    """
    circuit = board.circuit
    part = circuit.part(fault.ref)
    npar = len(board.params)
    S = np.zeros((board.n, npar))
    pred = np.zeros(board.n, dtype=complex)
    for key, (g, idx) in board.groups.items():
        t = g.term(part, fault.mode)
        if t.kind not in ("y", "none"):
            return None
        rt = np.array(g.rtype)
        if not np.all(np.isin(rt, ("v", "br", "ohm", "zero", "ol"))):
            return None
        st = getattr(g, "stamps", None) or g.__dict__.get("_stamps")
        if st is None:
            st = g._stamps = Stamps(circuit, g.net, board.pindex)
        live = g.analysis != "off"
        cols = np.flatnonzero(np.isin(rt, ("v", "br", "ohm")))
        if t.kind == "y":
            if fault.mode == "drift":
                ynew = admittance_of(part, fault.value, g.analysis, g.omega)
            elif fault.mode == "short" and fault.value:
                ynew = short_admittance(t.y0, fault.value).item()   # a short of resistance r
            else:
                ynew = g.new_admittance(part, fault.mode)
            d = ynew - t.y0
            wt, mt = g.solve_term(t)
            k = _at(wt, t.a, t.b)
        for c0 in range(0, cols.size, _BLOCK):
            q = cols[c0:c0 + _BLOCK]
            W, Mu = g.W[:, q], g.Mu[:, q]
            real = not np.iscomplexobj(W)
            alpha = g.d_m[q].real if real else g.d_m[q]
            den = 1.0 + alpha * g.z[q]
            if live:
                X = g.x[:, None] - W * (alpha * g.px[q] / den)[None, :]
                Lam = Mu / den[None, :]
            else:
                X, Lam = W, Mu
            if t.kind == "y" and d != 0:
                if real:
                    d = d.real if np.iscomplexobj(d) else d
                kit = _at(Mu, t.a, t.b)
                kti = _at(W, t.a, t.b)
                Wi = wt[:, None] - W * (alpha * kit / den)[None, :]
                Mi = mt[:, None] - Mu * (alpha * kti / den)[None, :]
                ki = k - kti * alpha * kit / den
                if np.isinf(d):
                    if np.any(np.abs(ki) <= _SING * g.zscale):
                        return None
                    f = 1.0 / ki
                else:
                    one = 1.0 + d * ki
                    if np.any(np.abs(one) <= 1e-9 * (1.0 + np.abs(d * ki))):
                        return None   # a bridge: the re-solve handles the floating section
                    f = d / one
                X = X - Wi * (f * _at(X, t.a, t.b))[None, :]
                Lam = Lam - Mi * (f * _at(Lam, t.a, t.b))[None, :]
            rows = idx[q]
            if live:
                s = g.scale[q].real if real else g.scale[q]
                val = s * (_cdot(g.U[:, q], X))
                G = st.grad_block(Lam, X, npar, [-1] * q.size) * s[None, :]
            else:   # ohms (a diode test on a linear network: scaled by its test current)
                s = g.scale[q].real
                val = _cdot(g.U[:, q], X) * s
                G = -st.minus_grad_block(Lam, X, npar) * s[None, :]
            pred[rows] = val
            ac = g.analysis == "ac"
            if ac:
                mag = np.abs(val)
                with np.errstate(divide="ignore", invalid="ignore"):
                    S[rows] = np.where(mag[:, None] > 0, (np.conj(val)[:, None] * G.T).real / mag[:, None], 0.0)
            else:
                S[rows] = G.T.real
    overrides = {fault.ref: fault.value if fault.mode == "drift" else fault.mode}
    for i in board.lifted:
        _, S[i] = _lifted(circuit, board.readings[i], board.pindex, npar, overrides)
    j = board.pindex.get(fault.ref, -1)
    if j >= 0:
        S[:, j] = 0.0
    return S


def _cdot(U, X):
    return np.einsum("ij,ij->j", U, X)
