"""Modal analysis and stability verdicts checked against outside references.

Every check names its source (see the project's REFERENCES list):

* Routh–Hurwitz criterion and the Schur–Cohn (Jury) recursion, both re-implemented here in
  exact rational arithmetic on the characteristic polynomial;
* Lyapunov certificates from scipy.linalg (solve_continuous_lyapunov / solve_discrete_lyapunov);
* the second-order handbook relations s = -ζωn ± jωn√(1-ζ²);
* python-control (control.poles, control.damp) as a reference library;
* mpmath eigenvalues at 50 digits for ill-conditioned matrices;
* participation factors of Pérez-Arriaga, Verghese & Schweppe (1982), re-derived from
  scipy.linalg.eig left and right eigenvectors;
* the exact zero-order-hold pole mapping z = e^{sT} (scipy.linalg.expm);
* scipy.linalg.eigvals(A, E) for descriptor pencils.
"""

from __future__ import annotations

import cmath
import math
from fractions import Fraction

import control
import mpmath
import numpy as np
import pytest
import scipy.linalg as la
from scipy.optimize import linear_sum_assignment

import eigengate as eg


# ----------------------------------------------------------------------------- helpers

def spectrum_of(A, **kw):
    return eg.analyse(eg.from_arrays(A, **kw))


def stability_verdict(A, **kw):
    sp = spectrum_of(A, **kw)
    (v,) = eg.evaluate(sp, [eg.Stability()])
    return v, sp


def expanded(sp, attr="eigenvalue"):
    """Every eigenvalue of the spectrum with multiplicity and conjugates, as (value, mode)."""
    out = []
    for m in sp.modes:
        val = getattr(m, attr)
        for _ in range(m.multiplicity):
            out.append((complex(val), m))
            if m.pair:
                out.append((complex(val).conjugate(), m))
    return out


def match(got, ref):
    """Pair two equally long lists of complex numbers by minimum total distance."""
    got, ref = np.asarray(got, complex), np.asarray(ref, complex)
    assert got.shape == ref.shape, (got, ref)
    cost = np.abs(got[:, None] - ref[None, :])
    rows, cols = linear_sum_assignment(cost)
    return rows, cols, cost[rows, cols]


def random_shifted(rng, n, margin):
    """A random real n×n matrix shifted so that its spectral abscissa is exactly -margin
    (margin > 0: Hurwitz by construction, < 0: not)."""
    A = rng.standard_normal((n, n))
    abscissa = np.linalg.eigvals(A).real.max()
    return A - (abscissa + margin) * np.eye(n)


def random_scaled(rng, n, radius):
    """A random real n×n matrix scaled to spectral radius ``radius``."""
    A = rng.standard_normal((n, n))
    return A * (radius / np.abs(np.linalg.eigvals(A)).max())


# --------------------------------------------------------------- Routh–Hurwitz criterion

def routh_first_column(coeffs):
    """First column of the Routh array of a real polynomial (highest power first), in exact
    rational arithmetic. Returns None for a singular case (a zero in the first column), which
    the Routh–Hurwitz criterion handles only with the epsilon or auxiliary-polynomial tricks
    that we do not re-implement here."""
    c = [Fraction(float(x)) for x in coeffs]
    n = len(c) - 1
    width = n // 2 + 1
    r0 = c[0::2] + [Fraction(0)] * (width - len(c[0::2]))
    r1 = c[1::2] + [Fraction(0)] * (width - len(c[1::2]))
    rows = [r0, r1]
    for _ in range(n - 1):
        a, b = rows[-2], rows[-1]
        if b[0] == 0:
            return None
        new = [(b[0] * a[j + 1] - a[0] * b[j + 1]) / b[0] for j in range(width - 1)] + [Fraction(0)]
        rows.append(new)
    col = [r[0] for r in rows[: n + 1]]
    if any(x == 0 for x in col):
        return None
    return col


def routh_rhp_count(coeffs):
    """Routh–Hurwitz: the number of sign changes in the first column is the number of roots
    in the open right half-plane."""
    col = routh_first_column(coeffs)
    if col is None:
        return None
    return sum(1 for a, b in zip(col, col[1:]) if (a > 0) != (b > 0))


