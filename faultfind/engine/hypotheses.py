"""Fault hypotheses: enumerate, fit, score and rank them.

Every hypothesis is a set of faulted parts with a failure mode each (formats.md
lists the modes of each kind); the empty set is the healthy circuit.  For each:

1. its predicted readings come from the healthy factorization by rank-one
   updates (:mod:`.updates`), never from a re-solve, except for the few
   topology changes :mod:`.updates` leaves to the re-solve oracle;
2. a drift hypothesis fits the drifted value by a vectorized search over the
   log of the value (a grid outside the part's tolerance, then two parabolic
   refinements);
3. its evidence is the likelihood of the readings (:mod:`.evidence`); a drift
   hypothesis's is integrated over the drifted value (Laplace's method) with a
   log-uniform prior over the drift range, so that a free parameter is paid
   for (Occam factor);
4. its posterior is prior (:mod:`.priors`) times evidence, normalized over all
   hypotheses considered.

The best few are re-scored with exact sensitivities (the faulted circuit's
own, from one re-solve each) so that the tolerance spread of their readings
is that of the faulted circuit.  When no single fault explains the readings,
pairs of the likeliest single faults are tried.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import solve_triangular
from scipy.special import logsumexp
from scipy.stats import chi2 as chi2_dist

from ..errors import SolveError
from .estimate import weighted_gram
from .evidence import Evidence
from .oracle import oracle_readings
from .predict import analysis_key, lifted_value, parameters, predict
from .priors import HANDBOOK
from .updates import Group, admittance_of, batch, single

__all__ = ["Fault", "Hypothesis", "Ranking", "rank", "Board", "Evaluator", "FIT_P", "HEALTHY_P"]

#: A hypothesis "explains" the readings when its chi-square has at least this
#: upper-tail probability (1 in 1000).
FIT_P = 1e-3
#: The healthy circuit explains the readings at this level (1 in 100).
HEALTHY_P = 1e-2

#: Drift range searched, as a factor of the nominal value (passive parts).
DRIFT_RANGE = (1e-3, 1e3)
#: Drift range of sources: a sagging or overshooting supply.
SOURCE_RANGE = (1e-2, 2.0)
_GRID = 25
#: How many of the best single faults are re-scored exactly and paired.
EXACT_TOP = 4
PAIR_TOP = 6
#: Drifts whose log posterior is within this of the leader are refitted on the full score.
REFIT_WINDOW = 20.0
#: A drift trial value this far (chi-square) above the best of its part by
#: every approximation is not scored exactly (it cannot be the best).
SEARCH_WINDOW = 50.0
#: How many hypotheses of the first pass are scored with the full covariance.
FULL_TOP = 40


@dataclass(frozen=True)
class Fault:
    """One faulted part: ``mode`` is open, short, drift or dead; ``value`` the
    fitted value (SI) for a drift, else None."""

    ref: str
    mode: str
    value: float | None = None
    seen: bool = True  # False: a drift the readings do not see (its value is unknown)


@dataclass
class Hypothesis:
    """A scored hypothesis.

    Attributes
    ----------
    faults : tuple of Fault
        Empty for the healthy circuit.
    predicted : ndarray
        Predicted displays (``inf``: OL).
    chi2 : float
        Chi-square of the readings against the prediction (full covariance).
    log_like, log_prior, log_post : float
        Log evidence, log prior and their sum.
    probability : float
        Posterior probability (normalized over every hypothesis considered).
    drift_sd : float or None
        Standard deviation of the fitted drift's log-value (Laplace).
    """

    faults: tuple
    predicted: np.ndarray
    chi2: float
    log_like: float
    log_prior: float
    log_post: float = -np.inf
    probability: float = 0.0
    drift_sd: float | None = None
    exact: bool = False
    occam: float = 0.0

    @property
    def label(self) -> str:
        if not self.faults:
            return "healthy"
        return " + ".join(f"{f.ref} {f.mode}" for f in self.faults)


@dataclass
class Ranking:
    """Every hypothesis considered, most probable first, and the verdict."""

    hypotheses: list
    healthy: Hypothesis
    verdict: str
    n_readings: int
    fit_p: dict = field(default_factory=dict)
    doubles_tried: bool = False
    screening: object = None


def _occam(sd, spec) -> float:
    """Log Occam factor of a fitted drift: the posterior width over the prior width.

    ``spec`` is :meth:`Evaluator.drift_range` (search range and tolerance band,
    in log-value); the prior is uniform over the range outside the band.
    """
    lo, hi, blo, bhi = spec
    span = (hi - lo) - max(0.0, min(hi, bhi) - max(lo, blo))
    return float(np.log(min(np.sqrt(2 * np.pi) * sd, span) / span))


def _display(values, ac_mask):
    v = np.asarray(values)
    out = np.where(ac_mask, np.abs(v), v.real)
    return np.where(np.isnan(v.real), np.nan, out)


class Board:
    """The healthy circuit factored once per analysis, for the readings of interest.

    Parameters
    ----------
    circuit : Circuit
    readings : list of Reading
        Validated (values not needed).
    meters : dict
        Meter profiles with "default".
    """

    def __init__(self, circuit, readings, meters, share=None):
        self.circuit = circuit
        self.readings = list(readings)
        self.meters = meters
        n = len(self.readings)
        self.n = n
        self.ac = np.array([r.quantity != "resistance" and r.mode == "ac" for r in self.readings],
                           dtype=bool)
        keys = {}
        self.lifted = []
        for i, rd in enumerate(self.readings):
            key = analysis_key(circuit, rd)
            if key[0] == "lifted":
                self.lifted.append(i)
            else:
                keys.setdefault(key, []).append(i)
        share = share or {}
        self.groups = {}
        for k, idx in keys.items():
            sh = share.get(k)
            cols = [sh.cols.get(i) for i in idx] if sh is not None else None
            self.groups[k] = (Group(circuit, k, [self.readings[i] for i in idx], meters, sh, cols),
                              np.array(idx))
        self.params = parameters(circuit)
        self.pindex = {r: j for j, r in enumerate(self.params)}
        self.tol_low = np.array([circuit.part(r).tol_low for r in self.params])
        self.tol_high = np.array([circuit.part(r).tol_high for r in self.params])

    # ---------------------------------------------------------- predictions
    def predict_fault(self, part, mode, factors=None) -> np.ndarray:
        """Displays under one fault; for ``drift``, one row per value factor.

        Returns
        -------
        ndarray, shape (k, n)
        """
        return self.predict_many([(part, mode, factors)])[0]

    def predict_many(self, items) -> list:
        """Displays under many single faults, batched per analysis.

        Parameters
        ----------
        items : list of (Part, mode, factors)
            ``factors`` (drift only) are the candidate values as multiples of
            nominal; None for the other modes.

        Returns
        -------
        list of ndarray, shape (k_i, n)
        """
        sizes = [1 if f is None else len(f) for _, _, f in items]
        offs = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
        big = np.zeros((int(offs[-1]), self.n), dtype=complex)
        outs = [big[offs[h]:offs[h + 1]] for h in range(len(items))]   # views into big
        for key, (g, idx) in self.groups.items():
            pending = {}
            tcache = g.__dict__.setdefault("_terms", {})
            for h, (part, mode, factors) in enumerate(items):
                k = sizes[h]
                t = tcache.get((part.ref, mode))
                if t is None:
                    t = tcache[(part.ref, mode)] = g.term(part, mode)
                if t.kind == "y":
                    if mode == "drift":
                        news = np.broadcast_to(admittance_of(part, part.value * np.asarray(factors, float),
                                                             g.analysis, g.omega), (k,))
                    else:
                        news = np.array([g.new_admittance(part, mode)])
                    pending.setdefault(k, []).append((h, t, news))
                elif t.kind == "fallback":
                    for row in range(k):
                        ov = mode if factors is None else part.value * factors[row]
                        outs[h][row, idx] = oracle_readings(self.circuit, g.readings, self.meters,
                                                            {part.ref: ov})
                elif t.kind == "b":
                    news = np.zeros(1) if mode == "dead" else t.e0 * np.asarray(factors)
                    outs[h][:, idx] = single(g, t, news)
                else:
                    outs[h][:, idx] = g.nominal()
            for k, lst in pending.items():
                res = batch(g, [t for _, t, _ in lst], np.array([nw for _, _, nw in lst]))
                rows = np.concatenate([np.arange(offs[h], offs[h] + k) for h, _, _ in lst])
                big[np.ix_(rows, idx)] = res.reshape(-1, len(idx))
        for i in self.lifted:
            rd = self.readings[i]
            base = lifted_value(self.circuit.part(rd.part))
            big[:, i] = base
            for h, (part, mode, factors) in enumerate(items):
                if rd.part != part.ref:
                    continue
                if mode == "drift":
                    outs[h][:, i] = [lifted_value(part, part.value * f) for f in factors]
                else:
                    outs[h][:, i] = lifted_value(part, mode if mode in ("open", "short") else None)
        disp = _display(big, self.ac)
        return [disp[offs[h]:offs[h + 1]] for h in range(len(items))]

    def predict_faults(self, faults) -> np.ndarray:
        """Displays under several faults at once (pairs), via the general update."""
        out = np.zeros(self.n, dtype=complex)
        overrides = {}
        for f in faults:
            p = self.circuit.part(f.ref)
            overrides[f.ref] = f.value if f.mode == "drift" else f.mode
        for key, (g, idx) in self.groups.items():
            terms, news, fallback = [], [], False
            for f in faults:
                p = self.circuit.part(f.ref)
                t = g.term(p, f.mode)
                if t.kind == "fallback":
                    fallback = True
                    break
                if t.kind == "none":
                    continue
                if t.kind == "b":
                    news.append(0.0 if f.mode == "dead" else t.e0 * f.value / p.value)
                elif f.mode == "drift":
                    news.append(admittance_of(p, f.value, g.analysis, g.omega))
                else:
                    news.append(g.new_admittance(p, f.mode))
                terms.append(t)
            if fallback:
                out[idx] = oracle_readings(self.circuit, g.readings, self.meters, overrides)
            else:
                out[idx] = g.evaluate(terms, news)
        for i in self.lifted:
            rd = self.readings[i]
            ov = overrides.get(rd.part)
            out[i] = lifted_value(self.circuit.part(rd.part), ov if ov != "dead" else None)
        return _display(out, self.ac)



class Evaluator(Board):
    """A :class:`Board` with the readings' evidence, for scoring hypotheses.

    Parameters
    ----------
    circuit : Circuit
    readings : list of Reading
        Validated, each with a value or OL.
    meters : dict
        Meter profiles with "default".
    priors : Priors, optional
        The fault priors (:mod:`.priors`); default the handbook's table.
    """

    def __init__(self, circuit, readings, meters, priors=None):
        readings = list(readings)
        #: the fault priors' table (:class:`~.priors.Priors`)
        self.priors = HANDBOOK if priors is None else priors
        share = {}
        nominal = predict(circuit, readings, meters, share=share) if readings else None
        super().__init__(circuit, readings, meters, share)
        for g in share.values():
            g.cols = {}   # the groups hold their own copies now
        #: analysis key -> factored healthy network (for another predict() on this circuit)
        self.share = share
        self.pred0 = nominal.value if self.n else np.zeros(0)
        self.S0 = nominal.sensitivity if self.n else np.zeros((0, len(self.params)))
        self.ev = Evidence(self.readings, meters, self.pred0, self.S0, self.tol_low, self.tol_high)

    def healthy_prediction(self):
        return self.pred0 + self.ev.shift0

    # -------------------------------------------------------------- scoring
    def drop_cols(self, faults):
        return [self.pindex.get(f.ref, -1) for f in faults]

    def make(self, faults, pred, drift_sd=None, occam=0.0):
        lp = self.prior(faults)
        chi2, ll = self.ev.score(pred, self.drop_cols(faults))
        return Hypothesis(tuple(faults), pred, chi2, ll + occam, lp, lp + ll + occam, drift_sd=drift_sd,
                          occam=occam)

    def exact(self, h: Hypothesis) -> Hypothesis:
        """Re-score ``h`` with the faulted circuit's own sensitivities (one re-solve)."""
        if not h.faults:
            return h
        S = self.faulted_sensitivity(h.faults)
        if S is None or not np.all(np.isfinite(S)):
            return h
        ev = self.ev
        T = weighted_gram(S, ev.var_p)
        pred = h.predicted
        num = (~ev.ol) & np.isfinite(pred)
        if not num.any():
            return h
        C = T[np.ix_(num, num)] + np.diag(ev.u[num] ** 2)
        r = ev.y[num] - pred[num]
        try:
            L = np.linalg.cholesky(C)
        except np.linalg.LinAlgError:
            return h
        z = solve_triangular(L, r, lower=True, check_finite=False)
        chi2 = float(z @ z)
        logdet = 2.0 * float(np.log(np.diag(L)).sum())
        ll = -0.5 * (chi2 + logdet + num.sum() * np.log(2 * np.pi))
        var = np.diag(T) + ev.u ** 2
        rest = ev._chi2_terms(pred[None, :], var)[0][~num].sum()
        chi2 += float(rest)
        ll += -0.5 * float(rest)
        occam = h.occam  # the drift's Occam factor, as fitted
        return Hypothesis(h.faults, pred, chi2, ll + occam, h.log_prior, h.log_prior + ll + occam,
                          drift_sd=h.drift_sd, exact=True, occam=occam)

    def faulted_sensitivity(self, faults):
        """Sensitivities of the readings on the circuit with ``faults`` applied.

        The faulted parts' own columns are zero.  One fault: by rank-one
        updates of the healthy factors (:mod:`.faulted`); otherwise, or where
        that does not apply, by re-solving the faulted circuit.  None when
        the faulted circuit cannot be solved.
        """
        cache = self.__dict__.setdefault("_fsens", {})
        key = tuple(faults)
        if key in cache:
            return cache[key]
        if len(cache) > 8:
            cache.clear()
        cache[key] = S = self._faulted_sensitivity(faults)
        return S

    def _faulted_sensitivity(self, faults):
        if len(faults) == 1:
            from .faulted import faulted_sensitivity
            S = faulted_sensitivity(self, faults[0])
            if S is not None:
                return S
        overrides = {f.ref: (f.value if f.mode == "drift" else f.mode) for f in faults}
        try:
            pr = predict(self.circuit, self.readings, self.meters, overrides=overrides)
        except (SolveError, ValueError, ZeroDivisionError, FloatingPointError):
            return None
        S = pr.sensitivity.copy()
        for j in self.drop_cols(faults):
            if j >= 0:
                S[:, j] = 0.0
        return S

    # ------------------------------------------------------------- drift fit
    def drift_range(self, part):
        lo, hi = np.log(SOURCE_RANGE if part.is_source else DRIFT_RANGE)
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
        grids = []
        for lo, hi, blo, bhi in specs:
            g = np.linspace(lo, hi, _GRID)
            g = np.where((g > blo) & (g < bhi), np.where(g >= (blo + bhi) / 2, bhi, blo), g)
            grids.append(np.clip(g, lo, hi))
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
        rows = np.arange(L)
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
            best = np.argmin(cc, axis=1)
            rho_a = pts[rows, best]
            m = np.clip(best, 1, 3)
            x0, x1, x2 = pts[rows, m - 1], pts[rows, m], pts[rows, m + 1]
            y0, y1, y2 = cc[rows, m - 1], cc[rows, m], cc[rows, m + 1]
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                d1 = (y1 - y0) / (x1 - x0)
                d2 = (y2 - y1) / (x2 - x1)
                a = (d2 - d1) / (x2 - x0)
                vx = 0.5 * (x0 + x1) - d1 / (2 * a)
            ok = np.isfinite(a) & (a > 0) & np.isfinite(vx) & (x0 < x1) & (x1 < x2)
            vx = np.clip(np.where(ok, vx, rho_a), np.minimum(x0, x2), np.maximum(x0, x2))
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
                sd, occam = None, 0.0
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
        drops = [[self.pindex.get(p.ref, -1)] for p, k in zip(parts, sizes) for _ in range(k)]
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
        if f.mode != "drift" or h.drift_sd is None:
            return 0.0
        return _occam(h.drift_sd, self.drift_range(self.circuit.part(f.ref)))

    def prior(self, faults):
        """Log prior of a list of faults."""
        table = getattr(self, "priors", HANDBOOK)
        if getattr(self, "_wtable", None) is not table:
            self._wtable, self._wtotal = table, table.total(self.circuit.fault_parts)
        return table.log_prior(self.circuit.parts, [(self.circuit.part(f.ref), f.mode) for f in faults],
                               self._wtotal)



