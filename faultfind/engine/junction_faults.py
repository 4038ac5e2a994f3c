"""Fault hypotheses on boards with semiconductors (nonlinear boards).

The linear machinery of :mod:`.updates` (Woodbury updates of the healthy
factors) cannot express a junction fault: an open or shorted junction moves
the operating point of every junction on the board, and a leaky diode or a
drifted forward / zener voltage changes a nonlinear law, not an admittance.
Each junction hypothesis is therefore evaluated by an exact nonlinear
re-solve of the faulted board (:func:`~.predict.predict` with the fault as
an override: the Newton operating point of the faulted circuit, the meter's
loading and the sensitivities from its linearisation), cached per fault.

* ``open``, ``short``, ``base-emitter-open``, ``base-emitter-short``: one
  re-solve each.
* ``drift`` (forward voltage of a diode or LED, zener voltage of a zener):
  the value is fitted by Gauss-Newton on the log of the value, bounded to
  :data:`JUNCTION_DRIFT` outside the tolerance band, started from the
  healthy linearisation; the exact sensitivity column of the part at each
  trial value gives the step and, at the end, the curvature (the drift's
  standard deviation and its Occam factor, as in :mod:`.drifts`).
* ``leaky`` (diodes): the leak resistance across the junction is fitted by a
  grid over its log (:data:`LEAK_RANGE`) and two parabolic refinements, with
  a log-uniform prior over the range (Occam factor, as in :mod:`.shorts`).

Hypotheses on the linear parts of a nonlinear board are scored first by the
usual fast path on the linearisation at the healthy operating point; the
leading ones (:data:`NONLINEAR_TOP`) are then re-scored by an exact
nonlinear re-solve (:func:`rescore_leaders`), since the linearisation holds
only near the healthy operating point.

Nothing here runs on a linear board (``circuit.is_nonlinear`` false).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..errors import SolveError
from ..model import Part
from .drifts import _occam
from .faults import Fault
from .nonlinear import Solution
from .predict import predict

__all__ = ["JUNCTION_DRIFT", "LEAK_RANGE", "NONLINEAR_TOP", "EXACT_ALL", "RESCORE_WINDOW",
           "split_junctions", "Exact", "junction_first_pass", "nonlinear_candidates",
           "rescore_leaders", "exact_faults", "exact_sensitivity"]

#: Drift range of a junction's value (forward or zener voltage), as a factor of nominal:
#: a forward voltage halved (a die damaged towards a short) to doubled (a
#: junction gone resistive); common practice (no source).
JUNCTION_DRIFT = (0.5, 2.0)
#: Range of a leaky diode's leak resistance (ohms): 100 ohm (nearly short) to 10 Mohm
#: (the leakage a diode test no longer shows); common practice (no source).
LEAK_RANGE = (1e2, 1e7)
#: Leading hypotheses re-scored by an exact nonlinear re-solve.
NONLINEAR_TOP = 8
#: A linearised hypothesis within this (log posterior) of the best exactly
#: solved one is re-solved too, up to :data:`RESCORE_MAX` in all.
RESCORE_WINDOW = 10.0
RESCORE_MAX = 40
#: On boards of at most this many parts a junction's drift and a diode's leak are
#: fitted by exact re-solves in the first pass; on larger ones the first pass takes
#: the healthy linearisation's drift and the leak's grid, and the fits are refined
#: by re-solves only for the hypotheses that lead (:func:`rescore_leaders`).
FULL_FIT_PARTS = 60
#: Boards with at most this many open / short / dead hypotheses of linear parts
#: have each of them re-solved exactly in the first pass: an open or short near a
#: junction moves its working point far beyond what the linearisation holds.
EXACT_ALL = 150
#: Gauss-Newton steps of a junction drift fit.
_GN_STEPS = 4
_LEAK_GRID = 5
#: Leak resistance of a large board's one-solve leak screen (ohms).
LEAK_PROBE = 1e4
#: Forward-difference step of the leak fit, in ln r.
_FD = 1e-3
_ERRORS = (SolveError, ValueError, ZeroDivisionError, FloatingPointError, ArithmeticError,
           np.linalg.LinAlgError)


def split_junctions(parts):
    """``(linear parts, semiconductor parts)`` of ``parts``, in their order."""
    lin = [p for p in parts if not p.is_semiconductor]
    semi = [p for p in parts if p.is_semiconductor]
    return lin, semi


def _override(circuit, f):
    """The engine's override of one Fault (see :func:`Exact.solve`), or None when the
    fault is written into the circuit instead (a short with a resistance)."""
    p = circuit.part(f.ref)
    if f.mode == "drift":
        return float(f.value)
    if f.mode == "leaky":
        return ("leaky", float(f.value))
    if f.mode == "short" and f.value and not p.is_semiconductor:
        return None
    return f.mode


def _faulted(circuit, faults):
    """The circuit and overrides that plant ``faults``.

    A linear part's short with a fitted resistance ``r`` is a resistor of ``r``
    across the part (as :mod:`.shorts` models it), added to the circuit.
    """
    overrides, extra = {}, []
    for f in faults:
        ov = _override(circuit, f)
        if ov is None:
            p = circuit.part(f.ref)
            extra.append(Part(f"__short_{f.ref}__", "resistor", tuple(p.nodes[:2]), float(f.value)))
        else:
            overrides[f.ref] = ov
    if extra:
        circuit = replace(circuit, parts=tuple(circuit.parts) + tuple(extra))
    return circuit, overrides


#: Solutions of faulted variants by (board, variant): the live operating point's element
#: voltages and each power-off reading's, where a later solve of the same variant starts
#: (:class:`~.nonlinear.Solution`: one Newton iteration).  Kept across diagnoses of the
#: same circuit object (re-diagnosing after a new reading solves the same variants).
_SOLVED: dict = {}


def _key_of(overrides):
    """A hashable form of a variant's overrides."""
    return tuple(sorted((r, repr(v)) for r, v in overrides.items()))


