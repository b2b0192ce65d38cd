"""Guardian maps for eigenvalue regions, and the real roots of their determinants along one
parameter (the algebra behind :mod:`eigengate.analysis.parametric`).

**Guardian maps** (Saydy, Tits & Abed, Math. Control Signals Systems 1990): a function of A
that vanishes when an eigenvalue lies on the boundary of a region. Used here, each a
determinant of a matrix that is linear (or quadratic) in A, so det of a matrix polynomial in p:

- the line Re s = −α (stability α = 0, decay rate α): the bialternate sum
  ``2(A+αI) ⊙ I`` (Fuller, J. Math. Anal. Appl. 1968; eigenvalues λi + λj, i < j, so it is
  singular when a pair ±iω + (−α) exists) and ``det(A + αI)`` (a real crossing);
- the circle |s| = r (max frequency, and for discrete models the unit circle and the circle
  ``e^{−αT}`` of a decay rate): the bialternate product ``A ⊙ A − r²I`` (eigenvalues λiλj,
  i < j, so λλ̄ = |λ|² = r² for a pair) and ``det(A ∓ rI)``;
- the two rays of the damping sector ζ = cos θ0: with ``c = e^{i(θ0 − π/2)}``, c·s is
  imaginary on the line through the origin at angle π − θ0, so the Kronecker sum
  ``cA ⊗ I + I ⊗ c̄A`` (eigenvalues cλi + c̄λj; for the pair λ, λ̄ it is 2 Re cλ) is singular
  when an eigenvalue lies on a ray (or on their extensions, or at the origin).

A guardian may vanish at other points too (λi + λj = 0 for two real eigenvalues, say): that only
adds split points. The real roots in the interval are eigenvalues of the companion
linearisation of the matrix polynomial (a generalised eigenvalue problem; Gohberg, Lancaster &
Rodman, *Matrix Polynomials*, 1982), taken generously (near-real ones too).
"""

from __future__ import annotations

import functools
import itertools
import math
import warnings
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

__all__ = ["Boundary", "Guardian", "bialternate_sum_factor", "kronecker_sum_factor",
           "bialternate_sum", "bialternate_product", "guardians", "identify",
           "real_roots", "DEGREES", "IDENTIFY_TOL"]

#: Degrees tried, in turn, for the matrix polynomial of A(p) along an interval.
DEGREES = (2, 4, 8)
#: Points (of [-1, 1]) where an identified polynomial is checked against the model.
_CHECK_T = (-0.8607, -0.2311, 0.4477, 0.9326)
#: Relative agreement an identified polynomial must reach at the check points.
IDENTIFY_TOL = 1e-9

@dataclass(frozen=True)
class Boundary:
    """Where an eigenvalue changes a requirement's verdict: ``abscissa`` (Re s = −value),
    ``circle`` (|λ| = value, of the s-plane or, for discrete models, the z-plane) or
    ``sector`` (the rays of damping ratio ``value``)."""

    kind: str
    value: float


# ------------------------------------------------------------------ guardian matrices

@functools.lru_cache(maxsize=32)
def _pairs(n: int) -> tuple[np.ndarray, np.ndarray]:
    i, j = np.triu_indices(n, 1)
    return i, j


def bialternate_sum(a: np.ndarray) -> np.ndarray:
    """``2A ⊙ I``: the restriction of ``A ⊗ I + I ⊗ A`` to the antisymmetric tensors, of order
    n(n−1)/2, with eigenvalues λi + λj (i < j) (Fuller 1968). Entry ((i,j),(k,l)) is
    ``a_ik δjl + a_jl δik − a_il δjk − a_jk δil`` in the basis (e_i∧e_j)."""
    i, j = _pairs(a.shape[0])
    eq = lambda u, v: u[:, None] == v[None, :]  # noqa: E731
    return (a[np.ix_(i, i)] * eq(j, j) + a[np.ix_(j, j)] * eq(i, i)
            - a[np.ix_(i, j)] * eq(j, i) - a[np.ix_(j, i)] * eq(i, j))


