"""The sparse modal search (issue 15): shift-invert Arnoldi over Bendixson's rectangle cut to
each requirement's region, checked against dense LAPACK, with partial-spectrum verdicts.

Sources: the dense reference is ``scipy.linalg.eig`` (LAPACK, reference library); the bare
baseline search is ``scipy.sparse.linalg.eigs(A, k=6, sigma=0)`` (ARPACK, reference library);
Bendixson's theorem (Acta Math. 1902) bounds the real parts by the symmetric part's and the
imaginary parts by the skew part's eigenvalues; the 2-D heat and convection-diffusion
matrices are the five-point finite-difference Laplacian (LeVeque, Finite Difference Methods,
2007, from memory: eigenvalues −(4/h²)(sin²(iπh/2) + sin²(jπh/2))); the damped spring chain
is the common textbook mass–spring lattice.
"""

import math

import numpy as np
import pytest
import scipy.linalg as la
import scipy.sparse as sp
from scipy.sparse.linalg import eigs

from eigengate.analysis.modes import analyse
from eigengate.analysis.sparse_modes import Target, analyse_sparse
from eigengate.model.core import from_arrays
from eigengate.rules.origin_requirements import DirectionCounts, EquilibriumType
from eigengate.rules.requirements import (MaxFrequency, MinDamping, MinDecayRate, PoleRegion,
                                          Stability, evaluate)


def laplacian(m, c=0.0):
    """Five-point Laplacian on an m×m grid of the unit square (Dirichlet), with convection c."""
    h = 1.0 / (m + 1)
    t = sp.diags([1 / h**2 + c / (2 * h), -2 / h**2, 1 / h**2 - c / (2 * h)], [-1, 0, 1],
                 shape=(m, m))
    eye = sp.identity(m)
    return (sp.kron(t, eye) + sp.kron(eye, t)).tocsr()


def spring_chain(n, k=1.0, d=0.02, mass=1.0):
    """n masses in a chain between walls: M q'' + D q' + K q = 0 with D = d·K (proportional
    damping), as a first-order sparse matrix [[0, I], [−M⁻¹K, −M⁻¹D]]."""
    K = sp.diags([-k, 2 * k, -k], [-1, 0, 1], shape=(n, n)).tocsr()
    eye = sp.identity(n)
    return sp.bmat([[None, eye], [-K / mass, -d * K / mass]]).tocsr()


def assert_agrees_with_dense(spectrum, dense_eigenvalues):
    """Every mode found is within 1e-10 relative (and within its own bound) of LAPACK's."""
    for m in spectrum.modes:
        for lam in ([m.s, m.s.conjugate()] if m.pair else [m.s]):
            gap = np.abs(dense_eigenvalues - lam)
            j = int(np.argmin(gap))
            assert gap[j] <= 1e-10 * abs(dense_eigenvalues[j]), (lam, dense_eigenvalues[j])
            assert gap[j] <= m.uncertainty + 1e-12 * abs(lam), (lam, gap[j], m.uncertainty)


def test_heat_equation_agrees_with_dense_and_is_certified_by_inertia():
    A = laplacian(20)  # n = 400, symmetric: eigenvalues real, double ones from symmetry
    model = from_arrays(A, sparse=True, requirements=[Stability()])
    spectrum = analyse_sparse(model)
    dense = la.eigvals(A.toarray())
    assert_agrees_with_dense(spectrum, dense)
    h = 1.0 / 21
    rightmost = -8 / h**2 * math.sin(math.pi * h / 2) ** 2  # closed form (LeVeque)
    assert abs(spectrum.modes[0].s.real - rightmost) <= 1e-10 * abs(rightmost)
    assert spectrum.modes[1].multiplicity == 2  # λ(1,2) = λ(2,1)
    assert spectrum.partial and spectrum.search.symmetric
    (verdict,) = evaluate(spectrum)
    # a search alone never certifies; A symmetric: Sylvester's law of inertia does (the LDLᵀ
    # pivots of A are all negative, so every eigenvalue is negative)
    assert verdict.passed and verdict.decided_by == "certified"
    assert "Sylvester's law of inertia" in verdict.message
    # the non-symmetric convection-diffusion matrix has no such certificate: a labelled search
    (verdict,) = evaluate(analyse_sparse(from_arrays(laplacian(20, c=5.0), sparse=True,
                                                     requirements=[Stability()])))
    assert verdict.passed and verdict.decided_by == "estimated"
    assert "no eigenvalue found" in verdict.message and "search covered" in verdict.message


