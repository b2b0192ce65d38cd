"""Transient growth and pseudospectral abscissa/radius against outside references: closed
forms (2×2 triangular exponential, Jordan-block pseudospectra), mpmath (40 digits), scipy's
expm on fine grids with local refinement, and brute-force σ_min grids."""

import math

import mpmath
import numpy as np
import pytest
import scipy.linalg as la
from scipy.optimize import brentq, minimize_scalar

from eigengate.analysis.growth import growth_curve, transient_growth
from eigengate.analysis.pseudospectra import pseudospectral_abscissa, sigma_min_grid
from eigengate.analysis.robustness import NotApplicable


def holds(b, ref, rel=1e-9):
    slack = rel * abs(ref)
    assert b.lower - slack <= ref <= b.upper + slack, (b, ref)
    assert b.lower <= b.value <= b.upper, b


def nonnormal(n, seed):
    rng = np.random.default_rng(seed)
    A = rng.normal(size=(n, n)) + 3.0 * np.triu(rng.normal(size=(n, n)), 1)
    return A - (np.linalg.eigvals(A).real.max() + 0.5) * np.eye(n)


# ---------------------------------------------------------------------------- growth


@pytest.mark.parametrize("A", [np.diag([-1.0, -2.0, -0.1]), np.array([[-0.2, 3.0], [-3.0, -0.2]])])
def test_normal_growth_is_one_at_zero(A):
    # normal stable A: ‖e^{At}‖ = e^{α t} ≤ 1, maximum 1 at t = 0 (Trefethen & Embree ch. 14)
    b = transient_growth(A)
    assert (b.value, b.lower, b.upper, b.at) == (1.0, 1.0, 1.0, (0.0,))


def exp_2x2_norm(a, b, k, t):
    """‖e^{At}‖₂ for A = [[−a, k], [0, −b]]: e^{At} = [[e^{−at}, k(e^{−at} − e^{−bt})/(b − a)],
    [0, e^{−bt}]] (a = b: k t e^{−at}); σ_max² = (F + √(F² − 4 det²))/2, F = ‖·‖F²."""
    p, r = mpmath.exp(-a * t), mpmath.exp(-b * t)
    q = k * t * p if a == b else k * (p - r) / (b - a)
    F = p * p + q * q + r * r
    return mpmath.sqrt((F + mpmath.sqrt(F * F - 4 * (p * r) ** 2)) / 2)


@pytest.mark.parametrize("a,b,k", [(1, 2, 5), (1, 2, 10), (1, 1, 4), (0.1, 1, 2), (3, 0.5, 50)])
def test_triangular_2x2_growth_peak_mpmath(a, b, k):
    # the family [[-1, k], [0, -2]] is Trefethen & Embree's ch. 14 illustration (from memory);
    # reference: the closed form above maximised over t with mpmath.findroot on its derivative
    mpmath.mp.dps = 40
    a, b, k = mpmath.mpf(a), mpmath.mpf(b), mpmath.mpf(k)
    ts = [mpmath.mpf(i) / 100 for i in range(0, 2000)]
    t0 = max(ts, key=lambda t: exp_2x2_norm(a, b, k, t))
    t_peak = mpmath.findroot(lambda t: mpmath.diff(lambda s: exp_2x2_norm(a, b, k, s), t), t0)
    g_peak = exp_2x2_norm(a, b, k, t_peak)
    A = np.array([[-float(a), float(k)], [0.0, -float(b)]])
    g = transient_growth(A)
    holds(g, float(g_peak), 1e-12)
    assert g.upper - g.lower <= 2e-3 * g.value  # the upper bound is sharpened to 1e-3
    assert abs(g.at[0] - float(t_peak)) <= 1e-3 * float(t_peak)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_growth_against_expm_grid(seed):
    # reference: scipy.linalg.expm on a fine grid of t, then bounded Brent around the best
    A = nonnormal(6, seed)
    ts = np.linspace(0.0, 20.0, 801)
    vals = [np.linalg.norm(la.expm(A * t), 2) for t in ts]
    i = int(np.argmax(vals))
    res = minimize_scalar(lambda t: -np.linalg.norm(la.expm(A * t), 2),
                          bounds=(ts[max(i - 1, 0)], ts[min(i + 1, 800)]), method="bounded",
                          options={"xatol": 1e-10})
    ref = max(-res.fun, vals[i])
    g = transient_growth(A)
    holds(g, ref, 1e-10)
    assert g.value > 1.2  # non-normal enough to have a hump


