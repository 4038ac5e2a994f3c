"""Estimate of every part's actual value from the readings (maximum a posteriori).

Under the most probable hypothesis the faulted parts take their fault values
(an open, a short, the fitted drift); every other part's log-value
``theta_j = ln(p_j / p_nom)`` has the tolerance prior (mean and variance of the
rectangular distribution inside its tolerance) and the readings update it by
a weighted least-squares step -- the linear-Gaussian MAP, i.e. one
Gauss-Newton step from the prior mean, which is the exact MAP of the
linearized model:

    theta = c + P S^T (S P S^T + R)^{-1} (y - f_H - S c)
    Cov   = P - P S^T (S P S^T + R)^{-1} S P

with ``S`` the sensitivities of the faulted circuit, ``R`` the meters'
variances and ``f_H`` the faulted circuit's prediction.  The ~95 % interval is
``theta +/- 1.96 sqrt(Cov_jj)``, mapped back to values.  Readings shown as OL
carry no number and are left out of the fit.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Estimate", "map_estimate", "limit_value"]


@dataclass(frozen=True)
class Estimate:
    """A part's estimated actual value and ~95 % interval (SI; inf allowed)."""

    ref: str
    nominal: float
    value: float
    low: float
    high: float
    fault: str | None = None


def limit_value(part, mode):
    """The value a part takes in an open or short (or a dead source)."""
    if mode == "dead":
        return 0.0
    if part.kind == "capacitor":
        return 0.0 if mode == "open" else np.inf
    return np.inf if mode == "open" else 0.0


def map_estimate(params, nominal, centre, var_p, S, y, pred, u, use, fixed):
    """Linear-Gaussian MAP of the parts' log-values.

    Parameters
    ----------
    params : sequence of str
        Parameter refs.
    nominal : ndarray (m,)
        Nominal values.
    centre, var_p : ndarray (m,)
        Prior mean and variance of each log-value.
    S : ndarray (n, m)
        Sensitivities of the readings to the log-values under the hypothesis.
    y, pred, u : ndarray (n,)
        Observed displays, predicted displays, meter standard uncertainties.
    use : ndarray of bool (n,)
        Readings that take part (numeric, finite prediction).
    fixed : dict
        ref -> (value, low, high, mode) for the faulted parts.

    Returns
    -------
    dict
        ref -> Estimate.
    """
    free = np.array([r not in fixed for r in params], dtype=bool)
    theta = centre.copy()
    var = var_p.copy()
    if use.any() and free.any():
        Su = S[np.ix_(use, free)]
        Pf = var_p[free]
        C = (Su * Pf) @ Su.T + np.diag(u[use] ** 2)
        r = y[use] - pred[use] - Su @ centre[free]
        try:
            K = np.linalg.solve(C, Su * Pf).T          # P S^T C^-1, shape (mf, nu)
            theta[free] = centre[free] + K @ r
            var[free] = Pf - np.einsum("ij,ji->i", K, Su * Pf)
        except np.linalg.LinAlgError:
            pass
    sd = np.sqrt(np.clip(var, 0, None))
    out = {}
    for j, ref in enumerate(params):
        if ref in fixed:
            v, lo, hi, mode = fixed[ref]
            out[ref] = Estimate(ref, float(nominal[j]), v, lo, hi, mode)
            continue
        out[ref] = Estimate(ref, float(nominal[j]), float(nominal[j] * np.exp(theta[j])),
                            float(nominal[j] * np.exp(theta[j] - 1.96 * sd[j])),
                            float(nominal[j] * np.exp(theta[j] + 1.96 * sd[j])))
    return out
