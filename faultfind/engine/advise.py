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

__all__ = ["expected_information_gain", "entropy_bits"]

_GH_X, _GH_W = np.polynomial.hermite_e.hermegauss(15)   # probabilists' Hermite
_GH_W = _GH_W / _GH_W.sum()


def entropy_bits(p) -> float:
    """Shannon entropy of a probability vector, in bits."""
    p = np.asarray(p, dtype=float)
    p = p[p > 0]
    return float(-(p * np.log2(p)).sum())


def expected_information_gain(prob, mu, sd):
    """Expected drop in the entropy of the hypothesis posterior, per candidate.

    Parameters
    ----------
    prob : array_like, shape (K,)
        Current probabilities of the hypotheses (sum to 1).
    mu : array_like, shape (C, K)
        Predicted value of each candidate reading under each hypothesis (on
        the scale the noise is Gaussian on).
    sd : array_like, shape (C, K)
        Standard deviation of that reading under that hypothesis (> 0).

    Returns
    -------
    ndarray, shape (C,)
        Expected information gain in bits (0 when the reading cannot
        separate any hypotheses).
    """
    prob = np.asarray(prob, dtype=float)
    mu = np.asarray(mu, dtype=float)
    sd = np.asarray(sd, dtype=float)
    if mu.ndim != 2 or mu.shape != sd.shape or mu.shape[1] != prob.size:
        raise ValueError(f"mu, sd: expected shape (C, {prob.size}), got {mu.shape} and {sd.shape}")
    if np.any(sd <= 0) or not np.all(np.isfinite(sd)):
        raise ValueError("sd: must be positive and finite")
    keep = prob > 0
    prob, mu, sd = prob[keep] / prob[keep].sum(), mu[:, keep], sd[:, keep]
    C, K = mu.shape
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
    h = -(post * lpost).sum(axis=3) / np.log(2)          # (C, K_j, Q)
    eh = (h * _GH_W[None, None, :]).sum(axis=2)         # (C, K_j)
    return np.clip(h0 - eh @ prob, 0.0, None)
