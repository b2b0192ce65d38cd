"""H∞ norm, complex and real stability radii against outside references: closed forms for
normal and 2×2 triangular matrices (mpmath, 40 digits), python-control's H∞ norm, brute-force
frequency grids and a brute-force search over real 2×2 perturbations."""

import math

import mpmath
import numpy as np
import pytest

from eigengate.analysis.robustness import (NotApplicable, hinf_norm, real_stability_radius,
                                           stability_radius)

control = pytest.importorskip("control")


def inside(b, ref, rel=0.0):
    """The bracket holds the reference (with a relative allowance for the reference's own
    accuracy) and the estimate is within it."""
    slack = rel * abs(ref)
    assert b.lower - slack <= ref <= b.upper + slack, (b, ref)
    assert b.lower <= b.value <= b.upper, b


def stable_random(n, seed, shift=0.3, dt=None):
    rng = np.random.default_rng(seed)
    A = rng.normal(size=(n, n))
    lam = np.linalg.eigvals(A)
    if dt is None:
        return A - (lam.real.max() + shift) * np.eye(n)
    return A / (np.abs(lam).max() * (1.0 + shift))


def control_hinf(A, B, C, D, dt=None):
    """python-control's H∞ norm (its scipy method: Hamiltonian bisection; discrete systems
    through the bilinear map). It needs a square D (p = m)."""
    sys = control.ss(A, B, C, D) if dt is None else control.ss(A, B, C, D, dt)
    return float(control.norm(sys, "inf", tol=1e-11, method="scipy"))


# ---------------------------------------------------------------------- normal matrices


@pytest.mark.parametrize("lam", [[-1.0, -2.0, -3.0], [-0.01, -5.0], [-7.0]])
def test_normal_diagonal_radius_is_distance_to_axis(lam):
    # normal A: σ_min(A − iωI) = min |λ − iω|, so r = min |Re λ| (Trefethen & Embree ch. 2)
    b = stability_radius(np.diag(lam))
    inside(b, min(abs(x) for x in lam))
    assert b.upper - b.lower <= 1e-8 * min(abs(x) for x in lam)


def test_normal_rotation_blocks_radius():
    # normal real matrix with pairs -0.2 ± 3i, -1 ± 0.5i, rotated orthogonally: r = 0.2
    # (Trefethen & Embree ch. 2: unitarily invariant, distance of the spectrum to the axis)
    blocks = np.zeros((4, 4))
    blocks[:2, :2] = [[-0.2, 3.0], [-3.0, -0.2]]
    blocks[2:, 2:] = [[-1.0, 0.5], [-0.5, -1.0]]
    Q = np.linalg.qr(np.random.default_rng(3).normal(size=(4, 4)))[0]
    b = stability_radius(Q @ blocks @ Q.T)
    inside(b, 0.2, 1e-12)
    assert abs(b.at[0] - 3.0) < 1e-3  # the minimum is at the pair's frequency


def test_normal_discrete_radius_is_distance_to_circle():
    # discrete normal A: min_θ |λ − e^{iθ}| = 1 − max |λ| (Trefethen & Embree ch. 2)
    lam = np.array([0.5, -0.9, 0.3])
    b = stability_radius(np.diag(lam), sample_period=0.1)
    inside(b, 0.1, 1e-12)
    assert abs(b.at[0] - math.pi / 0.1) < 1e-6  # at θ = π, reported as θ/T rad/s


# ------------------------------------------------------------------- 2×2 closed forms


def smin_2x2_sq(a, b, k, w):
    """σ_min² of [[−a−iω, k], [0, −b−iω]] from σ₁²+σ₂² = ‖M‖F², σ₁σ₂ = |det M|."""
    F = a * a + b * b + 2 * w * w + k * k
    P = (a * a + w * w) * (b * b + w * w)
    return (F - mpmath.sqrt(F * F - 4 * P)) / 2


@pytest.mark.parametrize("a,b,k", [(1, 2, 10), (1, 1, 5), (0.1, 3, 1), (2, 0.5, 30)])
def test_triangular_2x2_radius_mpmath(a, b, k):
    # reference: the closed form of σ_min above minimised over ω with mpmath (40 digits)
    mpmath.mp.dps = 40
    a, b, k = mpmath.mpf(a), mpmath.mpf(b), mpmath.mpf(k)
    grid = [mpmath.mpf(x) / 50 for x in range(0, 400)]
    w0 = min(grid, key=lambda w: smin_2x2_sq(a, b, k, w))
    if w0 == 0:
        ref = mpmath.sqrt(smin_2x2_sq(a, b, k, 0))
        wref = 0.0
    else:
        wref = mpmath.findroot(lambda w: mpmath.diff(lambda v: smin_2x2_sq(a, b, k, v), w), w0)
        ref = mpmath.sqrt(smin_2x2_sq(a, b, k, wref))
    A = np.array([[-float(a), float(k)], [0.0, -float(b)]])
    br = stability_radius(A)
    inside(br, float(ref))
    assert br.upper - br.lower <= 1e-7 * float(ref)
    # the same figure is 1/‖(sI − A)⁻¹‖∞ (Hinrichsen & Pritchard 1986)
    hn = hinf_norm(A, np.eye(2), np.eye(2))
    assert hn.lower <= 1 / float(ref) <= hn.upper


