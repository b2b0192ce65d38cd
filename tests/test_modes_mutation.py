"""Exact behaviour of the modal analysis and its error bounds, pinned where the code defines it.

Written to kill the mutants that survived the other tests (tests/mutation/run_mutmut.py), each
check against an outside reference named beside it:
- eigenvalues, eigenvectors and condition numbers from scipy.linalg (reference library);
  condition of a simple eigenvalue κ = ‖w‖‖v‖/|wᴴv| (Wilkinson 1965);
- eigenvalues of a triangular matrix are its diagonal; a Jordan block J_m(λ) has geometric
  multiplicity 1, a diagonal block m (common practice);
- participation factors p_ki = |v_ki·w_ki| / Σ_k |v_ki·w_ki| (Pérez-Arriaga, Verghese &
  Schweppe 1982, magnitude form): non-negative, summing to 1 per mode;
- the Hölder-type scale ‖A‖·(c·n·eps)^(1/m) of an eigenvalue of a Jordan block of size m
  (Golub & Van Loan, Matrix Computations, ch. 7, from memory), with c = 4 as DEVELOPERS.md
  documents;
- γ_k = k·u/(1 − k·u) (Higham, Accuracy and Stability of Numerical Algorithms, ch. 3);
- Gershgorin's theorem (a union of k discs disjoint from the rest holds k eigenvalues) checked
  against mpmath's eigenvalues at 50 digits (reference library);
- s = ln(z)/T for discrete modes, ζ = −Re s/|s|, τ = −1/Re s (common practice);
- a descriptor pencil (A, E) of order n with rank(E) = r has n − r infinite eigenvalues when it
  is regular and of index 1 (Dai, Singular Control Systems, 1989, from memory).
"""

from __future__ import annotations

import cmath
import math

import mpmath
import numpy as np
import pytest
import scipy.linalg as la

from eigengate import from_arrays
from eigengate.analysis import bounds
from eigengate.analysis.modes import Spectrum, analyse
from eigengate.errors import ModelError

EPS = float(np.finfo(float).eps)
U = 2.0 ** -53


def spec(A, **kw):
    return analyse(from_arrays(np.asarray(A, float), **kw))


def holder(norm, n, m):  # Golub & Van Loan, ch. 7 (from memory), c = 4
    return norm * (4.0 * n * EPS) ** (1.0 / m)


def mp_eigs(A, dps=50):  # mpmath reference eigenvalues of the exact double matrix
    with mpmath.workdps(dps):
        ev = mpmath.eig(mpmath.matrix(np.asarray(A).tolist()), left=False, right=False)
        return [complex(e) for e in ev]


# ------------------------------------------------------------------ order and figures

def test_modes_are_ordered_least_stable_first_with_ties_by_frequency_then_state():
    # triangular: eigenvalues are the diagonal (common practice); the pair -1±2j from a block
    A = la.block_diag([[-3.0]], [[-1.0, 2.0], [-2.0, -1.0]], [[-1.0]], [[0.5]], [[-1.0, 3.0],
                                                                                [-3.0, -1.0]])
    s = spec(A)
    got = [(m.index, m.eigenvalue) for m in s.modes]
    assert got == [(1, 0.5 + 0j), (2, -1 + 0j), (3, pytest.approx(-1 + 2j, abs=1e-14)),
                   (4, pytest.approx(-1 + 3j, abs=1e-14)), (5, -3 + 0j)]
    assert [m.pair for m in s.modes] == [False, False, True, True, False]
    assert [m.count for m in s.modes] == [1, 1, 2, 2, 1]
    assert s.n_eigenvalues == 7 and s.infinite == 0
    assert s.spectral_abscissa == 0.5
    assert s.spectral_radius == pytest.approx(math.hypot(1, 3), rel=1e-15)
    assert s.min_damping == pytest.approx(1 / math.hypot(1, 3), rel=1e-14)  # ζ = -Re/|s|
    ev = s.eigenvalues()
    assert len(ev) == 7 and ev[2] == pytest.approx(-1 + 2j) and ev[3] == pytest.approx(-1 - 2j)
    t = spec(np.diag([-2.0, -1.0, -1.0 + 1e-3]))
    assert [m.eigenvalue.real for m in t.modes] == pytest.approx([-0.999, -1, -2], rel=1e-15)


def test_tie_order_uses_the_dominant_state():
    # two complex pairs with the same s on different states (semisimple double pair): one mode
    blk = [[-1.0, 2.0], [-2.0, -1.0]]
    (m,) = spec(la.block_diag(blk, blk)).modes
    assert m.multiplicity == 2 and m.geometric_multiplicity == 2 and not m.defective
    assert m.pair and m.count == 4
    assert m.participation.sum() == pytest.approx(1.0, abs=1e-14)  # Pérez-Arriaga et al.


