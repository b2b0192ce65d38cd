"""Second-order plants ``M q'' + D q' + K q = F u`` (issue 15): companion form, dense and sparse
analysis against LAPACK, certificates from structure, and bad input.

Sources: the reference eigenvalues are ``scipy.linalg.eig`` of the companion pencil
``([[0, I], [−K, −D]], blkdiag(I, M))`` (LAPACK QZ, reference library; the linearisation is
that of Tisseur & Meerbergen, SIAM Review 2001); the spring chain is the common textbook
mass–spring lattice (K tridiagonal 2, −1; its eigenvalues 2 − 2cos(jπ/(n+1)), common
practice); the certificates rest on Sylvester's law of inertia (1852) for the definiteness of
M, D, K and on the scalar relation ``mλ² + dλ + k = 0`` of an eigenpair (Tisseur &
Meerbergen 2001, from memory); Meerbergen & Roose (IMA J. Numer. Anal. 1996) for the
rightmost eigenvalues by shift-invert; the ARPACK users' guide (Lehoucq, Sorensen & Yang
1998) for shift-invert spectrum slicing.
"""

import numpy as np
import pytest
import scipy.linalg as la
import scipy.sparse as sp

from eigengate.analysis.modes import analyse
from eigengate.analysis.sparse_modes import Target, analyse_sparse
from eigengate.analysis.structure import second_order_parts
from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from eigengate.model.second_order import from_second_order
from eigengate.rules.requirements import MinDamping, MinDecayRate, Stability, evaluate


def chain(n, damping=0.01, mass_spread=1.0):
    """n masses between walls: K = tridiag(−1, 2, −1), M = diag(1..1+spread), D = d·K + d/10·M."""
    K = sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(n, n)).tocsr()
    M = sp.diags(np.linspace(1.0, 1.0 + mass_spread, n)).tocsr()
    D = (damping * K + 0.1 * damping * M).tocsr()
    return M, D, K


def companion_eigenvalues(M, D, K):
    n = M.shape[0]
    A = np.block([[np.zeros((n, n)), np.eye(n)], [-K.toarray(), -D.toarray()]])
    E = la.block_diag(np.eye(n), M.toarray())
    return la.eigvals(A, E)


def assert_modes_match(spectrum, reference, rel=1e-10):
    """Every mode found is within ``rel`` relative of a reference eigenvalue, and within its
    own residual bound (which rests on the left vectors)."""
    for m in spectrum.modes:
        for lam in ([m.s, m.s.conjugate()] if m.pair else [m.s]):
            gap = np.abs(reference - lam)
            j = int(np.argmin(gap))
            assert gap[j] <= rel * abs(reference[j]), (lam, reference[j])
            assert gap[j] <= m.uncertainty + 1e-12 * abs(lam), (lam, gap[j], m.uncertainty)
            assert m.condition < 1e8  # a left vector was found for it


def test_dense_second_order_matches_the_companion_pencil_and_names_the_states():
    M, D, K = chain(40)
    F = np.zeros((40, 1))
    F[0, 0] = 1.0
    model = from_second_order(M, K, D, F, Cq=np.eye(1, 40), Cv=np.eye(1, 40, 39))
    assert not model.sparse and model.n_states == 80 and model.structure == "second order"
    assert model.states[0] == "q1" and model.states[40] == "q1'"
    assert model.B.shape == (80, 1) and model.B[40, 0] == 1.0 and model.C.shape == (1, 80)
    spectrum = analyse(model)
    ref = companion_eigenvalues(M, D, K)  # LAPACK QZ of the companion pencil
    assert sum(2 if m.pair else 1 for m in spectrum.modes) == 80
    assert_modes_match(spectrum, ref)
    # participation factors of a mode sum to one (common practice)
    assert abs(spectrum.modes[0].participation.sum() - 1.0) < 1e-12


def test_sparse_second_order_agrees_with_dense_and_is_certified_by_structure():
    M, D, K = chain(500)  # 1,000 states
    model = from_second_order(M, K, D, sparse=True,
                              requirements=[Stability(), MinDecayRate(1e-4)])
    assert model.sparse and model.E is not None
    assert second_order_parts(model.A, model.E) is not None
    spectrum = analyse_sparse(model, [Target("right", 0.0), Target("right", -1e-4)])
    ref = companion_eigenvalues(M, D, K)
    assert_modes_match(spectrum, ref)
    # the rightmost eigenvalue found is LAPACK's rightmost
    assert abs(spectrum.modes[0].s.real - ref.real.max()) <= 1e-10 * abs(ref.real.max())
    for v in evaluate(spectrum):
        assert v.passed and v.decided_by == "certified", v.message
        assert "second-order structure" in v.message and "inertia" in v.message
    # the certified decay bound min(λmin(D)/(2λmax(M)), λmin(K)/λmax(D)) is below the true one
    assert -ref.real.max() > 1e-4


def test_a_decay_rate_beyond_the_structural_bound_is_not_certified():
    M, D, K = chain(200)
    true_rate = -companion_eigenvalues(M, D, K).real.max()
    model = from_second_order(M, K, D, sparse=True, requirements=[MinDecayRate(2 * true_rate)])
    spectrum = analyse_sparse(model, [Target("right", -2 * true_rate)])
    (v,) = evaluate(spectrum)
    assert not v.passed and v.decided_by != "certified"
    assert not spectrum.search.proofs


