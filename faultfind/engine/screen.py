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
score); the fits that shrink it are handled below, the screening margin
covers the rest, and the tests check by comparing screened and unscreened
rankings.

Readings outside the whitened block (``OL`` displays, predictions undefined
in the healthy circuit) add their whole healthy penalty to every part's
bound: they can never prune a part wrongly.  A part whose best fit moves the
tolerance-dominated readings far from their healthy size (a feed fuse open
takes every reading, and its spread, to zero) is not bounded this way -- the
spread it removes is a gain the healthy covariance leaves out -- so that
gain, worked out at the best fit, is added to its bound (capped by the
universal bound: no residual at all and only the meters' own variance).
"""

from __future__ import annotations

import numpy as np

from .mna import ADMITTANCE
from .updates import _rows

__all__ = ["LineBounds", "line_bounds", "line_directions", "board_bounds"]

_SCREENABLE = ("resistor", "fuse", "switch", "capacitor", "inductor")
#: Best fits that rescale a tolerance-dominated reading's variance by more than
#: this (relative) get the spread they remove added to their bound (as
#: evidence.SCALE_OK).
_RESCALE = 0.1


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
        Mu = g.Mu[:, sel].real
        kit = _rows(Mu, a) - _rows(Mu, b)
        rt = np.array(g.rtype)[sel]
        if g.analysis == "off":
            W = g.W[:, sel].real
            dirs = kit * (_rows(W, a) - _rows(W, b))
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
    nonadm = set()
    for g, _ in board.groups.values():
        nonadm.update(ref for ref, (kind, _) in g.net.element.items() if kind != ADMITTANCE)
    refs = []
    for p in circuit.fault_parts:
        if p.kind not in _SCREENABLE or p.ref in must or p.ref in nonadm:
            must.add(p.ref)
        else:
            refs.append(p)
    T = len(refs)
    nb = idx_blk.size
    r0 = np.where(np.isfinite(ev.y[idx_blk]), ev.y[idx_blk] - healthy_pred[idx_blk], 0.0)
    Li = ev.whitener()
    rw = Li @ r0
    # Each part's direction is its sensitivity column (the column is the
    # direction times the part's own current, up to the meters' loading), so
    # the directions of every part come whitened from one product over the
    # sensitivity matrix; parts with no current (a capacitor at DC, an open
    # switch) take theirs explicitly.
    js = np.array([board.pindex.get(p.ref, -1) for p in refs], dtype=np.int64)
    S0r = ev.S0 if np.array_equal(idx_blk, np.arange(board.n)) else ev.S0[idx_blk]
    m = S0r.shape[1]
    groups = []      # block positions of each analysis' readings
    for key, (g, idx) in board.groups.items():
        q = pos[idx]
        q = q[q >= 0]
        if q.size:
            groups.append(q)
    G = len(groups)
    if T == 0 or G == 0:
        gain = np.zeros(T)
        sol = np.zeros((T, G))
    else:
        Ks = []
        for q in groups:
            if q.size == nb:
                Ks.append(Li @ S0r)                      # (nb, m), whitened columns
            else:
                M = np.zeros((nb, m))
                M[q] = S0r[q]
                Ks.append(Li @ M)
        # parts with a zero column: explicit directions, whitened
        # (a column is zero where its largest and its smallest entry are: two
        # reductions, no readings x parts temporary)
        colmax = np.maximum(S0r.max(axis=0), -S0r.min(axis=0)) if G else np.zeros(m)
        jsafe = np.maximum(js, 0)
        zero = np.flatnonzero((js < 0) | (colmax[jsafe] == 0))
        Kz = None
        if zero.size:   # same analyses, same readings, same order as `groups`
            zdirs = [dirs for dirs, rows in line_directions(board, [refs[k] for k in zero], keep=pos >= 0)]
            Kz = []
            for q, dirs in zip(groups, zdirs):
                M = np.zeros((nb, zero.size))
                M[q] = dirs.T
                Kz.append(Li @ M)
        if G == 1:
            K = Ks[0]
            h_all = np.einsum("ij,ij->j", K, K)
            b_all = rw @ K
            h, bvec = h_all[jsafe], b_all[jsafe]
            if zero.size:
                h[zero] = np.einsum("ij,ij->j", Kz[0], Kz[0])
                bvec[zero] = rw @ Kz[0]
            with np.errstate(divide="ignore", invalid="ignore"):
                gain = np.where(h > 0, bvec ** 2 / np.where(h > 0, h, 1.0), 0.0) / 2.0
                sol = np.where(h > 0, bvec / np.where(h > 0, h, 1.0), 0.0)[:, None]
        else:
            H = np.empty((T, G, G))
            bvec = np.empty((T, G))
            for i_ in range(G):
                bvec[:, i_] = (rw @ Ks[i_])[jsafe]
                for k_ in range(i_, G):
                    H[:, i_, k_] = H[:, k_, i_] = np.einsum("ij,ij->j", Ks[i_], Ks[k_])[jsafe]
            if zero.size:
                for i_ in range(G):
                    bvec[zero, i_] = rw @ Kz[i_]
                    for k_ in range(i_, G):
                        H[zero, i_, k_] = H[zero, k_, i_] = np.einsum("ij,ij->j", Kz[i_], Kz[k_])
            H = H + np.eye(G)[None] * (1e-12 * np.maximum(np.einsum("tgg->t", H), 1e-300))[:, None, None]
            sol = np.linalg.solve(H, bvec[..., None])[..., 0]
            gain = np.einsum("tg,tg->t", bvec, sol) / 2.0
    # A part whose best fit moves the readings far from their healthy size
    # (a feed fuse open: every reading to zero) also takes their tolerance
    # spread with it, a gain the healthy covariance leaves out (added below).
    if G and T:
        p0 = np.abs(healthy_pred[idx_blk])
        T0d = np.diag(ev.T0)[idx_blk]
        wgt = T0d / (T0d + ev.u[idx_blk] ** 2)
        hb = healthy_pred[idx_blk]
        inv = np.where(p0 > 0, wgt / np.where(p0 > 0, p0, 1.0), 0.0)
        # cheap screen: x_i = s* dir_i / healthy_i, w |(1 + x)^2 - 1| <= 2|x| + x^2 (w <= 1),
        # with max |x_i| bounded by the weighted 2-norm of the column
        nrm = np.sqrt(np.einsum("i,ij,ij->j", inv ** 2, S0r, S0r))[jsafe]
        far = np.zeros(T, dtype=bool)
        shrink = np.zeros(T)      # log-determinant gain of the spread the best fit removes
        u2 = ev.u[idx_blk] ** 2
        zpos = np.full(T, -1)
        zpos[zero] = np.arange(zero.size)
        for g_, q in enumerate(groups):
            x = np.abs(sol[:, g_]) * nrm
            maybe = np.flatnonzero((2 * x + x ** 2 > _RESCALE) | (zpos >= 0))
            if maybe.size:
                Sq = S0r if q.size == nb and np.array_equal(q, np.arange(nb)) else S0r[q]
                D = Sq[:, jsafe[maybe]]        # unwhitened directions, explicit where no current
                z = zpos[maybe] >= 0
                if z.any():
                    D[:, z] = zdirs[g_][zpos[maybe[z]]].T
                with np.errstate(divide="ignore", invalid="ignore"):
                    rel = np.abs(hb[q][:, None] + sol[maybe, g_][None, :] * D) / p0[q][:, None]
                rel = np.where(np.isfinite(rel) & (p0[q] > 0)[:, None], rel, 1.0)
                dev = np.max(wgt[q][:, None] * np.abs(rel ** 2 - 1.0), axis=0)
                far[maybe[dev > _RESCALE]] = True
                # variances at the best fit against the healthy ones, where they shrink
                var_fit = u2[q][:, None] + np.minimum(rel, 10.0) ** 2 * T0d[q][:, None]
                shrink[maybe] += 0.5 * np.sum(np.log(np.maximum((T0d[q] + u2[q])[:, None] / var_fit, 1.0)),
                                              axis=0)
        if far.any():
            # a fit that shrinks the readings' spread gains the log-determinant
            # the healthy covariance leaves out: add it (at the best fit), capped
            # by the universal bound (no residual, only the meters' variance)
            top = 0.5 * (float(rw @ rw) + blk[2] - float(np.sum(np.log(u2))))
            gain = np.where(far, np.minimum(gain + shrink, max(top, 0.0)), gain)
    # fixing the part's own tolerance shrinks the covariance: log-determinant gain
    if T:
        fixed = far if (G and T) else np.zeros(T, dtype=bool)
        have = js >= 0
        jsafe = np.maximum(js, 0)
        sc0 = ev._sc0()
        if G == 1 and np.all(sc0 == 1.0) and groups[0].size == nb:
            w2 = h_all[jsafe]     # |L^-1 s|^2, as above
        else:
            Wc = Li @ (S0r * sc0[:, None])
            w2 = np.einsum("ij,ij->j", Wc, Wc)[jsafe]
        w2 = np.where(have, w2, 0.0)
        den = 1.0 - np.where(have, ev.var_p[jsafe], 0.0) * w2
        gain = np.where(fixed, gain, gain - 0.5 * np.log(np.clip(den, 1e-300, 1.0)))
    # readings outside the block: their whole healthy penalty
    rest = np.ones(board.n, dtype=bool)
    rest[idx_blk] = False
    if rest.any():
        var = np.clip(np.diag(ev.T0), 0, None) + ev.u ** 2
        pen = ev._chi2_terms(healthy_pred[None, :], var)[0][rest]
        gain = gain + 0.5 * float(np.sum(np.where(np.isfinite(pen), pen, 0.0)))
    return LineBounds([p.ref for p in refs], np.asarray(gain, dtype=float), sorted(must))



def board_bounds(ev):
    """:func:`line_bounds` of an :class:`~.hypotheses.Evaluator` for its healthy prediction,
    with the healthy log-likelihood they are relative to (cached on ``ev``).

    Returns
    -------
    (LineBounds or None, float)
        The bounds (None: the readings cannot be screened) and ``log L(healthy)``
        on the first-pass covariance.
    """
    got = ev.__dict__.get("_board_bounds")
    if got is None:
        healthy = ev.healthy_prediction()
        c2, ld = ev.ev.chi2_rows(healthy[None, :], [[]], True)
        got = ev._board_bounds = (line_bounds(ev, ev.ev, healthy), -0.5 * float(c2[0] + ld[0]))
    return got
