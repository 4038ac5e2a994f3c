"""A cheap upper bound on how well any fault of a part can explain the readings.

On a large circuit most parts cannot explain the readings whatever their
fault: screening them out before their exact evaluation is what keeps the
diagnosis of a 100,000-part network within a few seconds.

Any change of one two-terminal part's admittance (open, short, any drift) is
a rank-one change of the network (:mod:`.updates`): in an analysis, every
reading moves along one fixed direction,

    r_i(d) = r_i + s(d) * dir_i,        dir_i = sc_i * (c_i^T A^{-1} u_t) / (1 + alpha_i z_i)

with one scalar ``s(d) = -d (u_t^T x) / (1 + d u_t^T A^{-1} u_t)`` shared by
all readings of the analysis (``alpha_i``, ``z_i``, ``sc_i``: the reading's
own meter term and scale; for in-circuit ohms ``dir_i = (c_i^T A^{-1}
u_t)^2``-like products and ``s = -d / (1 + d k)``).  The directions need only
the adjoint solves the diagnosis does anyway -- no per-part solve.  The best
any fault of the part can do is the least-squares fit of those scalars, one
per analysis, to the residuals of the healthy prediction under the healthy
covariance ``C0`` (whitened by its Cholesky factor):

    Delta_t = b^T H^+ b,   b = K_t^T C0^{-1} r0,   H = K_t^T C0^{-1} K_t

so that ``log L(fault of t) <= log L(healthy) + Delta_t / 2`` plus the
log-determinant change from fixing the part's own tolerance (exact, by
Sherman-Morrison).  The bound is exact for the linear-Gaussian model; it
assumes the fault leaves the tolerance spread of the readings at its healthy
size (a fault that scales a reading also scales its spread in the full
score), which the screening margin covers and the tests check by comparing
screened and unscreened rankings.

Readings outside the whitened block (``OL`` displays, predictions undefined
in the healthy circuit) add their whole healthy penalty to every part's
bound: they can never prune a part wrongly.
"""

from __future__ import annotations

import numpy as np

from .mna import ADMITTANCE

__all__ = ["LineBounds", "line_bounds", "line_directions"]

_SCREENABLE = ("resistor", "fuse", "switch", "capacitor", "inductor")


class LineBounds:
    """Upper bounds on each part's best log-likelihood gain over the healthy circuit.

    Attributes
    ----------
    refs : list of str
        Parts with a bound.
    gain : ndarray
        ``Delta_t / 2`` plus the log-determinant term: an upper bound of
        ``log L(any fault of t) - log L(healthy)`` under the healthy covariance.
    must : list of str
        Parts that cannot be bounded this way (sources, ideal windings, parts
        read by a lifted or a current reading): always evaluated exactly.
    """

    def __init__(self, refs, gain, must):
        self.refs = refs
        self.gain = gain
        self.must = must


def line_directions(board, parts, keep=None):
    """Each part's direction of change of the readings, per analysis.

    Parameters
    ----------
    board : :class:`~.hypotheses.Board`
    parts : list of Part
        Two-terminal parts stamped as admittances (or absent) in every analysis.
    keep : ndarray of bool, optional
        Readings to include (default all).

    Returns
    -------
    list of (ndarray (T, k), ndarray (k,))
        Per analysis: the directions (rows: parts) over its readings, and
        those readings' indices in ``board.readings``.
    """
    out = []
    T = len(parts)
    for key, (g, idx) in board.groups.items():
        net = g.net
        a = np.array([net.node_index[p.nodes[0]] for p in parts], dtype=np.int64)
        b = np.array([net.node_index[p.nodes[1]] for p in parts], dtype=np.int64)
        inblk = np.ones(idx.size, dtype=bool) if keep is None else keep[idx]
        if not inblk.any() or T == 0:
            continue
        sel = np.flatnonzero(inblk)
        Mu = np.ascontiguousarray(g.Mu[:, sel].real)
        ext = np.vstack([Mu, np.zeros((1, sel.size))])
        kit = ext[np.where(a >= 0, a, Mu.shape[0])] - ext[np.where(b >= 0, b, Mu.shape[0])]
        rt = np.array(g.rtype)[sel]
        if g.analysis == "off":
            W = np.ascontiguousarray(g.W[:, sel].real)
            extw = np.vstack([W, np.zeros((1, sel.size))])
            kti = extw[np.where(a >= 0, a, W.shape[0])] - extw[np.where(b >= 0, b, W.shape[0])]
            dirs = kit * kti
        else:
            dm = g.d_m[sel].real
            sc = g.scale[sel].real + np.where(rt == "ya", dm, 0.0)
            dirs = kit * (sc / (1.0 + dm * g.z[sel].real))[None, :]
        dirs = np.where(np.isin(rt, ("v", "br", "ya", "ohm"))[None, :], dirs, 0.0)
        out.append((dirs, idx[sel]))
    return out


