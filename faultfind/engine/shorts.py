"""Shorts with a resistance: the short's own resistance fitted to the readings.

A short is modelled as a resistance ``r`` across the part's terminals (in
parallel with the part), with ``0 <= r <= r_max``: ``r = 0`` is the exact
short of :mod:`.updates` (the ``1/d = 0`` limit), and a real short -- a
solder bridge, a punctured capacitor, welded contacts, a crushed cable --
has some milliohms to an ohm.  The largest short resistance is the point
where a short becomes a drift: 1/100 of a resistor's value (the bottom of
its drift range, ``hypotheses.RESISTOR_FLOOR``), so that a lifted resistor
reading a fraction of an ohm is a short, not a drift of -99.8 %; for a
capacitor, an inductor or a switch's welded contacts :data:`SHORT_MAX`
(common practice (no source)).

The prior of ``r`` is log-uniform over ``[r_max 1e-6, r_max]`` (six
decades; below, the readings cannot tell the resistance from zero).  The fit
is a grid over ``ln r`` and parabolic refinements, as for a drift, and the
hypothesis pays the Occam factor of the fitted resistance when the readings
pin it (``sqrt(2 pi) sd / span``); when they cannot tell it from zero the
exact short is kept at no cost, so a short the readings do not resolve
scores exactly as before.
"""

from __future__ import annotations

import numpy as np

from .drifts import parabola_step

__all__ = ["SHORT_MAX", "SHORT_DECADES", "short_range", "short_admittance", "lifted_short",
           "fit_shorts"]

#: Largest resistance of a short (ohms): 1 ohm (common practice (no source)).
SHORT_MAX = 1.0
#: A resistor's short reaches up to this share of its value (its drift range starts there).
RESISTOR_SHARE = 1e-2
#: Decades of the short resistance's log-uniform prior below ``r_max``.
SHORT_DECADES = 6
_GRID = 9
#: A short whose best grid point is this far (chi-square) behind the best of all
#: shorts is not refined: it cannot lead.
SEARCH_WINDOW = 50.0
#: A part whose line bound is this far (log-likelihood) below the best zero-ohm
#: short or the healthy circuit is not fitted: the screen's margin (25) and half
#: the search window, for the priors of other kinds (common practice (no source)).
BOUND_MARGIN = 50.0


def short_range(part):
    """``(ln r_lo, ln r_max)`` of a short of ``part``."""
    rmax = SHORT_MAX
    if part.kind == "resistor":
        rmax = RESISTOR_SHARE * part.value
    return np.log(rmax) - SHORT_DECADES * np.log(10.0), float(np.log(rmax))


