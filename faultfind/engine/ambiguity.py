"""Ambiguity groups: parts the readings cannot tell apart.

Two sources, both reported:

* Hypotheses with coinciding predictions.  Two fault hypotheses whose
  predicted readings differ by a distance of at most two standard
  uncertainties (the sum of squared standardized differences at most 4)
  cannot be separated by these readings at about 95 % confidence; their
  parts form a group.
* The weighted sensitivity matrix ``J = R^{-1/2} S P^{1/2}`` (readings by
  parts).  Parts whose columns are parallel (``|cos| >= cos_min``) move the
  readings the same way (their drifts trade off along the null space of
  ``J``): such parts form a group.  A part whose column is (numerically)
  zero, at most ``1e-6`` of the largest column's norm, is *unseen*: the
  readings do not depend on it at all.

On a large network (more than :data:`ALL_SEEN` seen parts) only *visible*
parts are grouped by their sensitivity columns: parts a fault would visibly
move.  A part is visible when a factor-2 change of it shifts the
readings by at least one standard uncertainty to first order, that is when
``ln(2) * || S[:, j] / sd || >= 1`` (``S`` is per ``ln`` of the part's value).
On a large mesh read at a cluster of nodes, hundreds of far-away parts have
tiny, nearly parallel columns (any far perturbation looks the same from the
cluster); a fault on them would not show, so grouping them says nothing.
When more than :data:`MAX_COMPARED` parts are visible, the ones with the
largest standardized columns are compared.

The pairwise test runs in blocks of the Gram matrix of the unit columns
(first in single precision with a rounding margin, then each candidate pair
in double precision), so memory stays bounded whatever the number of parts:
the result is the plain pairwise rule on the parts compared.

References: the testability analysis of analog circuits by the rank of the
sensitivity matrix and its ambiguity groups is standard in the analog fault
diagnosis literature (e.g. Stenbakken, Souders and Stewart, "Ambiguity groups
and testability", IEEE Trans. Instrum. Meas. 38(5), 1989; from memory).
"""

from __future__ import annotations

import math
import numbers

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

__all__ = ["ALL_SEEN", "MAX_COMPARED", "UNSEEN_RATIO", "VISIBLE_CHANGE", "groups_from_hypotheses",
           "groups_from_sensitivity", "merge_groups"]

#: A part is unseen when its weighted column norm is at most this share of the largest.
UNSEEN_RATIO = 1e-6
#: The change of a part a fault means for the visibility rule: a factor 2 (``ln 2``).
VISIBLE_CHANGE = math.log(2.0)
#: Up to this many seen parts, every seen part is compared (a board: its small
#: parts -- contacts, wiring -- still group with their neighbours in series);
#: beyond, only the visible ones.
ALL_SEEN = 2000
#: Most visible parts compared pairwise, largest standardized columns first.  The
#: test costs readings x parts^2 / 2 multiply-adds: about 0.1 s for 100 readings
#: and 3,000 visible parts, about 0.7 s at this cap (two cores).
MAX_COMPARED = 10_000
#: Elements of one single-precision Gram block (16 MB).
_GRAM_BLOCK = 1 << 22
#: Elements of one double-precision work array (column norms, candidate checks: 8 MB).
_WORK = 1 << 20


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
    """Groups of visible parts with parallel weighted sensitivity columns, and unseen parts.

    Parameters
    ----------
    params : sequence of str, length m
        Part (parameter) names, one per column of `S`.
    S : array_like, shape (n, m)
        Sensitivities ``d reading / d ln(part)``.
    sd : array_like, shape (n,)
        Standard uncertainty of each reading (finite, > 0).
    var_p : array_like, shape (m,)
        Prior variance of each ``ln(part)`` (finite, >= 0).
    cos_min : float, optional
        Columns with ``|cos| >= cos_min`` (of the weighted columns) are parallel.
    refs : collection of str, optional
        Report only these parts as unseen (all when None).

    Returns
    -------
    groups : list of list of str
        Each sorted; largest group first (as :func:`merge_groups`).  Parts are
        joined when their columns are parallel, transitively; only visible
        parts (module docstring) take part, at most :data:`MAX_COMPARED`.
    unseen : list of str
        Parts whose weighted column norm is at most :data:`UNSEEN_RATIO` of the
        largest, in the order of `params`.

    Raises
    ------
    ValueError
        On shapes that do not agree or values out of range, naming the argument.
    """
    params = list(params)
    S = np.asarray(S, dtype=float)
    if S.ndim != 2:
        raise ValueError(f"S: expected a 2-D array (readings x parts), got shape {S.shape}")
    n, m = S.shape
    if len(params) != m:
        raise ValueError(f"params: expected {m} names (one per column of S), got {len(params)}")
    sd = np.asarray(sd, dtype=float)
    if sd.shape != (n,):
        raise ValueError(f"sd: expected shape {(n,)}, got {sd.shape}")
    if not (np.isfinite(sd).all() and (sd > 0).all()):
        raise ValueError("sd: standard uncertainties must be finite and > 0")
    var_p = np.asarray(var_p, dtype=float)
    if var_p.shape != (m,):
        raise ValueError(f"var_p: expected shape {(m,)}, got {var_p.shape}")
    if not (np.isfinite(var_p).all() and (var_p >= 0).all()):
        raise ValueError("var_p: variances must be finite and >= 0")
    if not (isinstance(cos_min, numbers.Real) and 0.0 < cos_min <= 1.0):
        raise ValueError(f"cos_min: expected a number in (0, 1], got {cos_min!r}")

    z = _standardized_norms(S, sd)
    w = z * np.sqrt(var_p)
    big = float(w.max()) if m else 0.0
    seen = w > UNSEEN_RATIO * max(big, 1e-300)
    unseen = [params[j] for j in range(m) if not seen[j] and (refs is None or params[j] in refs)]
    if np.count_nonzero(seen) <= ALL_SEEN:
        idx = np.flatnonzero(seen)      # a board: every seen part is compared
    else:
        idx = np.flatnonzero(seen & (VISIBLE_CHANGE * z >= 1.0))
    if idx.size > MAX_COMPARED:
        idx = np.sort(idx[np.argsort(-z[idx], kind="stable")[:MAX_COMPARED]])
    if idx.size < 2:
        return [], unseen
    # The weighted column's direction: scaling a column by sqrt(var_p) leaves it.
    U = S[:, idx] / sd[:, None]
    U /= z[idx]
    labels = _parallel_components(U, float(cos_min))
    order = np.argsort(labels, kind="stable")
    cuts = np.flatnonzero(np.diff(labels[order])) + 1
    groups = [sorted(params[idx[j]] for j in part) for part in np.split(order, cuts) if part.size > 1]
    return sorted(groups, key=lambda g: (-len(g), g)), unseen