def test_empty_spectrum_defaults():
    s = spec([[-1.0]])
    empty = Spectrum(model=s.model, modes=(), infinite=0, norm=0.0, balanced=False)
    assert empty.spectral_abscissa == -math.inf and empty.spectral_radius == 0.0
    assert empty.min_damping == 1.0 and empty.n_eigenvalues == 0 and empty.eigenvalues() == []


def test_real_modes_only_damping_defaults_to_one():
    s = spec(np.diag([-1.0, -2.0]))
    assert s.min_damping == 1.0
    assert [m.damping_ratio for m in s.modes] == [1.0, 1.0]
    assert [m.time_constant for m in s.modes] == [1.0, 0.5]
    assert [m.natural_frequency for m in s.modes] == [1.0, 2.0]
    assert [m.decay_rate for m in s.modes] == [1.0, 2.0]
    unstable = spec([[3.0]]).modes[0]
    assert unstable.damping_ratio == -1.0 and unstable.time_constant == pytest.approx(-1 / 3)


def test_norm_and_balancing_flag():
    A = np.array([[-1.0, 3.0], [2.0, -4.0]])
    s = spec(A)
    assert not s.balanced and s.norm == float(np.linalg.norm(A, "fro"))
    # badly scaled: diagonal similarity lowers the 1-norm by orders of magnitude (scipy)
    B = np.array([[-1.0, 1e6], [1e-6, -2.0]])
    bal, _ = la.matrix_balance(B, permute=False, separate=True)
    t = spec(B)
    assert t.balanced and t.norm == pytest.approx(float(np.linalg.norm(bal, "fro")), rel=1e-15)
    ref = np.sort(la.eigvals(B).real)
    assert sorted(m.eigenvalue.real for m in t.modes) == pytest.approx(ref, rel=1e-12)
    assert not spec([[-5.0]]).balanced  # a scalar is never balanced


def test_condition_number_of_a_non_normal_pair():
    # κ = ‖w‖‖v‖/|wᴴv| from scipy's vectors (Wilkinson 1965); this matrix is already balanced
    A = np.array([[-1.0, 4.0], [-4.0, -3.0]])
    s = spec(A)
    assert not s.balanced
    lam, vl, vr = la.eig(A, left=True, right=True)
    i = int(np.argmax(lam.imag))
    kap = np.linalg.norm(vl[:, i]) * np.linalg.norm(vr[:, i]) / abs(vl[:, i].conj() @ vr[:, i])
    (m,) = s.modes
    assert kap > 1.01 and m.condition == pytest.approx(kap, rel=1e-12)
    for m in spec(np.diag([-1.0, -2.0])).modes:
        assert m.condition == pytest.approx(1.0, rel=1e-15)


def test_participation_factors_match_scipy_and_sum_to_one():
    rng = np.random.default_rng(7)
    A = rng.standard_normal((6, 6)) - 3 * np.eye(6)
    s = spec(A)
    lam, vl, vr = la.eig(A, left=True, right=True)
    p = np.abs(vr * vl.conj())
    p /= p.sum(axis=0)  # Pérez-Arriaga, Verghese & Schweppe 1982
    for m in s.modes:
        i = int(np.argmin(np.abs(lam - m.eigenvalue)))
        assert m.participation == pytest.approx(p[:, i], abs=1e-10)
        assert m.participation.sum() == pytest.approx(1.0, abs=1e-14)
        assert m.participation.min() >= 0


# ------------------------------------------------------------------ clusters, multiplicity

@pytest.mark.parametrize("m", [2, 3])
def test_jordan_block_bound_is_the_hoelder_scale(m):
    J = -np.eye(m) + np.diag(np.ones(m - 1), 1)
    (mode,) = spec(J).modes
    assert mode.multiplicity == m and mode.geometric_multiplicity == 1 and mode.defective
    assert mode.eigenvalue == pytest.approx(-1.0, abs=1e-4) and mode.eigenvalue.imag == 0.0
    h = holder(float(np.linalg.norm(J, "fro")), m, m)
    assert mode.uncertainty == pytest.approx(h, rel=1e-9)
    assert abs(mode.eigenvalue + 1.0) <= mode.uncertainty  # the exact value -1 is inside


