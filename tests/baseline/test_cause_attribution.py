"""Cause attribution of regressions: the inputs that changed since a model was accepted, with
before → after values and the line they are on, ranked by how much each moved the regressed
mode.

The ranking is the first-order eigenvalue perturbation δλ ≈ wᴴ(δA − λ δE)v / (wᴴ E v)
(Wilkinson, The Algebraic Eigenvalue Problem, 1965, ch. 2; Golub & Van Loan, Matrix
Computations, ch. 7: the condition of a simple eigenvalue). Every share is checked against an
independent finite-difference reference: the eigenvalue recomputed with numpy (or, for a
transfer function, the denominator's roots with numpy.roots; for the vector field, the closed
form of a second-order system's poles, s = −c/2 ± j√(4k − c²)/2, second-order standard form,
common in control textbooks) with the input moved a small step either way.
"""

from __future__ import annotations

import json
import textwrap

import numpy as np
import pytest
# the checks run in this process (support.run_main): their output is the subject here
from support import git, run_main

from eigengate.analysis.sensitivity import directional, eigenpair, shares
from eigengate.baseline.attribution import NOT_RECORDED
from eigengate.baseline.inputs import MAX_RECORDED, block_of, diff_inputs
from eigengate.baseline.regressions import compare
from eigengate.baseline.store import Baseline, baseline_entry_from
from eigengate.scan.config import Config
from eigengate.scan.engine import check_file


def upper(values):
    """The eigenvalue with the largest imaginary part (the member a finding reports)."""
    values = np.asarray(values, dtype=complex)
    return values[np.argmax(values.imag)]


def fd_eigen_shift(matrix_of, p0, k, delta, t=1e-6):
    """Reference first-order shift of the upper eigenvalue when input ``k`` moves by ``delta``:
    central differences of eigenvalues recomputed by numpy at p0 ± t·delta·e_k."""
    def at(s):
        p = np.array(p0, dtype=float)
        p[k] += s * delta
        return upper(np.linalg.eigvals(matrix_of(p)))
    return (at(t) - at(-t)) / (2 * t)


def accepted(path, root, **kw):
    """The baseline entry of the model file as it is now, through the file format."""
    (r,) = check_file(path, root=root, **kw).results
    text = Baseline([baseline_entry_from(r)]).dump()
    return Baseline.loads(text).entries()[0]


def regressions(path, root, entry, **kw):
    (r,) = check_file(path, root=root, **kw).results
    return [f for f in compare(r, entry).regressions if f.cause]


# An invented gantry crane's sway loop in state feedback: x' = A x + B u, u = -K x,
# A_cl = A - B K = [[0, 1], [-(2 + k1), -(0.5 + k2)]]: with k1 = 7, k2 = 2.5 the pair has
# ωn = 3 and ζ = 0.5 (second-order standard form).
CRANE = """\
    model_format: 1
    name: crane
    plant:
      states: [sway_angle, sway_rate]
      A:
        - [0, 1]
        - [-2, {a22}]
      B: [[0], [1]]
    feedback:
      state_gain: [[{k1}, {k2}]]
    """


def crane(tmp_path, a22=-0.5, k1=7.0, k2=2.5):
    path = tmp_path / "crane.yaml"
    path.write_text(textwrap.dedent(CRANE.format(a22=a22, k1=k1, k2=k2)), encoding="utf-8")
    return path


def crane_A(p):
    a22, k1, k2 = p
    return np.array([[0.0, 1.0], [-2.0, a22]]) - np.array([[0.0], [1.0]]) @ [[k1, k2]]


def test_a_retuned_gain_is_named_first_with_its_values_and_line(tmp_path):
    entry = accepted(crane(tmp_path), tmp_path)
    found = regressions(crane(tmp_path, k2=2.2), tmp_path, entry)
    assert found, "k2 2.5 → 2.2 lowers ζ 0.5 → 0.45: a regression"
    for f in found:
        top = f.cause[0]
        assert (top.input, top.before, top.after) == ("feedback.state_gain[0][1]", 2.5, 2.2)
        assert top.line == 10 == f.line  # the gain's line, not the feedback block's (9)
        assert "100 % of the first-order shift comes from feedback.state_gain[0][1] 2.5 → 2.2" \
            in top.text and top.text.startswith("mode ")
        # reference: numpy's eigenvalues of A - B K at k2 ± t·δ (common practice)
        ref = fd_eigen_shift(crane_A, [-0.5, 7.0, 2.5], 2, -0.3)
        assert abs(top.shift - ref) <= 1e-6 * abs(ref)
        # a small change: the first-order total agrees with the actual move
        assert any("first-order total" in c.text and "apart" in c.text for c in f.cause[1:])


