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
from scipy.special import logsumexp
from scipy.stats import chi2 as chi2_dist

from ..errors import SolveError
from .bands import log_tolerance
from .evidence import Evidence
from .oracle import oracle_readings
from .predict import analysis_key, lifted_value, parameters, predict
from .priors import log_prior
from .updates import Group, admittance_of, single

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
_GRID = 97
#: How many of the best single faults are re-scored exactly and paired.
EXACT_TOP = 6
PAIR_TOP = 6


@dataclass(frozen=True)
class Fault:
    """One faulted part: ``mode`` is open, short, drift or dead; ``value`` the
    fitted value (SI) for a drift, else None."""

    ref: str
    mode: str
    value: float | None = None


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

    def __init__(self, circuit, readings, meters):
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
        self.groups = {k: (Group(circuit, k, [self.readings[i] for i in idx], meters), np.array(idx))
                       for k, idx in keys.items()}
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
        k = 1 if factors is None else len(factors)
        out = np.zeros((k, self.n), dtype=complex)
        for key, (g, idx) in self.groups.items():
            t = g.term(part, mode)
            if t.kind == "fallback":
                for row in range(k):
                    ov = mode if factors is None else part.value * factors[row]
                    out[row, idx] = oracle_readings(self.circuit, g.readings, self.meters, {part.ref: ov})
                continue
            if t.kind == "b":
                news = np.zeros(1) if mode == "dead" else t.e0 * np.asarray(factors)
            elif t.kind == "y":
                if mode == "drift":
                    news = np.array([admittance_of(part, part.value * f, g.analysis, g.omega)
                                     for f in factors])
                else:
                    news = np.array([g.new_admittance(part, mode)])
            else:
                news = np.zeros(k)
            out[:, idx] = single(g, t, news)
        for i in self.lifted:
            rd = self.readings[i]
            if rd.part == part.ref:
                if mode == "drift":
                    out[:, i] = [lifted_value(part, part.value * f) for f in factors]
                else:
                    out[:, i] = lifted_value(part, mode if mode in ("open", "short") else None)
            else:
                out[:, i] = lifted_value(self.circuit.part(rd.part))
        return _display(out, self.ac)

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
    """

    def __init__(self, circuit, readings, meters):
        super().__init__(circuit, readings, meters)
        nominal = predict(circuit, self.readings, meters) if self.n else None
        self.pred0 = nominal.value if self.n else np.zeros(0)
        self.S0 = nominal.sensitivity if self.n else np.zeros((0, len(self.params)))
        self.ev = Evidence(self.readings, meters, self.pred0, self.S0, self.tol_low, self.tol_high)

    def healthy_prediction(self):
        return self.pred0 + self.ev.shift0

    # -------------------------------------------------------------- scoring
    def drop_cols(self, faults):
        return [self.pindex.get(f.ref, -1) for f in faults]

    def make(self, faults, pred, drift_sd=None, occam=0.0):
        parts = [(self.circuit.part(f.ref), f.mode) for f in faults]
        lp = log_prior(self.circuit.parts, parts)
        chi2, ll = self.ev.score(pred, self.drop_cols(faults))
        return Hypothesis(tuple(faults), pred, chi2, ll + occam, lp, lp + ll + occam, drift_sd=drift_sd)

    def exact(self, h: Hypothesis) -> Hypothesis:
        """Re-score ``h`` with the faulted circuit's own sensitivities (one re-solve)."""
        if not h.faults:
            return h
        overrides = {f.ref: (f.value if f.mode == "drift" else f.mode) for f in h.faults}
        try:
            pr = predict(self.circuit, self.readings, self.meters, overrides=overrides)
        except (SolveError, ValueError, ZeroDivisionError, FloatingPointError):
            return h
        if not np.all(np.isfinite(pr.sensitivity)):
            return h
        S = pr.sensitivity.copy()
        for j in self.drop_cols(h.faults):
            if j >= 0:
                S[:, j] = 0.0
        ev = self.ev
        T = (S * ev.var_p) @ S.T
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
        z = np.linalg.solve(L, r)
        chi2 = float(z @ z)
        logdet = 2.0 * float(np.log(np.diag(L)).sum())
        ll = -0.5 * (chi2 + logdet + num.sum() * np.log(2 * np.pi))
        var = np.diag(T) + ev.u ** 2
        rest = ev._chi2_terms(pred[None, :], var)[0][~num].sum()
        chi2 += float(rest)
        ll += -0.5 * float(rest)
        occam = h.log_like - self.ev.score(pred, self.drop_cols(h.faults))[1]  # keep the drift's Occam factor
        return Hypothesis(h.faults, pred, chi2, ll + occam, h.log_prior, h.log_prior + ll + occam,
                          drift_sd=h.drift_sd, exact=True)

    # ------------------------------------------------------------- drift fit
    def drift_range(self, part):
        lo, hi = np.log(SOURCE_RANGE if part.is_source else DRIFT_RANGE)
        if part.kind in ("fuse", "switch"):
            lo = 0.0  # "drift" of a contact or fuse is a high resistance
        tl, th = part.tol_low, part.tol_high
        return lo, hi, np.log1p(-min(tl, 0.999)), np.log1p(th)

    def fit_drift(self, part):
        """Best drifted value of ``part`` and its Laplace evidence.

        Returns
        -------
        Hypothesis or None
            None when the readings cannot see the part at all.
        """
        lo, hi, band_lo, band_hi = self.drift_range(part)
        grid = np.linspace(lo, hi, _GRID)
        grid = grid[(grid < band_lo) | (grid > band_hi)]
        grid = np.unique(np.concatenate([grid, [band_lo, band_hi]]))
        grid = grid[(grid >= lo) & (grid <= hi)]
        drop = [self.pindex.get(part.ref, -1)]
        P = self.predict_fault(part, "drift", np.exp(grid))
        c2 = self.ev.diag_chi2(P, drop)
        if not np.isfinite(c2).any():
            return None
        b = int(np.nanargmin(np.where(np.isfinite(c2), c2, np.inf)))
        step = (hi - lo) / (_GRID - 1)
        rho = grid[b]
        curv = None
        for width in (step, step / 8):
            pts = np.array([rho - width, rho, rho + width])
            pts = np.clip(pts, lo, hi)
            inside = (pts > band_lo) & (pts < band_hi)
            pts = np.where(inside, np.where(rho >= band_hi, band_hi, band_lo), pts)
            if np.ptp(pts) == 0:
                break
            cc = self.ev.diag_chi2(self.predict_fault(part, "drift", np.exp(pts)), drop)
            if not np.all(np.isfinite(cc)):
                break
            x0, x1, x2 = pts
            if x0 == x1 or x1 == x2:
                break
            # parabola through the three points
            d1 = (cc[1] - cc[0]) / (x1 - x0)
            d2 = (cc[2] - cc[1]) / (x2 - x1)
            a = (d2 - d1) / (x2 - x0)
            if a > 0:
                curv = 2 * a
                vx = 0.5 * (x0 + x1) - d1 / (2 * a) + 0.0
                vx = float(np.clip(vx, x0, x2))
                if band_lo < vx < band_hi:
                    vx = band_hi if rho >= band_hi else band_lo
                rho = vx
            else:
                rho = float(pts[np.argmin(cc)])
        width_total = (hi - lo) - max(0.0, min(hi, band_hi) - max(lo, band_lo))
        if curv and curv > 0:
            sd = float(np.sqrt(2.0 / curv))
            occam = float(np.log(min(np.sqrt(2 * np.pi) * sd, width_total) / width_total))
        else:
            sd = None
            occam = 0.0  # flat: the readings do not constrain the value
        pred = self.predict_fault(part, "drift", np.array([np.exp(rho)]))[0]
        f = Fault(part.ref, "drift", float(part.value * np.exp(rho)))
        return self.make([f], pred, drift_sd=sd, occam=occam)