def _key(faults):
    return tuple(sorted((f.ref, f.mode, None if f.value is None else round(float(f.value), 12))
                        for f in faults))


class Exact:
    """Exact nonlinear evaluation of fault hypotheses on an Evaluator's board.

    One re-solve per hypothesis (cached): the displays and the sensitivities
    (columns in the evaluator's parameter order; the faulted parts' own
    columns are kept, :func:`exact_sensitivity` drops them).
    """

    def __init__(self, ev):
        self.ev = ev
        self.cache = {}
        self.vals = {}     # displays without the power-off readings' sensitivity rows
        self.solves = 0
        # Newton starts from the healthy operating point (the DC group predict() shared)
        share = getattr(ev, "share", None) or {}
        self.warm = getattr(share.get(("dc", None)), "op", None)
        # live readings (one DC operating point) and the others (power off, lifted)
        self.live = [i for i, rd in enumerate(ev.readings)
                     if rd.quantity in ("voltage", "current")]
        self.live_set = set(self.live)
        # what a first pass on a large board solves: the live and lifted readings
        self.cheap = [i for i, rd in enumerate(ev.readings)
                      if i in self.live_set or rd.setup == "lifted"]
        # power-off readings' solutions on the healthy board, where their Newton solves
        # on a faulted variant start (filled on first use: :meth:`_off_warm`)
        self.off_warm = None

    def _off_warm(self):
        """The healthy board's power-off solutions by (plus, minus, quantity)."""
        if self.off_warm is None:
            ev = self.ev
            self.off_warm = {}
            off = [ev.readings[i] for i in range(ev.n) if i not in set(self.cheap)]
            have = getattr(ev, "off_ops", None)     # the Evaluator's healthy predict's
            if have is not None and all(_off_key(ev.circuit, rd) in have for rd in off):
                self.off_warm = have
                return have
            if off:
                try:
                    predict(ev.circuit, off, ev.meters, off_warm=self.off_warm, sens=False)
                except _ERRORS:
                    pass     # a reading without a healthy solution starts from cold
        return self.off_warm

    def solve(self, faults, sens=True):
        """``(displays (n,), sensitivity (n, m))`` under ``faults``; NaN displays and
        None when the faulted board cannot be solved.

        ``sens`` False: only the displays are wanted (no adjoint solves; the
        sensitivity returned is None); a displays-only result already cached for the
        live readings (:meth:`solve_live`) is completed by the power-off readings alone
        (:meth:`_from_live`)."""
        key = _key(faults)
        got = self.cache.get(key)
        if got is not None:
            return got
        if not sens:
            got = self.vals.get(key)
            if got is not None:
                return got
        ev = self.ev
        circuit, overrides = _faulted(ev.circuit, faults)
        self.solves += 1
        got = self._from_live(key, circuit, overrides, sens)
        if got is None:
            try:
                got = self._solve(circuit, overrides, range(ev.n), sens)
            except _ERRORS:
                got = self._piecewise(circuit, overrides, sens)
        store = self.cache if sens else self.vals
        if len(store) > 4096:
            store.clear()
        store[key] = got
        return got

    def solve_live(self, faults):
        """:meth:`solve` without the power-off readings (each its own Newton solve), and
        displays only: the power-off readings stand at ``Board.off_fill`` (what was read)
        until the hypothesis is re-solved in full (:func:`rescore_leaders`).  The full
        (displays-only) solve when there is nothing to save."""
        ev = self.ev
        fill = getattr(ev, "off_fill", None)
        if fill is None or len(self.cheap) == ev.n:
            return self.solve(faults, sens=False)
        key = ("live",) + _key(faults)
        got = self.vals.get(key)
        if got is None:
            circuit, overrides = _faulted(ev.circuit, faults)
            try:
                val = self._solve(circuit, overrides, self.cheap, False)[0] if self.cheap else \
                    np.full(ev.n, np.nan)
                rest = [i for i in range(ev.n) if i not in set(self.cheap)]
                val[rest] = fill[rest]
                got = (val, None)
            except _ERRORS:
                got = (np.full(ev.n, np.nan), None)
            self.vals[key] = got
        return got

    def _from_live(self, key, circuit, overrides, sens=True):
        """The displays-only full solve from a :meth:`solve_live` result already cached:
        its live and lifted rows (the same operating point a full solve computes) and
        the power-off readings solved now (they need no operating point).  None when
        sensitivities are wanted, when there is no such result or when the power-off
        solve fails (the caller solves it all)."""
        if sens:
            return None
        live = self.vals.get(("live",) + key)
        if live is None or np.isnan(live[0][self.cheap]).any():
            return None
        ev = self.ev
        cheap = set(self.cheap)
        off = [i for i in range(ev.n) if i not in cheap]
        val = live[0].copy()
        try:
            val[off] = self._solve(circuit, overrides, off, False)[0][off]
        except _ERRORS:
            return None
        return val, None

    def _solve(self, circuit, overrides, rows, sens=True):
        """Displays and sensitivities of the readings ``rows`` (raises when unsolvable);
        ``sens`` False: the displays only (the sensitivity returned is None)."""
        ev = self.ev
        rows = list(rows)
        rds = [ev.readings[i] for i in rows]
        # Newton starts from this variant's own solution when it was solved before (in
        # this diagnosis or an earlier one of the same board), else from the healthy one
        extra = tuple((p.ref, p.nodes, p.value) for p in circuit.parts[len(ev.circuit.parts):]) \
            if circuit is not ev.circuit else ()
        skey = (id(ev.circuit), extra) + _key_of(overrides)
        hit = _SOLVED.get(skey)
        if hit is not None and hit[0] is not ev.circuit:
            hit = None
        warm = hit[1] if hit is not None and hit[1] is not None else self.warm
        kw = {"warm": warm} if warm is not None else {}
        keep = None
        if any(i not in self.live_set for i in rows):
            off = self._off_warm()
            kw["off_warm"] = {**off, **hit[2]} if hit is not None else off
            kw["off_keep"] = keep = {}
        # predict() re-solves with the meter in the circuit where the meter loads a node
        # heavily (a pad above an open LED): docs/junction-models.md
        pr = predict(circuit, rds, ev.meters, overrides=overrides, sens=sens, **kw)
        live = Solution(pr.operating_point) if pr.operating_point is not None else None
        offs = dict(hit[2]) if hit is not None else {}
        offs.update({k: Solution(op.voltages()) for k, op in (keep or {}).items()})
        if len(_SOLVED) >= 4096:
            _SOLVED.clear()
        _SOLVED[skey] = (ev.circuit, live or (hit[1] if hit is not None else None), offs)
        val = np.full(ev.n, np.nan)
        val[rows] = np.asarray(pr.value, dtype=float)
        if not sens:
            return val, None
        S = np.zeros((ev.n, len(ev.params)))
        col = [ev.pindex.get(r, -1) for r in pr.params]
        have = [k for k, j in enumerate(col) if j >= 0]
        S[np.ix_(rows, [col[k] for k in have])] = np.asarray(pr.sensitivity, dtype=float)[:, have]
        return val, np.nan_to_num(S, nan=0.0, posinf=0.0, neginf=0.0)

    def _piecewise(self, circuit, overrides, sens=True):
        """The readings of a faulted board one analysis at a time, when one of them has no
        solution (a power-off reading the engine cannot settle, a node left held only by
        junctions): the live readings together, each power-off reading alone.  A reading
        that still has none is left at what was read (it neither helps nor hurts the
        hypothesis: ``Board.off_fill``); with no live solution the hypothesis has none."""
        ev = self.ev
        off = [i for i in range(ev.n) if i not in self.live_set]
        val = np.full(ev.n, np.nan)
        S = np.zeros((ev.n, len(ev.params))) if sens else None
        if self.live:
            try:
                v, s = self._solve(circuit, overrides, self.live, sens)
            except _ERRORS:
                return val, None
            val[self.live] = v[self.live]
            if sens:
                S[self.live] = s[self.live]
        fill = getattr(ev, "off_fill", None)
        if fill is None:   # a Board without readings' values (advice): the reading is unknown
            fill = np.full(ev.n, np.nan)
        for i in off:
            try:
                v, s = self._solve(circuit, overrides, [i], sens)
                val[i] = v[i]
                if sens:
                    S[i] = s[i]
            except _ERRORS:
                val[i] = fill[i]
        return val, S