def rank(circuit, readings, meters, *, doubles=True, priors=None) -> Ranking:
    """Score every single-fault hypothesis (and pairs when none fits).

    Parameters
    ----------
    circuit : Circuit
    readings : list of Reading
        With values; at least one.
    meters : dict
        Meter profiles with "default".
    doubles : bool
        Try pairs of faults when no single fault explains the readings.
    priors : Priors, optional
        The fault priors; default the handbook's table (:mod:`.priors`).

    Returns
    -------
    Ranking
    """
    ev = Evaluator(circuit, readings, meters, priors)
    return rank_with(ev, doubles=doubles)


def _first_pass(ev: Evaluator, parts):
    """Every single-fault hypothesis of ``parts``, scored on the first-pass
    covariance (:meth:`~.evidence.Evidence.chi2_rows`).

    Returns
    -------
    list of (Hypothesis, log Occam factor)
    """
    items, drifting = [], []
    for part in parts:
        for mode in part.fault_modes:
            if mode == "drift":
                drifting.append(part)
            else:
                items.append((part, mode, None))
    cands = []  # (Fault, prediction, drift sd, Occam factor)
    for (part, mode, _), P in zip(items, ev.predict_many(items)):
        cands.append((Fault(part.ref, mode), P[0], None, 0.0))
    cands += ev.fit_drifts(drifting)
    cands = [c for c in cands if not np.isnan(c[1]).any()]  # no answer: a short across a source
    first = []
    if cands:
        c2, logdet = ev.ev.chi2_rows(np.vstack([c[1] for c in cands]),
                                     [[ev.pindex.get(c[0].ref, -1)] for c in cands], True)
        for (f, pred, sd, occam), x2, ld in zip(cands, c2, logdet):
            lp = ev.prior([f])
            ll = -0.5 * (float(x2) + float(ld)) + occam
            first.append((Hypothesis((f,), pred, float(x2), ll, lp, lp + ll, drift_sd=sd, occam=occam), occam))
    return first


