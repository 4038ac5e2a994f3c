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
from .drifts import DRIFT_RANGE, RESISTOR_FLOOR, SEARCH_WINDOW, SOURCE_RANGE, DriftFits, _occam  # noqa: F401
from .estimate import weighted_gram
from .evidence import Evidence
from .faults import Fault
from .limits import apply_limits
from .modelspread import model_spread_columns
from .oracle import oracle_readings
from .predict import analysis_key, lifted_value, parameters, predict
from .priors import HANDBOOK
from .shorts import fit_shorts, lifted_short, short_admittance
from .stray import weak_readings
from .updates import Group, admittance_of, batch, single

__all__ = ["Fault", "Hypothesis", "Ranking", "rank", "Board", "Evaluator", "FIT_P", "HEALTHY_P"]

#: A hypothesis "explains" the readings when its chi-square has at least this
#: upper-tail probability (1 in 1000).
FIT_P = 1e-3
#: The healthy circuit explains the readings at this level (1 in 100).
HEALTHY_P = 1e-2

#: How many of the best single faults are re-scored exactly and paired.
EXACT_TOP = 4
PAIR_TOP = 6
#: Drifts whose log posterior is within this of the leader are refitted on the full score.
REFIT_WINDOW = 20.0
#: How many hypotheses of the first pass are scored with the full covariance.
FULL_TOP = 40


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
    #: supplies predicted in current limit under this hypothesis (:mod:`.limits`)
    limited: tuple = ()

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
        #: power-off readings of a board with junctions: no linear network gives them
        #: (each is its own nonlinear solve); the fast path leaves them at ``off_fill``
        self.offnl, self.off_fill = [], None
        for i, rd in enumerate(self.readings):
            key = analysis_key(circuit, rd)
            if key[0] == "lifted":
                self.lifted.append(i)
            elif key[0] == "off" and circuit.is_nonlinear:
                self.offnl.append(i)
            else:
                keys.setdefault(key, []).append(i)
        share = share or {}
        if circuit.is_nonlinear and not share and keys:
            # a board with junctions: the groups are the linearisation at the operating point
            predict(circuit, self.readings, meters, share=share)
        self.groups = {}
        for k, idx in keys.items():
            sh = share.get(k)
            cols = [sh.cols.get(i) for i in idx] if sh is not None else None
            self.groups[k] = (Group(circuit, k, [self.readings[i] for i in idx], meters, sh, cols),
                              np.array(idx))
        # the circuit's parameters, kept on the shared networks for the next board
        # (a pass over every part: a tenth of a second at 100,000 parts)
        got = next((sh._board_params for sh in share.values()
                    if getattr(sh, "_board_params", (None,))[0] is circuit), None)
        if got is None:
            params = parameters(circuit)
            got = (circuit, params, {r: j for j, r in enumerate(params)},
                   np.array([circuit.part(r).tol_low for r in params]),
                   np.array([circuit.part(r).tol_high for r in params]))
            for sh in share.values():
                sh._board_params = got
        _, self.params, self.pindex, self.tol_low, self.tol_high = got

    def board_for(self, readings, meters):
        """A :class:`Board` of the same circuit for other readings (its own factors)."""
        return Board(self.circuit, readings, meters)

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
                    elif mode == "short" and factors is not None:   # shorts of resistance r
                        news = short_admittance(t.y0, factors)
                    else:
                        news = np.array([g.new_admittance(part, mode)])
                    pending.setdefault(k, []).append((h, t, news))
                elif t.kind == "fallback":
                    for row in range(k):
                        ov = mode if factors is None or mode == "short" else part.value * factors[row]
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
                elif mode == "short" and factors is not None:
                    outs[h][:, i] = [lifted_short(part, r, base) for r in factors]
                else:
                    outs[h][:, i] = lifted_value(part, mode if mode in ("open", "short") else None)
        if self.offnl:
            big[:, self.offnl] = np.nan if self.off_fill is None else self.off_fill[self.offnl]
        disp = _display(big, self.ac)
        return [disp[offs[h]:offs[h + 1]] for h in range(len(items))]

    def predict_faults(self, faults) -> np.ndarray:
        """Displays under several faults at once (pairs), via the general update."""
        if self.circuit.is_nonlinear:   # a nonlinear board: the exact re-solve
            from .junction_faults import exact_faults
            return exact_faults(self, faults)
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
                elif f.mode == "short" and f.value:
                    news.append(short_admittance(t.y0, f.value).item())
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
            f = next((f for f in faults if f.ref == rd.part), None)
            if f is not None and f.mode == "short" and f.value:
                p = self.circuit.part(rd.part)
                out[i] = lifted_short(p, f.value, lifted_value(p))
            else:
                out[i] = lifted_value(self.circuit.part(rd.part), ov if ov != "dead" else None)
        return _display(out, self.ac)



