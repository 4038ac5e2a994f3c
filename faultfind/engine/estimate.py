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
from scipy.linalg import solve_triangular

__all__ = ["Estimate", "map_estimate", "limit_value", "weighted_gram"]

#: Columns per block in products over every part (keeps temporaries small:
#: on a 100,000-part network a full-width temporary costs more to allocate
#: than the arithmetic).
COLUMN_BLOCK = 8192


def weighted_gram(S, w, block=COLUMN_BLOCK):
    """``(S * w) @ S.T`` for a wide ``S`` (readings x parts), in column blocks."""
    S = np.asarray(S)
    w = np.asarray(w)
    n, m = S.shape
    out = np.zeros((n, n), dtype=np.result_type(S, w))
    # real S, w >= 0 (variances): X X^T with X = S sqrt(w), a symmetric
    # rank-k update (half the work of a general product)
    sym = not np.iscomplexobj(S) and not np.iscomplexobj(w) and bool(np.all(w >= 0))
    for a in range(0, m, block):
        Sa = S[:, a:a + block]
        if sym:
            X = Sa * np.sqrt(w[a:a + block])
            out += X @ X.T
        else:
            out += (Sa * w[a:a + block]) @ Sa.T
    return out


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
    free = np.fromiter((r not in fixed for r in params), dtype=bool, count=len(params))
    theta = centre.copy()
    var = var_p.copy()
    if use.any() and free.any():
        Su = S if use.all() else S[use]
        Pf = np.where(free, var_p, 0.0)        # a fixed part contributes no spread
        C = weighted_gram(Su, Pf) + np.diag(u[use] ** 2)
        r = y[use] - pred[use] - Su @ np.where(free, centre, 0.0)
        try:
            # with C = L L^T and B = L^-1 S:  P S^T C^-1 r = P B^T (L^-1 r),
            # diag(P S^T C^-1 S P) = P^2 * (column sums of B^2); in column blocks
            L = np.linalg.cholesky(C)
            Li = solve_triangular(L, np.eye(L.shape[0]), lower=True, check_finite=False)
            z = Li @ r
            new_theta = np.empty(len(theta))
            new_var = np.empty(len(var))
            for a in range(0, Su.shape[1], COLUMN_BLOCK):
                sl = slice(a, a + COLUMN_BLOCK)
                B = Li @ Su[:, sl]
                new_theta[sl] = centre[sl] + Pf[sl] * (B.T @ z)
                new_var[sl] = Pf[sl] - Pf[sl] ** 2 * np.einsum("ij,ij->j", B, B)
            theta[free] = new_theta[free]
            var[free] = new_var[free]
        except np.linalg.LinAlgError:
            pass
    sd = np.sqrt(np.clip(var, 0, None))
    nominal = np.asarray(nominal, dtype=float)
    # the values and bounds of every part at once; Python floats for the objects
    nom = nominal.tolist()
    val = (nominal * np.exp(theta)).tolist()
    low = (nominal * np.exp(theta - 1.96 * sd)).tolist()
    high = (nominal * np.exp(theta + 1.96 * sd)).tolist()
    out = {}
    for j, ref in enumerate(params):
        if ref in fixed:
            v, lo, hi, mode = fixed[ref]
            out[ref] = Estimate(ref, nom[j], v, lo, hi, mode)
        else:
            out[ref] = Estimate(ref, nom[j], val[j], low[j], high[j])
    return out
