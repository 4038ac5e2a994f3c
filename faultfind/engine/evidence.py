"""The readings as evidence: observed displays, their uncertainty, and how well a
prediction fits them.

Uncertainty of a reading (docs/estimate.md):

* the meter: its specification limit as a rectangular distribution and its
  display resolution (JCGM 100:2008, 4.3.7 and F.2.2.1; see
  :func:`faultfind.engine.meter.standard_uncertainty`), taken at the observed
  display so that every hypothesis is judged against the same yardstick;
* the healthy parts' tolerances, propagated through the linearized circuit
  (GUM 5.1.2): covariance ``S P S^T`` with ``P`` the variance of each part's
  log-value (rectangular within its tolerance: ``half^2 / 3``).  The
  covariance is full, not diagonal: readings that share a part move together.
* on a board with semiconductors, the model spread of the parts that have no
  value (a transistor's ``vbe`` and ``gain``, a zener's forward voltage;
  engine/modelspread.py, :data:`~.modelspread.MODEL_SPREAD`): their one-sigma effects
  ``M`` add ``M M^T`` to the healthy covariance.  They are no parameters: no
  hypothesis drops them; under a hypothesis they are rescaled with the
  prediction like the tolerances.

Under a fault hypothesis the tolerance spread of each reading is the healthy
spread rescaled by the ratio of the faulted to the healthy prediction (a
reading a fault drives to zero loses its spread; one it doubles doubles its
spread), with the faulted part's own column removed.  The top hypotheses are
then re-scored with their exact sensitivities (see hypotheses.py).

An ``OL`` display is a bound (censored reading): its likelihood is the
probability that the reading exceeds the meter's top range.

A voltage reading on a node the hypothesis cuts off from every source
(:mod:`.stray`) is weakly defined: the scoring functions take a ``weak``
mask, and such a reading's variance gains the stray voltage it shows, up to
the allowance (:data:`~.stray.STRAY_DC`, :data:`~.stray.STRAY_AC`), at a
fixed log-likelihood cost (:data:`~.stray.STRAY_PENALTY`) when it is used.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import solve_triangular
from scipy.special import log_ndtr

from .bands import log_tolerance
from .estimate import weighted_gram
from .meter import standard_uncertainty
from .stray import STRAY_AC, STRAY_DC, STRAY_PENALTY

__all__ = ["Evidence", "GROSS"]

#: chi-square charged to a reading the hypothesis says is OL but which shows a
#: number, or the reverse: a gross disagreement, kept finite so hypotheses
#: stay comparable.
GROSS = 2500.0

_LOG2PI = np.log(2 * np.pi)

#: First-pass rows whose tolerance spread departs from the healthy one by more
#: than this (relative variance, weighted by the tolerance's share of the
#: reading's variance) are scored with their own covariance, exactly.
SCALE_OK = 0.1

#: Top range assumed for an OL display of a voltage or a current, which a meter
#: profile does not state: 1000 V and 10 A, the usual top ranges of a handheld
#: meter (from memory).  An OL on a low-voltage board then says "re-check".
TOP_RANGE = {"voltage": 1000.0, "current": 10.0}


class Evidence:
    """Observed readings with their uncertainties.

    Parameters
    ----------
    readings : list of Reading
        With values (or ``OL``).
    meters : dict
        Meter profiles (with "default").
    pred0 : ndarray
        Healthy-circuit predictions (display values).
    S0 : ndarray, shape (n, m)
        Healthy sensitivities ``d display / d ln p``.
    tol_low, tol_high : ndarray, shape (m,)
        Parameter tolerances.
    model_spread : ndarray, shape (n, k), optional
        One-sigma effects of the model spread on the healthy displays
        (:func:`~.modelspread.model_spread_columns`); none by default.
    """

    def __init__(self, readings, meters, pred0, S0, tol_low, tol_high, model_spread=None):
        n = len(readings)
        self.n = n
        self.y = np.zeros(n)
        self.ol = np.zeros(n, dtype=bool)
        self.top = np.full(n, np.inf)       # meter's top range (resistance)
        self.u = np.zeros(n)
        for i, rd in enumerate(readings):
            meter = meters[rd.meter or "default"]
            if rd.overrange:
                self.ol[i] = True
                if rd.quantity == "resistance":
                    top = meter.max_resistance
                elif rd.quantity == "diode-test":   # censored like a resistance OL
                    top = min(meter.diode_test_max, meter.diode_test_voltage)
                else:
                    top = TOP_RANGE[rd.quantity]
                self.top[i] = top
                self.y[i] = np.nan
                self.u[i] = float(standard_uncertainty(meter, rd.quantity, rd.mode, top))
            else:
                self.y[i] = rd.value
                self.u[i] = float(standard_uncertainty(meter, rd.quantity, rd.mode, abs(rd.value)))
            if rd.overrange and rd.overrange < 0:
                self.top[i] = -np.inf
        #: stray-voltage allowance of each reading on a cut-off node (voltage readings only)
        self.stray_max = np.array([(STRAY_AC if rd.mode == "ac" else STRAY_DC) if rd.quantity == "voltage"
                                   else 0.0 for rd in readings])
        self.pred0 = np.asarray(pred0, dtype=float)
        S0 = np.asarray(S0, dtype=float)
        # read only: a copy only where something is not finite (a pass over
        # readings x parts is cheaper than a copy of it at 100,000 parts)
        self.S0 = S0 if np.isfinite(S0).all() else np.nan_to_num(S0, nan=0.0, posinf=0.0, neginf=0.0)
        centre, half = log_tolerance(tol_low, tol_high)
        self.var_p = half ** 2 / 3.0
        self.centre = centre
        # healthy: the mean shift of asymmetric tolerances moves the expected reading
        self.shift0 = self.S0 @ centre
        self.T0 = weighted_gram(self.S0, self.var_p)
        #: covariance of the model spread (zeros without one), part of ``T0``
        self.T_model = np.zeros((n, n))
        if model_spread is not None and np.size(model_spread):
            M = np.nan_to_num(np.asarray(model_spread, dtype=float).reshape(n, -1))
            self.T_model = M @ M.T
            self.T0 = self.T0 + self.T_model
        d = np.sqrt(np.clip(np.diag(self.T0), 0, None))
        with np.errstate(divide="ignore", invalid="ignore"):
            rel = d / np.abs(self.pred0)
        ok = np.isfinite(rel) & (np.abs(self.pred0) > 0)
        #: typical relative tolerance spread, for readings a fault moves off zero
        self.rel_floor = float(np.median(rel[ok])) if ok.any() else 0.01

    # ------------------------------------------------------------------
    def _scales(self, pred):
        p0 = np.abs(self.pred0)
        with np.errstate(divide="ignore", invalid="ignore"):
            s = np.abs(pred) / p0
        s = np.where(np.isfinite(s) & (p0 > 0), np.clip(s, 0.0, 10.0), 0.0)
        return s

    def stray(self, P, weak, base=None):
        """Stray-voltage variances and log-likelihood costs of predictions ``P`` (k, n).

        ``weak`` (k, n) or (n,) marks the readings on cut-off nodes (None:
        none); ``base`` is each reading's variance without the stray voltage
        (default: the meter's alone).  A weak numeric reading whose residual
        exceeds 3 times its base spread gains the excess as stray variance,
        at most the allowance squared, and pays :data:`~.stray.STRAY_PENALTY`.

        Returns
        -------
        var : ndarray (k, n)
        cost : ndarray (k,)
            To add to ``-2 log L`` (the log-determinant side).
        """
        P = np.atleast_2d(np.asarray(P, dtype=float))
        if weak is None:
            return np.zeros(P.shape), np.zeros(P.shape[0])
        w = np.broadcast_to(np.asarray(weak, dtype=bool), P.shape) & (~self.ol)[None, :] & np.isfinite(P)
        w &= (self.stray_max > 0)[None, :]
        base = self.u[None, :] ** 2 if base is None else np.atleast_2d(base)
        with np.errstate(invalid="ignore"):
            r2 = np.where(w, (self.y[None, :] - np.where(w, P, 0.0)) ** 2, 0.0)
        used = w & (r2 > 9.0 * base)      # beyond 3 standard deviations: the allowance is used
        var = np.where(used, np.minimum(r2 - base, self.stray_max[None, :] ** 2), 0.0)
        return var, 2.0 * STRAY_PENALTY * used.sum(axis=1)

    def tol_cov(self, pred, drop=()):
        """Tolerance covariance of the readings under a hypothesis predicting ``pred``.

        ``drop`` lists parameter columns fixed by the hypothesis (the faulted parts).
        """
        T = self.T0
        for j in drop:
            if j >= 0:
                s = self.S0[:, j]
                T = T - np.outer(s, s) * self.var_p[j]
        sc = self._scales(pred)
        T = T * np.outer(sc, sc)
        p0 = np.abs(self.pred0)
        fin = np.isfinite(pred)
        extra = np.where((p0 == 0) & fin, (self.rel_floor * np.where(fin, pred, 0.0)) ** 2, 0.0)
        return T + np.diag(extra)

    def diag_chi2(self, P, drop=(), with_logdet=False):
        """chi-square of many predictions with the diagonal of the covariance.

        Parameters
        ----------
        P : ndarray, shape (k, n)
            Predicted displays (``inf`` for OL, ``nan`` undefined).
        drop : sequence of int
            Parameter columns fixed by the hypothesis (the same for every row).
        with_logdet : bool
            Also return ``sum(log(2 pi var))`` over the numeric readings.

        Returns
        -------
        chi2 : ndarray, shape (k,)
            ``inf`` where a prediction is undefined.
        logdet : ndarray, shape (k,)
            Only with ``with_logdet``.
        """
        P = np.atleast_2d(P)
        drops = [list(drop)] * P.shape[0]
        return self.diag_chi2_rows(P, drops, with_logdet)

    def diag_chi2_rows(self, P, drops, with_logdet=False, weak=None):
        """:meth:`diag_chi2` with its own fixed columns for each row (a list per row)."""
        P = np.atleast_2d(P)
        var = self._row_vars(P, drops, weak)
        finP = np.isfinite(P)
        c2 = self._chi2_terms(P, var).sum(axis=1)
        if not with_logdet:
            return c2
        num = (~self.ol)[None, :] & finP
        logdet = np.where(num, np.log(2 * np.pi * np.where(num, var, 1.0)), 0.0).sum(axis=1)
        if weak is not None:
            logdet = logdet + self.stray(P, weak, self._row_vars(P, drops))[1]
        return c2, logdet

    # ----------------------------------------------------- many rows, full
    def _block(self):
        """Cholesky factor of the healthy covariance over the numeric readings (cached).

        Returns ``(idx, L, logdet)`` or None when there is no numeric reading
        with a finite healthy prediction or the covariance is not positive
        definite.
        """
        if getattr(self, "_blk", False) is not False:
            return self._blk
        idx = np.flatnonzero(~self.ol & np.isfinite(self.pred0))
        self._blk = None
        if idx.size:
            with np.errstate(over="ignore", invalid="ignore"):
                T = self.tol_cov(self.pred0, ())
                C = T[np.ix_(idx, idx)] + np.diag(self.u[idx] ** 2)
            if np.all(np.isfinite(C)):
                try:
                    L = np.linalg.cholesky(C)
                    if np.all(np.isfinite(L)) and np.all(np.diag(L) > 0):
                        self._blk = (idx, L, 2.0 * float(np.log(np.diag(L)).sum()), np.diag(C).copy())
                except np.linalg.LinAlgError:
                    self._blk = None
        return self._blk

    def whitener(self):
        """``L0^{-1}``, the inverse Cholesky factor of the numeric block's healthy covariance (cached)."""
        if getattr(self, "_Linv", None) is None:
            L = self._block()[1]
            self._Linv = solve_triangular(L, np.eye(L.shape[0]), lower=True, check_finite=False)
        return self._Linv

    def whiten(self, V):
        """``L0^{-1} V`` for columns ``V`` over the numeric block (rows in block order)."""
        return self.whitener() @ V

    def white_columns(self, cols):
        """Whitened sensitivity columns ``L0^{-1} S0[:, j]`` over the numeric block (cached per column)."""
        cache = self.__dict__.setdefault("_wcols", {})
        todo = sorted({int(j) for j in cols if j >= 0 and int(j) not in cache})
        if todo:
            idx = self._block()[0]
            Wc = self.whiten(self.S0[np.ix_(idx, todo)] * self._sc0()[:, None])
            for k, j in enumerate(todo):
                cache[j] = Wc[:, k]
        return cache

    def _sc0(self):
        """The healthy scale factors of :meth:`tol_cov` over the numeric block (1, or 0 at a zero reading)."""
        idx = self._block()[0]
        return self._scales(self.pred0)[idx]

    def chi2_rows(self, P, drops, with_logdet=False, blocks=None, window=None, weak=None):
        """chi-square of many predictions with the full covariance, approximately.

        Each row's covariance is taken as the healthy covariance (with the
        row's fixed parameter column removed, exactly, by Sherman-Morrison)
        whose variances are rescaled to the row's own (the tolerance spread
        scaled with the prediction, as :meth:`tol_cov`): the correlation
        structure of the healthy readings is kept.  Exact when the row's
        prediction leaves the spread unscaled; the diagonal of the result is
        always the row's own variances.  Rows with an undefined or
        non-finite prediction on a numeric reading, or with more than one
        fixed column, are scored exactly by :meth:`score`.

        Parameters
        ----------
        P : ndarray, shape (k, n)
        drops : list of list of int
            Fixed parameter columns of each row.
        with_logdet : bool
            Also return the log-determinant term, so that
            ``-0.5 * (chi2 + logdet)`` is each row's log-likelihood.
        blocks, window : ndarray of int and float, optional
            For a search (a drift's trial values): rows with the same block
            number are candidates for one minimum, and a row whose chi-square
            is more than ``window`` above its block's best by both the kept
            correlations and the diagonal alone is not re-scored exactly (it
            cannot be the minimum).
        weak : ndarray of bool (k, n), optional
            Readings on nodes each row's hypothesis cuts off from every
            source (:meth:`stray`).
        """
        P = np.atleast_2d(np.asarray(P, dtype=float))
        k = P.shape[0]
        blk = self._block()
        if blk is None or k == 0:
            c2, ld = self.diag_chi2_rows(P, drops, True, weak)
            return (c2, ld) if with_logdet else c2
        idx, L, logdet0, c0 = blk
        nb = idx.size
        lens = np.fromiter(map(len, drops), dtype=np.int64, count=k)
        js = np.fromiter((d[0] if n == 1 else -1 for d, n in zip(drops, lens)), dtype=np.int64, count=k)
        multi = lens > 1
        Pb = P[:, idx]
        good = np.all(np.isfinite(Pb), axis=1) & ~multi & ~np.any(np.isnan(P), axis=1)
        # variances of the block under each row (diagonal of tol_cov)
        T0d = np.diag(self.T0)[idx]
        s_cols = np.where(js[:, None] >= 0, self.S0[np.ix_(idx, np.maximum(js, 0))].T, 0.0)   # (k, nb)
        s_h = s_cols * self._sc0()[None, :]                                   # as in the healthy C0
        vj = np.where(js >= 0, self.var_p[np.maximum(js, 0)], 0.0)
        Td = np.clip(T0d[None, :] - vj[:, None] * s_cols ** 2, 0, None)
        p0 = np.abs(self.pred0[idx])
        with np.errstate(divide="ignore", invalid="ignore"):
            sc = np.abs(Pb) / p0
        sc = np.where(np.isfinite(sc) & (p0 > 0), np.clip(sc, 0, 10), 0.0)
        extra = np.where(p0 == 0, (self.rel_floor * np.where(np.isfinite(Pb), Pb, 0.0)) ** 2, 0.0)
        var_h = self.u[idx] ** 2 + sc ** 2 * Td + extra
        scost = np.zeros(k)
        if weak is not None:
            base = np.zeros(P.shape)
            base[:, idx] = var_h
            sv, scost = self.stray(P, np.atleast_2d(weak) & np.isin(np.arange(self.n), idx)[None, :], base)
            extra = extra + sv[:, idx]
        var_h = self.u[idx] ** 2 + sc ** 2 * Td + extra                      # row's own variances
        cd = np.clip(c0[None, :] - vj[:, None] * s_h ** 2, 1e-300, None)     # healthy-with-drop
        with np.errstate(invalid="ignore"):
            R = (self.y[idx][None, :] - np.where(np.isfinite(Pb), Pb, 0.0)) * np.sqrt(cd / var_h)
        R = np.where(good[:, None], R, 0.0)
        Z = R @ self.whitener().T                                             # (k, nb), rows whitened
        q = np.einsum("ij,ij->i", Z, Z)
        corr = np.zeros(k)
        ldc = np.zeros(k)
        has = np.flatnonzero((js >= 0) & good)
        if has.size:
            uj, inv = np.unique(js[has], return_inverse=True)
            wc = self.white_columns(uj)
            Wm = np.column_stack([wc[int(j)] for j in uj])                   # (nb, u)
            den = 1.0 - self.var_p[uj] * (Wm * Wm).sum(axis=0)
            ok = den > 1e-12
            proj = np.einsum("ij,ij->i", Wm.T[inv], Z[has])
            corr[has] = np.where(ok[inv], self.var_p[uj][inv] * proj ** 2 / np.where(ok, den, 1.0)[inv], 0.0)
            ldc[has] = np.where(ok[inv], np.log(np.where(ok, den, 1.0))[inv], 0.0)
        chi2 = q + corr
        logdet = (logdet0 + ldc + np.log(var_h).sum(axis=1) - np.log(cd).sum(axis=1)
                  + nb * _LOG2PI)
        # rows that rescale the tolerance spread where it matters: the kept
        # correlations would be wrong (a fault that drives the readings to zero
        # leaves only the meter's independent errors): score them exactly
        w = T0d / (T0d + self.u[idx] ** 2)
        far = good & (np.max(w[None, :] * np.abs(sc ** 2 - 1.0), axis=1) > SCALE_OK)
        far |= good & np.any(extra > SCALE_OK * self.u[idx] ** 2, axis=1)
        if far.any() and blocks is not None and window is not None:
            c2d = self.diag_chi2_rows(P[far], [drops[i] for i in np.flatnonzero(far)],
                                      weak=None if weak is None else np.atleast_2d(weak)[far])
            low = chi2.copy()
            low[far] = np.minimum(chi2[far], c2d)
            blocks = np.asarray(blocks)
            best = np.full(blocks.max() + 1, np.inf)
            np.minimum.at(best, blocks, np.where(np.isfinite(low), low, np.inf))
            far &= low <= best[blocks] + window
        if far.any():
            rows = np.flatnonzero(far)
            c2x, ldx = self._exact_block(Pb[rows], sc[rows], extra[rows], js[rows], idx)
            chi2[rows] = c2x
            logdet[rows] = ldx
        # readings outside the block (OL displays, predictions undefined in healthy)
        rest = np.ones(self.n, dtype=bool)
        rest[idx] = False
        if rest.any():
            var_r = self._row_vars(P, drops, weak)
            terms = self._chi2_terms(P, var_r)[:, rest]
            chi2 = chi2 + terms.sum(axis=1)
        logdet = logdet + scost
        for r in np.flatnonzero(~good):
            c2, ll = self.score(P[r], drops[r], None if weak is None else np.atleast_2d(weak)[r])
            chi2[r] = c2
            logdet[r] = -2.0 * ll - c2 if np.isfinite(ll) else np.inf
        chi2 = np.where(np.any(np.isnan(P), axis=1), np.inf, chi2)
        return (chi2, logdet) if with_logdet else chi2

    def _exact_block(self, Pb, sc, extra, js, idx, chunk=None):
        """Full-covariance chi-square and log-determinant over the numeric block,
        exactly as :meth:`score` (batched Cholesky factors), for rows with one
        fixed column ``js`` (-1: none)."""
        nb = idx.size
        chunk = chunk or max(1, int(4_000_000 // max(nb * nb, 1)))
        T0b = self.T0[np.ix_(idx, idx)]
        u2 = self.u[idx] ** 2
        c2 = np.empty(len(Pb))
        ld = np.empty(len(Pb))
        for a in range(0, len(Pb), chunk):
            sl = slice(a, a + chunk)
            j = js[sl]
            s = np.where(j[:, None] >= 0, self.S0[np.ix_(idx, np.maximum(j, 0))].T, 0.0)
            v = np.where(j >= 0, self.var_p[np.maximum(j, 0)], 0.0)
            C = np.einsum("ki,ij,kj->kij", sc[sl], T0b, sc[sl])
            ss = s * sc[sl]
            C -= v[:, None, None] * np.einsum("ki,kj->kij", ss, ss)
            C[:, np.arange(nb), np.arange(nb)] += u2[None, :] + extra[sl]
            r = self.y[idx][None, :] - Pb[sl]
            try:
                L = np.linalg.cholesky(C)
                # one batched LAPACK call (scipy's solve_triangular loops over a stack in Python)
                zz = np.linalg.solve(L, r[..., None])[..., 0]
                c2[sl] = np.einsum("ij,ij->i", zz, zz)
                ld[sl] = 2.0 * np.log(np.diagonal(L, axis1=1, axis2=2)).sum(axis=1) + nb * _LOG2PI
            except np.linalg.LinAlgError:
                for q in range(C.shape[0]):
                    try:
                        Lq = np.linalg.cholesky(C[q])
                        z = solve_triangular(Lq, r[q], lower=True, check_finite=False)
                        c2[a + q] = float(z @ z)
                        ld[a + q] = 2.0 * float(np.log(np.diag(Lq)).sum()) + nb * _LOG2PI
                    except np.linalg.LinAlgError:
                        var = np.diag(C[q])
                        c2[a + q] = float((r[q] ** 2 / var).sum())
                        ld[a + q] = float(np.log(var).sum()) + nb * _LOG2PI
        return c2, ld

    def _row_vars(self, P, drops, weak=None):
        """Diagonal of each row's covariance (as :meth:`diag_chi2_rows` uses)."""
        k = P.shape[0]
        Tdiag = np.broadcast_to(np.diag(self.T0), (k, self.n)).copy()
        for pos in range(max((len(d) for d in drops), default=0)):
            js = np.array([d[pos] if pos < len(d) else -1 for d in drops])
            ok = js >= 0
            if ok.any():
                Tdiag[ok] -= self.S0[:, js[ok]].T ** 2 * self.var_p[js[ok]][:, None]
        T = np.clip(Tdiag, 0, None)
        p0 = np.abs(self.pred0)
        with np.errstate(divide="ignore", invalid="ignore"):
            sc = np.abs(P) / p0
        sc = np.where(np.isfinite(sc) & (p0 > 0), np.clip(sc, 0, 10), 0.0)
        finP = np.isfinite(P)
        out = self.u ** 2 + sc ** 2 * T + np.where((p0 == 0) & finP, (self.rel_floor * np.where(finP, P, 0)) ** 2, 0)
        return out + self.stray(P, weak, out)[0] if weak is not None else out

    def _chi2_terms(self, P, var):
        P = np.atleast_2d(P)
        k, n = P.shape
        out = np.zeros((k, n))
        sd = np.sqrt(var)
        finP = np.isfinite(P)
        nanP = np.isnan(P)
        # numeric readings
        num = ~self.ol
        with np.errstate(invalid="ignore", over="ignore"):
            r = np.where(finP, (self.y - np.where(finP, P, 0.0)) / sd, 0.0)
        out = np.where(num & finP, r ** 2, out)
        out = np.where(num & ~finP & ~nanP, GROSS, out)
        # OL readings: P(display above the top range)
        if self.ol.any():
            with np.errstate(invalid="ignore", divide="ignore"):
                z = np.where(finP, (np.abs(np.where(finP, P, 0.0)) - np.abs(self.top)) / sd, np.inf)
            cens = -2.0 * log_ndtr(z)
            cens = np.minimum(cens, GROSS)
            out = np.where(self.ol, np.where(finP, cens, 0.0), out)
        out = np.where(nanP, np.inf, out)
        return out

    def score(self, pred, drop=(), weak=None):
        """Full-covariance chi-square and log-likelihood of one prediction.

        ``weak``: readings on cut-off nodes (see :meth:`stray`).

        Returns
        -------
        chi2 : float
        loglike : float
            ``-inf`` when the prediction is undefined.
        """
        pred = np.asarray(pred, dtype=float)
        if np.isnan(pred).any():
            return np.inf, -np.inf
        T = self.tol_cov(pred, drop)
        sv, cost = self.stray(pred, weak, np.diag(T) + self.u ** 2)
        T = T + np.diag(sv[0])
        num = (~self.ol) & np.isfinite(pred)
        chi2 = 0.0
        loglike = 0.0
        if num.any():
            C = T[np.ix_(num, num)] + np.diag(self.u[num] ** 2)
            r = self.y[num] - pred[num]
            try:
                L = np.linalg.cholesky(C)
                z = solve_triangular(L, r, lower=True, check_finite=False)
                chi2 += float(z @ z)
                logdet = 2.0 * float(np.log(np.diag(L)).sum())
            except np.linalg.LinAlgError:
                var = np.diag(C)
                chi2 += float((r ** 2 / var).sum())
                logdet = float(np.log(var).sum())
            loglike += -0.5 * (chi2 + logdet + num.sum() * _LOG2PI)
        var = np.diag(T) + self.u ** 2
        other = self._chi2_terms(pred[None, :], var)[0]
        rest = ~num
        extra = float(other[rest].sum())
        chi2 += extra
        # gross terms and censored terms enter the likelihood as -chi2/2
        loglike += -0.5 * extra - 0.5 * float(cost[0])
        return chi2, loglike

    def chi2_near(self, P, centre, drop=()):
        """Full-covariance chi-square of predictions ``P`` (k, n) that lie close to
        ``centre``, with the covariance taken once at ``centre`` (for a local
        search: a drift refined within a few standard deviations)."""
        P = np.atleast_2d(np.asarray(P, dtype=float))
        centre = np.asarray(centre, dtype=float)
        num = (~self.ol) & np.isfinite(centre) & np.all(np.isfinite(P), axis=0)
        out = np.zeros(P.shape[0])
        if num.any():
            T = self.tol_cov(centre, drop)
            C = T[np.ix_(num, num)] + np.diag(self.u[num] ** 2)
            R = (self.y[num][None, :] - P[:, num]).T
            try:
                L = np.linalg.cholesky(C)
                Z = solve_triangular(L, R, lower=True, check_finite=False)
                out += (Z * Z).sum(axis=0)
            except np.linalg.LinAlgError:
                out += ((R ** 2) / np.diag(C)[:, None]).sum(axis=0)
        rest = ~num
        if rest.any():
            var = np.diag(self.tol_cov(centre, drop)) + self.u ** 2
            out += self._chi2_terms(P, var)[:, rest].sum(axis=1)
        return np.where(np.any(np.isnan(P), axis=1), np.inf, out)

    def residuals(self, pred, drop=(), weak=None, tol_var=None):
        """Standardized residual of each reading (diagonal covariance); 0 for OL consistent.

        ``weak``: readings on cut-off nodes (see :meth:`stray`).  ``tol_var``:
        the tolerance variance of each reading under the hypothesis (the
        diagonal of its own covariance, e.g. from the faulted circuit's
        sensitivities); default the healthy one rescaled to ``pred``."""
        pred = np.asarray(pred, dtype=float)
        if tol_var is None:
            tol_var = np.diag(self.tol_cov(pred, drop))
        var = np.clip(np.asarray(tol_var, dtype=float), 0, None) + self.u ** 2
        var = var + self.stray(pred, weak, var)[0][0]
        t = self._chi2_terms(pred[None, :], var)[0]
        with np.errstate(invalid="ignore"):
            sign = np.sign(np.where(np.isfinite(pred) & ~self.ol, self.y - pred, 1.0))
        return sign * np.sqrt(t)
