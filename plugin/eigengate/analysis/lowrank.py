"""Sparse LU of a matrix with a few dense rows, through the Woodbury identity.

Static feedback around a sparse plant (:mod:`eigengate.model.sparse_loop`) adds ``B_s G``:
rows that may be full. SuperLU fills such rows in (a 10⁵-state heat model with two full
rows: 1.3·10⁸ LU entries and 137 s against 1.0·10⁷ and 4.8 s). Instead the matrix is split
``M = X + P R`` with X the matrix with those rows reduced to their diagonal entry, P the
columns of the identity at those rows and R the rest of them, and

    M⁻¹ = X⁻¹ − X⁻¹P (I + R X⁻¹P)⁻¹ R X⁻¹      (Woodbury; Golub & Van Loan, ch. 2)

with one sparse LU of X and an r×r capacitance matrix; the transposed solve likewise. The
eigenvalue bounds of the search come from true residuals of M, so a loss of accuracy here
shows in the bounds, never hides.
"""

from __future__ import annotations

from typing import Any

__all__ = ["factor", "DENSE_ROW", "MAX_RANK"]

#: A row with more stored entries than max(DENSE_ROW, 10 × the mean) is split off.
DENSE_ROW = 64
#: At most this many rows are split off; more, and the plain LU is used.
MAX_RANK = 32
#: Largest condition number of the capacitance matrix accepted.
MAX_COND = 1e12


class _Woodbury:
    """``solve(x, trans)`` of ``M = X + P R`` from an LU of X (module docstring)."""

    def __init__(self, lu: Any, rows: Any, R: Any, cap: Any, Z: Any, capt: Any, Zt: Any):
        self.lu, self.rows, self.R = lu, rows, R
        self.cap, self.Z, self.capt, self.Zt = cap, Z, capt, Zt

    def solve(self, x: Any, trans: str = "N") -> Any:
        import scipy.linalg as la

        if trans == "N":
            y = self.lu.solve(x)
            return y - self.Z @ la.lu_solve(self.cap, self.R @ y)
        y = self.lu.solve(x, trans="T")
        return y - self.Zt @ la.lu_solve(self.capt, y[self.rows])


def factor(M: Any) -> Any:
    """An object with SuperLU's ``solve(x, trans)`` for the sparse square M: the Woodbury
    form when M has a few dense rows, else ``splu(M)``. Raises RuntimeError when M is
    exactly singular, as splu does."""
    import numpy as np
    import scipy.linalg as la
    import scipy.sparse as sp
    from scipy.sparse.linalg import splu

    csr = sp.csr_matrix(M)
    n = csr.shape[0]
    counts = np.diff(csr.indptr)
    limit = max(DENSE_ROW, 10.0 * counts.mean())
    rows = np.nonzero(counts > limit)[0]
    if not 0 < len(rows) <= MAX_RANK:
        return splu(sp.csc_matrix(M))
    keep = np.ones(n, dtype=bool)
    keep[rows] = False
    diag = csr.diagonal()
    X = (sp.diags(keep.astype(float)) @ csr + sp.diags(np.where(keep, 0.0, diag))).tocsc()
    R = (csr[rows, :] - sp.csr_matrix((diag[rows], (np.arange(len(rows)), rows)),
                                      shape=(len(rows), n))).tocsr()
    try:
        lu = splu(X)
    except RuntimeError:
        return splu(sp.csc_matrix(M))
    P = np.zeros((n, len(rows)), dtype=M.dtype)
    P[rows, np.arange(len(rows))] = 1.0
    Z = lu.solve(P)
    cap = np.eye(len(rows)) + R @ Z
    if not np.all(np.isfinite(cap)) or np.linalg.cond(cap) > MAX_COND:
        return splu(sp.csc_matrix(M))
    Zt = lu.solve(np.asarray(R.T.toarray(), dtype=M.dtype), trans="T")
    capt = np.eye(len(rows)) + Zt[rows, :]
    return _Woodbury(lu, rows, R, la.lu_factor(cap), Z, la.lu_factor(capt), Zt)
