"""One sparse LU factorization, reused for many solves.

The diagnosis engine factors a network once and then needs forward solves
``A x = b``, adjoint solves ``A^T y = c`` (plain transpose, also for complex
systems) and rank-one (Sherman-Morrison) corrections.  This module wraps
SuperLU (:func:`scipy.sparse.linalg.splu`) behind that interface.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from ..errors import SolveError

__all__ = ["Factorization"]


#: Matrices up to this size are checked for symmetry densely (the same test, without
#: sparse arithmetic's overhead: a small board's Newton Jacobians are factored often).
_DENSE_CHECK = 256


def _symmetric(A) -> bool:
    """``max |A - A^T| <= 1e-14 max |A|`` (True for an empty matrix)."""
    if not A.nnz:
        return True
    if A.shape[0] <= _DENSE_CHECK:
        D = A.toarray()
        return bool(np.abs(D - D.T).max() <= 1e-14 * np.abs(D).max())
    return bool(abs(A - A.T).max() <= 1e-14 * abs(A).max())


class Factorization:
    """LU factors of a square sparse matrix.

    Parameters
    ----------
    A : sparse matrix
        Square, non-singular.
    lu : SuperLU, optional
        ``A``'s factors already computed with this class's options (Newton's
        last iteration factored the matrix it ends on): taken as they are.

    Raises
    ------
    SolveError
        ``A`` is singular (a floating node, a loop of voltage sources, or a
        resonance exactly at the analysis frequency).

    Notes
    -----
    The column ordering is minimum degree on ``A^T + A`` with a small
    diagonal pivoting threshold: the nodal part of an MNA matrix is
    symmetric, and a symmetric ordering keeps the fill close to that of a
    Cholesky factor while still allowing off-diagonal pivots for the zero
    diagonal of branch rows.
    """

    def __init__(self, A, lu=None):
        A = A if lu is not None and sp.isspmatrix_csc(A) else sp.csc_matrix(A)
        if A.shape[0] != A.shape[1]:
            raise ValueError(f"A: expected a square matrix, got shape {A.shape}")
        self.shape = A.shape
        self.dtype = A.dtype
        if A.shape[0] == 0:
            self._lu = None
            return
        try:
            self._lu = lu if lu is not None else splu(A, permc_spec="MMD_AT_PLUS_A",
                                                      diag_pivot_thresh=0.1,
                                                      options={"SymmetricMode": True})
        except RuntimeError as exc:  # "Factor is exactly singular"
            raise SolveError(f"the network equations are singular ({exc})") from None
        #: True when ``A`` equals its transpose (an MNA matrix stamped
        #: symmetrically): adjoint solves are then forward solves.
        self.symmetric = _symmetric(A)
        d = np.abs(self._lu.U.diagonal())
        if d.size and (not np.all(np.isfinite(d)) or d.min() <= 1e-15 * d.max()):
            raise SolveError("the network equations are singular or nearly so "
                             "(check for floating parts of the circuit or a resonance)")

    def _run(self, B, trans):
        B = np.asarray(B)
        if B.shape[0] != self.shape[0]:
            raise ValueError(f"B: expected {self.shape[0]} rows, got {B.shape[0]}")
        dtype = np.result_type(self.dtype, B.dtype)
        if self._lu is None:
            return np.zeros(B.shape, dtype=dtype)
        if np.iscomplexobj(B) and not np.iscomplexobj(np.zeros(0, self.dtype)):
            return self._run(B.real, trans) + 1j * self._run(B.imag, trans)
        return self._lu.solve(np.ascontiguousarray(B, dtype=dtype), trans=trans)

    def solve(self, B) -> np.ndarray:
        """Solve ``A X = B`` for a vector or a block of columns."""
        return self._run(B, "N")

    def solve_adjoint(self, B) -> np.ndarray:
        """Solve ``A^T X = B`` (transpose, not conjugate transpose)."""
        return self._run(B, "T")

    def solve_both(self, B):
        """``(A^{-1} B, A^{-T} B)``, with one solve when ``A`` is symmetric."""
        X = self.solve(B)
        if getattr(self, "symmetric", False):
            return X, X
        return X, self.solve_adjoint(B)
