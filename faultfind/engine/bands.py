"""Tolerance bands: where a healthy circuit's reading falls, given its parts' tolerances.

Statistical model (docs/estimate.md, "Tolerance bands"):

* Every part's actual value lies inside its tolerance, uniformly on a
  logarithmic scale: ``ln(p/p_nom)`` is rectangular on
  ``[ln(1 - below), ln(1 + above)]``.  A tolerance is a limit, not a standard
  deviation, so the rectangular distribution is the one JCGM 100:2008 (GUM)
  4.3.7 prescribes when only limits are known; the log scale keeps an
  asymmetric tolerance such as -20 %/+80 % meaningful.
* The reading is linearized in those log-values (law of propagation of
  uncertainty, GUM 5.1.2), giving a mean shift (non-zero for asymmetric
  tolerances) and a standard deviation ``sigma``.
* The half-width of the band is ``min(1.96 sigma, worst case)``: 1.96 is the
  normal 95 % coverage factor, right when several parts contribute (central
  limit theorem, GUM G.2); the worst-case linear sum caps it, so a reading
  governed by one part never gets a band wider than that part's tolerance.
  Such a reading's band covers it fully (100 %), which is conservative.

The tests check coverage against a Monte Carlo run of the full non-linear
circuit.
"""

from __future__ import annotations

import numpy as np

__all__ = ["log_tolerance", "tolerance_band", "COVERAGE_FACTOR"]

#: Normal coverage factor for a ~95 % interval (GUM G.2, table G.1: k = 1.960 for 95 %).
COVERAGE_FACTOR = 1.96


def log_tolerance(tol_low, tol_high):
    """Centre and half-width of each part's tolerance on the log scale.

    Parameters
    ----------
    tol_low, tol_high : array_like
        Relative tolerance below and above nominal (fractions; ``tol_low`` < 1).

    Returns
    -------
    centre, half : ndarray
        ``(ln(1+above) + ln(1-below)) / 2`` and ``(ln(1+above) - ln(1-below)) / 2``.
    """
    lo = np.asarray(tol_low, dtype=float)
    hi = np.asarray(tol_high, dtype=float)
    if np.any(lo < 0) or np.any(lo >= 1) or np.any(hi < 0):
        raise ValueError("tol_low, tol_high: need 0 <= tol_low < 1 and tol_high >= 0")
    a, b = np.log1p(-lo), np.log1p(hi)
    return (a + b) / 2.0, (b - a) / 2.0


def tolerance_band(value, sensitivity, tol_low, tol_high, coverage_factor=COVERAGE_FACTOR):
    """The ~95 % band of readings of a healthy circuit.

    Parameters
    ----------
    value : array_like, shape (n,)
        Predicted readings at nominal values.
    sensitivity : array_like, shape (n, m)
        ``d reading / d ln(p_j)``.
    tol_low, tol_high : array_like, shape (m,)
        Relative tolerances of the parameters.
    coverage_factor : float, optional
        Multiplier of the standard deviation (default 1.96).

    Returns
    -------
    low, high : ndarray, shape (n,)
        Band limits; ``nan`` where ``value`` is not finite.
    sigma : ndarray, shape (n,)
        Standard deviation of the reading caused by the tolerances.
    """
    value = np.asarray(value, dtype=float)
    S = np.atleast_2d(np.asarray(sensitivity, dtype=float))
    if S.shape != (value.size, np.size(tol_low)):
        raise ValueError(f"sensitivity: expected shape {(value.size, np.size(tol_low))}, got {S.shape}")
    centre, half = log_tolerance(tol_low, tol_high)
    shift = S @ centre
    sigma = np.sqrt((S ** 2) @ (half ** 2 / 3.0))
    worst = np.abs(S) @ half
    width = np.minimum(coverage_factor * sigma, worst)
    finite = np.isfinite(value)
    low = np.where(finite, value + shift - width, np.nan)
    high = np.where(finite, value + shift + width, np.nan)
    return low, high, np.where(finite, sigma, np.nan)
