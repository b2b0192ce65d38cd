"""Numerical honesty: defective and repeated eigenvalues, boundary cases, order independence,
thresholds at an eigenvalue, and known modes.

References: the Jordan form (a defective eigenvalue has fewer eigenvectors than its
multiplicity; its t·e^{λt} terms make a defective boundary eigenvalue unstable) and the
common-practice 2-state phase-portrait table in the REFERENCES list; the eigenvalues of every
matrix here are known exactly by construction (Jordan blocks, diagonal or rotation matrices),
so the expected values are not read from the tool.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg as la

import eigengate as eg


def spectrum_of(A, **kw):
    return eg.analyse(eg.from_arrays(A, **kw))


def jordan(n, lam=-1.0):
    return lam * np.eye(n) + np.diag(np.ones(n - 1), 1)


def orthogonal(rng, n):
    Q, R = np.linalg.qr(rng.standard_normal((n, n)))
    return Q * np.sign(np.diag(R))


def well_conditioned(rng, n, spread=1.0):
    """Q1 diag(e^u) Q2 with |u| <= spread: condition number at most e^(2·spread)."""
    return orthogonal(rng, n) @ np.diag(np.exp(rng.uniform(-spread, spread, n))) @ orthogonal(rng, n)


# ------------------------------------------------------------------- defective eigenvalues

@pytest.mark.parametrize("n", [2, 3])
def test_jordan_block_is_one_real_defective_mode(n):
    # Jordan form: J_n(-1) has the single eigenvalue -1 of algebraic multiplicity n and one
    # eigenvector; a real stable eigenvalue has ζ = -Re(s)/|s| = 1 exactly.
    sp = spectrum_of(jordan(n))
    assert len(sp.modes) == 1
    m = sp.modes[0]
    assert m.multiplicity == n and m.geometric_multiplicity == 1 and m.defective
    assert not m.pair and m.eigenvalue.imag == 0.0 and m.s.imag == 0.0
    assert abs(m.eigenvalue + 1) <= m.uncertainty or m.eigenvalue == -1.0
    assert m.damping_ratio == 1.0
    eq = eg.classify(sp.modes)
    assert eq.stable == n and eq.unstable == 0 and eq.center == 0
    assert "focus" not in eq.type
    if n == 2:  # common practice: a repeated eigenvalue of a 2-state system is degenerate
        assert eq.type == "degenerate"
        assert "defective" in eq.detail
    (v,) = eg.evaluate(sp, [eg.Stability()])
    assert v.passed and not v.uncertain


def similar_jordans(n, want):
    """Random orthogonal similarities of J_n(-1) that LAPACK splits into a complex pair."""
    out = []
    for seed in range(200):
        Q = orthogonal(np.random.default_rng(seed), n)
        A = Q @ jordan(n) @ Q.T
        ev = la.eigvals(A)
        if np.abs(ev.imag).max() > 0:  # the spurious complex pair of order √eps
            assert np.abs(ev + 1).max() > 1e-10
            out.append(A)
            if len(out) == want:
                return out
    raise AssertionError("no split found")  # pragma: no cover


@pytest.mark.parametrize("n", [2, 3])
def test_rotated_jordan_block_stays_one_real_mode(n):
    # Orthogonal similarity preserves the Jordan structure exactly; LAPACK splits the
    # eigenvalue by about eps^(1/n) into a spurious complex pair, which must not become a focus.
    for A in similar_jordans(n, 5):
        sp = spectrum_of(A)
        assert len(sp.modes) == 1, [m.eigenvalue for m in sp.modes]
        m = sp.modes[0]
        assert m.multiplicity == n and m.defective and not m.pair
        assert m.eigenvalue.imag == 0.0 and m.damping_ratio == 1.0
        assert abs(m.eigenvalue + 1) <= m.uncertainty
        eq = eg.classify(sp.modes)
        assert "focus" not in eq.type and eq.stable == n
        if n == 2:
            assert eq.type == "degenerate"
        (v,) = eg.evaluate(sp, [eg.Stability()])
        assert v.passed


def test_minus_identity_is_semisimple_double():
    # -I has the eigenvalue -1 with two independent eigenvectors: semisimple, not defective.
    for A in (-np.eye(2), -np.eye(3)):
        sp = spectrum_of(A)
        assert len(sp.modes) == 1
        m = sp.modes[0]
        assert m.multiplicity == A.shape[0] and m.geometric_multiplicity == A.shape[0]
        assert not m.defective and m.eigenvalue == -1.0
    eq = eg.classify(spectrum_of(-np.eye(2)).modes)
    assert eq.type == "degenerate" and "star" in eq.detail  # a proper (star) node


def test_mixed_jordan_structure_geometric_multiplicity():
    # Jordan form diag(J_2(-1), J_1(-1)): algebraic multiplicity 3, geometric 2.
    A = la.block_diag(jordan(2), [[-1.0]])
    Q = orthogonal(np.random.default_rng(3), 3)
    for M in (A, Q @ A @ Q.T):
        (m,) = spectrum_of(M).modes
        assert m.multiplicity == 3 and m.geometric_multiplicity == 2 and m.defective


# --------------------------------------------------------------- the stability boundary

def test_double_integrator_is_unstable_even_when_marginal_is_allowed():
    # Jordan form: J_2(0) gives x(t) = x0 + t·v0, polynomial growth: not even marginally stable.
    sp = spectrum_of(np.array([[0.0, 1.0], [0.0, 0.0]]))
    (m,) = sp.modes
    assert m.multiplicity == 2 and m.defective
    for req in (eg.Stability(allow_marginal=True), eg.Stability()):
        (v,) = eg.evaluate(sp, [req])
        assert not v.passed and not v.uncertain
        assert "defective" in v.message


@pytest.mark.parametrize("A", [[[0.0]], [[0.0, 1.0], [-1.0, 0.0]], [[0.0, 2.0], [-2.0, 0.0]]],
                         ids=["integrator", "center", "center-fast"])
def test_simple_boundary_mode_is_marginal(A):
    # A simple eigenvalue on the imaginary axis gives a bounded, non-decaying response:
    # marginally stable, not asymptotically stable.
    sp = spectrum_of(np.array(A))
    (ok,) = eg.evaluate(sp, [eg.Stability(allow_marginal=True)])
    assert ok.passed and not ok.uncertain
    (bad,) = eg.evaluate(sp, [eg.Stability()])
    assert not bad.passed and "marginal" in bad.message


def rotation(theta):
    return np.array([[math.cos(theta), -math.sin(theta)], [math.sin(theta), math.cos(theta)]])


def test_discrete_unit_circle_pole_is_boundary_not_stable():
    # A rotation matrix has |z| = 1 exactly; in floating point ln|z|/T comes out as about
    # ±1e-17 for T = 10 instead of 0, which must read as "on the boundary", not "stable".
    inexact = 0
    for theta in np.linspace(0.1, 3.0, 30):
        sp = spectrum_of(rotation(theta), sample_period=10.0)
        (m,) = sp.modes
        assert abs(m.s.real) < 1e-15
        assert m.s.imag == pytest.approx(theta / 10.0, rel=1e-12)
        eq = eg.classify(sp.modes)
        assert eq.center == 2 and eq.stable == 0 and eq.unstable == 0
        (v,) = eg.evaluate(sp, [eg.Stability()])
        assert not v.passed, (theta, m.s)
        assert "boundary" in v.message
        if m.s.real != 0.0:
            inexact += 1
            assert v.uncertain and eq.uncertain
            assert "uncertainty" in v.message
    assert inexact > 0  # the round-off case really occurred


def test_unit_circle_pole_from_expm_of_center():
    # Exact ZOH mapping z = e^{sT}: expm of a center is a rotation, Re(s) of order 1e-16.
    T = 0.05
    sp = spectrum_of(la.expm(np.array([[0.0, 3.0], [-3.0, 0.0]]) * T), sample_period=T)
    (m,) = sp.modes
    assert m.s.imag == pytest.approx(3.0, rel=1e-10)
    assert abs(m.s.real) <= m.uncertainty
    (v,) = eg.evaluate(sp, [eg.Stability()])
    assert not v.passed


# -------------------------------------------------------------------- order independence

def base_matrix():
    # eigenvalues known by construction: -0.5±2j, -3, 0.7±1.5j, -1.2, -8
    return la.block_diag([[-0.5, 2.0], [-2.0, -0.5]], [[-3.0]], [[0.7, 1.5], [-1.5, 0.7]],
                         [[-1.2]], [[-8.0]])


REQUIREMENTS = (eg.Stability(), eg.MinDecayRate(0.4), eg.MinDamping(0.3), eg.MaxFrequency(6.0),
                eg.MaxFrequency(9.0), eg.PoleRegion(alpha=0.2, zeta=0.1, omega=9.0),
                eg.PoleRegion(omega=9.0), eg.NoSaddle(), eg.DirectionCounts(stable=5, unstable=2),
                eg.EquilibriumType("saddle"))


def assert_same_modes(sp1, sp2):
    assert len(sp1.modes) == len(sp2.modes)
    for a, b in zip(sp1.modes, sp2.modes):
        assert abs(a.eigenvalue - b.eigenvalue) <= a.uncertainty + b.uncertainty + 1e-12
        assert (a.pair, a.multiplicity, a.geometric_multiplicity) == \
            (b.pair, b.multiplicity, b.geometric_multiplicity)
        for m in (a, b):
            assert m.eigenvalue.imag >= 0  # the stored member of a pair has imag >= 0
            assert (m.eigenvalue.imag > 0) == m.pair
    v1 = eg.evaluate(sp1, REQUIREMENTS)
    v2 = eg.evaluate(sp2, REQUIREMENTS)
    assert [v.passed for v in v1] == [v.passed for v in v2]
    assert [v.uncertain for v in v1] == [v.uncertain for v in v2]


def test_expected_verdicts_of_the_base_matrix():
    # The verdicts read off the eigenvalues listed in base_matrix: unstable (0.7±1.5j), so
    # stability, decay rate and the full region fail; ζ(-0.5±2j) = 0.243 < 0.3 fails;
    # max |s| = 8 fails ωn ≤ 6 and passes ωn ≤ 9; stable and unstable directions make a
    # saddle; 5 stable and 2 unstable directions.
    got = [v.passed for v in eg.evaluate(spectrum_of(base_matrix()), REQUIREMENTS)]
    assert got == [False, False, False, False, True, False, True, False, True, True]


@pytest.mark.parametrize("seed", range(8))
def test_permutation_and_similarity_give_the_same_modes(seed):
    # Similarity (and permutation, a special case) preserves eigenvalues and Jordan structure.
    rng = np.random.default_rng(seed)
    A = base_matrix()
    n = A.shape[0]
    P = np.eye(n)[rng.permutation(n)]
    V = well_conditioned(rng, n)
    ref = spectrum_of(A)
    assert_same_modes(ref, spectrum_of(P @ A @ P.T))
    assert_same_modes(ref, spectrum_of(V @ A @ np.linalg.inv(V)))
    assert_same_modes(ref, spectrum_of(V.T @ A @ np.linalg.inv(V.T)))  # conjugate-sign flip


@pytest.mark.parametrize("seed", range(4))
def test_similarity_with_a_jordan_block_gives_the_same_modes(seed):
    # The same with a defective double eigenvalue -2 (Jordan form) in the spectrum.
    rng = np.random.default_rng(100 + seed)
    A = la.block_diag(base_matrix(), jordan(2, -2.0))
    n = A.shape[0]
    P = np.eye(n)[rng.permutation(n)]
    Q = orthogonal(rng, n)
    ref = spectrum_of(A)
    assert any(m.defective for m in ref.modes)
    assert_same_modes(ref, spectrum_of(P @ A @ P.T))
    assert_same_modes(ref, spectrum_of(Q @ A @ Q.T))


# ---------------------------------------------------------- a threshold at an eigenvalue

def test_threshold_exactly_at_an_eigenvalue_is_uncertain():
    # diag(-1, -2): the slowest decay rate is exactly 1, the threshold.
    sp = spectrum_of(np.diag([-1.0, -2.0]))
    (v,) = eg.evaluate(sp, [eg.MinDecayRate(1.0)])
    assert v.uncertain and not v.passed
    assert "uncertainty" in v.message
    (v,) = eg.evaluate(sp, [eg.MinDecayRate(1.0)], on_uncertain="pass")
    assert v.uncertain and v.passed
    assert "uncertainty" in v.message
    # the model's own policy is used when evaluate() is not given one
    sp_pass = spectrum_of(np.diag([-1.0, -2.0]), on_uncertain="pass")
    (v,) = eg.evaluate(sp_pass, [eg.MinDecayRate(1.0)])
    assert v.uncertain and v.passed


@pytest.mark.parametrize("alpha, passed", [(1.0 - 1e-3, True), (1.0 + 1e-3, False)])
def test_threshold_a_little_away_is_certain(alpha, passed):
    sp = spectrum_of(np.diag([-1.0, -2.0]))
    (v,) = eg.evaluate(sp, [eg.MinDecayRate(alpha)])
    assert v.passed is passed and not v.uncertain
    assert v.margin == pytest.approx(1.0 - alpha, abs=1e-12)


def test_frequency_threshold_at_an_eigenvalue_is_uncertain():
    # |s| of -0.6±0.8j is exactly 1 (a 3-4-5 triangle).
    sp = spectrum_of(np.array([[-0.6, 0.8], [-0.8, -0.6]]))
    (v,) = eg.evaluate(sp, [eg.MaxFrequency(1.0)])
    assert v.uncertain and not v.passed
    (v,) = eg.evaluate(sp, [eg.MinDamping(0.6)])  # ζ = 0.6 exactly
    assert v.uncertain and not v.passed


# ------------------------------------------------------------------------------ known modes

def rigid_body_plant():
    # states: position, velocity (a free mass: double zero, defective) and a damped
    # flexible mode -0.2±3j coupled in.
    A = np.zeros((4, 4))
    A[0, 1] = 1.0
    A[2:, 2:] = [[-0.2, 3.0], [-3.0, -0.2]]
    A[1, 2] = 0.5
    return A, ["pos", "vel", "q", "qdot"]


def test_rigid_body_mode_declared_known_is_excluded():
    A, states = rigid_body_plant()
    known = (eg.KnownMode(count=2, eigenvalue=0.0, reason="rigid body"),)
    model = eg.from_arrays(A, states=states, requirements=(eg.Stability(),), known_modes=known)
    sp = eg.analyse(model)
    # without the declaration the double integrator fails
    assert not eg.evaluate(sp, known_modes=())[0].passed
    verdicts = eg.evaluate(sp)
    assert [v.rule for v in verdicts] == ["EG109", "EG101"]
    assert all(v.passed for v in verdicts), [v.message for v in verdicts]
    result = eg.check_model(model)
    assert result.passed
    # the origin's type sets the declared double zero aside, and says so
    eq = result.equilibrium
    assert eq.stable == 2 and eq.center == 0
    assert "2 declared known eigenvalues set aside" in eq.describe()


def test_known_mode_that_is_not_there_fails():
    A, states = rigid_body_plant()
    sp = spectrum_of(A, states=states)
    verdicts = eg.evaluate(sp, [eg.Stability(allow_marginal=True)],
                           known_modes=(eg.KnownMode(count=1, eigenvalue=5.0),))
    assert verdicts[0].rule == "EG109" and not verdicts[0].passed
    assert "found 0" in verdicts[0].message
    # the declaration took nothing, so the defective double zero still fails stability
    assert not verdicts[1].passed


def test_known_mode_count_mismatch_fails():
    A, states = rigid_body_plant()
    sp = spectrum_of(A, states=states)
    (v,) = eg.evaluate(sp, [], known_modes=(eg.KnownMode(count=1, eigenvalue=0.0),))
    assert not v.passed  # the zero eigenvalue is double


def test_known_mode_selected_by_states():
    A, states = rigid_body_plant()
    sp = spectrum_of(A, states=states)
    by_states = eg.evaluate(sp, [eg.Stability()],
                            known_modes=(eg.KnownMode(count=2, states=("pos", "vel")),))
    assert all(v.passed for v in by_states), [v.message for v in by_states]
    # the flexible states select the flexible pair, leaving the rigid body to fail
    by_flex = eg.evaluate(sp, [eg.Stability()],
                          known_modes=(eg.KnownMode(count=2, states=("q", "qdot")),))
    assert by_flex[0].passed and not by_flex[1].passed


def test_known_mode_on_boundary_without_selector():
    # With neither eigenvalue nor states, a known mode is one on the stability boundary.
    A, states = rigid_body_plant()
    sp = spectrum_of(A, states=states)
    vs = eg.evaluate(sp, [eg.Stability()], known_modes=(eg.KnownMode(count=2),))
    assert all(v.passed for v in vs)


def test_known_discrete_integrator():
    # x[k+1] = x[k] + ...: z = 1 is the discrete integrator; declared by its z-plane value.
    A = np.array([[1.0, 0.1], [0.0, 0.5]])
    sp = spectrum_of(A, sample_period=0.1)
    assert not eg.evaluate(sp, [eg.Stability()])[0].passed
    vs = eg.evaluate(sp, [eg.Stability()], known_modes=(eg.KnownMode(count=1, eigenvalue=1.0),))
    assert all(v.passed for v in vs), [v.message for v in vs]