def test_nonsymmetric_and_descriptor_agree_with_dense():
    A = laplacian(15, c=5.0)  # convection-diffusion: non-normal, real eigenvalues
    s = analyse_sparse(from_arrays(A, sparse=True))
    assert_agrees_with_dense(s, la.eigvals(A.toarray()))
    E = sp.diags(np.linspace(1.0, 3.0, A.shape[0])).tocsr()  # n = 225
    s = analyse_sparse(from_arrays(A, E=E, sparse=True))
    assert_agrees_with_dense(s, la.eigvals(A.toarray(), E.toarray()))
    # participation factors of the rightmost mode match the dense analysis
    dense = analyse(from_arrays(A.toarray(), E=E.toarray()))
    assert np.allclose(s.modes[0].participation, dense.modes[0].participation, atol=1e-8)
    assert abs(s.modes[0].participation.sum() - 1.0) < 1e-12


def test_rightmost_eigenvalue_far_from_the_first_shift_is_found():
    A = laplacian(15, c=5.0)
    far = sp.csr_matrix(np.array([[0.01, 1500.0], [-1500.0, 0.01]]))  # 0.01 ± 1500j
    B = sp.block_diag([A, far]).tocsr()
    bare = eigs(B, k=6, sigma=0, return_eigenvectors=False)
    assert np.all(bare.real < 0)  # the baseline search near 0 misses the unstable pair
    model = from_arrays(B, sparse=True, requirements=[Stability()])
    spectrum = analyse_sparse(model)
    top = spectrum.modes[0]
    assert top.pair and abs(top.s - complex(0.01, 1500.0)) <= 1e-10 * 1500
    (verdict,) = evaluate(spectrum)
    assert not verdict.passed and "found by an iterative search" in verdict.message
    assert verdict.decided_by == "estimated"


def test_damping_and_frequency_on_a_partial_spectrum_match_dense():
    A = spring_chain(40)  # n = 80, lightly damped pairs up to ωn = 2
    reqs = [MinDamping(0.02), MaxFrequency(1.9), PoleRegion(zeta=0.001)]
    model = from_arrays(A, sparse=True, requirements=reqs)
    spectrum = analyse_sparse(model, [t for r in reqs for t in r.targets()])
    dense_model = from_arrays(A.toarray(), requirements=reqs)
    dense = evaluate(analyse(dense_model))
    found = evaluate(spectrum)
    for v, d in zip(found, dense):
        assert v.passed == d.passed and v.rule == d.rule, (v.message, d.message)
        assert v.decided_by != "certified"
    # the worst damping and the largest frequency are the dense ones
    assert abs(found[0].measured - dense[0].measured) <= 1e-9
    assert abs(found[1].measured - dense[1].measured) <= 1e-10 * dense[1].measured


def test_bendixson_certifies_when_the_rectangle_misses_the_region():
    A = (laplacian(12) - sp.identity(144)).tocsr()  # symmetric part ≤ −1: Re λ ≤ −1
    model = from_arrays(A, sparse=True, requirements=[Stability(), MinDecayRate(0.5)])
    verdicts = evaluate(analyse_sparse(model, [Target("right", -0.5)]))
    assert all(v.passed and v.decided_by == "certified" for v in verdicts)
    assert "Bendixson" in verdicts[0].message


def test_whole_spectrum_requirements_cannot_be_evaluated_on_a_partial_spectrum():
    model = from_arrays(laplacian(12), sparse=True,
                        requirements=[EquilibriumType("stable-node"), DirectionCounts(stable=144)])
    for v in evaluate(analyse_sparse(model)):
        assert not v.passed and v.measured == "not evaluated"
        assert "cannot be evaluated on a partial spectrum" in v.message


def test_a_search_that_cannot_cover_its_region_is_uncertain():
    # a descriptor model has no Bendixson rectangle: only discs are searched (non-symmetric,
    # so no inertia certificate either)
    A = laplacian(12, c=5.0)
    E = sp.diags(np.linspace(1.0, 2.0, 144)).tocsr()
    spectrum = analyse_sparse(from_arrays(A, E=E, sparse=True))
    (fail,) = evaluate(spectrum, [Stability()])
    (ok,) = evaluate(spectrum, [Stability()], on_uncertain="pass")
    assert not fail.passed and fail.uncertain and fail.decided_by == "uncertain"
    assert ok.passed and ok.uncertain and "did not cover" in ok.message


def test_the_search_is_deterministic():
    A = laplacian(12, c=5.0)
    one = analyse_sparse(from_arrays(A, sparse=True))
    two = analyse_sparse(from_arrays(A, sparse=True))
    assert [m.s for m in one.modes] == [m.s for m in two.modes]
    assert [m.uncertainty for m in one.modes] == [m.uncertainty for m in two.modes]


def test_small_sparse_models_get_the_whole_spectrum():
    A = laplacian(4)  # 16 states: at most SMALL, decomposed in full
    s = analyse_sparse(from_arrays(A, sparse=True))
    assert not s.partial and s.n_eigenvalues == 16