def test_undamped_and_nonsymmetric_second_order_models_are_not_certified():
    M, _, K = chain(100)
    # D = 0: eigenvalues on the imaginary axis; no stability certificate (and none claimed)
    s = analyse_sparse(from_second_order(M, K, sparse=True), [Target("right", 0.0)])
    assert not s.search.proofs
    (v,) = evaluate(s, [Stability()])
    assert not v.passed and v.decided_by != "certified"
    # a follower force makes K non-symmetric: the structure argument does not apply
    Kf = (K + 0.3 * sp.eye(100, k=1)).tocsr()
    D = 0.05 * sp.identity(100, format="csr")
    s = analyse_sparse(from_second_order(M, Kf, D, sparse=True), [Target("right", 0.0)])
    assert not s.search.proofs


def test_damping_sector_certificate_against_dense_damping():
    M = sp.identity(60, format="csr")
    K = sp.diags(np.linspace(1.0, 4.0, 60)).tocsr()
    D = (0.8 * sp.identity(60)).tocsr()  # ζ_j = 0.4/√k_j ≥ 0.2
    model = from_second_order(M, K, D, sparse=True, requirements=[MinDamping(0.15)])
    s = analyse_sparse(model, [Target("sector", 0.15)])
    (v,) = evaluate(s)
    assert v.passed and v.decided_by == "certified", v.message
    zeta = -companion_eigenvalues(M, D, K)
    zeta = (zeta.real / np.abs(zeta)).min()
    assert abs(zeta - 0.2) < 1e-10  # closed form: ζ = d/(2√(mk)) with k = 4
    (v,) = evaluate(analyse_sparse(model, [Target("sector", 0.25)]), [MinDamping(0.25)])
    assert not v.passed and v.decided_by != "certified"


BASE = """\
model_format: 1
plant:
  second_order:
    M: [[2.0, 0.0], [0.0, 1.0]]
    D: [[0.3, -0.1], [-0.1, 0.2]]
    K: [[6.0, -2.0], [-2.0, 4.0]]
    F: [[0.0], [1.0]]
    Cq: [[1.0, 0.0]]
    coordinates: [cart, pole]
  inputs: [force]
  outputs: [position]
requirements:
  stable: true
"""


def load(tmp_path, text):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    path = tmp_path / "rig.yaml"
    path.write_text(text)
    return load_models(path)


def test_second_order_block_from_yaml(tmp_path):
    (model,) = load(tmp_path, BASE)
    assert model.states == ("cart", "pole", "cart'", "pole'")
    assert model.inputs == ("force",) and model.outputs == ("position",)
    ref = la.eigvals(model.A, model.E)
    M = np.diag([2.0, 1.0])
    K = np.array([[6.0, -2.0], [-2.0, 4.0]])
    D = np.array([[0.3, -0.1], [-0.1, 0.2]])
    # each eigenvalue solves det(λ²M + λD + K) = 0 (the quadratic eigenproblem itself)
    for lam in ref:
        assert abs(np.linalg.det(lam * lam * M + lam * D + K)) <= 1e-9 * np.abs(K).sum() ** 2
    (v,) = evaluate(analyse(model))
    assert v.passed


@pytest.mark.parametrize("change, field, words", [
    ("K: [[6.0, -2.0, 0.0], [-2.0, 4.0, 0.0]]", "plant.second_order.K", "must be square"),
    ("K: [[6.0, -2.0, 0.0], [-2.0, 4.0, 0.0], [0.0, 0.0, 1.0]]", "plant.second_order.K",
     "must be 2×2 like M"),
    ("F: [[0.0], [1.0], [2.0]]", "plant.second_order.F", "must have 2 rows"),
    ("Cq: [[1.0, 0.0, 3.0]]", "plant.second_order.Cq", "must have 2 columns"),
    ("M: [[1.0, 1.0], [1.0, 1.0]]", "plant.second_order.M", "is singular"),
    ("M: [[1.0, 1.0]]", "plant.second_order.M", "must be square"),
    ("coordinates: [cart]", "plant.second_order.coordinates", "must name 2"),
    ("Q: [[1.0]]", "plant.second_order.Q", "is not a field"),
])
def test_bad_second_order_input_names_file_and_field(tmp_path, change, field, words):
    key = change.split(":")[0]
    lines = [line for line in BASE.splitlines() if not line.strip().startswith(key + ":")]
    at = lines.index("  second_order:") + 1
    text = "\n".join(lines[:at] + ["    " + change] + lines[at:]) + "\n"
    with pytest.raises(ModelError) as exc:
        load(tmp_path, text)
    message = str(exc.value)
    assert "rig.yaml" in message and field in message and words in message, message
    assert "Traceback" not in message


def test_second_order_beside_a_state_space_matrix_is_refused(tmp_path):
    text = BASE.replace("  inputs: [force]", "  A: [[1.0]]\n  inputs: [force]")
    with pytest.raises(ModelError, match="plant.A.*second_order"):
        load(tmp_path, text)


def test_schema_keys_of_the_second_order_plant_match_the_loader():
    import json
    from importlib import resources

    from eigengate.load.context import SO_PLANT_KEYS
    from eigengate.model.second_order import SECOND_ORDER_KEYS

    s = json.loads(resources.files("eigengate").joinpath("schema/model-v1.schema.json")
                   .read_text(encoding="utf-8"))
    so = s["$defs"]["second_order"]
    assert set(so["properties"]) == set(SO_PLANT_KEYS)
    assert set(so["properties"]["second_order"]["properties"]) == set(SECOND_ORDER_KEYS)
