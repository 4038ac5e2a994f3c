"""Expected information gain of a candidate reading.

For hypotheses ``H_k`` with probabilities ``pi_k``, a candidate reading ``c``
would show ``y ~ N(mu_kc, sd_kc^2)`` under ``H_k`` (the meter's uncertainty and
the healthy parts' tolerance spread).  The expected information gain is the
mutual information between the reading and the hypothesis,

    EIG(c) = H(pi) - E_y[ H(pi | y) ],

the expected drop in entropy (bits) of the posterior over hypotheses
(Lindley 1956, "On a measure of the information provided by an experiment";
the criterion behind sequential diagnosis, de Kleer and Williams 1987,
"Diagnosing multiple faults"; both from memory).  The expectation over ``y``
is taken by Gauss-Hermite quadrature under each hypothesis's own Gaussian, so
the posterior after each quadrature point is exact for the mixture.

Everything here is vectorized over candidates; the predictions come from the
rank-one engine, not from a re-solve per candidate and hypothesis.
"""

from __future__ import annotations

import numpy as np
from scipy.special import logsumexp

__all__ = ["expected_information_gain", "entropy_bits", "condition_on_taken"]

_GH_X, _GH_W = np.polynomial.hermite_e.hermegauss(15)   # probabilists' Hermite
_GH_W = _GH_W / _GH_W.sum()


def entropy_bits(p) -> float:
    """Shannon entropy of a probability vector, in bits."""
    p = np.asarray(p, dtype=float)
    p = p[p > 0]
    return float(-(p * np.log2(p)).sum())


def expected_information_gain(prob, mu, sd, groups=None):
    """Expected drop in the entropy of the hypothesis posterior, per candidate.

    With ``groups``, the entropy is that of the posterior over the groups
    (the hypotheses of one group summed): the information about which group
    holds the fault, not about which hypothesis within it.

    Parameters
    ----------
    prob : array_like, shape (K,)
        Current probabilities of the hypotheses (sum to 1).
    mu : array_like, shape (C, K)
        Predicted value of each candidate reading under each hypothesis (on
        the scale the noise is Gaussian on).
    sd : array_like, shape (C, K)
        Standard deviation of that reading under that hypothesis (> 0).

    groups : array_like of int, shape (K,), optional
        Group of each hypothesis (e.g. one per part: open, short and drift
        of a part call for the same repair).

    Returns
    -------
    ndarray, shape (C,)
        Expected information gain in bits (0 when the reading cannot
        separate any hypotheses, or with ``groups`` any groups).
    """
    prob = np.asarray(prob, dtype=float)
    mu = np.asarray(mu, dtype=float)
    sd = np.asarray(sd, dtype=float)
    if mu.ndim != 2 or mu.shape != sd.shape or mu.shape[1] != prob.size:
        raise ValueError(f"mu, sd: expected shape (C, {prob.size}), got {mu.shape} and {sd.shape}")
    if np.any(sd <= 0) or not np.all(np.isfinite(sd)):
        raise ValueError("sd: must be positive and finite")
    keep = prob > 0
    if groups is not None:
        groups = np.asarray(groups)
        if groups.shape != (keep.size,):
            raise ValueError(f"groups: expected shape ({keep.size},), got {groups.shape}")
        _, g = np.unique(groups[keep], return_inverse=True)
    prob, mu, sd = prob[keep] / prob[keep].sum(), mu[:, keep], sd[:, keep]
    C, K = mu.shape
    if groups is not None:
        onehot = np.zeros((K, int(g.max()) + 1))
        onehot[np.arange(K), g] = 1.0
        h0 = entropy_bits(prob @ onehot)
    else:
        h0 = entropy_bits(prob)
    logp = np.log(prob)
    # y at quadrature nodes under each hypothesis j: (C, K_j, Q)
    y = mu[:, :, None] + sd[:, :, None] * _GH_X[None, None, :]
    # log-likelihood of y under every hypothesis k: (C, K_j, Q, K_k)
    z = (y[:, :, :, None] - mu[:, None, None, :]) / sd[:, None, None, :]
    ll = -0.5 * z ** 2 - np.log(sd[:, None, None, :])
    lp = ll + logp[None, None, None, :]
    lpost = lp - logsumexp(lp, axis=3, keepdims=True)
    post = np.exp(lpost)
    if groups is None:
        h = -(post * lpost).sum(axis=3) / np.log(2)      # (C, K_j, Q)
    else:
        gpost = post @ onehot                            # (C, K_j, Q, G)
        with np.errstate(divide="ignore", invalid="ignore"):
            h = -np.where(gpost > 0, gpost * np.log(gpost), 0.0).sum(axis=3) / np.log(2)
    eh = (h * _GH_W[None, None, :]).sum(axis=2)         # (C, K_j)
    return np.clip(h0 - eh @ prob, 0.0, None)