def test_gain_changes_map_through_minus_B_dK_C(tmp_path):
    # state feedback (C = I): δA_cl = −B δK; the realisation's derivative is that exactly
    from eigengate import load_models

    (m,) = load_models(crane(tmp_path), root=tmp_path)
    src = m.file_inputs
    K = np.array([[7.0, 2.5]])

    def moved(t):
        return src.realise({"feedback.state_gain": K + t * np.array([[0.0, -1.5]])})

    dA, dE = directional(moved)
    B = np.array([[0.0], [1.0]])
    assert dE is None and np.allclose(dA, -B @ np.array([[0.0, -1.5]]), atol=1e-9)


def test_two_changes_are_ranked_and_their_shares_match_finite_differences(tmp_path):
    entry = accepted(crane(tmp_path), tmp_path)
    # the plant's damping entry -0.5 → -0.45 and the gain 2.5 → 2.2: the gain moves more
    found = regressions(crane(tmp_path, a22=-0.45, k2=2.2), tmp_path, entry)
    f = found[0]
    ranked = [c for c in f.cause if c.share is not None]
    assert [c.input for c in ranked] == ["feedback.state_gain[0][1]", "plant.A[1][1]"]
    assert (ranked[1].before, ranked[1].after, ranked[1].line) == (-0.5, -0.45, 7)
    assert abs(sum(c.share for c in ranked) - 1.0) < 1e-12
    p0 = [-0.5, 7.0, 2.5]
    ref = [fd_eigen_shift(crane_A, p0, 2, -0.3), fd_eigen_shift(crane_A, p0, 0, 0.05)]
    for c, r in zip(ranked, ref):
        assert abs(c.shift - r) <= 1e-6 * abs(r)
    assert np.allclose([c.share for c in ranked], shares(ref), atol=1e-6)


def test_a_large_change_says_the_first_order_account_disagrees(tmp_path):
    entry = accepted(crane(tmp_path), tmp_path)
    f = regressions(crane(tmp_path, k2=0.1), tmp_path, entry)[0]
    note = f.cause[-1].text
    assert "differs from the actual move" in note and "guide only" in note


# A transfer-function plant: 2 / (s² + a1 s + 4), poles the roots of the denominator.
TF = """\
    model_format: 1
    name: reel
    plant:
      num: [2]
      den: [1, {a1}, 4]
    """


def test_a_transfer_function_coefficient(tmp_path):
    path = tmp_path / "reel.yaml"
    path.write_text(textwrap.dedent(TF.format(a1=1.2)), encoding="utf-8")
    entry = accepted(path, tmp_path)
    path.write_text(textwrap.dedent(TF.format(a1=1.1)), encoding="utf-8")
    f = regressions(path, tmp_path, entry)[0]
    top = f.cause[0]
    assert (top.input, top.before, top.after, top.line) == ("plant.den[1]", 1.2, 1.1, 5)

    # reference: the roots of the denominator (numpy.roots), independent of the realisation
    def roots_shift(t):
        return upper(np.roots([1.0, 1.2 + t * -0.1, 4.0]))

    ref = (roots_shift(1e-6) - roots_shift(-1e-6)) / 2e-6
    assert abs(top.shift - ref) <= 1e-6 * abs(ref)


