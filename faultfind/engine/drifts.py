"""Drift fits: the drifted value of a part that best explains the readings.

A drift hypothesis fits the drifted value by a vectorized search over the log
of the value (a grid outside the part's tolerance, then parabolic
refinements); its evidence is integrated over the value (Laplace's method)
with a log-uniform prior over the drift range, so that the free parameter is
paid for (the Occam factor, :func:`_occam`).  :class:`DriftFits` holds the
search as methods of :class:`~.hypotheses.Evaluator` (it needs the
evaluator's predictions and evidence).
"""

from __future__ import annotations

import numpy as np

from .faults import Fault


def parabola_step(pts, cc):
    """Best of five trial points per row and the vertex of the parabola through
    the best point and its neighbours.

    Parameters
    ----------
    pts, cc : ndarray, shape (L, 5)
        Trial log-values per row (sorted) and their chi-square (inf where not finite).

    Returns
    -------
    best : ndarray, shape (L,)
        The trial point of least chi-square.
    vx : ndarray, shape (L,)
        The parabola's vertex where ``ok``, else ``best``; clipped to its three points.
    a : ndarray, shape (L,)
        Half the parabola's curvature (``2 * a`` is d2 chi2 / d x2).
    ok : ndarray of bool, shape (L,)
        Where the three points make an upward parabola with a finite vertex.
    """
    rows = np.arange(len(pts))
    i = np.argmin(cc, axis=1)
    best = pts[rows, i]
    m = np.clip(i, 1, 3)
    x0, x1, x2 = pts[rows, m - 1], pts[rows, m], pts[rows, m + 1]
    y0, y1, y2 = cc[rows, m - 1], cc[rows, m], cc[rows, m + 1]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        d1 = (y1 - y0) / (x1 - x0)
        d2 = (y2 - y1) / (x2 - x1)
        a = (d2 - d1) / (x2 - x0)
        vx = 0.5 * (x0 + x1) - d1 / (2 * a)
    ok = np.isfinite(a) & (a > 0) & np.isfinite(vx) & (x0 < x1) & (x1 < x2)
    vx = np.clip(np.where(ok, vx, best), np.minimum(x0, x2), np.maximum(x0, x2))
    return best, vx, a, ok

__all__ = ["DRIFT_RANGE", "SOURCE_RANGE", "RESISTOR_FLOOR", "SEARCH_WINDOW", "DriftFits"]

#: Drift range searched, as a factor of the nominal value (passive parts).
DRIFT_RANGE = (1e-3, 1e3)
#: A resistor drifts down to this factor of its value; below it is short
#: (:mod:`.shorts`: a short's resistance reaches up to the same point).
RESISTOR_FLOOR = 1e-2
#: Drift range of sources: a sagging or overshooting supply.
SOURCE_RANGE = (1e-2, 2.0)
_GRID = 25
#: A drift trial value this far (chi-square) above the best of its part by
#: every approximation is not scored exactly (it cannot be the best).
SEARCH_WINDOW = 50.0


def _prior_width(spec) -> float:
    """Width of a drift's prior: its search range less the tolerance band (log-value)."""
    lo, hi, blo, bhi = spec
    return (hi - lo) - max(0.0, min(hi, bhi) - max(lo, blo))


def _occam(sd, spec) -> float:
    """Log Occam factor of a fitted drift: the posterior width over the prior width.

    ``spec`` is :meth:`Evaluator.drift_range` (search range and tolerance band,
    in log-value); the prior is uniform over the range outside the band.
    """
    span = _prior_width(spec)
    return float(np.log(min(np.sqrt(2 * np.pi) * sd, span) / span))


def _edge_occam(g, c2, spec) -> float:
    """Log Occam factor of a drift fit without a curvature (its best at an end of the range).

    The likelihood ``exp(-(chi2 - min) / 2)`` integrated over the search grid
    ``g`` (trapezoid rule in log-value, the tolerance band left out), over the
    prior width: what the Laplace factor of :func:`_occam` approximates when a
    parabola fits.  A drift of a link pinned at a thousand times its value fits
    like the link open: its evidence is paid for over the values that fit, not
    given for free.
    """
    blo, bhi = spec[2], spec[3]
    span = _prior_width(spec)
    ok = np.isfinite(c2)
    if ok.sum() < 2:
        return 0.0
    x, idx = np.unique(np.asarray(g, dtype=float)[ok], return_index=True)
    y = np.asarray(c2, dtype=float)[ok][idx]
    like = np.exp(-(y - y.min()) / 2.0)
    seg = 0.5 * (like[1:] + like[:-1]) * np.diff(x)
    seg[(x[:-1] >= blo) & (x[1:] <= bhi)] = 0.0     # across the tolerance band: not a drift
    width = float(seg.sum())
    if not width > 0.0:
        return 0.0
    return float(np.log(min(width, span) / span))