def rank(circuit, readings, meters, *, doubles=True) -> Ranking:
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

    Returns
    -------
    Ranking
    """
    ev = Evaluator(circuit, readings, meters)
    return rank_with(ev, doubles=doubles)


def rank_with(ev: Evaluator, *, doubles=True) -> Ranking:
    healthy = ev.make([], ev.healthy_prediction())
    hyps = [healthy]
    for part in ev.circuit.parts:
        for mode in part.fault_modes:
            if mode == "drift":
                h = ev.fit_drift(part)
                if h is not None:
                    hyps.append(h)
                continue
            pred = ev.predict_fault(part, mode)[0]
            if np.isnan(pred).any():
                continue  # the ideal model has no answer (a short across a source)
            hyps.append(ev.make([Fault(part.ref, mode)], pred))
    hyps = [h for h in hyps if np.isfinite(h.log_post)]
    hyps.sort(key=lambda h: -h.log_post)
    # exact re-scoring of the leaders
    for i in range(min(EXACT_TOP, len(hyps))):
        hyps[i] = ev.exact(hyps[i])
    n = ev.n
    fits = lambda h: chi2_dist.sf(h.chi2, max(n - (1 if any(f.mode == "drift" for f in h.faults) else 0), 1))
    hyps.sort(key=lambda h: -h.log_post)
    tried = False
    if doubles and n >= 2 and fits(healthy) < HEALTHY_P and all(fits(h) < FIT_P for h in hyps[:EXACT_TOP]):
        tried = True
        hyps += _pairs(ev, hyps)
        hyps.sort(key=lambda h: -h.log_post)
    logs = np.array([h.log_post for h in hyps])
    post = np.exp(logs - logsumexp(logs))
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
    return Ranking(hyps, healthy, verdict, n, fit_p, tried)


def _pairs(ev: Evaluator, hyps):
    """Pairs of the likeliest single faults on distinct parts."""
    singles = [h for h in hyps if len(h.faults) == 1]
    best = {}
    for h in singles:
        f = h.faults[0]
        best.setdefault(f.ref, []).append(f)
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
                    occam = 0.0
                    h = ev.make([fa, fb], pred, occam=occam)
                    if np.isfinite(h.log_post):
                        out.append(h)
    return out