def _off_key(circuit, rd):
    """A power-off reading's key in the warm starts' dict (engine/semis.py)."""
    plus, minus = circuit.part(rd.part).nodes[:2] if rd.part is not None else (rd.plus, rd.minus)
    return (plus, minus, rd.quantity)


def _exact(ev) -> Exact:
    ex = ev.__dict__.get("_exact_nl")
    if ex is None:
        ex = ev._exact_nl = Exact(ev)
    return ex


def exact_faults(board, faults):
    """Displays of ``board``'s readings under ``faults`` by an exact nonlinear re-solve."""
    return _exact(board).solve(list(faults), sens=False)[0]


def exact_sensitivity(ev, faults):
    """Sensitivities of the faulted nonlinear board (the faulted parts' columns zero), or None."""
    _, S = _exact(ev).solve(list(faults))
    if S is None:
        return None
    S = S.copy()
    for j in ev.drop_cols(faults):
        if j >= 0:
            S[:, j] = 0.0
    return S


# ----------------------------------------------------------------- scoring helpers
def _weights(ev, drop):
    """Diagonal weights 1 / (meter variance + tolerance spread) of the numeric readings,
    without the column ``drop``; zero for OL readings."""
    e = ev.ev
    var = np.diag(e.T0).copy()
    if drop >= 0:
        var = var - e.S0[:, drop] ** 2 * e.var_p[drop]
    var = np.clip(var, 0.0, None) + e.u ** 2
    w = np.where(e.ol | ~np.isfinite(e.y) | ~np.isfinite(e.pred0), 0.0, 1.0 / np.where(var > 0, var, 1.0))
    return w