def test_a_referenced_matrix_file(tmp_path):
    (tmp_path / "data").mkdir()
    csv = tmp_path / "data" / "winch.csv"
    csv.write_text("0, 1\n-9, -0.9\n", encoding="utf-8")
    path = tmp_path / "winch.yaml"
    path.write_text(textwrap.dedent("""\
        model_format: 1
        name: winch
        plant:
          states: [rope_angle, rope_rate]
          A: {file: data/winch.csv}
        """), encoding="utf-8")
    entry = accepted(path, tmp_path)
    (block,) = entry.inputs
    assert (block.name, block.file, block.values) == ("plant.A", "data/winch.csv",
                                                      (0.0, 1.0, -9.0, -0.9))
    csv.write_text("0, 1\n-9, -0.3\n", encoding="utf-8")
    f = regressions(path, tmp_path, entry)[0]
    top = f.cause[0]
    assert (top.input, top.before, top.after, top.file, top.line) == (
        "plant.A[1][1]", -0.9, -0.3, "data/winch.csv", 5)
    assert "plant.A[1][1] (file data/winch.csv) -0.9 → -0.3" in top.text

    def A(p):
        return np.array([[0.0, 1.0], [-9.0, p[0]]])

    ref = fd_eigen_shift(A, [-0.9], 0, 0.6)
    assert abs(top.shift - ref) <= 1e-6 * abs(ref)


FIELD_PY = """\
import numpy as np


def sway(x, u, c=0.4, k=4.0):
    return np.array([x[1], -k * x[0] - c * x[1]])
"""
FIELD = """\
    model_format: 1
    name: mast
    vector_field:
      function: dyn.mast:sway
      parameters:
        c: {c}
        k: 4.0
      states: [tilt, tilt_rate]
      at:
        - {{label: upright, x: [0.0, 0.0]}}
    """


