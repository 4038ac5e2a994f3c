"""How a network's matrix and right-hand side depend on each part's log-value.

The derivative stamps the adjoint sensitivities need (``d y / d ln p`` of
every admittance, ``d b / d ln p`` of every source term) and the vectorized
sums ``lambda^T (db_j - dA_j x)`` over a block of readings.  Shared by the
linear predictions (engine/linpredict.py), the power-off readings with
junctions (engine/offnet.py) and the linearized semiconductor networks
(engine/semis.py), which add their junction terms to these.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..model import Circuit
from .mna import Network

__all__ = ["Stamps"]


def _dstamps(circuit: Circuit, net: Network, pindex: dict):
    """Derivatives of the admittances and sources w.r.t. ln(value) of their part.

    Returns ``(jy, dy, jb, db_rows)``: for admittance element k, parameter
    column ``jy[k]`` (-1 if none) and ``dy[k] = d y_k / d ln p``; and a list of
    ``(column, row, d b)`` for source terms.
    """
    parts = circuit.parts
    w = 2 * np.pi * net.frequency if net.analysis == "ac" else 0.0
    jy = np.full(len(net.y_ref), -1, dtype=np.int64)
    dy = np.zeros(len(net.y_ref), dtype=net.A.dtype)
    for k, pi in enumerate(net.y_ref):
        p = parts[pi]
        j = pindex.get(p.ref, -1)
        y = net.y_val[k]
        if p.kind in ("resistor", "fuse", "switch"):
            jy[k], dy[k] = j, -y
        elif p.kind == "capacitor":
            jy[k], dy[k] = j, y
        elif p.kind == "inductor" and net.analysis == "ac":
            jy[k], dy[k] = j, -y * y * 1j * w * p.value
    src = []
    for k, pi in enumerate(net.br_ref):
        e = net.br_e[k]
        if e != 0:
            src.append((pindex[parts[pi].ref], net.n + k, e))
    for k, pi in enumerate(net.inj_ref):
        i = net.inj_i[k]
        if i != 0:
            j = pindex[parts[pi].ref]
            if net.inj_a[k] >= 0:
                src.append((j, net.inj_a[k], i))
            if net.inj_b[k] >= 0:
                src.append((j, net.inj_b[k], -i))
    return jy, dy, src


def _times(a, b):
    """``a * b``, into ``a`` (a fresh array) when its type holds the product: one
    elements x readings temporary fewer."""
    if np.result_type(a, b) == a.dtype:
        a *= b
        return a
    return a * b


class Stamps:
    """How a network's matrix and right-hand side depend on each parameter's log-value.

    Gives the sensitivities ``lambda^T (db_j - dA_j x)`` of a block of
    readings from their adjoint and forward vectors.
    """

    def __init__(self, circuit, net, pindex):
        self.net = net
        self.jy, self.dy, self.src = _dstamps(circuit, net, pindex)

    def _scatter(self, n_params):
        """Sparse (n_params x elements) matrix summing element terms into parameter columns."""
        if getattr(self, "_M", None) is None or self._M.shape[0] != n_params:
            ok = np.flatnonzero(self.jy >= 0)
            self._M = sp.csr_matrix((np.ones(ok.size), (self.jy[ok], ok)),
                                    shape=(n_params, len(self.jy)))
        return self._M

    def incidence(self):
        """Sparse (elements x unknowns) matrix with ``D @ x = x[a] - x[b]`` per admittance element."""
        if getattr(self, "_inc", None) is None:
            net = self.net
            a, b = np.asarray(net.y_a), np.asarray(net.y_b)
            ka, kb = np.flatnonzero(a >= 0), np.flatnonzero(b >= 0)
            rows = np.concatenate([ka, kb])
            cols = np.concatenate([a[ka], b[kb]])
            vals = np.concatenate([np.ones(ka.size), -np.ones(kb.size)])
            self._inc = sp.csr_matrix((vals, (rows, cols)), shape=(len(a), net.size))
        return self._inc

    def pairs(self, X):
        """``X[a] - X[b]`` per admittance element (rows), -1 meaning the reference."""
        return self.incidence() @ np.ascontiguousarray(X)

    def _gather_params(self, term, n_params, out=None):
        """Sum element rows of ``term`` into parameter rows (into ``out`` if given)."""
        if getattr(self, "_inj", None) is None:
            ok = np.flatnonzero(self.jy >= 0)
            injective = np.unique(self.jy[ok]).size == ok.size
            # every element its own parameter, in order: rows j0..j1 take the
            # elements as they are (a slice, no gather)
            span = None
            if injective and ok.size == self.jy.size and ok.size and np.all(np.diff(self.jy) == 1):
                span = (int(self.jy[0]), int(self.jy[-1]) + 1)
            self._inj = (ok, injective, span)
        ok, injective, span = self._inj
        if out is None:
            if not injective:
                return np.asarray(self._scatter(n_params) @ term)
            out = np.empty((n_params,) + term.shape[1:], dtype=term.dtype)
        if span is not None:
            j0, j1 = span
            out[:j0] = 0.0
            out[j1:] = 0.0
            out[j0:j1] = term
        elif injective:
            out[...] = 0.0
            out[self.jy[ok]] = term[ok]
        else:
            out[...] = self._scatter(n_params) @ term
        return out

    def grad_block(self, Lam, X, n_params, skips, out=None):
        """Sensitivities ``lambda^T (db_j - dA_j x)`` for a block of columns (one
        per reading); returns (n_params, k), written into ``out`` if given (an
        array of that shape whose type holds the result)."""
        term = _times(self.pairs(Lam), self.pairs(X))
        term *= -self.dy[:, None]
        for q, k in enumerate(skips):
            if k >= 0:
                term[k, q] = 0.0
        if out is not None:
            G = self._gather_params(term, n_params, out)
        else:
            G = self._gather_params(term, n_params)
            G = G.astype(np.result_type(G, Lam, X), copy=False)
        for j, row, d in self.src:
            G[j] += Lam[row] * d
        return G

    def minus_grad_block(self, Mu, W, n_params):
        """``sum_k dy_k (mu_a - mu_b)(w_a - w_b)`` per parameter, for a block (real part)."""
        term = _times(self.pairs(Mu), self.pairs(W))
        term *= self.dy[:, None]
        return self._gather_params(term, n_params).real