def short_admittance(y0, r):
    """Admittance of a part of admittance ``y0`` with a short of resistance ``r`` across it
    (``inf`` where ``r == 0``)."""
    r = np.asarray(r, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(r > 0, y0 + 1.0 / np.where(r > 0, r, 1.0), np.inf)


def lifted_short(part, r, healthy_ohms):
    """What an ohmmeter reads across a lifted ``part`` shorted by ``r`` (``healthy_ohms``:
    its healthy lifted reading, ``inf`` for a capacitor)."""
    if r is None or r <= 0:
        return 0.0
    if not np.isfinite(healthy_ohms):
        return float(r)
    return float(r * healthy_ohms / (r + healthy_ohms)) if healthy_ohms > 0 else 0.0


def fit_shorts(ev, parts):
    """Best short resistance of each part and its Occam factor.

    Parameters
    ----------
    ev : hypotheses.Evaluator
    parts : list of Part
        Parts with a ``short`` mode.

    Returns
    -------
    list of (value or None, prediction, log Occam factor)
        ``value`` None: the exact short (the readings cannot tell ``r`` from 0,
        or they favour it).
    """
    if not parts:
        return []
    P0 = ev.predict_many([(p, "short", None) for p in parts])
    fit, c0 = _worth_fitting(ev, parts, P0)
    out = [None if f else (None, pz[0], 0.0) for f, pz in zip(fit, P0)]
    keep = np.flatnonzero(fit)
    if keep.size == 0:
        return out
    if keep.size < len(parts):
        full = out
        parts = [parts[i] for i in keep]
        P0 = [P0[i] for i in keep]
        for i, got in zip(keep, _fit(ev, parts, P0, None if c0 is None else c0[keep])):
            full[i] = got
        return full
    return _fit(ev, parts, P0, c0)


def _worth_fitting(ev, parts, P0):
    """Which parts' short resistance can matter (bool per part).

    A part whose best possible fault of any kind (its line bound,
    :func:`.screen.board_bounds`) stays :data:`BOUND_MARGIN` below the best
    zero-ohm short and the healthy circuit cannot come near the leader with
    any short resistance: it keeps the exact short.  Parts without a bound
    (lifted or current readings on them, sources, AC readings) are fitted.
    """
    from .screen import board_bounds
    fit = np.ones(len(parts), dtype=bool)
    lb, ll0 = board_bounds(ev)
    if lb is None or not parts:
        return fit, None
    gain = dict(zip(lb.refs, lb.gain.tolist()))
    c2, ld = ev.ev.chi2_rows(np.vstack([pz[0] for pz in P0]), [[ev.pindex.get(p.ref, -1)] for p in parts],
                             True)
    ll = -0.5 * (c2 + ld)
    lead = max(ll0, float(np.max(np.where(np.isfinite(ll), ll, -np.inf))))
    for i, p in enumerate(parts):
        g = gain.get(p.ref)
        if g is not None and ll0 + g < lead - BOUND_MARGIN:
            fit[i] = False
    return fit, c2


def _fit(ev, parts, P0, c0=None):
    """:func:`fit_shorts` of ``parts`` (their zero-ohm short predictions ``P0`` and, if
    known, chi-squares ``c0``)."""
    specs = [short_range(p) for p in parts]
    spec = np.array(specs, dtype=float)
    grid_all = np.linspace(spec[:, 0], spec[:, 1], _GRID, axis=1)
    grids = list(grid_all)
    P = ev.predict_many([(p, "short", np.exp(g)) for p, g in zip(parts, grids)])
    c0 = ev._chi2_blocks(parts, P0) if c0 is None else [np.array([x]) for x in c0]
    cg = ev._chi2_blocks(parts, P)
    out = [None] * len(parts)
    live = []
    lows = [min(float(np.min(np.where(np.isfinite(c), c, np.inf))), float(z[0]) if np.isfinite(z[0]) else np.inf)
            for c, z in zip(cg, c0)]
    lead = min(lows) if lows else np.inf
    for i, (pz, c_zero, c_grid) in enumerate(zip(P0, c0, cg)):
        fin = c_grid[np.isfinite(c_grid)]
        if fin.size == 0 or not np.isfinite(c_zero[0]):
            out[i] = (None, pz[0], 0.0)
            continue
        if fin.max() - fin.min() < 0.05 or c_zero[0] <= fin.min() + 0.05:
            out[i] = (None, pz[0], 0.0)     # r unseen, or zero fits best
            continue
        if fin.min() > lead + SEARCH_WINDOW:
            # far behind the best short: the grid's best stands, unrefined (it cannot lead)
            b = int(np.argmin(np.where(np.isfinite(c_grid), c_grid, np.inf)))
            out[i] = (float(np.exp(grids[i][b])), P[i][b], 0.0)
            continue
        live.append(i)
    if not live:
        return out
    rho = np.array([grids[i][int(np.nanargmin(np.where(np.isfinite(cg[i]), cg[i], np.inf)))] for i in live])
    lo = np.array([specs[i][0] for i in live])
    hi = np.array([specs[i][1] for i in live])
    step = (hi - lo) / (_GRID - 1)
    curv = np.full(len(live), np.nan)
    offs = np.array([-1.0, -0.5, 0.0, 0.5, 1.0])
    for shrink in (1.0, 0.15, 0.02):
        pts = np.clip(rho[:, None] + (step * shrink)[:, None] * offs, lo[:, None], hi[:, None])
        P2 = ev.predict_many([(parts[i], "short", np.exp(pts[k])) for k, i in enumerate(live)])
        cc = np.vstack(ev._chi2_blocks([parts[i] for i in live], P2))
        cc = np.where(np.isfinite(cc), cc, np.inf)
        rho, vx, a, ok = parabola_step(pts, cc)
        rho = np.where(ok, vx, rho)
        curv = np.where(ok, 2 * a, curv)
    Pf = ev.predict_many([(parts[i], "short", np.array([np.exp(rho[k])])) for k, i in enumerate(live)])
    for k, i in enumerate(live):
        span = hi[k] - lo[k]
        if np.isfinite(curv[k]) and curv[k] > 0:
            sd = float(np.sqrt(2.0 / curv[k]))
            occam = float(np.log(min(np.sqrt(2 * np.pi) * sd, span) / span))
        else:
            occam = 0.0
        out[i] = (float(np.exp(rho[k])), Pf[k][0], occam)
    return out
