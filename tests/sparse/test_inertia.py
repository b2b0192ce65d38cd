"""Inertia counts from SuperLU without pivoting (issue 15), against LAPACK's symmetric solver.

Sources: Sylvester's law of inertia (1852): a congruence keeps the numbers of positive,
negative and zero eigenvalues; the reference counts are ``numpy.linalg.eigvalsh`` (LAPACK,
reference library); the residual bound is Higham, Accuracy and Stability of Numerical
Algorithms (2002), Thm 9.3 with Weyl's inequality; spectrum slicing by shift-and-count is
the ARPACK users' guide's (Lehoucq, Sorensen & Yang 1998); Meerbergen & Roose (IMA J. Numer.
Anal. 1996) on rightmost eigenvalues for why a search alone is no proof.
"""

import numpy as np
import pytest
import scipy.sparse as sp

from eigengate.analysis.inertia import gershgorin, ldlt_inertia, pencil_above, pencil_below


def laplacian(m):
    t = sp.diags([1.0, -2.0, 1.0], [-1, 0, 1], shape=(m, m))
    return (sp.kron(t, sp.identity(m)) + sp.kron(sp.identity(m), t)).tocsr()


@pytest.mark.parametrize("shift", [-7.9, -3.7, -1.3, -0.05])
def test_counts_match_lapack_on_shifted_laplacians(shift):
    A = laplacian(12)  # eigenvalues in (−8, 0), many of them double
    S = (A - shift * sp.identity(144)).tocsr()
    inert = ldlt_inertia(S)
    ev = np.linalg.eigvalsh(S.toarray())
    assert inert is not None
    assert (inert.positive, inert.negative) == ((ev > 0).sum(), (ev < 0).sum())
    # the residual bound is small against the gaps it must not cross
    assert 0 < inert.residual < 1e-3 * np.abs(ev).min()


def test_a_factorisation_that_pivots_is_refused():
    S = sp.csr_matrix(np.array([[0.0, 1.0], [1.0, 0.0]]))  # zero diagonal: SuperLU pivots
    assert ldlt_inertia(S) is None


def test_pencil_bounds_at_and_beside_an_eigenvalue():
    A = sp.diags(-np.arange(1.0, 41.0)).tocsr()  # eigenvalues −1, −2, …, −40
    assert pencil_below(A, None, -1.0 + 1e-6)
    assert not pencil_below(A, None, -1.0)          # an eigenvalue on the line: no proof
    assert not pencil_below(A, None, -1.0 - 1e-6)
    assert pencil_above(A, None, -40.0 - 1e-6) and not pencil_above(A, None, -40.0)
    # a symmetric positive definite E: the pencil's eigenvalues are −i/e_i
    E = sp.diags(np.linspace(1.0, 2.0, 40)).tocsr()
    top = (-np.arange(1.0, 41.0) / np.linspace(1.0, 2.0, 40)).max()
    assert pencil_below(A, E, top + 1e-9) and not pencil_below(A, E, top - 1e-9)
    # an indefinite E proves nothing
    bad = sp.diags(np.linspace(-1.0, 2.0, 40)).tocsr()
    assert not pencil_below(A, bad, 0.0)


def test_non_symmetric_input_proves_nothing():
    A = (sp.diags(-np.arange(1.0, 11.0)) + 1e-3 * sp.eye(10, k=1)).tocsr()
    assert not pencil_below(A, None, 0.0)


def test_gershgorin_bounds_enclose_the_spectrum():
    A = laplacian(10)
    lo, hi = gershgorin(A)
    ev = np.linalg.eigvalsh(A.toarray())
    assert lo <= ev.min() and ev.max() <= hi  # Gershgorin's theorem


def test_the_residual_bound_covers_the_true_factorisation_error():
    # a badly scaled symmetric positive definite matrix: the bound must cover
    # ‖P S Pᵀ − L D Lᵀ‖₂ measured in extended form (dense, 2-norm by LAPACK's SVD)
    from scipy.sparse.linalg import splu

    rng = np.random.default_rng(0)
    n = 150
    A = sp.random(n, n, density=0.03, random_state=1)
    A = (A + A.T + sp.diags(rng.uniform(1.0, 2.0, n) * 10)).tocsc()
    s = sp.diags(10.0 ** rng.uniform(-3, 3, n))
    S = (s @ A @ s).tocsc()
    inert = ldlt_inertia(S)
    assert inert is not None and inert.positive == n
    lu = splu(S, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
              options=dict(SymmetricMode=True))
    q = np.argsort(lu.perm_c)  # Pr S Pc = L U puts S[i, j] at (perm[i], perm[j])
    L = lu.L.toarray()
    ldl = L @ np.diag(lu.U.diagonal()) @ L.T
    err = np.linalg.norm(S.toarray()[np.ix_(q, q)] - ldl, 2)
    assert err <= inert.residual