def test_routh_array_on_textbook_polynomials():
    # Routh–Hurwitz criterion: s^3 + 3 s^2 + 2 s + K is Hurwitz for 0 < K < 6
    # (the loop K/(s(s+1)(s+2)) from the REFERENCES list); K = 8 gives two RHP roots.
    assert routh_rhp_count([1, 3, 2, 1]) == 0
    assert routh_rhp_count([1, 3, 2, 5.9]) == 0
    assert routh_rhp_count([1, 3, 2, 8]) == 2
    assert routh_rhp_count([1, 3, 2, 6]) is None  # row of zeros: the marginal gain
    # (s - 1)(s + 2)(s + 3): one right half-plane root
    assert routh_rhp_count(np.poly([1, -2, -3])) == 1


def test_stability_verdicts_agree_with_routh_hurwitz_on_random_matrices():
    # Routh–Hurwitz criterion on np.poly(A), ~200 seeded random matrices of order 2..8.
    rng = np.random.default_rng(20240611)
    checked = stable_seen = unstable_seen = 0
    for trial in range(200):
        n = int(rng.integers(2, 9))
        margin = float(rng.uniform(0.15, 1.0)) * (1 if trial % 2 else -1)
        A = random_shifted(rng, n, margin)
        rhp = routh_rhp_count(np.poly(A))
        if rhp is None:  # irregular array: outside what the reference handles
            continue
        v, sp = stability_verdict(A)
        assert v.passed == (rhp == 0), (trial, A, rhp, v.message)
        assert not v.uncertain
        # Sign changes count the unstable eigenvalues: compare with the direction counts.
        assert eg.classify(sp.modes).unstable == rhp, (trial, rhp)
        # and the construction itself (abscissa exactly -margin) agrees with Routh
        assert (rhp == 0) == (margin > 0)
        checked += 1
        stable_seen += rhp == 0
        unstable_seen += rhp > 0
    assert checked >= 180 and stable_seen >= 60 and unstable_seen >= 60


# ------------------------------------------------------------- Jury / Schur–Cohn recursion

def schur_cohn_stable(coeffs):
    """Schur–Cohn (Jury) test in exact arithmetic: a real polynomial (highest power first) has
    every root strictly inside the unit circle iff every reflection coefficient
    k = a_0 / a_n of the step-down recursion p -> (p - k p*) / z has |k| < 1."""
    p = [Fraction(float(x)) for x in coeffs]
    while len(p) > 1:
        k = p[-1] / p[0]
        if abs(k) >= 1:
            return False
        rev = p[::-1]
        q = [a - k * b for a, b in zip(p, rev)]
        assert q[-1] == 0
        p = q[:-1]
    return True


def test_schur_cohn_on_textbook_polynomials():
    # Jury test on hand-made polynomials with known roots.
    assert schur_cohn_stable(np.poly([0.5, -0.9, 0.3 + 0.4j, 0.3 - 0.4j]).real)
    assert not schur_cohn_stable(np.poly([0.5, -1.1]))
    assert not schur_cohn_stable(np.poly([0.2, 0.9 + 0.5j, 0.9 - 0.5j]).real)  # |z| = 1.03


def test_discrete_stability_verdicts_agree_with_jury_test():
    # Jury (Schur–Cohn) stability test on np.poly(A) for seeded random discrete models.
    rng = np.random.default_rng(7)
    seen = {True: 0, False: 0}
    for trial in range(120):
        n = int(rng.integers(2, 9))
        radius = float(rng.uniform(0.2, 0.9) if trial % 2 else rng.uniform(1.1, 2.0))
        A = random_scaled(rng, n, radius)
        ref = schur_cohn_stable(np.poly(A))
        T = float(rng.uniform(0.01, 1.0))
        v, sp = stability_verdict(A, sample_period=T)
        assert v.passed == ref, (trial, radius, v.message)
        assert not v.uncertain
        assert ref == (radius < 1)
        assert (sp.spectral_radius < 1) == ref
        seen[ref] += 1
    assert seen[True] >= 50 and seen[False] >= 50