def _chi2(ev, P, drop):
    """First-pass chi-square of rows ``P`` (k, n) with part column ``drop`` removed."""
    P = np.atleast_2d(P)
    return ev.ev.chi2_rows(P, [[drop]] * len(P))


def _drift_spec(part):
    lo, hi = np.log(JUNCTION_DRIFT)
    return lo, hi, float(np.log1p(-min(part.tol_low, 0.999))), float(np.log1p(part.tol_high))


def _outside(rho, blo, bhi):
    """``rho`` moved to the nearer edge of the band (blo, bhi) when inside it."""
    if blo < rho < bhi:
        return bhi if rho >= 0.5 * (blo + bhi) else blo
    return rho


def fit_junction_drift(ev, part, exact=True):
    """Best drifted value of a junction ``part`` (Gauss-Newton on the exact re-solve).

    ``exact`` False (large boards' first pass): the step from the healthy
    linearisation alone, predicted on it (re-solved if it leads, :func:`rescore_leaders`).

    Returns
    -------
    (Fault, prediction, sd or None, log Occam factor)
    """
    ex = _exact(ev)
    j = ev.pindex.get(part.ref, -1)
    lo, hi, blo, bhi = spec = _drift_spec(part)
    w = _weights(ev, j)
    y = np.where(np.isfinite(ev.ev.y), ev.ev.y, 0.0)
    s0 = ev.S0[:, j] if j >= 0 else np.zeros(ev.n)
    info = float(np.sum(w * s0 ** 2))
    if j < 0 or info < 1e-6:   # the readings do not see this junction's value
        rho = hi
        f = Fault(part.ref, "drift", float(part.value * np.exp(rho)), seen=False)
        return f, ex.solve([f], sens=False)[0], None, 0.0
    r0 = np.where(w > 0, y - np.where(np.isfinite(ev.healthy_prediction()), ev.healthy_prediction(), 0.0), 0.0)
    rho = float(np.clip(np.sum(w * s0 * r0) / info, lo, hi))
    if not exact:
        rho = float(np.clip(_outside(rho, blo, bhi), lo, hi))
        pred = np.where(np.isfinite(ev.healthy_prediction()), ev.healthy_prediction() + s0 * rho,
                        ev.healthy_prediction())
        sd = float(np.sqrt(1.0 / info))
        return Fault(part.ref, "drift", float(part.value * np.exp(rho))), pred, sd, _occam(sd, spec)
    best = _drift_gauss_newton(ev, part, j, rho, (lo, hi, blo, bhi), w, y)
    if best is None:
        f = Fault(part.ref, "drift", float(part.value * np.exp(hi)))
        return f, np.full(ev.n, np.nan), None, 0.0
    c2, rho, f, pred, S = best
    g = float(np.sum(w * S[:, j] ** 2))
    sd = float(np.sqrt(1.0 / g)) if g > 0 else None
    if sd:
        c2, rho, f, pred = _polish_drift(_exact(ev), ev, part, j, (c2, rho, f, pred), sd, spec)
    occam = _occam(sd, spec) if sd else 0.0
    return f, pred, sd, occam