@dataclass
class Screening:
    """What the screen left out (see :mod:`.screen`).

    Attributes
    ----------
    evaluated : int
        Parts whose hypotheses were evaluated exactly.
    pruned : int
        Parts whose best possible hypothesis was at least :data:`SCREEN_MARGIN`
        below the leader.
    pruned_logmass : float
        Log of an upper bound of the pruned hypotheses' total posterior mass
        (same scale as ``log_post``).
    unresolved : list of str
        Parts not pruned but not evaluated either (the evaluation budget ran
        out): their mass is counted at its upper bound.
    unresolved_logmass : float
    """

    evaluated: int = 0
    pruned: int = 0
    pruned_logmass: float = -np.inf
    unresolved: list = field(default_factory=list)
    unresolved_logmass: float = -np.inf


#: Circuits with at least this many parts that can fail are screened (:mod:`.screen`).
SCREEN_PARTS = 500
#: A part whose best possible hypothesis is this far (log posterior) below the
#: leader is not evaluated: e^-25 ~ 1.4e-11 each.
SCREEN_MARGIN = 25.0
#: Parts evaluated per step of the screened search, and at most in all.
SCREEN_CHUNK = 64
SCREEN_BUDGET = 640


def _screened_first(ev: Evaluator, parts, healthy, progress=None):
    """:func:`_first_pass` over the parts that can matter (branch and bound).

    Returns ``(first, Screening)``, or None when the readings cannot be screened.
    """
    from .screen import line_bounds
    lb = line_bounds(ev, ev.ev, healthy.predicted)
    if lb is None:
        return None
    by_ref = {p.ref: p for p in parts}
    c2, ld = ev.ev.chi2_rows(healthy.predicted[None, :], [[]], True)
    ll0 = -0.5 * float(c2[0] + ld[0])
    cache = {}

    def best_prior(p):
        key = p.kind
        if key not in cache:
            cache[key] = max(ev.prior([Fault(p.ref, m)]) for m in p.fault_modes)
        return cache[key]

    ub = np.array([best_prior(by_ref[r]) for r in lb.refs]) + ll0 + lb.gain
    order = np.argsort(-ub, kind="stable")
    must = [by_ref[r] for r in lb.must if r in by_ref]
    first = _first_pass(ev, must) if must else []
    lead = max([healthy.log_post] + [h.log_post for h, _ in first])
    done = 0            # positions of `order` looked at
    n_eval = 0          # parts among them evaluated in full
    skipped = []        # parts of a chunk whose bound had fallen below the leader
    total = min(len(order), SCREEN_BUDGET)
    chunk = max(1, SCREEN_CHUNK // 4)   # small first: the leader is usually among the first few
    while done < len(order) and done < SCREEN_BUDGET and ub[order[done]] >= lead - SCREEN_MARGIN:
        step = order[done:done + chunk]
        live = ub[step] >= lead - SCREEN_MARGIN
        skipped.append(step[~live])
        step = step[live]
        got = _first_pass(ev, [by_ref[lb.refs[k]] for k in step])
        first += got
        n_eval += int(step.size)
        lead = max([lead] + [h.log_post for h, _ in got])
        done += chunk
        chunk = min(2 * chunk, SCREEN_CHUNK)
        if progress is not None:
            progress("screening", min(done, total), total)
    rest = order[done:]
    # the leader only rises: a part skipped in a chunk stays below it (pruned)
    pruned = np.concatenate(skipped + [rest[ub[rest] < lead - SCREEN_MARGIN]]).astype(np.int64)
    unres = rest[ub[rest] >= lead - SCREEN_MARGIN]
    n_modes = np.array([len(by_ref[r].fault_modes) for r in lb.refs], dtype=float)
    scr = Screening(evaluated=len(must) + n_eval, pruned=int(pruned.size),
                    pruned_logmass=float(logsumexp(ub[pruned] + np.log(n_modes[pruned]))) if pruned.size else -np.inf,
                    unresolved=[lb.refs[k] for k in unres],
                    unresolved_logmass=float(logsumexp(ub[unres] + np.log(n_modes[unres]))) if unres.size else -np.inf)
    return first, scr


def rank_with(ev: Evaluator, *, doubles=True, screen=None, progress=None) -> Ranking:
    """:func:`rank` on an existing :class:`Evaluator`.

    ``screen``: True / False forces the screen of :mod:`.screen` on or off;
    None (default) uses it on circuits with at least :data:`SCREEN_PARTS`
    parts that can fail.  ``progress``, if given, is called as
    ``progress(stage, done, total)`` during long steps.
    """
    healthy = ev.make([], ev.healthy_prediction())
    parts = list(ev.circuit.fault_parts)
    use = screen if screen is not None else len(parts) >= SCREEN_PARTS
    got = _screened_first(ev, parts, healthy, progress) if use else None
    if got is None:
        first, screening = _first_pass(ev, parts), None
    else:
        first, screening = got
    # second pass: the full covariance for the hypotheses that can matter
    first.sort(key=lambda ho: -ho[0].log_post)
    hyps = [healthy]
    for rank_i, (h, occam) in enumerate(first):
        if rank_i < FULL_TOP:
            hyps.append(ev.make(list(h.faults), h.predicted, drift_sd=h.drift_sd, occam=occam))
        else:
            hyps.append(h)
    hyps = [h for h in hyps if np.isfinite(h.log_post)]
    if not hyps:  # nothing can be scored (readings no model can produce)
        healthy.probability = 1.0
        return Ranking([healthy], healthy, "inconsistent", ev.n, {id(healthy): 0.0}, False, screening)
    hyps.sort(key=lambda h: -h.log_post)
    # the drift search used the first-pass covariance; refit the leading
    # drifts on the full score
    lead = hyps[0].log_post
    for i in range(min(2 * EXACT_TOP, len(hyps))):
        h = hyps[i]
        if (len(h.faults) == 1 and h.faults[0].mode == "drift" and h.faults[0].seen
                and h.log_post > lead - REFIT_WINDOW):
            hyps[i] = ev.refit_drift(h)
    hyps.sort(key=lambda h: -h.log_post)
    # exact re-scoring of the leaders (those that can still matter)
    lead = hyps[0].log_post
    for i in range(min(EXACT_TOP, len(hyps))):
        if i == 0 or hyps[i].log_post > lead - REFIT_WINDOW:
            hyps[i] = ev.exact(hyps[i])
    n = ev.n
    fits = lambda h: chi2_dist.sf(h.chi2, max(n - (1 if any(f.mode == "drift" for f in h.faults) else 0), 1))
    hyps.sort(key=lambda h: -h.log_post)
    tried = False
    if doubles and n >= 2 and fits(healthy) < HEALTHY_P and all(fits(h) < FIT_P for h in hyps[:EXACT_TOP]):
        # before reaching for two faults, give more single faults their exact score
        for i in range(EXACT_TOP, min(2 * EXACT_TOP + 4, len(hyps))):
            hyps[i] = ev.exact(hyps[i])
        hyps.sort(key=lambda h: -h.log_post)
    if doubles and n >= 2 and fits(healthy) < HEALTHY_P and all(fits(h) < FIT_P for h in hyps[:EXACT_TOP]):
        tried = True
        hyps += _pairs(ev, hyps)
        hyps.sort(key=lambda h: -h.log_post)
    logs = np.array([h.log_post for h in hyps])
    # parts the screen could not resolve keep their mass (at its upper bound)
    extra = screening.unresolved_logmass if screening is not None else -np.inf
    norm = logsumexp(np.append(logs, extra))
    post = np.exp(logs - norm)
    for h, p in zip(hyps, post):
        h.probability = float(p)
    top = hyps[0]
    fit_p = {id(h): float(fits(h)) for h in hyps[:20]}
    fit_p[id(healthy)] = float(fits(healthy))
    if top is healthy and fit_p[id(healthy)] >= HEALTHY_P:
        verdict = "no-fault"
    elif top is not healthy and fit_p.get(id(top), 0.0) >= FIT_P:
        verdict = "fault"
    elif fit_p[id(healthy)] >= HEALTHY_P:
        verdict = "no-fault"
    else:
        verdict = "inconsistent"
    return Ranking(hyps, healthy, verdict, n, fit_p, tried, screening)


def _pairs(ev: Evaluator, hyps):
    """Pairs of the likeliest single faults on distinct parts."""
    singles = [h for h in hyps if len(h.faults) == 1]
    best = {}
    occ = {}
    for h in singles:
        f = h.faults[0]
        best.setdefault(f.ref, []).append(f)
        occ[(f.ref, f.mode)] = ev.occam_of(h)
    refs = [h.faults[0].ref for h in singles]
    seen, lead = set(), []
    for r in refs:
        if r not in seen:
            seen.add(r)
            lead.append(r)
        if len(lead) >= PAIR_TOP:
            break
    out = []
    for a in range(len(lead)):
        for b in range(a + 1, len(lead)):
            for fa in best[lead[a]][:2]:
                for fb in best[lead[b]][:2]:
                    pred = ev.predict_faults([fa, fb])
                    if np.isnan(pred).any():
                        continue
                    # each drifted value is a free parameter: pay its Occam factor
                    occam = occ.get((fa.ref, fa.mode), 0.0) + occ.get((fb.ref, fb.mode), 0.0)
                    h = ev.make([fa, fb], pred, occam=occam)
                    if np.isfinite(h.log_post):
                        out.append(h)
    return out