# ------------------------------------------------------------------ Lyapunov certificates

def is_positive_definite(P):
    P = 0.5 * (P + P.T)
    return bool(np.linalg.eigvalsh(P).min() > 0)


def test_continuous_lyapunov_certificate_matches_stability_verdict():
    # Lyapunov: A is Hurwitz iff A^T P + P A = -I has a positive-definite solution
    # (scipy.linalg.solve_continuous_lyapunov solves a X + X a^H = q).
    rng = np.random.default_rng(11)
    for trial in range(40):
        n = int(rng.integers(2, 7))
        A = random_shifted(rng, n, float(rng.uniform(0.2, 1.0)) * (1 if trial % 2 else -1))
        P = la.solve_continuous_lyapunov(A.T, -np.eye(n))
        assert np.allclose(A.T @ P + P @ A, -np.eye(n), atol=1e-8 * max(1, np.abs(P).max()))
        v, _ = stability_verdict(A)
        assert v.passed == is_positive_definite(P), (trial, v.message)


def test_discrete_lyapunov_certificate_matches_stability_verdict():
    # Lyapunov (discrete): A is Schur iff A^T P A - P = -I has a positive-definite solution
    # (scipy.linalg.solve_discrete_lyapunov solves a X a^H - X + q = 0).
    rng = np.random.default_rng(12)
    for trial in range(40):
        n = int(rng.integers(2, 7))
        radius = float(rng.uniform(0.3, 0.85) if trial % 2 else rng.uniform(1.15, 1.6))
        A = random_scaled(rng, n, radius)
        P = la.solve_discrete_lyapunov(A.T, np.eye(n))
        v, _ = stability_verdict(A, sample_period=0.1)
        assert v.passed == is_positive_definite(P), (trial, radius, v.message)


# --------------------------------------------------------- second-order handbook relations

@pytest.mark.parametrize("zeta", [0.01, 0.05, 0.2, 0.5, 0.707, 0.9, 0.99])
@pytest.mark.parametrize("wn", [0.1, 1.0, 7.5, 100.0])
def test_second_order_standard_form(zeta, wn):
    # Handbook relation: x'' + 2ζωn x' + ωn² x = 0 has s = -ζωn ± jωn√(1-ζ²),
    # ζ = -Re(s)/|s|, ωn = |s|; the envelope time constant is 1/(ζωn).
    # (Percent overshoot 100·exp(-πζ/√(1-ζ²)) is not computed by the tool: not checked.)
    A = np.array([[0.0, 1.0], [-wn**2, -2 * zeta * wn]])
    sp = spectrum_of(A)
    assert len(sp.modes) == 1
    m = sp.modes[0]
    assert m.pair and m.multiplicity == 1
    expected = complex(-zeta * wn, wn * math.sqrt(1 - zeta**2))
    assert abs(m.s - expected) <= 1e-12 * wn
    assert m.damping_ratio == pytest.approx(zeta, rel=1e-10)
    assert m.natural_frequency == pytest.approx(wn, rel=1e-12)
    assert m.time_constant == pytest.approx(1 / (zeta * wn), rel=1e-10)
    assert m.damped_frequency == pytest.approx(wn * math.sqrt(1 - zeta**2), rel=1e-10)


@pytest.mark.parametrize("wn", [0.5, 3.0])
def test_second_order_critically_damped_and_overdamped(wn):
    # Handbook relation: ζ = 1 is a double real root -ωn; ζ > 1 gives two real roots
    # -ωn(ζ ∓ √(ζ²-1)), each with damping ratio 1 (ζ = -Re(s)/|s| for a real stable root).
    crit = spectrum_of(np.array([[0.0, 1.0], [-wn**2, -2 * wn]]))
    assert len(crit.modes) == 1
    m = crit.modes[0]
    assert m.multiplicity == 2 and m.defective and not m.pair
    assert abs(m.s - (-wn)) <= m.uncertainty
    assert m.time_constant == pytest.approx(1 / wn, rel=1e-7)
    zeta = 2.0
    over = spectrum_of(np.array([[0.0, 1.0], [-wn**2, -2 * zeta * wn]]))
    roots = sorted([-wn * (zeta - math.sqrt(zeta**2 - 1)), -wn * (zeta + math.sqrt(zeta**2 - 1))],
                   reverse=True)
    assert [m.s.real for m in over.modes] == pytest.approx(roots, rel=1e-12)
    assert all(m.damping_ratio == 1.0 for m in over.modes)