def test_a_vector_field_parameter(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[tool.eigengate]\nallow_python = true\n")
    (tmp_path / "dyn").mkdir()
    (tmp_path / "dyn" / "__init__.py").write_text("")
    (tmp_path / "dyn" / "mast.py").write_text(FIELD_PY)
    path = tmp_path / "mast.yaml"
    config = Config(root=tmp_path, allow_python=True)
    path.write_text(textwrap.dedent(FIELD.format(c=0.4)), encoding="utf-8")
    entry = accepted(path, tmp_path, config=config)
    path.write_text(textwrap.dedent(FIELD.format(c=0.3)), encoding="utf-8")
    f = regressions(path, tmp_path, entry, config=config)[0]
    top = f.cause[0]
    assert (top.input, top.before, top.after, top.line) == (
        "vector_field.parameters.c", 0.4, 0.3, 6)
    # closed form: s = −c/2 + j√(4k − c²)/2, ds/dc = −1/2 − j c / (2√(4k − c²)) at c = 0.4
    c, k = 0.4, 4.0
    ref = complex(-0.5, -c / (2 * np.sqrt(4 * k - c * c))) * -0.1
    assert abs(top.shift - ref) <= 1e-6 * abs(ref)


def test_a_descriptor_entry_moves_the_mode_through_minus_lambda_dE(tmp_path):
    # E x' = A x with E = diag(1, m): the mass entry of E moves the pair
    text = textwrap.dedent("""\
        model_format: 1
        name: carriage
        plant:
          A: [[0, 1], [-4, -0.4]]
          E: [[1, 0], [0, {m}]]
        """)
    path = tmp_path / "carriage.yaml"
    path.write_text(text.format(m=1.0), encoding="utf-8")
    entry = accepted(path, tmp_path)
    path.write_text(text.format(m=1.2), encoding="utf-8")
    f = regressions(path, tmp_path, entry)[0]
    top = f.cause[0]
    assert (top.input, top.before, top.after) == ("plant.E[1][1]", 1.0, 1.2)

    def pencil_eig(m):  # reference: scipy's generalized eigenvalues
        import scipy.linalg as sla

        vals = sla.eigvals(np.array([[0.0, 1.0], [-4.0, -0.4]]), np.diag([1.0, m]))
        return upper(vals)

    ref = (pencil_eig(1.0 + 0.2e-6) - pencil_eig(1.0 - 0.2e-6)) / 2e-6
    assert abs(top.shift - ref) <= 1e-6 * abs(ref)


def test_the_sensitivity_formula_against_finite_differences():
    # random 5×5 matrix and perturbation: wᴴ δA v / (wᴴ v) vs numpy's eigenvalues (common
    # practice), and the descriptor form with an E perturbation
    rng = np.random.default_rng(17)
    A, dA = rng.standard_normal((5, 5)), rng.standard_normal((5, 5))
    E, dE = np.eye(5) + 0.1 * rng.standard_normal((5, 5)), rng.standard_normal((5, 5))
    for e, de in ((None, None), (E, dE)):
        pair = eigenpair(A, e, near=0j)
        import scipy.linalg as sla

        def lam(t):
            vals = sla.eigvals(A + t * dA, None if e is None else e + t * de)
            return vals[np.argmin(np.abs(vals - pair.value))]

        ref = (lam(1e-7) - lam(-1e-7)) / 2e-7
        assert abs(pair.shift(dA, de) - ref) <= 1e-5 * max(1.0, abs(ref))


def test_an_old_baseline_without_inputs_says_so(tmp_path):
    path = crane(tmp_path)
    (r,) = check_file(path, root=tmp_path).results
    old = baseline_entry_from(r)
    from dataclasses import replace

    old = replace(old, inputs=())  # as a baseline written before inputs were recorded
    text = Baseline([old]).dump()
    assert '"inputs"' not in text
    entry = Baseline.loads(text).entries()[0]
    f = regressions(crane(tmp_path, k2=2.0), tmp_path, entry)[0]
    assert [c.text for c in f.cause] == [NOT_RECORDED]
    # accepting again records them, although every figure is the same
    again = Baseline([old]).updated([baseline_entry_from(r)])
    assert again.entries()[0].inputs and '"inputs"' in again.dump()


def test_large_blocks_keep_a_digest_only():
    big = np.arange(MAX_RECORDED + 1, dtype=float)
    small = block_of("plant.A", np.ones((2, 2)))
    a, b = block_of("plant.B", big), block_of("plant.B", big + (np.arange(big.size) == 3))
    assert a.values is None and small.values == (1.0,) * 4 and a.digest != b.digest
    (change,) = diff_inputs([small, a], [small, b])
    assert change.index is None and "values not recorded" in change.why
    # the digest is of the rounded values the file holds: round-off changes nothing
    assert block_of("k", [[0.1 + 0.2]]).digest == block_of("k", [[0.3]]).digest


def test_against_a_git_revision_names_the_changed_gain(tmp_path):
    git(tmp_path, "init", "-q")
    (tmp_path / "pyproject.toml").write_text("[tool.eigengate]\n", encoding="utf-8")
    path = crane(tmp_path / "models") if (tmp_path / "models").mkdir() is None else None
    git(tmp_path, "add", "-A")
    git(tmp_path, "commit", "-qm", "crane tuned")
    crane(tmp_path / "models", k2=2.0)
    out = run_main("check", "--against", "HEAD", "--format", "json", cwd=tmp_path)
    assert out.returncode == 1, out.stderr
    data = json.loads(out.stdout)
    (model,) = data["files"][0]["models"]
    moved = [f for f in model["findings"] if f["cause"]]
    assert moved and all(f["line"] == 10 for f in moved)
    top = moved[0]["cause"][0]
    assert (top["input"], top["before"], top["after"], top["line"]) == (
        "feedback.state_gain[0][1]", 2.5, 2.0, 10)
    assert path is not None
    text = run_main("check", "--against", "HEAD", cwd=tmp_path).stdout
    assert "cause: mode " in text and "feedback.state_gain[0][1] 2.5 → 2 (line 10)" in text


def test_the_stored_baseline_with_a_cached_run_reads_the_file_again(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[tool.eigengate]\n", encoding="utf-8")
    (tmp_path / "models").mkdir()
    crane(tmp_path / "models")
    assert run_main("baseline", "accept", cwd=tmp_path).returncode == 0
    stored = json.loads((tmp_path / ".eigengate" / "baseline.json").read_text())
    entry = stored["models"]["models/crane.yaml"]["crane"]
    assert entry["inputs"]["feedback.state_gain"]["values"] == [7, 2.5]
    crane(tmp_path / "models", k2=2.0)
    for _ in range(2):  # the second run's results come from the cache
        out = run_main("check", "--format", "json", cwd=tmp_path)
        f = next(f for f in json.loads(out.stdout)["files"][0]["models"][0]["findings"]
                 if f["cause"])
        assert f["cause"][0]["input"] == "feedback.state_gain[0][1]"


@pytest.mark.parametrize("k2", [2.5])
def test_an_unchanged_model_has_no_causes(tmp_path, k2):
    entry = accepted(crane(tmp_path, k2=k2), tmp_path)
    assert regressions(crane(tmp_path, k2=k2), tmp_path, entry) == []