def test_two_jordan_blocks_and_a_semisimple_part():
    # J2(-1) ⊕ J2(-1): algebraic 4, geometric 2. The cluster's block is at most 4 − 2 + 1 = 3,
    # but each member's bound was capped with the largest block its neighbours allow (4 values
    # within 2·h_4), so the Hölder scale of size 4 (Golub & Van Loan) is what is reported
    J = la.block_diag([[-1.0, 1.0], [0.0, -1.0]], [[-1.0, 1.0], [0.0, -1.0]])
    (mode,) = spec(J).modes
    assert (mode.multiplicity, mode.geometric_multiplicity) == (4, 2)
    norm = float(np.linalg.norm(J, "fro"))
    assert mode.uncertainty == pytest.approx(holder(norm, 4, 4), rel=1e-9)
    assert mode.uncertainty > holder(norm, 4, 3)
    assert "×4 defective" in mode.describe()


def test_defective_descriptor_bound_is_scaled_by_the_eigenvalue():
    # A = [[-4, 2], [0, -4]], E = 2I: the pencil's eigenvalue -2 is a 2×2 Jordan block
    A = np.array([[-4.0, 2.0], [0.0, -4.0]])
    E = 2.0 * np.eye(2)
    s = spec(A, E=E)
    (mode,) = s.modes
    assert s.infinite == 0 and (mode.multiplicity, mode.geometric_multiplicity) == (2, 1)
    norm = float(np.linalg.norm(A, "fro") + np.linalg.norm(E, "fro"))
    assert s.norm == pytest.approx(norm, rel=1e-15)
    assert mode.uncertainty == pytest.approx(holder(norm, 2, 2) * (1 + 2.0), rel=1e-6)


def test_close_but_distinct_eigenvalues_stay_apart():
    s = spec(np.diag([-1.0, -1.0 - 1e-6, -2.0]))
    assert [m.multiplicity for m in s.modes] == [1, 1, 1]
    assert [m.geometric_multiplicity for m in s.modes] == [1, 1, 1]


@pytest.mark.parametrize("n", [401])
def test_large_model_multiplicity_from_eigenvectors(n):
    # above SVD_RANK_LIMIT the geometric multiplicity is read from the eigenvectors
    # (the other eigenvalues small, so that the Hölder scales of the Jordan pair stay below
    # their distance to it: see DEVELOPERS.md on the defective cap)
    diag = -np.linspace(0.01, 0.02, n - 4)
    A = la.block_diag(np.diag(diag), [[-1.0, 1.0], [0.0, -1.0]], np.diag([-0.5, -0.5]))
    q = orth(n, 4)  # a similarity, so that LAPACK splits the Jordan pair by about √eps
    s = spec(q @ A @ q.T)
    by = {round(m.eigenvalue.real, 5): m for m in s.modes}
    assert (by[-0.5].multiplicity, by[-0.5].geometric_multiplicity) == (2, 2)
    assert (by[-1.0].multiplicity, by[-1.0].geometric_multiplicity) == (2, 1)
    assert s.n_eigenvalues == n and len(s.modes) == n - 2


# ------------------------------------------------------------------ discrete models

def test_discrete_mode_figures_follow_log_z():
    T = 0.1
    z = 0.9 * cmath.exp(0.3j)
    A = np.array([[z.real, -z.imag], [z.imag, z.real]])
    (m,) = spec(A, sample_period=T).modes
    s_ref = cmath.log(z) / T  # common practice
    assert m.s == pytest.approx(s_ref, rel=1e-13) and m.pair
    assert m.eigenvalue == pytest.approx(z, rel=1e-14)
    assert m.damping_ratio == pytest.approx(-s_ref.real / abs(s_ref), rel=1e-12)
    assert m.time_constant == pytest.approx(-1 / s_ref.real, rel=1e-12)
    # the bound maps through |d s| ≈ |d z|/(|z| T): below 1e-12 for this well-conditioned z
    assert 0 < m.uncertainty < 1e-12


def test_deadbeat_and_negative_real_discrete_modes():
    T = 0.5
    s = spec(np.array([[0.0, 1.0], [0.0, 0.0]]), sample_period=T)  # nilpotent: z = 0 twice
    (m,) = s.modes
    assert m.eigenvalue == 0j and m.s.real == -math.inf and m.s.imag == 0.0
    assert m.damping_ratio == 1.0 and m.time_constant == 0.0 and m.uncertainty == 0.0
    assert m.multiplicity == 2
    (n,) = spec([[-0.5]], sample_period=T).modes  # ln(-0.5) = ln 0.5 + iπ (common practice)
    assert n.s == pytest.approx(complex(math.log(0.5) / T, math.pi / T), rel=1e-14)
    assert not n.pair