def condition_on_taken(mu, noise, factor, sens, var, taken, observed):
    """Predictions of candidate readings given the readings already taken.

    Under each hypothesis ``k`` the readings (candidates and those taken) are
    modelled as ``y = mu[:, k] + factor[:, k] * (sens @ t) + e``: the
    healthy parts' log-values ``t`` are independent with variances ``var``
    (their tolerances), shared by every reading of the board, and ``e`` is
    the meter's own independent error with standard deviation ``noise``.
    A reading already taken therefore tells something of the tolerances, and
    a candidate correlated with it (the same node read another way, a node
    joined to it by a closed contact) is predicted from what was seen: its
    Gaussian conditional given the observed values (the conditional of a
    joint Gaussian; e.g. Rasmussen and Williams 2006, "Gaussian processes for
    machine learning", eq. A.6; from memory).  A reading that repeats one
    already taken is then predicted at the value seen under every
    hypothesis, and carries no information.

    Parameters
    ----------
    mu : ndarray, shape (R, K)
        Predicted value of every row under every hypothesis (the candidates
        first, then the readings taken, on the scale their noise is Gaussian
        on).
    noise : ndarray, shape (R, K)
        Standard deviation of each row's independent error (> 0).
    factor : ndarray, shape (R, K)
        Scale of each row's tolerance term under each hypothesis (1 where the
        healthy sensitivities apply as they are).
    sens : ndarray, shape (R, P)
        Sensitivities of the rows to the parts' log-values on the healthy
        board (on the rows' scale).
    var : ndarray, shape (P,)
        Variance of each part's log-value.
    taken : ndarray of int, shape (M,)
        Rows that are readings already taken; every other row is a candidate.
    observed : ndarray, shape (M,)
        What those readings showed, on the same scale.

    Returns
    -------
    mean, sd : ndarray, shape (C, K)
        Conditional mean and standard deviation of the candidate rows (in
        row order, taken rows left out) under each hypothesis.
    """
    mu = np.asarray(mu, dtype=float)
    noise = np.asarray(noise, dtype=float)
    factor = np.asarray(factor, dtype=float)
    sens = np.asarray(sens, dtype=float)
    var = np.asarray(var, dtype=float)
    taken = np.asarray(taken, dtype=int)
    observed = np.asarray(observed, dtype=float)
    R, K = mu.shape
    if noise.shape != (R, K) or factor.shape != (R, K) or sens.shape[0] != R \
            or var.shape != (sens.shape[1],) or observed.shape != taken.shape:
        raise ValueError("mu, noise, factor, sens, var, taken, observed: inconsistent shapes")
    cand = np.setdiff1d(np.arange(R), taken)
    # the sensitivities are the large array (rows x parts): rows in one run are
    # read as a view, not copied
    s_cand, s_taken = _rows(sens, cand), _rows(sens, taken)
    g_cc = np.einsum("cp,cp,p->c", s_cand, s_cand, var)
    mean = mu[cand].copy()
    sd2 = factor[cand] ** 2 * g_cc[:, None] + noise[cand] ** 2
    if taken.size:
        St = s_taken * var[None, :]
        G_ct = s_cand @ St.T                           # (C, M)
        G_tt = s_taken @ St.T                          # (M, M)
        for k in range(K):
            ft = factor[taken, k]
            A = ft[:, None] * G_tt * ft[None, :] + np.diag(noise[taken, k] ** 2)
            B = factor[cand, k][:, None] * G_ct * ft[None, :]
            resid = np.nan_to_num(observed - mu[taken, k])
            X = np.linalg.solve(A, np.column_stack([resid, B.T]))
            mean[:, k] += B @ X[:, 0]
            sd2[:, k] -= np.einsum("cm,mc->c", B, X[:, 1:])
    sd2 = np.maximum(sd2, noise[cand] ** 2)
    return mean, np.sqrt(sd2)


def _rows(a, idx):
    """``a[idx]``, as a view when ``idx`` is a run of consecutive rows."""
    if idx.size and idx[-1] - idx[0] + 1 == idx.size and np.all(np.diff(idx) == 1):
        return a[idx[0]:idx[-1] + 1]
    return a[idx]