def _drift_gauss_newton(ev, part, j, rho, bounds, w, y):
    """Gauss-Newton on the log-value ``rho`` of ``part``'s drift (column ``j``), each
    step an exact re-solve of the drifted board (:meth:`Exact.solve`, with its
    sensitivities), kept out of the tolerance band and within the drift range
    ``bounds = (lo, hi, band low, band high)``; a step that raises the chi-square is
    halved back.  Returns the best ``(chi2, rho, Fault, prediction, sensitivity)``,
    or None when the first trial has no solution."""
    lo, hi, blo, bhi = bounds
    ex = _exact(ev)
    best = None
    for _ in range(_GN_STEPS):
        rho = float(np.clip(_outside(rho, blo, bhi), lo, hi))
        f = Fault(part.ref, "drift", float(part.value * np.exp(rho)))
        pred, S = ex.solve([f])
        if S is None or np.isnan(pred).any():
            break
        c2 = float(_chi2(ev, pred, j)[0])
        if best is None or c2 < best[0]:
            best = (c2, rho, f, pred, S)
        elif c2 > best[0]:
            rho = 0.5 * (rho + best[1])     # overshot: halve the step back
            continue
        sj = S[:, j]
        g = float(np.sum(w * sj * sj))
        if g <= 0:
            break
        step = float(np.sum(w * sj * np.where(np.isfinite(pred), y - pred, 0.0)) / g)
        if abs(step) < 1e-4:
            break
        rho = rho + step
    return best