# ------------------------------------------------------------------ descriptor models

def test_descriptor_infinite_count_and_finite_modes():
    # E = diag(1, 1, 0): rank 2 → one infinite eigenvalue (Dai 1989, from memory)
    A = np.array([[-1.0, 0.0, 1.0], [0.0, -3.0, 0.0], [1.0, 0.0, 1.0]])
    E = np.diag([1.0, 1.0, 0.0])
    s = spec(A, E=E)
    assert s.infinite == 1 and s.n_eigenvalues == 2 and not s.balanced
    ref = la.eigvals(A, E)
    fin = np.sort(ref[np.isfinite(ref)].real)
    assert sorted(m.eigenvalue.real for m in s.modes) == pytest.approx(fin, rel=1e-12)
    assert s.norm == pytest.approx(float(np.linalg.norm(A, "fro") + np.linalg.norm(E, "fro")))
    for m in s.modes:
        assert m.participation.sum() == pytest.approx(1.0, abs=1e-14)


def test_descriptor_participation_uses_e_weighted_left_vectors():
    A = np.array([[-1.0, 2.0], [0.5, -3.0]])
    E = np.array([[2.0, 1.0], [0.0, 1.0]])
    s = spec(A, E=E)
    lam, vl, vr = la.eig(A, E, left=True, right=True)
    ew = E.conj().T @ vl
    p = np.abs(vr * ew.conj())
    p /= p.sum(axis=0)  # Pérez-Arriaga et al. 1982 with wᴴE in place of wᴴ
    for m in s.modes:
        i = int(np.argmin(np.abs(lam - m.eigenvalue)))
        assert m.participation == pytest.approx(p[:, i], abs=1e-10)
        kap = np.linalg.norm(vl[:, i]) * np.linalg.norm(vr[:, i]) / abs(ew[:, i].conj() @ vr[:, i])
        assert m.condition == pytest.approx(kap, rel=1e-8)  # κ with wᴴEv (Stewart & Sun 1990)
        assert m.enclosure == math.inf  # no certified discs for pencils


@pytest.mark.parametrize("E", [np.zeros((2, 2)), np.array([[0.0, 1.0], [0.0, 0.0]])])
def test_descriptor_with_only_infinite_eigenvalues_is_refused(E):
    with pytest.raises(ModelError, match="no finite eigenvalues: all 2"):
        spec(np.eye(2), E=E)


def test_singular_pencil_is_refused():
    # A and E share a zero row: det(A − λE) ≡ 0 (Gantmacher, from memory)
    with pytest.raises(ModelError, match="singular pencil"):
        spec(np.array([[-1.0, 0.0], [0.0, 0.0]]), E=np.array([[1.0, 0.0], [0.0, 0.0]]))


def test_tiny_but_regular_descriptor_is_not_singular():
    A = np.array([[-1e-10, 0.0], [0.0, -2.0]])
    E = np.diag([1e-10, 1.0])
    s = spec(A, E=E)
    assert s.infinite == 0
    assert sorted(m.eigenvalue.real for m in s.modes) == pytest.approx([-2.0, -1.0], rel=1e-12)


# ------------------------------------------------------------------ bounds module

def test_gamma_is_highams_constant():
    for k in (1, 10, 1000):
        ref = k * U / (1 - k * U)  # Higham ch. 3
        assert ref <= bounds._gamma(k) <= ref * (1 + 5 * U)
        assert bounds._gamma(k) > ref
    assert bounds._gamma(2 ** 52) == math.inf and bounds._gamma(2 ** 52 - 1) < math.inf


def test_hoelder_scale():
    assert bounds.hoelder(1e-15, 1.0, 2) == pytest.approx(math.sqrt(1e-15), rel=1e-15)
    assert bounds.hoelder(8e-15, 2.0, 3) == pytest.approx(2.0 * (4e-15) ** (1 / 3), rel=1e-14)
    assert bounds.hoelder(0.0, 0.0, 2) == 0.0


def test_mul_matches_complex_product():
    rng = np.random.default_rng(1)
    M = rng.standard_normal((4, 4))
    X = rng.standard_normal((4, 3)) + 1j * rng.standard_normal((4, 3))
    assert bounds._mul(M, X) == pytest.approx(M @ X, abs=1e-14)
    assert bounds._mul(M + 0j, X) == pytest.approx(M @ X, abs=1e-14)
    assert bounds._mul(M, X.real) == pytest.approx(M @ X.real, abs=1e-14)