# ------------------------------------------------------------ python-control as reference

def system(rng, n, discrete):
    if discrete:
        radius = float(rng.uniform(0.3, 0.9) if rng.random() < 0.5 else rng.uniform(1.1, 1.5))
        A = random_scaled(rng, n, radius)
    else:
        A = random_shifted(rng, n, float(rng.uniform(0.2, 1.0) * rng.choice([-1, 1])))
    B = rng.standard_normal((n, 1))
    C = rng.standard_normal((1, n))
    D = np.zeros((1, 1))
    return A, B, C, D


@pytest.mark.parametrize("discrete", [False, True], ids=["continuous", "discrete"])
def test_poles_and_damping_match_python_control(discrete):
    # python-control: control.poles(ss) and control.damp(ss) (wn, zeta; for a discrete system
    # damp uses s = log(z)/dt) on random stable and unstable systems.
    rng = np.random.default_rng(31 if discrete else 30)
    for _ in range(25):
        n = int(rng.integers(2, 8))
        A, B, C, D = system(rng, n, discrete)
        T = 0.05 if discrete else None
        sys = control.ss(A, B, C, D, T) if discrete else control.ss(A, B, C, D)
        poles = np.asarray(control.poles(sys), complex)
        wn_ref, zeta_ref, poles_damp = control.damp(sys, doprint=False)
        assert np.allclose(np.sort_complex(poles), np.sort_complex(np.asarray(poles_damp)))
        sp = eg.analyse(eg.from_control(sys))
        got = expanded(sp)
        rows, cols, dist = match([g for g, _ in got], poles)
        for r, c, d in zip(rows, cols, dist):
            value, mode = got[r]
            assert d <= 1e-9 * max(1.0, abs(poles[c])) + 4 * mode.uncertainty, (value, poles[c])
            assert mode.natural_frequency == pytest.approx(float(wn_ref[c]), rel=1e-8, abs=1e-10)
            assert mode.damping_ratio == pytest.approx(float(zeta_ref[c]), abs=1e-8)
        v = eg.evaluate(sp, [eg.Stability()])[0]
        ref_stable = bool(np.all(np.abs(poles) < 1)) if discrete else bool(np.all(poles.real < 0))
        assert v.passed == ref_stable
        assert bool(control.isdtime(sys, strict=True)) == sp.model.discrete


# ---------------------------------------------------------------- mpmath high precision

def frank(n):
    """Frank matrix: upper Hessenberg, a_ij = n + 1 - max(i, j) for j >= i - 1; its small
    eigenvalues are notoriously ill-conditioned."""
    return np.array([[n + 1 - max(i, j) if j >= i - 1 else 0 for j in range(1, n + 1)]
                     for i in range(1, n + 1)], dtype=float)


def companion(roots):
    c = np.poly(roots).real
    C = np.diag(np.ones(len(roots) - 1), -1)
    C[0, :] = -c[1:]
    return C


def grcar(n, k=3):
    G = np.eye(n) - np.diag(np.ones(n - 1), -1)
    for d in range(1, k + 1):
        G += np.diag(np.ones(n - d), d)
    return G


def mp_eigenvalues(A, dps=50):
    with mpmath.workdps(dps):
        ev = mpmath.eig(mpmath.matrix(A.tolist()), left=False, right=False)
        return [complex(e) for e in ev]