def _polish_drift(ex, ev, part, j, best, sd, spec):
    """A junction drift moved towards the minimum of the chi-square itself.

    Gauss-Newton weighs the readings one by one, so where readings share a
    spread (the nodes of one LED string and its supply) it can stop off the
    score's own minimum (an LED 25 % low came out 21 % low and lost to the
    healthy board, tests/heldout_semis).  Two rounds: the score at ``rho`` and
    ``rho +- d`` (``d`` = the drift's sd, at most 0.1; the side towards
    nominal stops at the tolerance band's edge), then at the vertex of the
    parabola through them.  At most six more re-solves (values only).
    """
    lo, hi, blo, bhi = spec
    seen = {}

    def score(r):
        r = float(np.clip(r, lo, hi))
        if r not in seen:
            f = Fault(part.ref, "drift", float(part.value * np.exp(r)))
            pr = ex.solve([f], sens=False)[0]
            seen[r] = (np.inf if np.isnan(pr).any() else float(_chi2(ev, pr, j)[0]), r, f, pr)
        return seen[r]

    c0, r0, f0, p0 = best
    seen[r0] = (c0, r0, f0, p0)
    d = min(sd, 0.1)
    for _ in range(2):
        r0 = min(seen.values(), key=lambda t: t[0])[1]
        left, right = r0 - d, r0 + d
        if r0 <= blo:
            right = min(right, blo)
        if r0 >= bhi:
            left = max(left, bhi)
        x = sorted({float(np.clip(v, lo, hi)) for v in (left, r0, right)})
        if len(x) < 3:
            break
        y = [score(v)[0] for v in x]
        if not np.all(np.isfinite(y)):
            break
        d1 = (y[1] - y[0]) / (x[1] - x[0])
        d2 = (y[2] - y[1]) / (x[2] - x[1])
        curv = (d2 - d1) / (x[2] - x[0])
        if curv > 0:
            rv = float(np.clip(0.5 * (x[0] + x[1]) - d1 / (2.0 * curv), x[0] - d, x[2] + d))
            if not (blo < rv < bhi):
                score(rv)
        d *= 0.5
    c, r, f, pr = min(seen.values(), key=lambda t: t[0])
    return c, r, f, pr


def fit_leak(ev, part, refine=True):
    """Best leak resistance of a leaky diode ``part`` (grid + parabolas on the exact re-solve).

    ``refine`` False (large boards' first pass): the grid's best only.
    Five points over ``ln r`` in :data:`LEAK_RANGE`, then Gauss-Newton from the
    best of them (the derivative by a forward difference): a diode test across
    the leak reads it nearly in proportion, which no coarse parabola follows.

    Returns
    -------
    (Fault, prediction, None, log Occam factor)
    """
    ex = _exact(ev)
    j = -1   # a leak keeps the diode's own tolerance column (Board.drop_cols)
    lo, hi = np.log(LEAK_RANGE)
    seen = {}

    def score(x):
        x = float(np.clip(x, lo, hi))
        if x not in seen:
            f = Fault(part.ref, "leaky", float(np.exp(x)))
            pred, _ = ex.solve([f], sens=False)
            c2 = np.inf if np.isnan(pred).any() else float(_chi2(ev, pred, j)[0])
            seen[x] = (c2, f, pred)
        return seen[x]

    if not refine:   # large boards: one re-solve, the leak's conductance fitted on the line
        return _leak_on_line(ev, part, score, lo, hi)
    grid = np.linspace(lo, hi, _LEAK_GRID)
    cc = np.array([score(x)[0] for x in grid])
    fin = cc[np.isfinite(cc)]
    if fin.size == 0:
        got = score(hi)
        return got[1], got[2], None, 0.0
    if fin.max() - fin.min() < 0.05:   # unseen: no leak the readings can tell from none
        got = score(hi)
        return got[1], got[2], None, 0.0
    # Gauss-Newton on ln r from the grid's best, the derivative by a forward difference
    w = _weights(ev, j)
    y = np.where(np.isfinite(ev.ev.y), ev.ev.y, 0.0)
    x = float(grid[int(np.argmin(cc))])
    g = None
    for _ in range(_GN_STEPS + 1 if refine else 0):
        c0, _, p0 = score(x)
        c1, _, p1 = score(x + _FD)
        if not (np.isfinite(c0) and np.isfinite(c1)):
            break
        use = np.isfinite(p0) & np.isfinite(p1) & (w > 0)
        with np.errstate(invalid="ignore"):
            jac = np.where(use, (p1 - p0) / _FD, 0.0)
        g = float(np.sum(w * jac * jac))
        if g <= 0:
            break
        step = float(np.sum(w * jac * np.where(use, y - p0, 0.0)) / g)
        step = float(np.clip(step, -(hi - lo) / 4, (hi - lo) / 4))
        new = float(np.clip(x + step, lo, hi))
        if abs(new - x) < 1e-3:
            break
        if score(new)[0] > c0:   # overshot: half the step
            new = float(np.clip(x + 0.5 * step, lo, hi))
            if score(new)[0] > c0:
                break
        x = new
    best = min(seen.values(), key=lambda t: t[0])
    span = hi - lo
    occam = 0.0
    if g:
        sd = float(np.sqrt(1.0 / g))
        occam = float(np.log(min(np.sqrt(2 * np.pi) * sd, span) / span))
    return best[1], best[2], None, occam