def test_real_radius_of_jordan_like_2x2_is_smallest_singular_value():
    # A = [[-1, k], [0, -1]]: σ_min(A − iωI) = (√(k² + 4(1+ω²)) − k)/2 is least at ω = 0, so
    # r_C = σ_min(A); a real rank-one Δ = −σ u vᵀ (Eckart–Young) makes A + Δ singular, so
    # r_R ≤ σ_min(A) and r_R ≥ r_C (Qiu et al. 1995): r_R = r_C = (√(k²+4) − k)/2.
    k = 4.0
    A = np.array([[-1.0, k], [0.0, -1.0]])
    ref = (math.sqrt(k * k + 4) - k) / 2
    rr = real_stability_radius(A)
    inside(rr, ref, 1e-12)
    U, s, Vt = np.linalg.svd(A)
    Delta = -s[-1] * np.outer(U[:, -1], Vt[-1])
    assert abs(np.linalg.norm(Delta, 2) - ref) < 1e-12
    assert np.max(np.linalg.eigvals(A + Delta).real) > -1e-12  # destabilised (eigenvalue 0)


def brute_real_radius_2x2(A, m=90):
    """Brute force over real 2×2 Δ = s·U(θ₁)diag(1, c)V(θ₂)ᵀ (every real 2×2 matrix of 2-norm
    s, reflections absorbed in c ∈ [−1, 1]): the least s that reaches det(A+Δ) = 0 (a real
    eigenvalue at 0: Eckart–Young, σ_min(A)) or tr(A+Δ) = 0 with det(A+Δ) ≥ 0 (a pair on the
    axis). Continuous-time 2×2 real matrices are stable iff tr < 0 and det > 0."""
    t1, t2, c = np.meshgrid(np.linspace(0, np.pi, m), np.linspace(0, np.pi, m),
                            np.linspace(-1, 1, m), indexing="ij")

    def rot(t):
        return np.array([[np.cos(t), -np.sin(t)], [np.sin(t), np.cos(t)]])

    U, V = rot(t1), rot(t2)
    N = np.einsum("ik...,k...,jk...->ij...", U, np.array([np.ones_like(c), c]), V)
    trN = N[0, 0] + N[1, 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        s = -np.trace(A) / trN
    ok = np.isfinite(s) & (s > 0)
    s = np.where(ok, s, 0.0)
    P = A[:, :, None, None, None] + s * N
    det = P[0, 0] * P[1, 1] - P[0, 1] * P[1, 0]
    best = np.min(np.where(ok & (det >= 0), s, np.inf))
    return min(best, np.linalg.svd(A, compute_uv=False)[-1])


@pytest.mark.parametrize("A", [[[-0.2, 5.0], [-0.5, -0.2]], [[-0.5, 3.0], [-1.0, -1.0]]])
def test_real_radius_2x2_against_brute_force(A):
    # reference: brute force above (grid of 90³ perturbation directions, exact s for each):
    # an upper estimate of the true r_R, close to it on this grid (1e-2 relative)
    A = np.array(A)
    rr = real_stability_radius(A)
    rc = stability_radius(A)
    ref = brute_real_radius_2x2(A)
    assert rr.lower <= ref * (1 + 1e-12)  # the brute force found a destabilising real Δ
    assert ref <= rr.upper * (1 + 1e-2)
    assert rr.lower >= rc.lower * (1 - 1e-12)  # r_R ≥ r_C (Qiu et al. 1995)
    assert rr.value > 1.05 * rc.value  # real perturbations need more here


def test_real_radius_of_normal_matrix_equals_complex():
    # normal A with a pair -0.3 ± 2i: the real Δ = 0.3 I puts the pair on the axis, and
    # r_R ≥ r_C = 0.3, so r_R = 0.3 (Hinrichsen & Pritchard 1986: equal for normal matrices)
    A = np.array([[-0.3, 2.0], [-2.0, -0.3], ])
    rr = real_stability_radius(A)
    inside(rr, 0.3, 1e-9)


# ---------------------------------------------------------------- python-control H∞ norm


def corpus():
    """Random stable systems (fixed seeds), a lightly damped resonance, near-axis poles."""
    out = []
    for seed, n in [(1, 3), (2, 6), (3, 10)]:
        rng = np.random.default_rng(100 + seed)
        A = stable_random(n, seed)
        out.append((f"random{n}", A, rng.normal(size=(n, 2)), rng.normal(size=(2, n)),
                    rng.normal(size=(2, 2))))
    w, z = 7.0, 0.002
    A = np.array([[0.0, 1.0], [-w * w, -2 * z * w]])
    out.append(("resonance", A, np.array([[0.0], [1.0]]), np.array([[1.0, 0.0]]),
                np.zeros((1, 1))))
    A = np.array([[-1e-4, 3.0, 0.0], [-3.0, -1e-4, 1.0], [0.0, 0.0, -2.0]])
    out.append(("near_axis", A, np.ones((3, 1)), np.array([[1.0, 0.0, 1.0]]),
                np.array([[0.5]])))
    return out


@pytest.mark.parametrize("case", corpus(), ids=lambda c: c[0])
@pytest.mark.parametrize("with_d", [False, True])
def test_hinf_continuous_against_python_control(case, with_d):
    name, A, B, C, D = case
    D = D if with_d else np.zeros_like(D)
    ref = control_hinf(A, B, C, D)
    b = hinf_norm(A, B, C, D)
    # python-control's tolerance is 1e-11, but its axis test np.isclose(Re λ, 0) (absolute
    # 1e-8) errs near a peak of 7e3 (near_axis): there it is 4e-8 low, so 1e-7 for that case
    inside(b, ref, 1e-7 if name == "near_axis" else 1e-8)
    assert b.upper - b.lower <= 1e-8 * b.value
    # the estimate is σ̄(G(iω)) at the reported frequency (direct evaluation, numpy)
    w = b.at[0]
    G = C @ np.linalg.solve(1j * w * np.eye(len(A)) - A, B) + D if math.isfinite(w) else D
    assert abs(np.linalg.svd(G, compute_uv=False)[0] - b.value) <= 1e-9 * b.value


@pytest.mark.parametrize("seed", [4, 5, 6])
@pytest.mark.parametrize("with_d", [False, True])
def test_hinf_discrete_against_python_control(seed, with_d):
    rng = np.random.default_rng(seed)
    n = 5
    A = stable_random(n, seed, shift=0.05, dt=0.2)
    B, C = rng.normal(size=(n, 2)), rng.normal(size=(2, n))
    D = rng.normal(size=(2, 2)) if with_d else np.zeros((2, 2))
    ref = control_hinf(A, B, C, D, 0.2)
    b = hinf_norm(A, B, C, D, sample_period=0.2)
    inside(b, ref, 1e-8)
    assert 0.0 <= b.at[0] <= math.pi / 0.2 + 1e-9


@pytest.mark.parametrize("case", corpus()[:3], ids=lambda c: c[0])
def test_structured_radius_against_python_control(case):
    # r = 1/‖C(sI − A)⁻¹B‖∞ (Hinrichsen & Pritchard 1986), reference: python-control's norm
    _, A, B, C, _ = case
    ref = 1.0 / control_hinf(A, B, C, np.zeros((2, 2)))
    b = stability_radius(A, B=B, C=C)
    inside(b, ref, 1e-8)


def test_discrete_unstructured_radius_against_python_control():
    # r = 1/‖(zI − A)⁻¹‖∞ on the unit circle; reference python-control (bilinear map)
    A = stable_random(6, 8, shift=0.1, dt=1.0)
    ref = 1.0 / control_hinf(A, np.eye(6), np.eye(6), np.zeros((6, 6)), 1.0)
    b = stability_radius(A, sample_period=1.0)
    inside(b, ref, 1e-8)


def test_descriptor_radius_against_frequency_grid():
    # E x' = (A + Δ)x: r = min_ω σ_min(A − iωE); reference: dense grid over ω plus a golden
    # search (common practice), which can only overestimate the minimum
    rng = np.random.default_rng(12)
    A = stable_random(4, 12, shift=0.4)
    E = np.eye(4) + 0.3 * rng.normal(size=(4, 4))
    As = np.linalg.solve(E, A)
    b = stability_radius(A, E=E)

    def f(w):
        return np.linalg.svd(A - 1j * w * E, compute_uv=False)[-1]

    ws = np.linspace(0, 20, 20001)
    vals = [f(w) for w in ws]
    i = int(np.argmin(vals))
    from scipy.optimize import minimize_scalar
    res = minimize_scalar(f, bounds=(ws[max(i - 1, 0)], ws[min(i + 1, len(ws) - 1)]),
                          method="bounded", options={"xatol": 1e-12})
    assert np.linalg.eigvals(As).real.max() < 0  # the case is a stable one
    assert b.lower <= res.fun <= b.upper + 1e-9 * res.fun


# ------------------------------------------------------------------------- edge cases


@pytest.mark.parametrize("A", [[[0.0]], [[1.0, 0.0], [0.0, -1.0]], [[0.0, 1.0], [-1.0, 0.0]],
                               np.zeros((3, 3))])
def test_not_asymptotically_stable_has_radius_zero(A):
    # an eigenvalue on or right of the axis: already unstable, distance 0 (definition)
    b = stability_radius(np.array(A, dtype=float))
    assert (b.value, b.lower, b.upper) == (0.0, 0.0, 0.0)
    assert hinf_norm(np.array(A, dtype=float), np.eye(len(A)), np.eye(len(A))).lower == math.inf
    assert real_stability_radius(np.array(A, dtype=float)).upper == 0.0


def test_unstable_discrete_radius_zero():
    b = stability_radius(np.diag([0.5, 1.2]), sample_period=1.0)
    assert b.upper == 0.0


@pytest.mark.parametrize("scale", [1e-8, 1.0, 1e8])
def test_radius_scales_linearly(scale):
    # r(cA) = c·r(A) for c > 0 (σ_min(cA − iωI) = c σ_min(A − i(ω/c)I)); closed form of the
    # 1×1 case: r = |a| (normal)
    A = scale * np.array([[-1.0, 10.0], [0.0, -2.0]])
    base = stability_radius(np.array([[-1.0, 10.0], [0.0, -2.0]]))
    b = stability_radius(A)
    assert b.lower <= base.value * scale * (1 + 1e-9) and base.value * scale <= b.upper * (1 + 1e-9)
    one = stability_radius(np.array([[-3.0 * scale]]))
    inside(one, 3.0 * scale, 1e-12)


def test_singular_descriptor_is_not_applicable():
    A = np.array([[-1.0, 0.0], [0.0, -1.0]])
    E = np.array([[1.0, 0.0], [0.0, 0.0]])
    for call in (lambda: stability_radius(A, E=E), lambda: hinf_norm(A, np.eye(2), np.eye(2), E=E),
                 lambda: real_stability_radius(A, E=E)):
        with pytest.raises(NotApplicable, match="singular"):
            call()


@pytest.mark.parametrize("bad", [np.ones((2, 3)), np.array([[np.nan]]), np.zeros((0, 0))])
def test_bad_shapes_are_not_applicable(bad):
    with pytest.raises(NotApplicable):
        stability_radius(bad)


def test_mismatched_structure_is_not_applicable():
    with pytest.raises(NotApplicable, match="B: expected 2 rows"):
        stability_radius(-np.eye(2), B=np.ones((3, 1)), C=np.ones((1, 2)))


def test_deterministic():
    A = stable_random(8, 21)
    first = [stability_radius(A), real_stability_radius(A[:4, :4] - 2 * np.eye(4)),
             hinf_norm(A, np.ones((8, 1)), np.ones((1, 8)), sample_period=None)]
    second = [stability_radius(A), real_stability_radius(A[:4, :4] - 2 * np.eye(4)),
              hinf_norm(A, np.ones((8, 1)), np.ones((1, 8)), sample_period=None)]
    assert first == second


def test_hinf_closed_form_band_pass():
    # G(s) = 1/(s+1) − 2/(s+2) = −s/((s+1)(s+2)): |G(iω)|² = ω²/((1+ω²)(4+ω²)) peaks where
    # ω⁴ = 4, at ω = √2 with |G| = 1/3 (calculus), and G(0) = 0
    A, B, C = np.diag([-1.0, -2.0]), np.ones((2, 1)), np.array([[1.0, -2.0]])
    b = hinf_norm(A, B, C)
    inside(b, 1.0 / 3.0, 1e-14)
    assert abs(b.at[0] - math.sqrt(2.0)) < 1e-4


def test_hinf_peak_at_infinity_is_d():
    # G(s) = 1 − 1/(s+1) = s/(s+1): |G(iω)| increases to |D| = 1 as ω → ∞ (calculus)
    b = hinf_norm(np.array([[-1.0]]), np.array([[1.0]]), np.array([[-1.0]]), np.array([[1.0]]))
    inside(b, 1.0, 1e-14)
    assert b.at == (math.inf,)