@pytest.mark.parametrize("name, A, ill", [
    ("frank12", frank(12), True),
    ("wilkinson10-companion", companion(-np.arange(1.0, 11.0)), True),
    ("quadruple-root-companion", companion([-1.0, -1.0, -1.0, -1.0]), True),
    ("grcar10", grcar(10), False),
    ("frank4", frank(4), False),
])
def test_error_bounds_are_honest_against_mpmath(name, A, ill):
    # mpmath.eig at 50 significant digits is the reference; the matrices hold integers, so the
    # float model is exactly the matrix mpmath sees.
    ref = mp_eigenvalues(A)
    sp = spectrum_of(A)
    got = expanded(sp)
    assert len(got) == len(ref)
    rows, cols, dist = match([g for g, _ in got], ref)
    for r, c, d in zip(rows, cols, dist):
        value, mode = got[r]
        assert d <= mode.uncertainty, (name, value, ref[c], d, mode.uncertainty)
        # an honest bound, not a vacuous one
        assert mode.uncertainty < 1e-2 * max(1.0, abs(ref[c]))
    if ill:
        assert max(m.condition for m in sp.modes) > 1e4
    else:
        assert max(m.condition for m in sp.modes) < 1e3


def test_quadruple_root_is_reported_once_with_its_multiplicity():
    # mpmath at 50 digits: the companion of (s + 1)^4 has the single eigenvalue -1 (×4), which
    # double precision splits by about eps^(1/4).
    A = companion([-1.0, -1.0, -1.0, -1.0])
    ref = mp_eigenvalues(A)
    assert max(abs(r + 1) for r in ref) < 1e-10  # 50 digits split it by only ~(1e-50)^(1/4)
    assert np.abs(la.eigvals(A) + 1).max() > 1e-6  # LAPACK really splits it
    sp = spectrum_of(A)
    assert len(sp.modes) == 1
    m = sp.modes[0]
    assert m.multiplicity == 4 and m.geometric_multiplicity == 1 and not m.pair
    assert abs(m.eigenvalue + 1) <= m.uncertainty


# ------------------------------------------------- participation factors (Pérez-Arriaga 1982)

def reference_participation(A):
    """p_ki = |v_ki · w_ik| / Σ_k |v_ki · w_ik| from scipy.linalg.eig right (v) and left (w)
    eigenvectors (Pérez-Arriaga, Verghese & Schweppe, 1982, magnitude form)."""
    lam, vl, vr = la.eig(A, left=True, right=True)
    raw = np.abs(vr * vl.conj())
    return lam, raw / raw.sum(axis=0)


def participation_by_eigenvalue(sp, lam, ref):
    """For each mode, the reference column of the eigenvalue closest to it."""
    out = []
    for m in sp.modes:
        i = int(np.argmin(np.abs(lam - m.eigenvalue)))
        out.append((m, ref[:, i]))
    return out


def test_participation_factors_match_rederivation():
    # Pérez-Arriaga, Verghese & Schweppe (1982): re-derived from scipy.linalg.eig vectors.
    rng = np.random.default_rng(5)
    for _ in range(20):
        n = int(rng.integers(2, 9))
        A = rng.standard_normal((n, n)) * np.exp(rng.uniform(-2, 2, n))[:, None]
        lam, ref = reference_participation(A)
        sp = spectrum_of(A)
        assert sum(m.count for m in sp.modes) == n
        for m, p in participation_by_eigenvalue(sp, lam, ref):
            assert m.participation.shape == (n,)
            assert m.participation.sum() == pytest.approx(1.0, abs=1e-12)
            assert np.all(m.participation >= 0)
            np.testing.assert_allclose(m.participation, p, atol=1e-8)


def test_participation_is_confined_to_its_block():
    # Pérez-Arriaga et al. (1982): for block-diagonal A a mode of one block has zero
    # participation in the states of the other (its right and left vectors vanish there).
    rng = np.random.default_rng(9)
    A1 = rng.standard_normal((3, 3)) - 3 * np.eye(3)
    A2 = rng.standard_normal((2, 2)) + 3 * np.eye(2)
    A = la.block_diag(A1, A2)
    lam1, lam2 = la.eigvals(A1), la.eigvals(A2)
    sp = spectrum_of(A, states=["a1", "a2", "a3", "b1", "b2"])
    assert sum(m.count for m in sp.modes) == 5
    for m in sp.modes:
        in_first = np.min(np.abs(lam1 - m.eigenvalue)) < np.min(np.abs(lam2 - m.eigenvalue))
        outside = m.participation[3:] if in_first else m.participation[:3]
        assert np.all(outside <= 1e-12), (m.eigenvalue, m.participation)
        assert {s for s, _ in m.top_states(5, 1e-6)} <= (
            {"a1", "a2", "a3"} if in_first else {"b1", "b2"})