class DriftFits:
    """Drift search methods of :class:`~.hypotheses.Evaluator`."""

    # ------------------------------------------------------------- drift fit
    def drift_range(self, part):
        lo, hi = np.log(SOURCE_RANGE if part.is_source else DRIFT_RANGE)
        if part.kind == "resistor":
            lo = np.log(RESISTOR_FLOOR)  # below, a resistor is short (a short of resistance r, .shorts)
        if part.kind in ("fuse", "switch"):
            lo = 0.0  # "drift" of a contact or fuse is a high resistance
        tl, th = part.tol_low, part.tol_high
        return lo, hi, np.log1p(-min(tl, 0.999)), np.log1p(th)

    def fit_drifts(self, parts):
        """Best drifted value of each part and its Laplace evidence (batched).

        A grid over the log of the value outside the part's tolerance band,
        then a parabola through five points around the grid's best, which
        gives the minimum and the curvature (the drift's standard deviation).

        Returns
        -------
        list of (Fault, prediction, sd or None, log Occam factor)
        """
        if not parts:
            return []
        specs = [self.drift_range(p) for p in parts]
        sp = np.array(specs, dtype=float)
        lo_, hi_, blo_, bhi_ = (sp[:, k:k + 1] for k in range(4))
        g = np.linspace(sp[:, 0], sp[:, 1], _GRID, axis=1)
        g = np.where((g > blo_) & (g < bhi_), np.where(g >= (blo_ + bhi_) / 2, bhi_, blo_), g)
        grids = list(np.clip(g, lo_, hi_))
        P = self.predict_many([(p, "drift", np.exp(g)) for p, g in zip(parts, grids)])
        stage, flat = [], []
        allc2 = self._chi2_blocks(parts, P)
        for p, g, Pp, c2, (lo, hi, blo, bhi) in zip(parts, grids, P, allc2, specs):
            if not np.isfinite(c2).any():
                stage.append(None)
                continue
            fin = c2[np.isfinite(c2)]
            if fin.max() - fin.min() < 0.05:
                stage.append(None)  # the readings do not see this part's value
                flat.append(p)
                continue
            b = int(np.argmin(np.where(np.isfinite(c2), c2, np.inf)))
            stage.append(np.array([0, 0, g[b], 0, 0], dtype=float))
        live = [i for i, pts in enumerate(stage) if pts is not None]
        L = len(live)
        lo_a, hi_a, blo_a, bhi_a = (np.array([specs[i][k] for i in live]) for k in range(4))
        rho_a = np.array([stage[i][2] for i in live], dtype=float)
        step_a = (hi_a - lo_a) / (_GRID - 1)
        curv_a = np.full(L, np.nan)
        offs = np.array([-1.0, -0.5, 0.0, 0.5, 1.0])
        for shrink in (1.0, 0.15, 0.02):
            if L == 0:
                break
            pts = rho_a[:, None] + (step_a * shrink)[:, None] * offs
            pts = np.clip(pts, lo_a[:, None], hi_a[:, None])
            inband = (pts > blo_a[:, None]) & (pts < bhi_a[:, None])
            edge = np.where(rho_a >= bhi_a, bhi_a, blo_a)[:, None]
            pts = np.where(inband, edge, pts)
            P2 = self.predict_many([(parts[i], "drift", np.exp(pts[k])) for k, i in enumerate(live)])
            cc = np.vstack(self._chi2_blocks([parts[i] for i in live], P2))
            cc = np.where(np.isfinite(cc), cc, np.inf)
            rho_a, vx, a, ok = parabola_step(pts, cc)
            vx = np.where((vx > blo_a) & (vx < bhi_a), np.where(rho_a >= bhi_a, bhi_a, blo_a), vx)
            rho_a = np.where(ok, vx, rho_a)
            curv_a = np.where(ok, 2 * a, np.where(shrink == 1.0, np.nan, curv_a))
        rho = {i: float(rho_a[k]) for k, i in enumerate(live)}
        curv = {i: (float(curv_a[k]) if np.isfinite(curv_a[k]) else None) for k, i in enumerate(live)}
        finals, info = [], []
        for i in live:
            p = parts[i]
            lo, hi, blo, bhi = specs[i]
            if curv[i]:
                sd = float(np.sqrt(2.0 / curv[i]))
                occam = _occam(sd, specs[i])
            else:
                sd, occam = None, _edge_occam(grids[i], allc2[i], specs[i])
            finals.append((p, "drift", np.array([np.exp(rho[i])])))
            info.append((Fault(p.ref, "drift", float(p.value * np.exp(rho[i]))), sd, occam))
        for p in flat:  # unseen: the value stays unknown over the whole range; no Occam factor
            lo, hi, blo, bhi = self.drift_range(p)
            rho0 = hi if hi > bhi else lo
            finals.append((p, "drift", np.array([np.exp(rho0)])))
            info.append((Fault(p.ref, "drift", float(p.value * np.exp(rho0)), seen=False), None, 0.0))
        P3 = self.predict_many(finals)
        return [(f, Pp[0], sd, occam) for (f, sd, occam), Pp in zip(info, P3)]

    def _chi2_blocks(self, parts, P):
        """Diagonal chi-square of each part's block of predictions, in one call."""
        if not P:
            return []
        sizes = [len(x) for x in P]
        js = np.repeat([self.pindex.get(p.ref, -1) for p in parts], sizes).tolist()
        drops = [[j] for j in js]
        blocks = np.repeat(np.arange(len(sizes)), sizes)
        c2 = self.ev.chi2_rows(np.vstack(P), drops, blocks=blocks, window=SEARCH_WINDOW)
        return np.split(c2, np.cumsum(sizes)[:-1])

    def refit_drift(self, h):
        """Refine a single drift's value on the full-covariance score.

        Three rounds of five points around the current value (spaced by the
        drift's standard deviation, then a third and a ninth of it), each
        closing with a parabola through the best three.
        """
        f = h.faults[0]
        part = self.circuit.part(f.ref)
        lo, hi, blo, bhi = self.drift_range(part)
        rho = float(np.log(f.value / part.value))
        w = h.drift_sd if h.drift_sd else 0.05
        w = float(np.clip(w, 1e-4, 0.5))
        drop = self.drop_cols(h.faults)
        for shrink in (2.0, 0.6, 0.2):
            pts = rho + w * shrink * np.array([-1.0, -0.5, 0.0, 0.5, 1.0])
            pts = np.clip(pts, lo, hi)
            pts = np.where((pts > blo) & (pts < bhi), np.where(rho >= bhi, bhi, blo), pts)
            P = self.predict_fault(part, "drift", np.exp(pts))
            c = self.ev.chi2_near(P, P[2], drop)
            c = np.where(np.isfinite(c), c, np.inf)
            k = int(np.argmin(c))
            rho = float(pts[k])
            m = int(np.clip(k, 1, 3))
            x, y = pts[m - 1:m + 2], c[m - 1:m + 2]
            if np.all(np.isfinite(y)) and x[0] < x[1] < x[2]:
                d1 = (y[1] - y[0]) / (x[1] - x[0])
                d2 = (y[2] - y[1]) / (x[2] - x[1])
                a = (d2 - d1) / (x[2] - x[0])
                if a > 0:
                    vx = float(np.clip(0.5 * (x[0] + x[1]) - d1 / (2 * a), x[0], x[2]))
                    if not (blo < vx < bhi):
                        rho = vx
                    w = float(np.clip(np.sqrt(2.0 / (2 * a)), 1e-5, 0.5))
        pred = self.predict_fault(part, "drift", np.array([np.exp(rho)]))[0]
        fnew = Fault(f.ref, "drift", float(part.value * np.exp(rho)))
        occam = _occam(w, (lo, hi, blo, bhi))
        out = self.make([fnew], pred, drift_sd=w, occam=occam)
        return out if out.log_post >= h.log_post or not np.isfinite(h.log_post) else h

    def occam_of(self, h) -> float:
        """Log Occam factor of a single drift hypothesis (0 for the other modes)."""
        f = h.faults[0]
        if f.mode != "drift":
            return 0.0
        if h.drift_sd is None:
            return h.occam  # fitted without a curvature (:func:`_edge_occam`)
        return _occam(h.drift_sd, self.drift_range(self.circuit.part(f.ref)))
