"""Sparse discrete-time models (issue 15): the eigenvalues of largest modulus, labelled
partial verdicts, certificates.

Sources: the reference eigenvalues are ``scipy.linalg.eigvals`` (LAPACK, reference library);
the model is the explicit Euler step ``I + T·L`` of the five-point heat equation (LeVeque,
Finite Difference Methods, 2007, from memory); the modulus search is ARPACK's
``which="LM"`` (Lehoucq, Sorensen & Yang, ARPACK users' guide, 1998); Gershgorin's theorem
bounds every |z| by the largest absolute row sum; Sylvester's law of inertia certifies a
symmetric A.
"""

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp

from eigengate.analysis.sparse_modes import Target, analyse_sparse
from eigengate.model.core import from_arrays
from eigengate.rules.requirements import MinDecayRate, Stability, evaluate

T = 0.1


def euler_heat(m, drift=0.0, gain=1.0):
    t = sp.diags([1.0, -2.0, 1.0], [-1, 0, 1], shape=(m, m))
    L = sp.kron(t, sp.identity(m)) + sp.kron(sp.identity(m), t)
    return (gain * (sp.identity(m * m) + T * L) + drift * sp.eye(m * m, k=1)).tocsr()


def test_largest_moduli_match_lapack_and_symmetric_models_are_certified():
    A = euler_heat(20)  # 400 states, z in (0.2, 1)
    s = analyse_sparse(from_arrays(A, sparse=True, sample_period=T,
                                   requirements=[Stability()]), [Target("right", 0.0)])
    ref = la.eigvals(A.toarray())
    top = ref[np.argmax(np.abs(ref))]
    assert abs(s.modes[0].eigenvalue - top) <= 1e-10 * abs(top)
    assert abs(s.modes[0].s.real - np.log(abs(top)) / T) <= 1e-9
    (v,) = evaluate(s)
    assert v.passed and v.decided_by == "certified" and "Sylvester" in v.message


def test_unstable_nonsymmetric_discrete_model_fails_with_the_search_named():
    A = euler_heat(20, drift=0.01)  # non-symmetric; one |z| just above 1
    ref = la.eigvals(A.toarray())
    assert np.abs(ref).max() > 1.0
    s = analyse_sparse(from_arrays(A, sparse=True, sample_period=T,
                                   requirements=[Stability()]), [Target("right", 0.0)])
    (v,) = evaluate(s)
    assert not v.passed and v.decided_by == "estimated"
    assert "largest moduli" in v.message
    top = ref[np.argmax(np.abs(ref))]
    assert abs(s.modes[0].eigenvalue - top) <= 1e-10 * abs(top)


def test_a_stable_nonsymmetric_discrete_model_is_searched_not_certified():
    A = euler_heat(20, drift=0.01, gain=0.99)
    assert np.abs(la.eigvals(A.toarray())).max() < 1.0
    s = analyse_sparse(from_arrays(A, sparse=True, sample_period=T), [Target("right", 0.0)])
    (v,) = evaluate(s, [Stability()])
    assert v.passed and v.decided_by == "estimated" and "search covered" in v.message


def test_row_sums_certify_a_fast_decay():
    A = (0.3 * euler_heat(15, drift=0.01)).tocsr()  # every |z| ≤ 0.3·1.01 by row sums
    s = analyse_sparse(from_arrays(A, sparse=True, sample_period=T,
                                   requirements=[MinDecayRate(10.0)]), [Target("right", -10.0)])
    (v,) = evaluate(s)  # e^{-10·0.1} = 0.368 > 0.303: no |z| can reach the region
    assert v.passed and v.decided_by == "certified" and "row sum" in v.message