def test_participation_is_invariant_under_diagonal_state_scaling():
    # Pérez-Arriaga et al. (1982): x -> D x maps v -> D v and w -> D^-1 w, so |v_k w_k| is
    # unchanged.
    rng = np.random.default_rng(13)
    A = rng.standard_normal((6, 6))
    D = np.diag(10.0 ** rng.uniform(-3, 3, 6))
    B = D @ A @ np.linalg.inv(D)
    sp_a, sp_b = spectrum_of(A), spectrum_of(B)
    assert len(sp_a.modes) == len(sp_b.modes)
    for ma, mb in zip(sp_a.modes, sp_b.modes):
        assert abs(ma.eigenvalue - mb.eigenvalue) <= 1e-9
        np.testing.assert_allclose(ma.participation, mb.participation, atol=1e-8)


# ---------------------------------------------------- exact ZOH pole mapping z = e^{sT}

def test_discrete_modes_map_back_to_continuous_eigenvalues():
    # Exact zero-order-hold pole mapping: A_d = expm(A T) has z = e^{sT}; for |Im(s) T| < π the
    # principal logarithm recovers s = ln(z)/T.
    rng = np.random.default_rng(17)
    for _ in range(20):
        n = int(rng.integers(2, 7))
        A = random_shifted(rng, n, float(rng.uniform(-0.5, 1.0)))
        s_ref = la.eigvals(A)
        T = float(rng.uniform(0.3, 0.9)) * math.pi / max(1.0, np.abs(s_ref.imag).max())
        sp = spectrum_of(la.expm(A * T), sample_period=T)
        got = expanded(sp, "s")
        rows, cols, dist = match([g for g, _ in got], s_ref)
        for r, c, d in zip(rows, cols, dist):
            assert d <= 1e-8 * max(1.0, abs(s_ref[c])), (got[r][0], s_ref[c])
        # the z-plane value is kept as the native eigenvalue
        for m in sp.modes:
            assert abs(cmath.exp(m.s * T) - m.eigenvalue) <= 1e-12 * max(1.0, abs(m.eigenvalue))
            assert m.eigenvalue.imag >= 0


@pytest.mark.parametrize("z", [-0.5, -0.95, -1.3])
def test_negative_real_pole_is_a_nyquist_oscillation(z):
    # Principal logarithm of a negative real z: ln z = ln|z| + iπ, so s = ln|z|/T + iπ/T and
    # ζ = -ln|z| / √(ln²|z| + π²) (handbook relation ζ = -Re(s)/|s|).
    T = 0.1
    sp = spectrum_of(np.diag([z, 0.3]), sample_period=T)
    (m,) = [m for m in sp.modes if m.eigenvalue.real < 0]
    assert m.eigenvalue == complex(z, 0.0)
    assert m.s.real == pytest.approx(math.log(abs(z)) / T, rel=1e-12)
    assert m.s.imag == pytest.approx(math.pi / T, rel=1e-12)
    ln = math.log(abs(z))
    assert m.damping_ratio == pytest.approx(-ln / math.hypot(ln, math.pi), rel=1e-12)
    assert math.isfinite(m.damping_ratio)
    assert m.natural_frequency == pytest.approx(math.hypot(ln, math.pi) / T, rel=1e-12)
    assert m.count == 1
    v = eg.evaluate(sp, [eg.Stability()])[0]
    assert v.passed == (abs(z) < 1)


# ------------------------------------------------------------------------ descriptor models

def finite_generalized(A, E, limit=1e8):
    """Finite eigenvalues of the pencil from scipy.linalg.eigvals(A, E). LAPACK may return an
    infinite eigenvalue as a huge finite one (β of order eps), so beyond ``limit`` counts as
    infinite; the tests' finite eigenvalues are O(10)."""
    w = la.eigvals(A, E)
    return w[np.isfinite(w) & (np.abs(w) < limit)]