def _standardized_norms(S, sd):
    """Norms of the columns of ``S / sd``, in bounded work memory."""
    n, m = S.shape
    out = np.zeros(m)
    step = max(1, _WORK // max(n, 1))
    for c in range(0, m, step):
        block = S[:, c:c + step]
        if not np.isfinite(block).all():
            raise ValueError("S: sensitivities must be finite")
        block = block / sd[:, None]
        out[c:c + step] = np.sqrt(np.einsum("ij,ij->j", block, block))
    return out


def _parallel_components(U, cos_min):
    """Component label of each unit column; ``|u_a . u_b| >= cos_min`` joins a and b.

    Blocks of the Gram matrix in single precision pick candidate pairs with a
    margin that covers their rounding (the dot product of two unit vectors of
    length n is off by at most about ``n`` units of float32 roundoff), and each
    candidate is then checked in double precision.
    """
    n, k = U.shape
    U32 = U.astype(np.float32)
    margin = 2.0 * (n + 2) * 2.0 ** -24
    rows_per_block = max(1, _GRAM_BLOCK // k)
    labels = np.arange(k)
    ncomp = k
    for a0 in range(0, k, rows_per_block):
        a1 = min(k, a0 + rows_per_block)
        G = U32[:, a0:a1].T @ U32[:, a0:]
        np.abs(G, out=G)
        r, c = np.nonzero(G >= cos_min - margin)
        del G
        keep = c > r                    # the upper triangle: each pair once, no diagonal
        r = r[keep] + a0
        c = c[keep] + a0
        if r.size == 0:
            continue
        ok = np.zeros(r.size, dtype=bool)
        step = max(1, _WORK // max(n, 1))
        for p in range(0, r.size, step):
            cos = np.einsum("ij,ij->j", U[:, r[p:p + step]], U[:, c[p:p + step]])
            ok[p:p + step] = np.abs(cos) >= cos_min
        if ok.any():
            ncomp, labels = _join(labels, ncomp, r[ok], c[ok])
    return labels


def _join(labels, ncomp, r, c):
    """Labels after joining the parts of the pairs ``(r, c)`` to the components so far."""
    k = labels.size
    # Nodes 0..k-1 are the parts, k..k+ncomp-1 the components found so far.
    rows = np.concatenate([np.arange(k), r])
    cols = np.concatenate([k + labels, c])
    graph = coo_matrix((np.ones(rows.size, dtype=np.int32), (rows, cols)), shape=(k + ncomp, k + ncomp))
    _, lab = connected_components(graph, directed=False)
    uniq, lab = np.unique(lab[:k], return_inverse=True)
    return uniq.size, lab.reshape(-1)


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