def test_estimate_residual_kappa_and_bound_against_mpmath():
    A = np.array([[-1.0, 10.0, 0.0], [0.0, -2.0, 1.0], [0.5, 0.0, -4.0]])
    lam, vl, vr = la.eig(A, left=True, right=True)
    bnd, kap, R = bounds.estimate(A, None, lam, vr, vl, vl)
    assert R == pytest.approx(A @ vr - vr * lam, abs=1e-13)
    ref_k = np.linalg.norm(vl, axis=0) * np.linalg.norm(vr, axis=0) / np.abs(
        np.einsum("ij,ij->j", vl.conj(), vr))
    assert kap == pytest.approx(ref_k, rel=1e-12)  # Wilkinson 1965
    exact = mp_eigs(A)
    for i, l in enumerate(lam):
        err = min(abs(l - e) for e in exact)
        assert err <= bnd[i] < 1e-12  # honest and tight
        assert bnd[i] >= bounds.FIGURE_FLOOR * EPS * abs(l)
    # the floor alone: with R = 0 the bound is 2·3·sqrt(n+1)·eps·(‖A‖F + |λ|)·‖v‖‖w‖/|wᴴv|
    v = np.eye(3, dtype=complex)
    d = np.array([-1.0, -2.0, -4.0]) + 0j
    b2, _, _ = bounds.estimate(np.diag(d.real), None, d, v, v, v)
    na = float(np.linalg.norm(np.diag(d.real), "fro"))
    want = 2 * 3 * 2 * EPS * (na + np.abs(d))
    assert b2 == pytest.approx(want, rel=1e-12)


def test_estimate_descriptor_residual_and_infinite_kappa():
    A = np.array([[-1.0, 2.0], [0.5, -3.0]])
    E = np.array([[2.0, 1.0], [0.0, 1.0]])
    lam, vl, vr = la.eig(A, E, left=True, right=True)
    bnd, kap, R = bounds.estimate(A, E, lam, vr, vl, E.T @ vl)
    assert R == pytest.approx(A @ vr - E @ vr * lam, abs=1e-13)
    assert np.all(bnd < 1e-12)
    # orthogonal left and right vectors: κ = 1/eps and an infinite bound
    v = np.array([[1.0], [0.0]], dtype=complex)
    w = np.array([[0.0], [1.0]], dtype=complex)
    b3, k3, _ = bounds.estimate(A, None, np.array([-1.0 + 0j]), v, w, w)
    assert k3[0] == 1.0 / EPS and b3[0] == math.inf


def test_cap_defective_uses_the_largest_block_present():
    n, norm = 3, 1.0
    base = 4 * n * EPS * norm
    h = {m: bounds.hoelder(base, norm, m) for m in (2, 3)}
    lam = np.array([-1.0, -1.0 + 0.5 * h[3], -1.0 - 0.5 * h[3]]) + 0j
    delta = np.array([1.0, 1e-20, 1.0])
    bounds.cap_defective(lam, delta, base, norm, n)
    assert delta[0] == h[3] and delta[1] == 1e-20 and delta[2] == h[3]
    # two close values only: block 2
    lam2 = np.array([-1.0, -1.0 + h[2], 5.0]) + 0j
    d2 = np.array([1.0, 1.0, 1.0])
    bounds.cap_defective(lam2, d2, base, norm, n)
    assert list(d2) == [h[2], h[2], h[2]]
    # a bound at exactly h_2 is left alone
    d3 = np.array([h[2], 0.0, 0.0])
    bounds.cap_defective(lam2, d3, base, norm, n)
    assert d3[0] == h[2]


def test_enclosure_discs_hold_the_exact_eigenvalues():
    A = np.array([[-1.0, 3.0, 0.0], [0.0, -2.0, 1.0], [0.2, 0.0, -5.0]])
    lam, vl, vr = la.eig(A, left=True, right=True)
    R = A @ vr - vr * lam
    rho = bounds.enclose(A, lam, vr, vl, R)
    exact = mp_eigs(A)
    for i, l in enumerate(lam):
        assert min(abs(l - e) for e in exact) <= rho[i] < 1e-12  # Gershgorin on X⁻¹AX
    labels = bounds.components(lam, rho)
    assert labels == [0, 1, 2]
    for i in range(3):
        r = bounds.cluster_radius(lam, rho, labels, [i], complex(lam[i]))
        assert r == pytest.approx(rho[i] * (1 + 4 * U), rel=1e-15) and r >= rho[i]
    # a defective block: the eigenvector matrix is singular, no certificate
    J = np.array([[-1.0, 1.0], [0.0, -1.0]])
    lj, wl, wr = la.eig(J, left=True, right=True)
    assert bounds.enclose(J, lj, wr, wl, J @ wr - wr * lj) is None
    # orthogonal left/right pair: wᴴv = 0
    e = np.eye(2, dtype=complex)
    assert bounds.enclose(np.eye(2), np.ones(2, complex), e, e[:, ::-1], np.zeros((2, 2))) is None