def _leak_on_line(ev, part, score, lo, hi):
    """A leak's first-pass screen on a large board: one re-solve at :data:`LEAK_PROBE`
    (without the power-off readings, :meth:`Exact.solve_live`), the
    readings taken as linear in the leak's conductance through it and the healthy board,
    the conductance fitted in closed form (refined by re-solves if it leads)."""
    f1 = Fault(part.ref, "leaky", float(LEAK_PROBE))
    p1 = _exact(ev).solve_live([f1])[0]
    c1 = np.inf if np.isnan(p1).any() else float(_chi2(ev, p1, -1)[0])
    p0 = ev.healthy_prediction()
    w = _weights(ev, -1)
    ok = np.isfinite(p0) & np.isfinite(p1) & (w > 0)
    d = np.where(ok, p1 - p0, 0.0)
    y = np.where(np.isfinite(ev.ev.y), ev.ev.y, 0.0)
    info = float(np.sum(w * d * d))
    if not np.isfinite(c1) or info < 1e-6:   # the readings do not see a leak here
        return f1, p1, None, 0.0
    t = float(np.sum(w * d * np.where(ok, y - p0, 0.0)) / info)
    g = float(np.clip(t / LEAK_PROBE, 1.0 / np.exp(hi), 1.0 / np.exp(lo)))
    pred = np.where(ok, p0 + d * g * LEAK_PROBE, p1)
    return Fault(part.ref, "leaky", 1.0 / g), pred, None, 0.0


def junction_first_pass(ev, parts):
    """Every fault hypothesis of the semiconductor ``parts``, by exact re-solves.

    Returns
    -------
    list of (Fault, prediction, drift sd or None, log Occam factor)
        In the form of :func:`.hypotheses._first_pass`'s candidates.
    """
    ex = _exact(ev)
    full = len(ev.circuit.parts) <= FULL_FIT_PARTS   # large boards: fits refined if they lead
    cands = []
    for p in parts:
        for mode in p.fault_modes:
            if mode == "drift":
                cands.append(fit_junction_drift(ev, p, exact=full))
            elif mode == "leaky":
                cands.append(fit_leak(ev, p, refine=full))
            else:
                f = Fault(p.ref, mode)
                cands.append((f, (ex.solve([f], sens=False) if full else ex.solve_live([f]))[0],
                              None, 0.0))
    return cands


def nonlinear_candidates(ev, parts, linear_candidates):
    """The first pass's candidates on a board with junctions.

    Junction faults by exact re-solves (:func:`junction_first_pass`); the
    linear parts' opens, shorts and dead sources also by exact re-solves when
    there are at most :data:`EXACT_ALL` of them, else on the linearisation
    (``linear_candidates``, the fast path of :mod:`.hypotheses`); their drifts
    on the linearisation (refitted exactly if they lead, :func:`rescore_leaders`).
    Power-off readings the linearisation cannot give stand at what was read
    for the linearised candidates (they are re-solved before they count).
    """
    lin, semis = split_junctions(parts)
    discrete = [(p, m) for p in lin for m in p.fault_modes if m != "drift"]
    if len(discrete) <= EXACT_ALL:
        ex = _exact(ev)
        cands = []
        for p, m in discrete:
            f = Fault(p.ref, m)
            cands.append((f, ex.solve([f], sens=False)[0], None, 0.0))
        cands += ev.fit_drifts([p for p in lin if "drift" in p.fault_modes])
    else:
        cands = linear_candidates(ev, lin)
    return cands + junction_first_pass(ev, semis)