def test_discrete_growth_against_powers():
    # reference: ‖A^k‖₂ for every k ≤ 3000 (numpy matrix powers)
    A = nonnormal(5, 7)
    A = A / (np.abs(np.linalg.eigvals(A)).max() * 1.05)
    A = A + 0.0
    powers, X = [1.0], np.eye(5)
    for _ in range(3000):
        X = X @ A
        powers.append(np.linalg.norm(X, 2))
    k = int(np.argmax(powers))
    g = transient_growth(A, sample_period=0.5)
    holds(g, powers[k], 1e-12)
    assert g.at == (float(k),)


def test_discrete_contraction_is_one():
    # ‖A‖₂ < 1: ‖A^k‖ ≤ ‖A‖^k < 1, maximum 1 at k = 0 (submultiplicativity)
    g = transient_growth(np.array([[0.5, 0.3], [0.0, 0.4]]), sample_period=1.0)
    assert (g.value, g.lower, g.upper) == (1.0, 1.0, 1.0)


@pytest.mark.parametrize("scale", [1e-6, 1e6])
def test_growth_invariant_under_time_scaling(scale):
    # e^{(cA)t} = e^{A(ct)}: same peak, time divided by c (definition)
    A = np.array([[-1.0, 10.0], [0.0, -2.0]])
    g1, g2 = transient_growth(A), transient_growth(scale * A)
    assert abs(g2.value - g1.value) <= 1e-9 * g1.value
    assert abs(g2.at[0] * scale - g1.at[0]) <= 1e-3 * g1.at[0]


@pytest.mark.parametrize("A", [[[0.0]], [[0.1, 0.0], [0.0, -1.0]], [[0.0, 1.0], [-1.0, 0.0]]])
def test_unstable_growth_is_infinite(A):
    assert transient_growth(np.array(A)).lower == math.inf
    assert transient_growth(np.array(A) + 1.0, sample_period=1.0).lower == math.inf


def test_descriptor_growth_is_that_of_inverse_e_times_a():
    # documented choice: E x' = Ax is x' = E⁻¹A x
    A = nonnormal(4, 9)
    E = np.diag([2.0, 1.0, 0.5, 1.0])
    holds(transient_growth(A, E=E), transient_growth(np.linalg.solve(E, A)).value, 1e-12)
    with pytest.raises(NotApplicable, match="singular"):
        transient_growth(A, E=np.diag([1.0, 0.0, 1.0, 1.0]))


def test_growth_curve_matches_expm_and_powers():
    A = nonnormal(4, 4)
    ts = [0.0, 0.3, 1.7]
    assert np.allclose(growth_curve(A, ts), [np.linalg.norm(la.expm(A * t), 2) for t in ts],
                       rtol=1e-12)
    Ad = A / 10
    assert np.allclose(growth_curve(Ad, [0, 3], sample_period=1.0),
                       [1.0, np.linalg.norm(np.linalg.matrix_power(Ad, 3), 2)], rtol=1e-12)
    with pytest.raises(NotApplicable):
        growth_curve(Ad, [0.5], sample_period=1.0)


# -------------------------------------------------------------------------- pseudospectra


@pytest.mark.parametrize("eps", [1e-1, 1e-3])
def test_normal_abscissa_is_spectral_abscissa_plus_eps(eps):
    # normal A: Λ_ε is the union of discs of radius ε about the eigenvalues (Trefethen &
    # Embree ch. 2), so α_ε = α + ε and, discrete, ρ_ε = ρ + ε
    A = np.array([[-0.5, 2.0, 0.0], [-2.0, -0.5, 0.0], [0.0, 0.0, -3.0]])
    holds(pseudospectral_abscissa(A, eps), -0.5 + eps)
    Ad = np.diag([0.5, -0.8, 0.2])
    holds(pseudospectral_abscissa(Ad, eps, sample_period=1.0), 0.8 + eps)


@pytest.mark.parametrize("c,k,eps", [(1.0, 1.0, 1e-2), (0.5, 10.0, 1e-3), (2.0, 3.0, 0.1)])
def test_jordan_2x2_pseudospectrum_is_a_disc(c, k, eps):
    # A = −cI + kJ₂: J and e^{iθ}J are unitarily similar, so Λ_ε is a disc about −c; on the
    # real axis σ_min(kJ − rI) = (√(k² + 4r²) − k)/2 = ε gives r = √(εk + ε²) (closed form;
    # the J₂ disc of radius √(ε + ε²) is in Trefethen & Embree, from memory)
    A = np.array([[-c, k], [0.0, -c]])
    b = pseudospectral_abscissa(A, eps)
    holds(b, -c + math.sqrt(eps * k + eps * eps))
    assert b.upper - b.lower <= 1e-8 * max(1.0, abs(b.value))