class Evaluator(Board, DriftFits):
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
        #: a board with junctions: the healthy solutions of the power-off readings, by
        #: (plus, minus, quantity), where their re-solves on faulted variants start
        self.off_ops = {}
        nominal = predict(circuit, readings, meters, share=share,
                          off_warm=self.off_ops) if readings else None
        super().__init__(circuit, readings, meters, share)
        for g in share.values():
            g.cols = {}   # the groups hold their own copies now
        #: analysis key -> factored healthy network (for another predict() on this circuit)
        self.share = share
        self.pred0 = nominal.value if self.n else np.zeros(0)
        self.S0 = nominal.sensitivity if self.n else np.zeros((0, len(self.params)))
        # semiconductors' model spread (vbe, gain, zener forward voltage): no parameters,
        # extra covariance (engine/spread.py); nothing on a linear board
        ms = model_spread_columns(circuit, self.readings, meters, nominal, share=share,
                                  off_ops=self.off_ops) if self.n else None
        self.ev = Evidence(self.readings, meters, self.pred0, self.S0, self.tol_low, self.tol_high,
                           model_spread=ms)
        if self.offnl:   # the fast path's stand-in: what was read (.junction_faults re-solves)
            self.off_fill = np.where(self.ev.ol, np.inf, np.nan_to_num(self.ev.y))

    def healthy_prediction(self):
        return self.pred0 + self.ev.shift0

    # -------------------------------------------------------------- scoring
    def drop_cols(self, faults):
        """Columns of the faulted parts, whose tolerance no longer applies (-1: none).

        A leaky diode keeps its column: the leak sits across the junction, whose
        forward voltage still spreads over its tolerance (with the column
        dropped a planted leak lost to the healthy board wherever the diode's
        own spread explained a reading, tests/heldout_semis).
        """
        return [-1 if f.mode == "leaky" else self.pindex.get(f.ref, -1) for f in faults]

    def weak(self, faults):
        """Readings on nodes ``faults`` cut off from every source (:mod:`.stray`), or None."""
        return weak_readings(self, faults)

    def make(self, faults, pred, drift_sd=None, occam=0.0):
        lp = self.prior(faults)
        chi2, ll = self.ev.score(pred, self.drop_cols(faults), self.weak(faults))
        return Hypothesis(tuple(faults), pred, chi2, ll + occam, lp, lp + ll + occam, drift_sd=drift_sd,
                          occam=occam)

    def exact(self, h: Hypothesis) -> Hypothesis:
        """Re-score ``h`` with the faulted circuit's own sensitivities (one re-solve).

        A hypothesis predicted with a supply in current limit (:mod:`.limits`)
        is returned as it is: the faulted circuit's sensitivities are those
        of the supply holding its voltage, which would spread the limited
        prediction by the full fault current."""
        if not h.faults or h.limited:
            return h
        S = self.faulted_sensitivity(h.faults)
        if S is None or not np.all(np.isfinite(S)):
            return h
        ev = self.ev
        T = weighted_gram(S, ev.var_p)
        pred = h.predicted
        sc = ev._scales(pred)
        T = T + ev.T_model * np.outer(sc, sc)
        num = (~ev.ol) & np.isfinite(pred)
        if not num.any():
            return h
        sv, cost = ev.stray(pred, self.weak(h.faults), np.diag(T) + ev.u ** 2)
        T = T + np.diag(sv[0])
        C = T[np.ix_(num, num)] + np.diag(ev.u[num] ** 2)
        r = ev.y[num] - pred[num]
        try:
            L = np.linalg.cholesky(C)
        except np.linalg.LinAlgError:
            return h
        z = solve_triangular(L, r, lower=True, check_finite=False)
        chi2 = float(z @ z)
        logdet = 2.0 * float(np.log(np.diag(L)).sum())
        ll = -0.5 * (chi2 + logdet + num.sum() * np.log(2 * np.pi) + float(cost[0]))
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
        if self.circuit.is_nonlinear:   # the faulted board's own linearisation
            from .junction_faults import exact_sensitivity
            return exact_sensitivity(self, faults)
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
    if ev.circuit.is_nonlinear:   # a board with junctions (.junction_faults)
        from .junction_faults import nonlinear_candidates
        cands = nonlinear_candidates(ev, parts, _candidates)
    else:
        cands = _candidates(ev, parts)
    cands = [c for c in cands if not np.isnan(c[1]).any()]  # no answer: a short across a source
    first = []
    if cands:
        weak = [ev.weak([c[0]]) for c in cands]
        W = (np.vstack([np.zeros(ev.n, dtype=bool) if w is None else w for w in weak])
             if any(w is not None for w in weak) else None)
        c2, logdet = ev.ev.chi2_rows(np.vstack([c[1] for c in cands]),
                                     [[ev.pindex.get(c[0].ref, -1)] for c in cands], True, weak=W)
        for (f, pred, sd, occam), x2, ld in zip(cands, c2, logdet):
            lp = ev.prior([f])
            ll = -0.5 * (float(x2) + float(ld)) + occam
            first.append((Hypothesis((f,), pred, float(x2), ll, lp, lp + ll, drift_sd=sd, occam=occam), occam))
    return first


