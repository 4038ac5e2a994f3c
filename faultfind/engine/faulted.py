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
    # filled as its transpose (parameters x readings): each block's gradients
    # (parameters x block) go in without a transposing copy, and the products
    # over every part (the exact score's Gram matrix, the estimate) read
    # column blocks of S, contiguous in this layout
    ST = np.zeros((npar, board.n))
    S = ST.T
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
            q = _span(cols[c0:c0 + _BLOCK])
            W, Mu = g.W[:, q], g.Mu[:, q]      # views when the readings are consecutive
            real = not np.iscomplexobj(W)
            alpha = g.d_m[q].real if real else g.d_m[q]
            den = 1.0 + alpha * g.z[q]
            # X = base + W cw - wt c3 and Lam = Mu cm - mt h (the formulas of the
            # module docstring with the meter and fault terms multiplied out:
            # the columns are combinations of W, Mu and the fault term's two
            # solves, formed in one pass each)
            if live:
                c1 = alpha * g.px[q] / den
                cw, cm = -c1, 1.0 / den
            else:
                c1 = 0.0
                cw, cm = np.ones(den.shape, dtype=den.dtype), np.ones(den.shape, dtype=den.dtype)
            c3 = h = None
            if t.kind == "y" and d != 0:
                if real:
                    d = d.real if np.iscomplexobj(d) else d
                kit = _at(Mu, t.a, t.b)
                kti = _at(W, t.a, t.b)
                c2 = alpha * kit / den        # Wi = wt - W c2
                b2 = alpha * kti / den        # Mi = mt - Mu b2
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
                # the fault term's rows of the meter-loaded vectors
                xt = (_at(g.x, t.a, t.b) - kti * c1) if live else kti
                lt = kit * cm
                c3 = f * xt                   # X = X0 - Wi c3
                h = f * lt                    # Lam = Lam0 - Mi h
                cw = cw + c2 * c3
                cm = cm + b2 * h
            X = W * cw[None, :]
            if c3 is not None:
                X = _less(X, wt[:, None] * c3[None, :])
            if live:
                X = _less(X, -g.x[:, None])
            rows = idx[q]
            # the gradients are linear in the adjoint vectors: each reading's
            # scale goes on its adjoint column (nodes) rather than on its
            # gradient column (parameters)
            if live:
                s = g.scale[q].real if real else g.scale[q]
            else:   # ohms (a diode test on a linear network: scaled by its test current)
                s = -g.scale[q].real
            Lam = Mu * (cm * s)[None, :]
            if h is not None:
                Lam = _less(Lam, mt[:, None] * (h * s)[None, :])
            ac = g.analysis == "ac"
            if live:
                val = s * (_cdot(g.U[:, q], X))
                span = _span(rows)
                if not ac and isinstance(span, slice) and np.result_type(Lam, X, st.dy) == ST.dtype:
                    # straight into S's columns of these readings (a view)
                    st.grad_block(Lam, X, npar, [-1] * X.shape[1], out=ST[:, span])
                    pred[rows] = val
                    continue
                G = st.grad_block(Lam, X, npar, [-1] * X.shape[1])
            else:
                val = -(_cdot(g.U[:, q], X) * s)
                G = st.minus_grad_block(Lam, X, npar)
            pred[rows] = val
            if ac:
                mag = np.abs(val)
                with np.errstate(divide="ignore", invalid="ignore"):
                    ST[:, _span(rows)] = np.where(mag[None, :] > 0, (np.conj(val)[None, :] * G).real / mag[None, :], 0.0)
            else:
                ST[:, _span(rows)] = G.real
    overrides = {fault.ref: fault.value if fault.mode == "drift" else fault.mode}
    for i in board.lifted:
        _, S[i] = _lifted(circuit, board.readings[i], board.pindex, npar, overrides)
    j = board.pindex.get(fault.ref, -1)
    if j >= 0:
        S[:, j] = 0.0
    return S


def _less(a, b):
    """``a - b``, into ``a`` (a fresh array) when its type holds the result."""
    if np.result_type(a, b) == a.dtype:
        a -= b
        return a
    return a - b


def _span(rows):
    """``rows`` as a slice when they are consecutive (a slice assignment is
    several times faster than a fancy-indexed one), else as they are."""
    if rows.size and rows[-1] - rows[0] == rows.size - 1 and np.all(np.diff(rows) == 1):
        return slice(int(rows[0]), int(rows[-1]) + 1)
    return rows


def _cdot(U, X):
    return np.einsum("ij,ij->j", U, X)