def brute_abscissa(A, eps, box, m=121):
    """Dense grid of z with σ_min(A − zI) ≤ ε, the rightmost refined along its line (brentq):
    a point of Λ_ε, so a lower estimate of α_ε that the grid makes close."""
    xs, ys = np.linspace(box[0], box[1], m), np.linspace(0.0, box[2], m)
    best = None
    for y in ys:
        for x in xs[::-1]:
            if np.linalg.svd(A - complex(x, y) * np.eye(len(A)), compute_uv=False)[-1] <= eps:
                if best is None or x > best[0]:
                    best = (x, y)
                break
    x0, y0 = best
    hx, hy = (box[1] - box[0]) / (m - 1), box[2] / (m - 1)
    top = -math.inf
    for y in np.linspace(max(y0 - 2 * hy, 0.0), y0 + 2 * hy, 81):  # finer lines near the best
        def g(t, y=y):
            return np.linalg.svd(A - complex(t, y) * np.eye(len(A)), compute_uv=False)[-1] - eps
        lo, hi = x0 - 3 * hx, x0 + 3 * hx
        if g(lo) <= 0 < g(hi):
            top = max(top, brentq(g, lo, hi, xtol=1e-14))
    return top


def test_abscissa_against_brute_force_grid():
    A = np.array([[-1.0, 5.0, 0.0], [0.0, -2.0, 3.0], [-0.5, 0.0, -1.5]])
    eps = 0.05
    b = pseudospectral_abscissa(A, eps)
    ref = brute_abscissa(A, eps, (-3.0, 1.0, 3.0))
    assert ref <= b.upper  # a point of Λ_ε lies left of the proven bound
    assert abs(b.value - ref) <= 1e-5  # refined lines 3/4800 apart: error O(Δy²)
    z = complex(*b.at)
    s = np.linalg.svd(A - z * np.eye(3), compute_uv=False)[-1]
    assert abs(s - eps) <= 1e-9  # the reported point is on the level curve (numpy SVD)


def test_discrete_radius_against_polar_grid():
    # reference: polar grid max |z| with σ_min(A − zI) ≤ ε (numpy SVD), plus refinement
    A = np.array([[0.5, 2.0], [0.0, -0.6]])
    eps = 0.01
    b = pseudospectral_abscissa(A, eps, sample_period=1.0)
    best = 0.0
    for th in np.linspace(-math.pi, math.pi, 721):
        u = complex(math.cos(th), math.sin(th))
        def g(r):
            return np.linalg.svd(A - r * u * np.eye(2), compute_uv=False)[-1] - eps
        if g(0.6) <= 0:
            best = max(best, brentq(g, 0.6, 3.0, xtol=1e-14))
    assert best <= b.upper and abs(best - b.value) <= 1e-4


def test_sigma_min_grid_matches_svd():
    A = nonnormal(5, 3)
    xs, ys = [-1.0, 0.0, 0.5], [0.0, 2.0]
    grid = sigma_min_grid(A, xs, ys)
    ref = [[np.linalg.svd(A - complex(x, y) * np.eye(5), compute_uv=False)[-1] for x in xs]
           for y in ys]
    assert grid.shape == (2, 3) and np.allclose(grid, ref, rtol=1e-8)


def test_pseudospectral_bad_epsilon():
    with pytest.raises(NotApplicable, match="epsilon"):
        pseudospectral_abscissa(-np.eye(2), 0.0)


def test_deterministic_growth_and_abscissa():
    A = nonnormal(7, 5)
    assert transient_growth(A) == transient_growth(A)
    assert pseudospectral_abscissa(A, 1e-2) == pseudospectral_abscissa(A, 1e-2)
    assert pseudospectral_abscissa(A / 20, 1e-2, sample_period=1.0) == \
        pseudospectral_abscissa(A / 20, 1e-2, sample_period=1.0)


@pytest.mark.parametrize("scale", [1e-6, 1e6])
def test_abscissa_scales_with_the_matrix(scale):
    # σ_min(cA − zI) = c σ_min(A − (z/c)I), so α_{cε}(cA) = c α_ε(A) for c > 0 (definition)
    A = np.array([[-1.0, 5.0], [0.0, -2.0]])
    base = pseudospectral_abscissa(A, 0.1)
    b = pseudospectral_abscissa(scale * A, 0.1 * scale)
    holds(b, scale * base.value, 1e-8)