def test_touching_components_exact_labels():
    lam = np.array([0.0, 3.0, 1.0, 10.0, 2.0 + 1.0j]) + 0j
    r = np.array([0.5, 0.5, 0.5, 0.1, 0.01])
    # 0–2 touch exactly (|1 − 0| = 1·(0.5 + 0.5)), 2–1 are 2 apart (>1), 4 far from all
    assert bounds.touching(lam, r, 1.0) == [0, 1, 0, 3, 4]
    assert bounds.touching(lam, r, 0.999) == [0, 1, 2, 3, 4]
    assert bounds.touching(lam, r, 2.0) == [0, 0, 0, 3, 4]  # chains join; |2+j − 3| > 1.02
    # a point reached through a later neighbour in the sweep (b > a + 1)
    lam2 = np.array([0.0, 0.1 + 5j, 0.2]) + 0j
    assert bounds.touching(lam2, np.array([0.15, 0.15, 0.15]), 1.0) == [0, 1, 0]
    assert bounds.touching(np.array([1.0 + 0j]), np.array([0.0]), 4.0) == [0]
    assert bounds.components(lam, r) == [0, 1, 0, 3, 4]


def test_cluster_radius_refuses_shared_components():
    lam = np.array([0.0, 1.0]) + 0j
    rho = np.array([0.6, 0.6])
    assert bounds.cluster_radius(lam, None, None, [0], 0j) == math.inf
    assert bounds.cluster_radius(lam, rho, [0, 0], [0], 0j) == math.inf
    r = bounds.cluster_radius(lam, rho, [0, 0], [0, 1], 0.5 + 0j)
    assert r == pytest.approx(1.1 * (1 + 4 * U), rel=1e-15)


def test_map_to_s_holds_the_image_of_the_disc():
    z, T = 0.8 * cmath.exp(0.4j), 0.2
    for rad in (1e-3, 0.1, 0.5):
        R = bounds.map_to_s(rad, z, T)
        want = math.hypot(-math.log1p(-rad / abs(z)), math.asin(rad / abs(z))) / T
        assert want <= R <= want * (1 + 20 * U)
        s0 = cmath.log(z) / T  # common practice: s = ln z / T
        for t in np.linspace(0, 2 * math.pi, 64):
            zp = z + rad * cmath.exp(1j * t)
            assert abs(cmath.log(zp) / T - s0) <= R
    assert bounds.map_to_s(abs(z), z, T) == math.inf
    assert bounds.map_to_s(0.81, z, T) == math.inf
    assert bounds.map_to_s(math.inf, z, T) == math.inf
    assert bounds.map_to_s(0.0, z, T) == 0.0


# ------------------------------------------------------------------ second round (survivors)

def orth(n, seed):
    q, _ = np.linalg.qr(np.random.default_rng(seed).standard_normal((n, n)))
    return q


def test_fmt_and_top_states_details():
    from dataclasses import replace

    from eigengate.analysis.modes import _fmt_complex
    assert _fmt_complex(complex(1, 0.5), False) == "1+0.5j"
    (m,) = spec([[-1.0]]).modes
    many = replace(m, participation=np.full(40, 0.025), states=tuple(f"x{i}" for i in range(40)))
    # ties keep the state order (a stable sort; numpy's default is not stable for 40 entries)
    assert [s for s, _ in many.top_states(3, 0.0)] == ["x0", "x1", "x2"]
    rng = np.random.default_rng(0)
    p = np.round(rng.uniform(0, 1, 64), 1)
    tied = replace(m, participation=p, states=tuple(f"x{i}" for i in range(64)))
    want = [f"x{i}" for i in np.argsort(-p, kind="stable")[:5]]
    assert [s for s, _ in tied.top_states(5, 0.0)] == want


@pytest.mark.parametrize("seed", range(10))
def test_tied_modes_are_ordered_by_dominant_state(seed):
    # -1 and -1 − 1e-11 agree to 10 significant digits: a tie, broken by the dominant state
    q = orth(4, seed)
    s = spec(q @ np.diag([-1.0, -1.0 - 1e-11, -5.0, -3.0]) @ q.T)
    first, second = s.modes[:2]
    assert first.multiplicity == second.multiplicity == 1
    assert int(np.argmax(first.participation)) <= int(np.argmax(second.participation))