def _candidates(ev: Evaluator, parts):
    """``[(Fault, prediction, drift sd, Occam factor)]`` of every single fault of ``parts``
    by the fast path (rank-one updates, fitted shorts and drifts)."""
    items, drifting, shorting = [], [], []
    for part in parts:
        for mode in part.fault_modes:
            if mode == "drift":
                drifting.append(part)
            elif mode == "short":
                shorting.append(part)
            else:
                items.append((part, mode, None))
    cands = []  # (Fault, prediction, drift sd, Occam factor)
    for (part, mode, _), P in zip(items, ev.predict_many(items)):
        cands.append((Fault(part.ref, mode), P[0], None, 0.0))
    for part, (r, pred, occam) in zip(shorting, fit_shorts(ev, shorting)):
        cands.append((Fault(part.ref, "short", r), pred, None, occam))
    cands += ev.fit_drifts(drifting)
    return cands


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
    from .screen import board_bounds
    lb, ll0 = board_bounds(ev)     # for healthy.predicted (shared with the short fit)
    if lb is None:
        return None
    by_ref = {p.ref: p for p in parts}
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
                and h.log_post > lead - REFIT_WINDOW
                and not ev.circuit.part(h.faults[0].ref).is_semiconductor):
            hyps[i] = ev.refit_drift(h)
    hyps.sort(key=lambda h: -h.log_post)
    if ev.circuit.is_nonlinear:   # the linearisation's leaders, re-solved exactly
        from .junction_faults import rescore_leaders
        hyps = rescore_leaders(ev, hyps)
        hyps.sort(key=lambda h: -h.log_post)
    # exact re-scoring of the leaders (those that can still matter)
    lead = hyps[0].log_post
    for i in range(min(EXACT_TOP, len(hyps))):
        if i == 0 or hyps[i].log_post > lead - REFIT_WINDOW:
            hyps[i] = ev.exact(hyps[i])
            if ev.circuit.is_nonlinear and len(hyps[i].faults) == 1 and hyps[i].faults[0].mode == "leaky":
                hyps[i] = _refit_leak_exact(ev, hyps[i])
    # the leader's part in its other modes, on the same exact terms: the mode is
    # decided on equal footing (an open beside a current source, scored on the
    # healthy spread, can trail its own thousandfold drift scored exactly)
    if len(hyps[0].faults) == 1:
        ref = hyps[0].faults[0].ref
        for i in range(1, min(FULL_TOP, len(hyps))):
            h = hyps[i]
            if not h.exact and len(h.faults) == 1 and h.faults[0].ref == ref:
                hyps[i] = ev.exact(h)
    # supplies with a current limit: a fault drawing more is predicted in current limit
    hyps[:EXACT_TOP] = apply_limits(ev, hyps[:EXACT_TOP], EXACT_TOP)
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
        pairs = sorted(_pairs(ev, hyps), key=lambda h: -h.log_post)
        if ev.circuit.is_nonlinear:
            # the leading pairs on the exact terms of the singles they compete
            # with: scored on the healthy spread, a leaky diode paired with a
            # supply fault no power-off reading sees (the same prediction) beat
            # the diode alone, scored exactly (tests/heldout_semis)
            for i in range(min(EXACT_TOP, len(pairs))):
                pairs[i] = ev.exact(pairs[i])
        hyps += pairs
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


def _refit_leak_exact(ev: Evaluator, h: Hypothesis) -> Hypothesis:
    """A leaky diode's leak refined on the exact score (a pattern search in ln r).

    The leak was fitted on the healthy board's spread (engine/junction_faults.py);
    once the leak carries a reading (an ohmmeter across the diode reads the leak
    nearly alone) the faulted board's own, narrower spread is the one to fit
    it on, as for a drift (:meth:`~.drifts.DriftFits.refit_drift`).  Steps of
    20 %, 7 % and 2.5 % each way, keeping the better score; at most six re-solves.
    """
    best = h
    for step in (0.2, 0.07, 0.025):
        x0 = float(np.log(best.faults[0].value))
        for x in (x0 - step, x0 + step):
            f = Fault(h.faults[0].ref, "leaky", float(np.exp(x)))
            pred = ev.predict_faults([f])
            if np.isnan(pred).any():
                continue
            cand = ev.exact(ev.make([f], pred, occam=h.occam))
            if cand.log_post > best.log_post:
                best = cand
    return best


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
    # a part whose lifted reading is far off its healthy value is direct evidence: pair it first
    z = ev.ev.residuals(ev.healthy_prediction())
    direct = [ev.readings[i].part for i in ev.lifted if abs(z[i]) > 3 and ev.readings[i].part in best]
    refs = direct + refs
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