def is_exact(ev, h) -> bool:
    """True when ``h``'s prediction came from an exact re-solve and fit (or it is the
    healthy board); a large board's first-pass leak is solved but not yet refined."""
    if not h.faults:
        return True
    if (len(h.faults) == 1 and h.faults[0].mode == "leaky"
            and len(ev.circuit.parts) > FULL_FIT_PARTS and not getattr(h, "_refined", False)):
        return False
    ex = _exact(ev)
    key = _key(h.faults)
    return key in ex.cache or key in ex.vals


def rescore_leaders(ev, hyps, top=NONLINEAR_TOP):
    """Re-predict the leading linearised hypotheses by an exact nonlinear re-solve.

    Hypotheses on linear parts scored on the linearisation at the healthy
    operating point are predicted again on the faulted board: the first
    ``top`` of ``hyps`` (sorted), then any other within
    :data:`RESCORE_WINDOW` of the best exactly solved one, at most
    :data:`RESCORE_MAX` in all.  A drift of a linear part is refitted by
    Gauss-Newton on the exact re-solve.  Returns the list re-sorted (the
    leaders to be re-scored by :meth:`~.hypotheses.Evaluator.exact`).
    """
    out = sorted(hyps, key=lambda h: -h.log_post)
    done = 0
    for i in range(min(top, len(out))):
        if not is_exact(ev, out[i]) and done < RESCORE_MAX:
            out[i] = _resolve(ev, out[i])
            done += 1
    while done < RESCORE_MAX:
        out.sort(key=lambda h: -h.log_post)
        lead = max((h.log_post for h in out if is_exact(ev, h)), default=-np.inf)
        todo = [i for i, h in enumerate(out) if not is_exact(ev, h) and h.log_post > lead - RESCORE_WINDOW]
        if not todo:
            break
        for i in todo[: RESCORE_MAX - done]:
            out[i] = _resolve(ev, out[i])
            done += 1
    out.sort(key=lambda h: -h.log_post)
    return out


def _resolve(ev, h):
    """``h`` predicted again by the exact re-solve (a linear drift refitted); its score
    drops out when the faulted board has no operating point."""
    part = ev.circuit.part(h.faults[0].ref) if len(h.faults) == 1 else None
    if part is not None and part.is_semiconductor and h.faults[0].mode in ("drift", "leaky"):
        fit = fit_junction_drift if h.faults[0].mode == "drift" else fit_leak
        f, pred, sd, occam = fit(ev, part)
        faults = [f]
    elif len(h.faults) == 1 and h.faults[0].mode == "drift" and h.faults[0].seen:
        f, pred, sd, occam = _refit_linear_drift(ev, h)
        faults = [f]
    else:
        pred, sd, occam = exact_faults(ev, h.faults), h.drift_sd, h.occam
        faults = list(h.faults)
    if np.isnan(pred).any():
        h.log_post = -np.inf
        return h
    out = ev.make(faults, pred, drift_sd=sd, occam=occam)
    out._refined = True
    return out


def _refit_linear_drift(ev, h):
    """A linear part's drift refitted on the exact re-solve (Gauss-Newton from its value)."""
    f0 = h.faults[0]
    part = ev.circuit.part(f0.ref)
    j = ev.pindex.get(part.ref, -1)
    lo, hi, blo, bhi = spec = ev.drift_range(part)
    w = _weights(ev, j)
    y = np.where(np.isfinite(ev.ev.y), ev.ev.y, 0.0)
    rho = float(np.log(f0.value / part.value))
    best = _drift_gauss_newton(ev, part, j, rho, (lo, hi, blo, bhi), w, y)
    if best is None:
        return f0, exact_faults(ev, [f0]), h.drift_sd, h.occam
    _, _, f, pred, S = best
    g = float(np.sum(w * S[:, j] ** 2))
    sd = float(np.sqrt(1.0 / g)) if g > 0 else h.drift_sd
    return f, pred, sd, (_occam(sd, spec) if sd else h.occam)