def test_error_messages_name_file_field_line_and_hint():
    lines = {"plant.A": 4, "plant.E": 9}
    with pytest.raises(ModelError) as e:
        spec(np.array([[-1.0, 0.0], [0.0, 0.0]]), E=np.array([[1.0, 0.0], [0.0, 0.0]]),
             source="m.yaml", lines=lines)
    err = e.value
    assert (err.source, err.field, err.line) == ("m.yaml", "plant.E", 9)
    assert err.problem == ("makes a singular pencil: det(A - λE) is zero for every λ, so the "
                           "model has no well-defined modes")
    assert err.hint == "check for a state that appears in no equation"
    with pytest.raises(ModelError) as e:
        spec(np.eye(2), E=np.zeros((2, 2)), source="m.yaml", lines=lines)
    err = e.value
    assert (err.source, err.field, err.line) == ("m.yaml", "plant.E", 9)
    assert err.problem == ("gives no finite eigenvalues: all 2 eigenvalues of the pencil (A, E) "
                           "are infinite, so the model has no dynamic mode to check")
    assert err.hint == ("E is zero or nilpotent: check that the differential equations are in E")


@pytest.mark.filterwarnings("ignore:overflow encountered:RuntimeWarning")
def test_overflowing_eigenvalues_are_refused_with_the_field():
    # the loader refuses entries above 1e150; analyse guards on its own as well (a model built
    # around that check): ‖A‖F of 1e200 entries overflows double precision
    from dataclasses import replace
    model = from_arrays(np.eye(3), source="big.yaml", lines={"plant.A": 3})
    with pytest.raises(ModelError) as e:
        analyse(replace(model, A=np.full((3, 3), 1e200) * np.array([[1, 1, 1], [1, -1, 1],
                                                                     [1, 1, -1]])))
    err = e.value
    assert (err.source, err.field, err.line) == ("big.yaml", "plant.A", 3)
    assert err.problem == "has eigenvalues beyond the range of double precision"
    assert err.hint == "rescale the units"


def test_balancing_keeps_participation_on_the_right_states():
    # badly scaled and reducible (column 2 is zero off the diagonal): a permuting balance
    # would move state 2; participation is invariant under diagonal scaling only
    # (Pérez-Arriaga et al. 1982), so it must equal scipy's on the original matrix
    A = np.array([[-1.0, 1e6, 0.0], [1e-6, -2.0, 0.0], [1.0, 1.0, -3.0]])
    s = spec(A)
    assert s.balanced
    lam, vl, vr = la.eig(A, left=True, right=True)
    p = np.abs(vr * vl.conj())
    p /= p.sum(axis=0)
    for m in s.modes:
        i = int(np.argmin(np.abs(lam - m.eigenvalue)))
        assert m.participation == pytest.approx(p[:, i], abs=1e-9)


def test_small_norm_matrix_is_balanced_too():
    B = np.array([[-1e-3, 0.5], [5e-13, -2e-3]])  # 1-norm 0.502, balanced 1-norm ~1e-7
    assert np.linalg.norm(B, 1) < 1
    assert spec(B).balanced


def test_descriptor_bounds_are_honest_against_mpmath():
    A = np.array([[-1.0, 2.0], [0.5, -3.0]])
    E = np.array([[2.0, 1.0], [0.0, 1.0]])
    with mpmath.workdps(50):
        M = mpmath.inverse(mpmath.matrix(E.tolist())) * mpmath.matrix(A.tolist())
        exact = [complex(x) for x in mpmath.eig(M, left=False, right=False)]
    for m in spec(A, E=E).modes:
        err = min(abs(m.eigenvalue - x) for x in exact)
        assert err <= m.uncertainty < 1e-12


def test_descriptor_semisimple_double_with_small_e():
    # A = −I, E = 1e-3·I: λ = −1000 twice, semisimple (A − λE = 0 exactly)
    s = spec(-np.eye(2), E=1e-3 * np.eye(2))
    (m,) = s.modes
    assert m.eigenvalue == pytest.approx(-1000.0, rel=1e-12)
    assert (m.multiplicity, m.geometric_multiplicity) == (2, 2)
    # and a descriptor double that is semisimple only in the pencil's metric: A = diag(−4, −4),
    # E = 2I (λ = −2; A − λ·I would be of full rank)
    (n,) = spec(np.diag([-4.0, -4.0]), E=2 * np.eye(2)).modes
    assert (n.multiplicity, n.geometric_multiplicity) == (2, 2)


