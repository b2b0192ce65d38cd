"""Numerical paths that must not pass confidently: they fail, are refused, or say "uncertain".

References, named beside each check: mpmath eigenvalues at 60 digits of the very matrix given
(the "truth" the bounds must cover); Golub & Van Loan, Matrix Computations, ch. 7 (from
memory): an eigenvalue of a Jordan block of size k moves by about (ε·‖A‖)^(1/k) under a
perturbation of size ε; the Jordan form (a defective boundary eigenvalue grows polynomially);
common practice for the 2-state equilibrium types (distinct real eigenvalues of one sign: a
node; a non-real pair: a focus; a repeated eigenvalue: degenerate); IEEE 754 double range
(overflow beyond about 1.8e308, subnormals below 2.2e-308).
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest

import eigengate as eg
from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from test_numerical_honesty import jordan, orthogonal, rotation, spectrum_of


def mp_eigenvalues(A, dps=60):
    """Eigenvalues of the double-precision matrix ``A`` itself, computed by mpmath at ``dps``
    digits (reference library)."""
    with mpmath.workdps(dps):
        ev = mpmath.eig(mpmath.matrix(A.tolist()), left=False, right=False)
        return np.array([complex(x) for x in ev])


# ------------------------------------------------- marginal stability within its uncertainty

def inexact_unit_circle_cases():
    """Rotation matrices (|z| = 1 exactly) whose computed ln|z|/T is round-off, not zero."""
    out = []
    for theta in np.linspace(0.1, 3.0, 30):
        sp = spectrum_of(rotation(theta), sample_period=10.0)
        if sp.modes[0].s.real != 0.0:
            out.append(sp)
    assert out  # the round-off case really occurs
    return out


def test_marginal_requirement_within_uncertainty_follows_on_uncertain():
    # |z| = 1 exactly, computed |z| off by round-off: the eigenvalue may lie just outside the
    # unit circle (unstable), so "stable: marginal" is not decided and on_uncertain decides.
    for sp in inexact_unit_circle_cases():
        (v,) = eg.evaluate(sp, [eg.Stability(allow_marginal=True)])
        assert v.uncertain and not v.passed, v.message
        assert "failed by the on_uncertain=fail policy" in v.message
        assert "accepted" not in v.message and "passed" not in v.message
        (v,) = eg.evaluate(sp, [eg.Stability(allow_marginal=True)], on_uncertain="pass")
        assert v.uncertain and v.passed
        assert "passed by the on_uncertain=pass policy" in v.message


def test_exact_boundary_mode_is_decided():
    # An exact zero (integrator) is exactly on the boundary: marginal, decided either way.
    sp = spectrum_of(np.array([[0.0, 1.0], [0.0, -1.0]]))
    (ok,) = eg.evaluate(sp, [eg.Stability(allow_marginal=True)])
    assert ok.passed and not ok.uncertain
    (bad,) = eg.evaluate(sp, [eg.Stability()])
    assert not bad.passed and not bad.uncertain


def test_exact_defective_boundary_mode_fails_even_beside_an_uncertain_one():
    # Jordan form: J_2(0) grows like t, unstable for sure; a second, round-off boundary mode
    # elsewhere must not turn that certain failure into an on_uncertain question.
    for sp in inexact_unit_circle_cases()[:3]:
        A = sp.model.A
        # z = 1 defective (J_2(1)) beside the rotation: discrete double integrator
        M = np.block([[A, np.zeros((2, 2))], [np.zeros((2, 2)), jordan(2, 1.0)]])
        full = spectrum_of(M, sample_period=10.0)
        for allow in (True, False):
            (v,) = eg.evaluate(full, [eg.Stability(allow_marginal=allow)], on_uncertain="pass")
            assert not v.passed, v.message
            assert "defective" in v.message


# --------------------------------------------------- defective eigenvalues under rotation

@pytest.mark.parametrize("n", [2, 3, 4, 5, 6])
def test_rotated_jordan_block_bound_covers_the_true_eigenvalues(n):
    # Golub & Van Loan ch. 7: the eigenvalues of the rounded matrix Q J_n Q^T lie about
    # (eps·‖A‖)^(1/n) from -1; mpmath gives them for the very matrix analysed. Every one must
    # lie within the reported uncertainty of the reported mode.
    worst = 0.0
    for seed in range(12):
        Q = orthogonal(np.random.default_rng(1000 * n + seed), n)
        A = Q @ jordan(n) @ Q.T
        sp = spectrum_of(A)
        for true in mp_eigenvalues(A):
            ratio = min(min(abs(true - m.eigenvalue), abs(true - m.eigenvalue.conjugate()))
                        / m.uncertainty for m in sp.modes)
            worst = max(worst, ratio)
    assert worst <= 1.0, worst


@pytest.mark.parametrize("n", [2, 3, 4])
def test_decay_threshold_between_computed_and_true_value_is_not_passed(n):
    # The threshold sits halfway between the computed decay rate and the true one (mpmath at
    # 60 digits): a decided verdict there must agree with the truth, so it is uncertain.
    checked = 0
    for seed in range(40):
        Q = orthogonal(np.random.default_rng(seed), n)
        A = Q @ jordan(n) @ Q.T
        sp = spectrum_of(A)
        computed = min(m.decay_rate for m in sp.modes)
        true = float(min(-mp_eigenvalues(A).real))
        if true >= computed:
            continue
        checked += 1
        (v,) = eg.evaluate(sp, [eg.MinDecayRate((true + computed) / 2)])
        assert not v.passed and v.uncertain, (seed, computed, true, v.message)
    assert checked >= 5


def test_triangular_jordan_block_of_three_has_the_hoelder_bound():
    # Golub & Van Loan ch. 7: J_3 perturbed by ε has eigenvalues ε^(1/3) away; the bound of an
    # unrotated block is no smaller than that of a rotated one.
    (m,) = spectrum_of(jordan(3)).modes
    eps = np.finfo(float).eps
    assert m.multiplicity == 3 and m.defective
    assert m.uncertainty >= (eps * np.linalg.norm(jordan(3))) ** (1 / 3)


# ----------------------------------------------------------------------- equilibrium types

def test_close_distinct_eigenvalues_do_not_give_a_decided_degenerate_type():
    # Common practice: distinct real stable eigenvalues make a stable node. -1 and -1-1e-14
    # are within their error bounds of each other, so "degenerate" is not decided either.
    for A in (np.diag([-1.0, -1.0 - 1e-14]),
              (lambda Q: Q @ np.diag([-1.0, -1.0 - 1e-14]) @ Q.T)(
                  orthogonal(np.random.default_rng(5), 2))):
        sp = spectrum_of(A)
        eq = eg.classify(sp.modes)
        assert eq.uncertain, eq
        assert "uncertainty" in eq.describe()
        for kind in ("degenerate", "stable-node"):
            (v,) = eg.evaluate(sp, [eg.EquilibriumType(kind)])
            assert not v.passed and v.uncertain, v.message
        (v,) = eg.evaluate(sp, [eg.EquilibriumType(eq.type)], on_uncertain="pass")
        assert v.passed and v.uncertain


def test_pair_within_its_bound_of_the_real_axis_is_uncertain():
    # -1 ± 1e-15j is a stable focus (common practice: a non-real pair), but its imaginary part
    # is within the error bound: the type cannot be decided.
    sp = spectrum_of(np.array([[-1.0, 1e-15], [-1e-15, -1.0]]))
    eq = eg.classify(sp.modes)
    assert eq.uncertain and eq.stable == 2
    (v,) = eg.evaluate(sp, [eg.EquilibriumType("stable-focus")], on_uncertain="pass")
    assert v.uncertain


def test_well_separated_types_stay_decided():
    # Common practice: distinct real eigenvalues of one sign, a node; a pair, a focus.
    for A, kind in ((np.diag([-1.0, -2.0]), "stable-node"),
                    (np.array([[-1.0, 2.0], [-2.0, -1.0]]), "stable-focus"),
                    (np.diag([1.0, -2.0]), "saddle")):
        eq = eg.classify(spectrum_of(A).modes)
        assert eq.type == kind and not eq.uncertain


def test_declared_known_modes_that_are_all_the_modes_keep_the_type_of_the_origin():
    # Jordan form: J_2(0) is a double zero, the equilibria form a line: degenerate with two
    # center directions, whether or not the zero is declared a known mode (setting aside
    # every eigenvalue would leave nothing to classify, not an unstable node).
    A = np.array([[0.0, 1.0], [0.0, 0.0]])
    known = (eg.KnownMode(count=2, eigenvalue=0.0, reason="free mass"),)
    for kw in ({}, {"known_modes": known}):
        model = eg.from_arrays(A, requirements=(eg.EquilibriumType("unstable-node"),), **kw)
        result = eg.check_model(model)
        eq = result.equilibrium
        assert eq.type == "degenerate" and eq.center == 2, eq
        assert eq.stable == 0 and eq.unstable == 0
        verdict = [v for v in result.verdicts if v.rule == "EG106"][0]
        assert not verdict.passed
        if kw:
            assert "every eigenvalue is a declared known mode" in eq.describe()


def test_known_integrator_beside_a_stable_mode_is_set_aside_plainly():
    # diag(0, -1) with the zero declared: the origin is classified from -1 alone and says
    # that the declared eigenvalue was set aside (common practice: one real stable direction).
    model = eg.from_arrays(np.diag([0.0, -1.0]), requirements=(eg.Stability(),),
                           known_modes=(eg.KnownMode(count=1, eigenvalue=0.0),))
    result = eg.check_model(model)
    assert result.passed
    eq = result.equilibrium
    assert eq.type == "stable-node" and eq.stable == 1 and eq.center == 0
    assert "1 declared known eigenvalue set aside" in eq.describe()


# ------------------------------------------------------------ extreme periods and magnitudes

@pytest.mark.parametrize("T", [5e-324, 1e-310, 1e-300, 1e300, float(np.finfo(float).max)])
def test_extreme_sample_period_is_refused(T):
    # IEEE 754: ln|z|/T overflows for a subnormal T and underflows to an exact 0 for a huge one.
    with pytest.raises(ModelError) as info:
        eg.from_arrays(0.5 * rotation(0.3), sample_period=T)
    assert "sample_period" in str(info.value)


@pytest.mark.parametrize("scale", [1e200, 1e308, 1e-310, 1e-200])
def test_extreme_matrix_magnitude_is_refused(scale):
    # IEEE 754: norms and products of 1e200 entries overflow; a matrix of subnormal scale
    # loses every digit (its eigenvalues come back from LAPACK meaningless).
    with pytest.raises(ModelError) as info:
        eg.from_arrays(scale * rotation(0.3), sample_period=1.0)
    assert "A" in str(info.value) and "entry" in str(info.value)


def test_ordinary_small_and_large_magnitudes_are_accepted():
    # Stiff models have entries from 1e-12 to 1e12; tiny couplings beside them are kept.
    A = np.array([[-1e12, 1e-30], [0.0, -1e-12]])
    sp = spectrum_of(A)
    assert sorted(m.decay_rate for m in sp.modes) == pytest.approx([1e-12, 1e12], rel=1e-9)


def test_extreme_sample_period_in_a_model_file(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    path = tmp_path / "fast.yaml"
    path.write_text("model_format: 1\ndomain: discrete\nsample_period: 1.0e-320\n"
                    "plant:\n  A: [[0.5]]\n")
    with pytest.raises(ModelError) as info:
        load_models(path)
    text = str(info.value)
    assert "fast.yaml" in text and "sample_period" in text and "1e-320" in text
    assert "between" in text


# ------------------------------------------------------------------ inputs that are refused

@pytest.mark.parametrize("block, field", [
    ("plant: {num: [], den: [1, 1]}", "plant.num"),
    ("plant: {num: [[[1], []]], den: [1, 1]}", "plant.num[0][1]"),
])
def test_numerator_without_coefficients_is_refused(tmp_path, block, field):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    path = tmp_path / "tf.yaml"
    path.write_text(f"model_format: 1\n{block}\n")
    with pytest.raises(ModelError) as info:
        load_models(path)
    text = str(info.value)
    assert "tf.yaml" in text and field in text and "no coefficients" in text


def test_numerator_without_coefficients_is_refused_by_the_realisation():
    from eigengate.model import interconnect as ic

    with pytest.raises(ic.InterconnectError, match="no coefficients"):
        ic.tf_siso([], [1.0, 1.0])


@pytest.mark.parametrize("E", [np.zeros((2, 2)), np.array([[0.0, 1.0], [0.0, 0.0]])])
def test_descriptor_model_without_finite_modes_is_refused(E):
    # det(A - λE) = det(A) ≠ 0 for every λ when E is zero or nilpotent with A = I: every
    # eigenvalue of the pencil is infinite; there is no mode to classify or to check.
    model = eg.from_arrays(np.eye(2), E=E, requirements=(eg.Stability(),))
    with pytest.raises(ModelError) as info:
        eg.analyse(model)
    text = str(info.value)
    assert "E" in text and "no finite eigenvalues" in text
