"""Ambiguity groups: parts the readings cannot tell apart.

Two sources, both reported:

* Hypotheses with coinciding predictions.  Two fault hypotheses whose
  predicted readings differ by a distance of at most two standard
  uncertainties (the sum of squared standardized differences at most 4)
  cannot be separated by these readings at about 95 % confidence; their
  parts form a group.
* The weighted sensitivity matrix ``J = R^{-1/2} S P^{1/2}`` (readings by
  parts).  Parts whose columns are parallel move the readings the same way
  (their drifts trade off along the null space of ``J``): such parts form a
  group.  A part whose column is zero is not seen by the readings at all.

References: the testability analysis of analog circuits by the rank of the
sensitivity matrix and its ambiguity groups is standard in the analog fault
diagnosis literature (e.g. Stenbakken, Souders and Stewart, "Ambiguity groups
and testability", IEEE Trans. Instrum. Meas. 38(5), 1989; from memory).
"""

from __future__ import annotations

import numpy as np

__all__ = ["groups_from_hypotheses", "groups_from_sensitivity", "merge_groups"]


def groups_from_hypotheses(hyps, sd, min_probability=1e-3, top=20):
    """Groups of parts whose single-fault hypotheses predict the same readings.

    Parameters
    ----------
    hyps : list of Hypothesis
        Most probable first.
    sd : ndarray (n,)
        Standard uncertainty of each reading.
    """
    cand = [h for h in hyps[:top] if len(h.faults) == 1 and h.probability >= min_probability]
    groups = []
    for a in range(len(cand)):
        for b in range(a + 1, len(cand)):
            pa, pb = cand[a].predicted, cand[b].predicted
            fa, fb = cand[a].faults[0].ref, cand[b].faults[0].ref
            if fa == fb:
                continue
            both = np.isfinite(pa) & np.isfinite(pb)
            same_ol = np.isinf(pa) == np.isinf(pb)
            if not same_ol.all():
                continue
            if np.sum(((pa[both] - pb[both]) / sd[both]) ** 2) <= 4.0:
                groups.append({fa, fb})
    return merge_groups(groups)


def groups_from_sensitivity(params, S, sd, var_p, cos_min=0.999, refs=None):
    """Groups of parts with parallel weighted sensitivity columns, and unseen parts.

    Returns
    -------
    groups : list of set
    unseen : list of str
        Parts whose weighted column is (numerically) zero.
    """
    J = S / sd[:, None] * np.sqrt(var_p)[None, :]
    norms = np.linalg.norm(J, axis=0)
    big = norms.max() if norms.size else 0.0
    seen = norms > 1e-6 * max(big, 1e-300)
    unseen = [params[j] for j in range(len(params)) if not seen[j] and (refs is None or params[j] in refs)]
    idx = np.flatnonzero(seen)
    if idx.size < 2:
        return [], unseen
    U = J[:, idx] / norms[idx]
    G = np.abs(U.T @ U)
    groups = []
    for a in range(idx.size):
        for b in range(a + 1, idx.size):
            if G[a, b] >= cos_min:
                groups.append({params[idx[a]], params[idx[b]]})
    return merge_groups(groups), unseen


def merge_groups(groups):
    """Union of overlapping sets, each sorted; largest first."""
    out = []
    for g in groups:
        g = set(g)
        keep = []
        for h in out:
            if h & g:
                g |= h
            else:
                keep.append(h)
        out = keep + [g]
    return sorted((sorted(g) for g in out if len(g) > 1), key=lambda g: (-len(g), g))