@pytest.mark.parametrize("seed", range(6))
def test_descriptor_finite_eigenvalues_match_scipy(seed):
    # scipy.linalg.eigvals(A, E): finite generalized eigenvalues; the rest are infinite.
    # Infinite eigenvalues are not dynamic modes (common practice) and never fail Stability.
    rng = np.random.default_rng(seed)
    n, rank = 5, int(rng.integers(2, 5))
    E = np.diag([1.0] * rank + [0.0] * (n - rank))
    U, _ = np.linalg.qr(rng.standard_normal((n, n)))
    W, _ = np.linalg.qr(rng.standard_normal((n, n)))
    A = rng.standard_normal((n, n))
    A[:rank, :rank] -= (np.linalg.eigvals(A[:rank, :rank]).real.max() + 3) * np.eye(rank)
    # Block elimination of the algebraic part: the finite eigenvalues are those of the Schur
    # complement A11 - A12 A22^-1 A21 (rank of E of them, A22 being generically invertible).
    schur = A[:rank, :rank] - A[:rank, rank:] @ np.linalg.solve(A[rank:, rank:], A[rank:, :rank])
    A, E = U @ A @ W, U @ E @ W  # hide the structure behind orthogonal equivalence
    ref = finite_generalized(A, E)
    assert len(ref) == rank
    rows, cols, dist = match(ref, la.eigvals(schur))
    assert np.all(dist <= 1e-8 * np.maximum(1.0, np.abs(ref[rows])))
    sp = spectrum_of(A, E=E)
    got = expanded(sp)
    assert len(got) == len(ref)
    assert sp.infinite == n - len(ref)
    rows, cols, dist = match([g for g, _ in got], ref)
    for r, c, d in zip(rows, cols, dist):
        assert d <= 1e-8 * max(1.0, abs(ref[c])) + 4 * got[r][1].uncertainty
    v = eg.evaluate(sp, [eg.Stability()])[0]
    assert v.passed == bool(np.all(ref.real < 0)), v.message


def test_descriptor_with_only_infinite_extra_modes_is_stable():
    # scipy.linalg.eigvals(A, E) gives -2 and three infinite eigenvalues (a nilpotent chain of
    # index 3 in E); infinite eigenvalues are not dynamic modes (common practice).
    E = np.array([[1, 0, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1], [0, 0, 0, 0]], dtype=float)
    A = np.eye(4)
    A[0, 0] = -2.0
    ref = la.eigvals(A, E)
    assert np.sum(np.isinf(ref)) == 3
    sp = spectrum_of(A, E=E)
    assert sp.infinite == 3
    assert [m.eigenvalue for m in sp.modes] == [pytest.approx(-2.0)]
    assert eg.evaluate(sp, [eg.Stability()])[0].passed


def test_descriptor_unstable_finite_mode_still_fails():
    # scipy.linalg.eigvals(A, E): finite eigenvalue +0.5 with one infinite; the finite one rules.
    A = np.array([[0.5, 1.0], [0.0, 1.0]])
    E = np.array([[1.0, 0.0], [0.0, 0.0]])
    assert np.sum(np.isinf(la.eigvals(A, E))) == 1
    sp = spectrum_of(A, E=E)
    assert sp.infinite == 1
    v = eg.evaluate(sp, [eg.Stability()])[0]
    assert not v.passed


@pytest.mark.parametrize("A, E", [
    ([[1.0, 0.0], [0.0, 0.0]], [[1.0, 0.0], [0.0, 0.0]]),
    ([[1.0, 2.0, 0.0], [0.0, 0.0, 0.0], [3.0, 1.0, -1.0]],
     [[1.0, 0.0, 0.0], [0.0, 0.0, 0.0], [0.0, 1.0, 2.0]]),
])
def test_singular_pencil_is_a_model_error(A, E):
    # A pencil with det(A - λE) ≡ 0 (a shared zero row) has no well-defined eigenvalues:
    # verified here by evaluating the determinant at random points.
    A, E = np.array(A), np.array(E)
    for lam in (0.3, -1.7, 2.2 + 0.5j):
        assert abs(np.linalg.det(A - lam * E)) < 1e-12
    with pytest.raises(eg.ModelError):
        spectrum_of(A, E=E)
