"""Eigenvalue counts of symmetric sparse matrices from an LDLᵀ factorisation, with a bound.

By Sylvester's law of inertia (1852) a congruence ``S = L D Lᵀ`` with L nonsingular keeps the
numbers of positive, negative and zero eigenvalues, so the signs of D's diagonal count the
eigenvalues of S on each side of 0; applied to ``A − cE`` (E symmetric positive definite) they
count the eigenvalues of the symmetric pencil (A, E) on each side of c (Parlett, *The
Symmetric Eigenvalue Problem*, 1980, ch. 3, from memory; the shift-and-count use is that of
spectrum slicing in the ARPACK users' guide of Lehoucq, Sorensen & Yang, 1998).

scipy has no sparse LDLᵀ. SuperLU (``scipy.sparse.linalg.splu``) with a symmetric fill-reducing
order, ``SymmetricMode`` and ``diag_pivot_thresh=0`` takes every pivot on the diagonal unless
one is exactly zero; then ``perm_r == perm_c = p`` and ``S[p][:, p] = L̂ Û`` with
``Û ≈ D L̂ᵀ``, ``D = diag(Û)``. A factorisation that pivoted off the diagonal is refused (its
pivots are no inertia count).

Floating point makes ``L̂ D L̂ᵀ`` the factorisation of a nearby matrix only. The distance is
bounded rigorously here, so a count can be trusted where it matters:

* Gaussian elimination in any order gives ``L̂Û = PSPᵀ + ΔS`` with ``|ΔS| ≤ γ_k |L̂||Û|``
  (Higham, *Accuracy and Stability of Numerical Algorithms*, 2002, Thm 9.3; γ_k = ku/(1 − ku),
  k the longest inner product, at most the largest column count of L̂);
* ``L̂ D L̂ᵀ = L̂Û − L̂(Û − D L̂ᵀ)``, the difference formed and bounded explicitly;
* spectral norms of absolute-value matrices are bounded by ``√(‖X‖₁‖X‖∞)``.

So ``L̂ D L̂ᵀ = PSPᵀ + Δ`` with ``‖Δ‖₂ ≤ ρ`` (:attr:`Inertia.residual`), and by Weyl's
inequality every eigenvalue of S is within ρ of one of ``L̂ D L̂ᵀ``, whose inertia is D's
exactly. :func:`pencil_below` turns that into a proof: the pivots of ``A − (c − δ)E`` all
negative with ``ρ/g < δ`` (g a proven lower bound of E's eigenvalues) means every eigenvalue
of the pencil is below c. Where the factorisation pivoted, a pivot was zero, or ρ is too large
against δ, nothing is claimed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

__all__ = ["Inertia", "ldlt_inertia", "pencil_below", "pencil_above", "gershgorin",
           "is_symmetric"]

_U = 2.0 ** -53


def _gamma(k: int) -> float:
    ku = k * _U
    return ku / (1.0 - ku)


@dataclass(frozen=True)
class Inertia:
    """Pivot signs of an LDLᵀ factorisation and the bound ``residual`` on the 2-norm distance
    between the matrix factored and the one whose inertia the pivots give exactly."""

    positive: int
    negative: int
    zero: int
    residual: float


def is_symmetric(S: Any) -> bool:
    """Whether the sparse matrix S equals its transpose exactly."""
    return S.shape[0] == S.shape[1] and (S != S.T).nnz == 0


def _abs_norm2(X: Any) -> float:
    """Upper bound on ‖|X|‖₂ (and so on ‖X‖₂): √(‖X‖₁‖X‖∞), rounding of the sums included."""
    import numpy as np

    if X.nnz == 0:
        return 0.0
    # sums of |entries| straight from the compressed arrays (no canonical copy: an entry
    # stored twice only adds to the sums, which stay upper bounds)
    a = np.abs(X.data)
    indptr = X.indptr
    starts = np.minimum(indptr[:-1], a.size - 1)
    major = np.add.reduceat(a, starts)
    major[indptr[1:] == indptr[:-1]] = 0.0
    minor = np.bincount(X.indices, weights=a, minlength=X.shape[1 if X.format == "csr" else 0])
    # no sum has more terms than X stores (duplicates included)
    return math.sqrt(float(major.max()) * float(minor.max())) * (1.0 + _gamma(2 * X.nnz + 8))


def gershgorin(S: Any) -> tuple[float, float]:
    """Rigorous bounds (lo, hi) on the eigenvalues of a symmetric sparse S from its rows."""
    import numpy as np

    S = S.tocsr()
    diag = S.diagonal()
    rows = np.asarray(abs(S).sum(axis=1)).ravel()
    off = rows - np.abs(diag)
    width = int(np.diff(S.indptr).max()) + 4 if S.nnz else 4
    slack = _gamma(width) * float(rows.max()) if S.nnz else 0.0
    return float((diag - off).min()) - slack, float((diag + off).max()) + slack


def ldlt_inertia(S: Any) -> Inertia | None:
    """The inertia of a symmetric sparse S from SuperLU without off-diagonal pivoting, with its
    rigorous residual bound; None when the factorisation failed or pivoted."""
    import numpy as np
    import scipy.sparse as sp
    from scipy.sparse.linalg import splu

    try:
        lu = splu(sp.csc_matrix(S, dtype=float), permc_spec="MMD_AT_PLUS_A",
                  diag_pivot_thresh=0.0, options=dict(SymmetricMode=True))
    except RuntimeError:  # exactly singular: a zero pivot, no count
        return None
    if not np.array_equal(lu.perm_r, lu.perm_c):
        return None
    L, U = lu.L.tocsc(), lu.U.tocsr()
    d = U.diagonal()
    if not np.all(np.isfinite(d)) or not np.all(np.isfinite(L.data)) \
            or not np.all(np.isfinite(U.data)):
        return None
    # D·L̂ᵀ in CSR from L̂'s CSC arrays: row j of L̂ᵀ is column j of L̂, scaled by d_j
    DLt = sp.csr_matrix((L.data * np.repeat(d, np.diff(L.indptr)), L.indices, L.indptr),
                        shape=(L.shape[1], L.shape[0]))
    X = U - DLt
    k = int(np.bincount(L.indices).max()) + 1  # most terms of an inner product (a row of L)
    nl, nu = _abs_norm2(L), _abs_norm2(U)
    # ‖Δ‖ ≤ γ_k‖|L||U|‖ + ‖|L|‖(‖X̂‖ + rounding of X̂: one product and one difference)
    rho = _gamma(k) * nl * nu + nl * (_abs_norm2(X) + 2.0 * _U * (nu + _abs_norm2(DLt)))
    rho *= 1.0 + _gamma(16)
    return Inertia(positive=int((d > 0).sum()), negative=int((d < 0).sum()),
                   zero=int((d == 0).sum()), residual=rho)


def _lower_of(E: Any) -> float:
    """A proven lower bound of the eigenvalues of a symmetric E (0.0 when none is proven
    positive): Gershgorin's, else a quarter of the smallest diagonal entry checked by an
    inertia count."""
    if E is None:
        return 1.0
    lo, _ = gershgorin(E)
    if lo > 0.0:
        return lo
    t = 0.25 * float(E.diagonal().min())
    if t > 0.0 and pencil_below(-E, None, -t):
        return t
    return 0.0


def pencil_below(A: Any, E: Any, c: float, e_lower: float | None = None) -> bool:
    """Proof that every eigenvalue of the symmetric pencil (A, E) (E None: the identity; E
    symmetric positive definite) is strictly below ``c`` (module docstring)."""
    import scipy.sparse as sp

    if not math.isfinite(c) or not is_symmetric(A) or (E is not None and not is_symmetric(E)):
        return False
    g = _lower_of(E) if e_lower is None else e_lower
    if g <= 0.0:
        return False
    n = A.shape[0]
    ident = sp.identity(n, format="csr") if E is None else E
    absA, absE = _abs_norm2(A), _abs_norm2(ident)
    delta = 2.0 ** -40 * (absA + abs(c) * absE) + 1e-300
    for _ in range(2):
        shift = c - delta
        T = (A - shift * ident).tocsc()
        inert = ldlt_inertia(T)
        if inert is None or inert.negative != n:
            return False
        # forming T: each entry a − shift·e rounded twice at most
        rho = inert.residual + 2.0 * _U * (absA + abs(shift) * absE) * (1.0 + 4.0 * _U)
        if rho / g < delta:
            return True
        delta = 4.0 * rho / g
    return False


def pencil_above(A: Any, E: Any, c: float, e_lower: float | None = None) -> bool:
    """Proof that every eigenvalue of the symmetric pencil (A, E) is strictly above ``c``."""
    return pencil_below(-A, E, -c, e_lower)
