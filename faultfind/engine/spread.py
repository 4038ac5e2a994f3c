"""Tolerance bands that follow the circuit's own non-linearity.

:func:`faultfind.engine.bands.tolerance_band` linearizes every reading in the
log-values of the parts.  A reading proportional to one part (a lifted
resistor, the current through a capacitor) is exponential in that log-value,
so a linear band stops short of the part's own limits; with wide asymmetric
tolerances (-20 %/+80 % electrolytics) whose effects multiply, it misses a
tenth of healthy boards.

Here every part that matters to a reading (its linear share of the worst case
is at least ``significant``) is moved over its own tolerance exactly, one part
at a time, with the rank-one engine, at Gauss-Legendre nodes and at its two
limits: that gives the part's exact effect.  The effects are combined as
independent, on the logarithm of the reading when every part keeps the
reading's sign (a circuit's readings are mostly products and ratios of part
values, which add exactly in logs), otherwise on the reading itself (a bridge
output near zero).  The band is the mean plus or minus 1.96 standard
deviations, widened where needed to hold every reading one part alone gives
anywhere in its tolerance (a lifted 100 ohm +/-5 % resistor's band is
95..105 ohm: a part within tolerance is healthy), and capped by the sum of
all parts' extremes (the worst case).  Parts below the threshold keep the
linear treatment.

On a circuit with semiconductors the exact excursions are re-solves of the
circuit (:func:`~.predict.predict` with the part's value changed, Newton
starting from the nominal operating point) instead of rank-one updates, and
only the junctions' values (forward and zener voltages, whose effect is
exponential) are moved so; the linear parts take the linear treatment on
the linearization at the operating point (engine/semis.py).  Diode-test
readings on a linear circuit are moved by re-solves too.

Model spread (nonlinear boards only).  A transistor has no value and a
zener's forward voltage is no parameter, yet real parts spread from one to
the next: each transistor's ``vbe`` and ``gain`` and each zener's
``forward_voltage`` is moved over :data:`~.modelspread.MODEL_SPREAD` exactly (re-solves of
the healthy board, as a junction's value), and enters the band as one more
independent part.  These are not fault-hypothesis parameters (no estimate,
no hypothesis); :func:`~.modelspread.model_spread_columns` gives their one-sigma effect
for the evidence's covariance (engine/evidence.py).
"""

from __future__ import annotations

import numpy as np

from ..errors import SolveError
from .bands import COVERAGE_FACTOR, log_tolerance
from .hypotheses import Board
from .modelspread import _model_resolved, _ol_top, model_parameters
from .predict import predict

__all__ = ["tolerance_bands"]

_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(6)

def _combine(mean, var, lo_sum, hi_sum, one_lo, one_hi):
    sd = np.sqrt(np.clip(var, 0, None))
    low = np.maximum(np.minimum(mean - COVERAGE_FACTOR * sd, one_lo), lo_sum)
    high = np.minimum(np.maximum(mean + COVERAGE_FACTOR * sd, one_hi), hi_sum)
    return low, high, sd


def _resolved(circuit, readings, meters, part, factors, rows, y0, warm):
    """Displays with ``part`` at each value factor, by re-solving (only the ``rows`` readings)."""
    idx = np.flatnonzero(rows)
    P = np.tile(np.asarray(y0, dtype=float), (len(factors), 1))
    sub = [readings[i] for i in idx]
    for k, f in enumerate(factors):
        try:
            P[k, idx] = predict(circuit, sub, meters, {part.ref: part.value * float(f)},
                                warm=warm, sens=False).value
        except SolveError:
            P[k, idx] = np.nan
    # a diode test a part's tolerance carries over the display's top reads OL there:
    # its band reaches the top (an LED drawn high in its tolerance reads OL when healthy)
    for i in idx:
        rd = readings[i]
        if rd.quantity == "diode-test":
            m = meters[rd.meter or "default"]
            top = min(m.diode_test_max, m.diode_test_voltage)
            P[:, i] = np.where(np.isinf(P[:, i]), top, P[:, i])
    return P