def bialternate_product(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The symmetrised bialternate product, the restriction of ``(A ⊗ B + B ⊗ A)/2`` to the
    antisymmetric tensors; for ``b = a`` the second compound matrix (2×2 minors), with
    eigenvalues λiλj (i < j)."""
    i, j = _pairs(a.shape[0])

    def half(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return (x[np.ix_(i, i)] * y[np.ix_(j, j)] - x[np.ix_(i, j)] * y[np.ix_(j, i)]
                - x[np.ix_(j, i)] * y[np.ix_(i, j)] + x[np.ix_(j, j)] * y[np.ix_(i, i)]) / 2

    return (half(a, b) + half(b, a)) / 2


def _rank_terms(a: np.ndarray) -> list[tuple[np.ndarray, np.ndarray]]:
    """``a = Σ u vᵀ`` from its SVD, singular values below 1e-15 of the largest dropped (they
    move the guardian by less than its rounding)."""
    u, sv, vt = np.linalg.svd(a)
    keep = sv > 1e-15 * max(float(sv[0]), 1e-300) if sv.size else sv > 0
    return [(u[:, r] * sv[r], vt[r]) for r in np.flatnonzero(keep)]


def bialternate_sum_factor(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``2A ⊙ I = L @ R`` of width n·rank(A): for ``A = u vᵀ`` the entries of the bialternate
    sum regroup as ``Σ_m (u_i δjm − u_j δim)(v_k δml − v_l δmk)``."""
    n = a.shape[0]
    i, j = _pairs(n)
    ls, rs = [], []
    eye = np.eye(n)
    for u, v in _rank_terms(a):
        ls.append(u[i][:, None] * eye[j] - u[j][:, None] * eye[i])
        rs.append((v[i][None, :] * eye[:, j] - v[j][None, :] * eye[:, i]))
    if not ls:
        m = len(i)
        return np.zeros((m, 0)), np.zeros((0, m))
    return np.hstack(ls), np.vstack(rs)


def kronecker_sum_factor(a: np.ndarray, c: complex) -> tuple[np.ndarray, np.ndarray]:
    """``cA ⊗ I + I ⊗ c̄A = L @ R`` of width 2n·rank(A)."""
    n = a.shape[0]
    eye = np.eye(n)
    ls, rs = [], []
    for u, v in _rank_terms(a):
        ls += [np.kron(c * u[:, None], eye), np.kron(eye, c.conjugate() * u[:, None])]
        rs += [np.kron(v[None, :], eye), np.kron(eye, v[None, :])]
    if not ls:
        return np.zeros((n * n, 0)), np.zeros((0, n * n))
    return np.hstack(ls), np.vstack(rs)


@dataclass(frozen=True)
class Guardian:
    """A matrix polynomial (coefficients, lowest power first) and, when it is of degree 1, a
    low-rank factorisation of its degree-1 coefficient (which makes its roots cheap)."""

    coeffs: tuple[np.ndarray, ...]
    factor: "tuple[np.ndarray, np.ndarray] | None" = None


def guardians(coeffs: Sequence[np.ndarray], boundary: Boundary) -> list[Guardian]:
    """Matrix polynomials whose determinants vanish wherever an eigenvalue of
    ``A(t) = Σ t^k coeffs[k]`` lies on ``boundary``."""
    n = coeffs[0].shape[0]
    eye = np.eye(n)
    affine = len(coeffs) == 2

    def shifted(shift: float) -> Guardian:
        a = tuple(c + shift * eye if k == 0 else c for k, c in enumerate(coeffs))
        terms = _rank_terms(coeffs[1]) if affine else []
        factor = (np.array([u for u, _ in terms]).T.reshape(n, -1),
                  np.array([v for _, v in terms]).reshape(-1, n)) if affine else None
        return Guardian(a, factor)

    if boundary.kind == "abscissa":
        a = shifted(boundary.value)
        return [Guardian(tuple(bialternate_sum(c) for c in a.coeffs),
                         bialternate_sum_factor(coeffs[1]) if affine else None), a]
    if boundary.kind == "circle":
        r = boundary.value
        d = len(coeffs) - 1
        prod = [np.zeros((n * (n - 1) // 2,) * 2) for _ in range(2 * d + 1)]
        for j, k in itertools.product(range(d + 1), repeat=2):
            prod[j + k] = prod[j + k] + bialternate_product(coeffs[j], coeffs[k])
        prod[0] = prod[0] - r * r * np.eye(prod[0].shape[0])
        return [Guardian(tuple(prod)), shifted(-r), shifted(r)]
    if boundary.kind == "sector":
        theta0 = math.acos(boundary.value)
        c = complex(math.cos(theta0 - math.pi / 2), math.sin(theta0 - math.pi / 2))
        return [Guardian(tuple(np.kron(c * m, eye) + np.kron(eye, c.conjugate() * m)
                               for m in coeffs),
                         kronecker_sum_factor(coeffs[1], c) if affine else None)]
    raise ValueError(f"unknown boundary {boundary.kind!r}")


# ------------------------------------------------------------------ matrix polynomials

@functools.lru_cache(maxsize=8)
def _cheb_to_monomial(deg: int) -> np.ndarray:
    from numpy.polynomial import chebyshev as ch

    out = np.zeros((deg + 1, deg + 1))
    for k in range(deg + 1):
        c = ch.cheb2poly(np.eye(deg + 1)[k])
        out[:len(c), k] = c
    return out


def identify(f: Callable[[float], np.ndarray]) -> list[np.ndarray] | None:
    """The monomial coefficients (in t ∈ [−1, 1], lowest first) of a matrix polynomial ``f``,
    by interpolation at Chebyshev points of degree 2, 4, 8 in turn, each checked at four other
    points; None when none fits (f is not a polynomial of degree ≤ 8: a rational function)."""
    from numpy.polynomial import chebyshev as ch

    checks = {t: f(t) for t in _CHECK_T}
    for deg in DEGREES:
        nodes = np.cos(math.pi * (np.arange(deg + 1) + 0.5) / (deg + 1))
        vals = np.array([f(float(t)) for t in nodes])
        shape = vals.shape[1:]
        cheb = ch.chebfit(nodes, vals.reshape(deg + 1, -1), deg)
        scale = max(float(np.abs(vals).max()), 1e-300)
        mono = _cheb_to_monomial(deg) @ cheb
        top = deg
        while top > 0 and np.abs(mono[top]).max() <= 1e-13 * scale:
            top -= 1
        mono[np.abs(mono) <= 1e-15 * scale] = 0.0  # interpolation noise: keeps zeros zero
        coeffs = [mono[k].reshape(shape) for k in range(top + 1)]
        if all(np.abs(sum(c * t ** k for k, c in enumerate(coeffs)) - v).max()
               <= IDENTIFY_TOL * max(scale, float(np.abs(v).max())) for t, v in checks.items()):
            return coeffs
    return None


def real_roots(coeffs: Sequence[np.ndarray],
               factor: "tuple[np.ndarray, np.ndarray] | None" = None) -> np.ndarray | None:
    """The real t in [−1, 1] (and near-real ones: a double root may come out slightly
    complex) where ``det Σ t^k coeffs[k]`` vanishes, as eigenvalues of the first companion
    pencil; None when the polynomial is singular (its determinant vanishes for every t)."""
    import scipy.linalg as la

    coeffs = list(coeffs)
    norm = max(float(np.abs(c).max()) for c in coeffs) or 1.0
    while len(coeffs) > 1 and np.abs(coeffs[-1]).max() <= 1e-14 * norm:
        coeffs.pop()
    size = coeffs[0].shape[0]
    # a determinant that vanishes everywhere gives no boundary: rank-revealing QR at a point
    # (LU's pivots: an exactly singular matrix leaves one at the rounding level; a false
    # alarm only sends the interval to sampling)
    value = sum(c * 0.3183 ** k for k, c in enumerate(coeffs))
    with warnings.catch_warnings():  # an exact zero pivot is answered below
        warnings.simplefilter("ignore", la.LinAlgWarning)
        lu = la.lu_factor(value, check_finite=False)
    diag = np.abs(np.diag(lu[0]))
    if diag.min() <= 1e-13 * max(float(diag.max()), 1e-300):
        return None
    d = len(coeffs) - 1
    if d == 0:
        return np.zeros(0)
    if d == 1:  # G0 + t G1 = G(t0)(I + (t - t0) G(t0)⁻¹ G1): a standard eigenproblem
        # G1 = L R (low rank: one affine parameter) or sparse (S its nonzero columns, or
        # rows): the nonzero eigenvalues of G(t0)⁻¹G1 are those of R G(t0)⁻¹ L, or of
        # (G(t0)⁻¹G1[:, S])[S] (rows: (G1[S]·G(t0)⁻¹)[:, S]), smaller matrices
        t0 = 0.3183
        g1 = coeffs[1]
        cols = np.flatnonzero(np.any(g1 != 0, axis=0))
        rows = np.flatnonzero(np.any(g1 != 0, axis=1))
        if factor is not None and factor[0].shape[1] < min(len(cols), len(rows)):
            small = factor[1] @ la.lu_solve(lu, factor[0], check_finite=False)
        elif len(cols) <= len(rows):
            small = la.lu_solve(lu, g1[:, cols], check_finite=False)[cols]
        else:
            small = la.lu_solve(lu, g1[rows].T, trans=1, check_finite=False).T[:, rows]
        mu = la.eigvals(small) if small.size else np.zeros(0)
        mu = mu[np.abs(mu) > 1e-14 * max(float(np.abs(mu).max(initial=0.0)), 1e-300)]
        t = t0 - 1.0 / mu
    else:
        dtype = np.result_type(*coeffs)
        x = np.eye(d * size, dtype=dtype)
        x[:size, :size] = coeffs[d]
        y = np.zeros((d * size, d * size), dtype=dtype)
        for k in range(d):
            y[:size, k * size:(k + 1) * size] = coeffs[d - 1 - k]
        for k in range(1, d):
            y[k * size:(k + 1) * size, (k - 1) * size:k * size] = -np.eye(size)
        alpha, beta = la.eig(-y, x, right=False, homogeneous_eigvals=True)
        finite = np.abs(beta) > 1e-14 * np.abs(alpha)
        t = alpha[finite] / beta[finite]
    keep = (np.abs(t.imag) <= 1e-5 * np.maximum(1.0, np.abs(t))) \
        & (t.real >= -1 - 1e-9) & (t.real <= 1 + 1e-9)
    return np.unique(np.clip(t.real[keep], -1.0, 1.0))
