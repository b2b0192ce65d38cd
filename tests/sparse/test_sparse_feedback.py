"""Static feedback around a sparse plant (issue 15): the closed loop kept sparse, its full
gain rows factored through the Woodbury identity.

Sources: the Woodbury identity (Golub & Van Loan, Matrix Computations, ch. 2); the reference
closed loop is ``A − B K`` formed dense and ``scipy.linalg.eigvals`` (LAPACK, reference
library); the plant is the five-point heat equation (LeVeque, Finite Difference Methods,
2007, from memory).
"""

import numpy as np
import pytest
import scipy.linalg as la
import scipy.sparse as sp

from eigengate.analysis.lowrank import factor
from eigengate.analysis.sparse_modes import analyse_sparse
from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from eigengate.rules.requirements import evaluate


def heat(m):
    t = sp.diags([1.0, -2.0, 1.0], [-1, 0, 1], shape=(m, m))
    return ((sp.kron(t, sp.identity(m)) + sp.kron(sp.identity(m), t)) * (m + 1) ** 2 / 100
            ).tocsr()


def test_woodbury_solves_match_the_matrix():
    A = heat(30)
    n = A.shape[0]
    rng = np.random.default_rng(1)
    rows = sp.csr_matrix((rng.standard_normal(2 * n), (np.repeat([7, 500], n),
                                                       np.tile(np.arange(n), 2))), (n, n))
    for shift in (0.3, 0.3 + 2j):
        M = (A + rows - shift * sp.identity(n)).tocsc()
        f = factor(M)
        assert type(f).__name__ == "_Woodbury"  # the two full rows were split off
        x = rng.standard_normal(n) + (0j if isinstance(shift, complex) else 0.0)
        assert np.linalg.norm(M @ f.solve(x) - x) <= 1e-10 * np.linalg.norm(x)
        assert np.linalg.norm(M.T @ f.solve(x, trans="T") - x) <= 1e-10 * np.linalg.norm(x)
    assert type(factor(A.tocsc())).__name__ == "SuperLU"  # no dense rows: plain LU


@pytest.fixture
def repo(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    m = 30
    n = m * m
    A = heat(m)
    B = np.zeros((n, 2))
    B[10, 0] = B[800, 1] = 1.0
    K = np.random.default_rng(3).standard_normal((2, n))
    sp.save_npz(tmp_path / "plate.npz", A)
    np.savez(tmp_path / "io.npz", B=B, K=K, C=np.eye(1, n, 5))
    return tmp_path, A, B, K


def write(repo, feedback):
    path = repo / "plate.yaml"
    path.write_text("model_format: 1\nname: plate\nplant:\n  A: {file: plate.npz}\n"
                    "  B: {file: io.npz, key: B}\n  C: {file: io.npz, key: C}\n"
                    "  sparse: true\n" + feedback + "requirements:\n  stable: true\n")
    return path


def test_state_feedback_around_a_sparse_plant_matches_the_dense_closed_loop(repo):
    tmp, A, B, K = repo
    (model,) = load_models(write(tmp, "feedback:\n  state_gain: {file: io.npz, key: K}\n"))
    assert model.sparse and model.structure == "closed loop: state feedback"
    assert model.A.nnz <= A.nnz + 2 * A.shape[0]  # two full rows, nothing more
    ref = la.eigvals(A.toarray() - B @ K)
    spectrum = analyse_sparse(model)
    for mode in spectrum.modes:
        gap = np.abs(ref - mode.s)
        j = int(np.argmin(gap))
        assert gap[j] <= 1e-9 * abs(ref[j]) and gap[j] <= mode.uncertainty + 1e-12
    assert abs(spectrum.modes[0].s.real - ref.real.max()) <= 1e-9 * abs(ref.real.max())
    (v,) = evaluate(spectrum)
    assert v.passed == bool(ref.real.max() < 0)


def test_output_feedback_and_a_refused_dynamic_controller(repo):
    tmp, A, B, _ = repo
    (model,) = load_models(write(tmp, "feedback:\n  inputs: [u1]\n  output_gain: [[4.0]]\n"))
    C = np.eye(1, A.shape[0], 5)
    ref = la.eigvals(A.toarray() - 4.0 * B[:, :1] @ C)
    top = analyse_sparse(model).modes[0].s
    assert abs(top - ref[np.argmax(ref.real)]) <= 1e-9 * abs(top)
    with pytest.raises(ModelError, match="feedback.controller.*sparse plant"):
        load_models(write(tmp, "feedback:\n  controller: {A: [[0.0]], B: [[1.0]], "
                          "C: [[1.0]], D: [[0.0]]}\n"))