def _accumulate(acc, P, yf, same_sign):
    """Add one independent part's exact effect ``P`` (Gauss-Legendre nodes, then
    its two limits, by nominal display ``yf``) to the accumulators; returns the
    updated same-sign mask."""
    P = np.where(np.isfinite(P), P, yf)
    d = P - yf
    same_sign = same_sign & np.all(np.sign(P) == np.sign(yf), axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = np.where(same_sign, np.log(np.abs(P) / np.where(same_sign, np.abs(yf), 1.0)), 0.0)
    for key, D in (("", d), ("g", g)):
        q = D[: len(_NODES)]
        m = (_WEIGHTS[:, None] * q).sum(axis=0) / 2.0
        v = (_WEIGHTS[:, None] * q ** 2).sum(axis=0) / 2.0 - m ** 2
        acc[key + "m"] += m
        acc[key + "v"] += np.clip(v, 0, None)
        acc[key + "lo"] += D.min(axis=0)
        acc[key + "hi"] += D.max(axis=0)
        acc[key + "olo"] = np.minimum(acc[key + "olo"], D.min(axis=0))
        acc[key + "ohi"] = np.maximum(acc[key + "ohi"], D.max(axis=0))
    return same_sign


def tolerance_bands(circuit, readings, meters, significant=0.01):
    """Expected displays and their ~95 % bands on a healthy circuit.

    Parameters
    ----------
    circuit : Circuit
    readings : list of Reading
    meters : dict
        Meter profiles with "default".
    significant : float, optional
        Share of a reading's linear worst case above which a part is moved
        over its tolerance exactly (default 1 %).

    Returns
    -------
    value, low, high, sigma : ndarray
        Nominal display (``inf`` for OL), band limits and standard deviation
        (``nan`` where the display is OL).
    """
    readings = list(readings)
    pred = predict(circuit, readings, meters)
    y0 = pred.value
    n = y0.size
    finite = np.isfinite(y0)
    yf = np.where(finite, y0, 0.0)
    S = np.nan_to_num(pred.sensitivity)
    tl = np.array([circuit.part(r).tol_low for r in pred.params])
    th = np.array([circuit.part(r).tol_high for r in pred.params])
    centre, half = log_tolerance(tl, th)
    contrib = np.abs(S) * half
    worst = contrib.sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(worst[:, None] > 0, contrib / worst[:, None], 0.0)
    E = share >= significant            # per reading: the parts moved exactly for it
    # a circuit with semiconductors (or a diode-test reading) is moved by exact
    # re-solves, each starting from the nominal operating point; there only the
    # junctions' values are moved exactly (their effect is exponential), the linear
    # parts take the linearization at the operating point
    resolve = circuit.is_nonlinear or any(rd.quantity == "diode-test" for rd in readings)
    if resolve and circuit.is_nonlinear:
        junction = np.array([circuit.part(r).is_semiconductor for r in pred.params], dtype=bool)
        E &= junction[None, :]
    exact = E.any(axis=0)
    # per-part effects: additive deviations d (linear) and log ratios g (log)
    acc = {k: np.zeros(n) for k in ("m", "v", "lo", "hi", "olo", "ohi",
                                     "gm", "gv", "glo", "ghi", "golo", "gohi")}
    same_sign = np.abs(yf) > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        Sl = np.where(same_sign[:, None], S / np.where(same_sign, yf, 1.0)[:, None], 0.0)
    for key, M in (("", S), ("g", Sl)):
        ML = np.where(E, 0.0, M)        # linear for the parts not moved exactly for that reading
        acc[key + "m" if key else "m"] += ML @ centre
        acc[key + "v" if key else "v"] += (ML ** 2) @ (half ** 2 / 3.0)
        acc[key + "lo" if key else "lo"] += ML @ centre - np.abs(ML) @ half
        acc[key + "hi" if key else "hi"] += ML @ centre + np.abs(ML) @ half
    if exact.any():
        board = None if resolve else Board(circuit, readings, meters)
        for j in np.flatnonzero(exact):
            part = circuit.part(pred.params[j])
            a, b = centre[j] - half[j], centre[j] + half[j]
            rho = np.concatenate([centre[j] + half[j] * _NODES, [a, b]])
            if board is None:
                P = _resolved(circuit, readings, meters, part, np.exp(rho), E[:, j], yf,
                              pred.operating_point)
            else:
                P = board.predict_fault(part, "drift", np.exp(rho))
            P = np.where(E[:, j][None, :], P, yf)      # only the readings it is significant for
            same_sign = _accumulate(acc, P, yf, same_sign)
    # model spread of the semiconductors (no value, no parameter): each key is
    # moved over its spread exactly, on every reading, as one more independent part
    off_warm = {}   # power-off readings start from the first re-solve's solution
    for ref, key, lo, hi in model_parameters(circuit):
        c, h = log_tolerance(lo, hi)
        rho = np.concatenate([c + h * _NODES, [c - h, c + h]])
        P = _model_resolved(circuit, readings, meters, ref, key, np.exp(rho), yf,
                            pred.operating_point, off_warm)
        same_sign = _accumulate(acc, P, yf, same_sign)
    low_l, high_l, sd_l = _combine(acc["m"], acc["v"], acc["lo"], acc["hi"], acc["olo"], acc["ohi"])
    low_g, high_g, sd_g = _combine(acc["gm"], acc["gv"], acc["glo"], acc["ghi"], acc["golo"], acc["gohi"])
    ay = np.abs(yf)
    sgn = np.sign(yf)
    with np.errstate(over="ignore", invalid="ignore"):  # log branch unused where it overflows
        lg = sgn * ay * np.where(sgn >= 0, np.exp(low_g), np.exp(high_g))
        hg = sgn * ay * np.where(sgn >= 0, np.exp(high_g), np.exp(low_g))
    use_log = same_sign & finite
    low = np.where(use_log, lg, yf + low_l)
    high = np.where(use_log, hg, yf + high_l)
    sigma = np.where(use_log, ay * sd_g, sd_l)
    nanv = np.full(n, np.nan)
    return y0, np.where(finite, low, nanv), np.where(finite, high, nanv), np.where(finite, sigma, nanv)