def test_scaled_semisimple_double_under_similarity():
    # Q·diag(−1, −1, −3)·Qᵀ scaled by 1e4: geometric multiplicity 2 (common practice)
    q = orth(3, 5)
    (m, other) = spec(1e4 * q @ np.diag([-1.0, -1.0, -3.0]) @ q.T).modes
    assert (m.multiplicity, m.geometric_multiplicity) == (2, 2)
    assert m.eigenvalue == pytest.approx(-1e4, rel=1e-12) and other.multiplicity == 1


def test_descriptor_scaling_of_finite_and_infinite_eigenvalues():
    # tiny but regular: λ = −1, −2 (the thresholds scale with ‖A‖ and ‖E‖)
    s = spec(np.diag([-1e-14, -2e-14]), E=np.diag([1e-14, 1e-14]))
    assert sorted(m.eigenvalue.real for m in s.modes) == pytest.approx([-2.0, -1.0], rel=1e-12)
    # large A: λ = −1e8 and −5e8 are finite
    s = spec(np.diag([-1e8, -1e9]), E=np.diag([1.0, 2.0]))
    assert s.infinite == 0
    assert sorted(m.eigenvalue.real for m in s.modes) == pytest.approx([-5e8, -1e8], rel=1e-12)
    # large A and E, E of rank 2, under orthogonal mixing: exactly one infinite eigenvalue (Dai 1989)
    q, z = orth(3, 1), orth(3, 2)
    A = q @ np.diag([-1e6, -2e6, 1e6]) @ z
    E = q @ np.diag([1e6, 1e6, 0.0]) @ z
    s = spec(A, E=E)
    assert s.infinite == 1 and s.n_eigenvalues == 2
    assert sorted(m.eigenvalue.real for m in s.modes) == pytest.approx([-2.0, -1.0], rel=1e-9)
    # and a singular pencil at that scale is still recognised (shared null vector)
    E2 = q @ np.diag([1e6, 1e6, 0.0]) @ z
    A2 = q @ np.array([[-1e6, 0, 0], [0, -2e6, 0], [0, 0, 0.0]]) @ z
    with pytest.raises(ModelError, match="singular pencil"):
        spec(A2, E=E2)


def test_every_figure_keeps_its_rounding_floor_and_enclosure():
    # uncertainty ≥ 8·eps·|s| (FIGURE_FLOOR, DEVELOPERS.md); the certified enclosure is
    # reported for standard models and holds the mpmath eigenvalue
    A = np.array([[-1.0, 3.0, 0.0], [0.0, -2.0, 1.0], [0.2, 0.0, -5.0]])
    exact = mp_eigs(A)
    for m in spec(A).modes:
        assert m.uncertainty >= 8 * EPS * abs(m.s)
        assert min(abs(m.eigenvalue - x) for x in exact) <= m.enclosure < 1e-12
        assert m.uncertainty <= m.enclosure
    (d,) = spec(np.array([[-3.0]])).modes
    assert 8 * EPS * 3 <= d.uncertainty < 100 * EPS * 3 and d.enclosure < math.inf


def test_enclosure_at_the_order_limit():
    n = bounds.ENCLOSE_LIMIT
    d = -np.linspace(1.0, 5.0, n)
    q = orth(n, 11)
    s = spec(q @ np.diag(d) @ q.T)
    assert len(s.modes) == n and all(m.enclosure < 1e-8 for m in s.modes)


def test_discrete_descriptor_uncertainty_maps_through_log():
    # no enclosure for pencils, so the first-order bound maps to s as δs = δz/(|z|·T)
    # (derivative of ln z / T, common practice); compared with the same pencil read as
    # continuous, whose bound is δz itself
    z = 0.5 * cmath.exp(0.3j)
    R = np.array([[z.real, -z.imag * 1e4], [z.imag * 1e-4, z.real]])
    E = 2 * np.eye(2)
    T = 0.5
    (c,) = spec(2 * R, E=E).modes
    (d,) = spec(2 * R, E=E, sample_period=T).modes
    assert c.uncertainty > 1e3 * EPS  # the first-order bound, well above the floors
    assert d.uncertainty == pytest.approx(c.uncertainty / abs(z) / T, rel=1e-9)


def test_semisimple_double_gets_no_hoelder_bound():
    # diag(−1, −1, −3): semisimple, so its error is first order (Bauer–Fike: κ(V) = 1 for a
    # normal matrix), not the Hölder scale √(n·eps)
    (m, _) = spec(np.diag([-1.0, -1.0, -3.0])).modes
    assert (m.multiplicity, m.geometric_multiplicity) == (2, 2)
    assert m.uncertainty < 1e-13