def line_bounds(board, evidence, healthy_pred):
    """Bounds for every screenable part of ``board`` (a :class:`~.hypotheses.Board`).

    Returns
    -------
    LineBounds or None
        None when the readings cannot be screened (AC readings, op-amps, no
        numeric reading block): evaluate every part.
    """
    circuit = board.circuit
    if any(g.analysis == "ac" for g, _ in board.groups.values()):
        return None
    if any(p.kind == "opamp" for p in circuit.parts):
        return None
    ev = evidence
    blk = ev._block()
    if blk is None:
        return None
    idx_blk = blk[0]
    pos = np.full(board.n, -1, dtype=np.int64)
    pos[idx_blk] = np.arange(idx_blk.size)
    must = set()
    for i in board.lifted:
        must.add(board.readings[i].part)
    for rd in board.readings:
        if rd.quantity == "current" and rd.part is not None:
            must.add(rd.part)
    refs = []
    for p in circuit.parts:
        if not p.fault_modes:
            continue
        if p.kind not in _SCREENABLE or p.ref in must:
            must.add(p.ref)
            continue
        ok = True
        for key, (g, _) in board.groups.items():
            el = g.net.element.get(p.ref)
            if el is not None and el[0] != ADMITTANCE:
                ok = False
                break
        if not ok:
            must.add(p.ref)
            continue
        refs.append(p)
    T = len(refs)
    nb = idx_blk.size
    r0 = np.where(np.isfinite(ev.y[idx_blk]), ev.y[idx_blk] - healthy_pred[idx_blk], 0.0)
    ev.whiten(np.zeros((nb, 0)))
    Li = ev._Linv
    rw = Li @ r0
    cols = [dirs @ Li.T[pos[rows], :]                    # whitened: (T, nb)
            for dirs, rows in line_directions(board, refs, keep=pos >= 0)]
    G = len(cols)
    if G == 0:
        gain = np.zeros(T)
    elif G == 1:
        K = cols[0]
        h = np.einsum("ij,ij->i", K, K)
        bvec = K @ rw
        with np.errstate(divide="ignore", invalid="ignore"):
            gain = np.where(h > 0, bvec ** 2 / np.where(h > 0, h, 1.0), 0.0) / 2.0
    else:
        K = np.stack(cols, axis=1)                       # (T, G, nb)
        H = np.einsum("tgn,thn->tgh", K, K)
        bvec = np.einsum("tgn,n->tg", K, rw)
        H = H + np.eye(G)[None] * (1e-12 * np.maximum(np.einsum("tgg->t", H), 1e-300))[:, None, None]
        sol = np.linalg.solve(H, bvec[..., None])[..., 0]
        gain = np.einsum("tg,tg->t", bvec, sol) / 2.0
    # fixing the part's own tolerance shrinks the covariance: log-determinant gain
    if T:
        js = np.array([board.pindex.get(p.ref, -1) for p in refs])
        have = js >= 0
        Sb = ev.S0[idx_blk][:, np.maximum(js, 0)] * ev._sc0()[:, None]
        if not have.all():
            Sb[:, ~have] = 0.0
        Wc = Li @ Sb
        den = 1.0 - np.where(have, ev.var_p[np.maximum(js, 0)], 0.0) * (Wc * Wc).sum(axis=0)
        gain = gain - 0.5 * np.log(np.clip(den, 1e-300, 1.0))
    # readings outside the block: their whole healthy penalty
    rest = np.ones(board.n, dtype=bool)
    rest[idx_blk] = False
    if rest.any():
        var = np.clip(np.diag(ev.T0), 0, None) + ev.u ** 2
        pen = ev._chi2_terms(healthy_pred[None, :], var)[0][rest]
        gain = gain + 0.5 * float(np.sum(np.where(np.isfinite(pen), pen, 0.0)))
    return LineBounds([p.ref for p in refs], np.asarray(gain, dtype=float), sorted(must))
