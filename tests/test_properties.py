"""Property-based checks (hypothesis) of invariances the spectrum must have.

* Similarity invariance: A and V A V^-1 have the same eigenvalues and Jordan structure, so every
  verdict is the same; the expected verdicts are computed here from the eigenvalues the matrix
  is built from (ζ = -Re(s)/|s|, ωn = |s|: handbook relations), not read from the tool.
* Time scaling: x' = cAx has eigenvalues cλ, natural frequencies c·ωn and the same damping
  ratios (handbook relations ζ = -Re(s)/|s|, ωn = |s|).
* The common-practice 2-state table: opposite real signs → saddle, two negative (positive) real
  → stable (unstable) node, complex with negative (positive) real part → stable (unstable)
  focus, purely imaginary → center.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.linalg as la
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import linear_sum_assignment

import eigengate as eg

SETTINGS = settings(max_examples=60, deadline=None, database=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])

ALPHA, ZETA, OMEGA = 0.5, 0.3, 5.0
GAP = 0.05  # every eigenvalue keeps at least this distance (or ζ gap) from each threshold


def orthogonal(rng, n):
    Q, R = np.linalg.qr(rng.standard_normal((n, n)))
    return Q * np.sign(np.diag(R))


def well_conditioned(rng, n):
    return orthogonal(rng, n) @ np.diag(np.exp(rng.uniform(-1, 1, n))) @ orthogonal(rng, n)


def real_block(eigs):
    """Real block-diagonal matrix with the given real eigenvalues and pairs σ ± jω (ω > 0)."""
    blocks = [[[z.real, z.imag], [-z.imag, z.real]] if z.imag else [[z.real]] for z in eigs]
    return la.block_diag(*blocks)


def expand(eigs):
    out = []
    for z in eigs:
        out.append(z)
        if z.imag:
            out.append(z.conjugate())
    return np.array(out, complex)


def away(z):
    """Margins from every threshold used below, in the plane the rule measures."""
    r = abs(z)
    ok = abs(z.real) > GAP and abs(z.real + ALPHA) > GAP and abs(r - OMEGA) > GAP
    if z.imag:
        ok = ok and abs(-z.real / r - ZETA) > GAP / 5 and abs(z.imag) > GAP
    return ok


real_eig = st.floats(-7.0, 3.0).map(complex)
pair_eig = st.builds(complex, st.floats(-6.0, 2.0), st.floats(0.2, 6.0))
spectra = st.lists(st.one_of(real_eig, pair_eig), min_size=1, max_size=4).filter(
    lambda es: all(away(z) for z in es))


def separated(eigs, gap=0.1):
    full = expand(eigs)
    d = np.abs(full[:, None] - full[None, :]) + np.eye(len(full)) * 1e9
    return bool(d.min() > gap)


def expected_verdicts(eigs):
    """Verdicts read off the construction (handbook relations), in REQUIREMENTS order."""
    full = expand(eigs)
    re = full.real
    zetas = [-z.real / abs(z) for z in full if z.imag]
    stable, unstable = int((re < 0).sum()), int((re > 0).sum())
    in_region = all(z.real <= -ALPHA and -z.real / abs(z) >= ZETA and abs(z) <= OMEGA
                    for z in full)
    return [
        bool(np.all(re < 0)),                              # Stability
        bool(np.all(-re >= ALPHA)),                        # MinDecayRate
        all(zt >= ZETA for zt in zetas),                   # MinDamping
        bool(np.all(np.abs(full) <= OMEGA)),               # MaxFrequency
        in_region,                                         # PoleRegion
        not (stable and unstable),                         # NoSaddle
    ], stable, unstable


def requirements(stable, unstable):
    return (eg.Stability(), eg.MinDecayRate(ALPHA), eg.MinDamping(ZETA), eg.MaxFrequency(OMEGA),
            eg.PoleRegion(alpha=ALPHA, zeta=ZETA, omega=OMEGA), eg.NoSaddle(),
            eg.DirectionCounts(stable=stable, unstable=unstable))


@SETTINGS
@given(eigs=spectra, seed=st.integers(0, 2**32 - 1), data=st.data())
def test_similarity_and_reordering_leave_verdicts_unchanged(eigs, seed, data):
    # Similarity invariance of the spectrum; expected verdicts from the construction.
    assume(separated(eigs))
    rng = np.random.default_rng(seed)
    L = real_block(eigs)
    n = L.shape[0]
    V = well_conditioned(rng, n)
    A = V @ L @ np.linalg.inv(V)
    perm = data.draw(st.permutations(range(n)))
    P = np.eye(n)[list(perm)]
    expected, stable, unstable = expected_verdicts(eigs)
    reqs = requirements(stable, unstable)
    for M in (L, A, P @ A @ P.T):
        verdicts = eg.evaluate(eg.analyse(eg.from_arrays(M)), reqs)
        assert [v.passed for v in verdicts] == expected + [True], [v.message for v in verdicts]
        assert not any(v.uncertain for v in verdicts)


def match(a, b):
    cost = np.abs(np.asarray(a)[:, None] - np.asarray(b)[None, :])
    r, c = linear_sum_assignment(cost)
    return r, c, cost[r, c]


def mode_list(sp):
    out = []
    for m in sp.modes:
        out.append((m.s, m))
        if m.pair:
            out.append((m.s.conjugate(), m))
    return out


@SETTINGS
@given(eigs=spectra, seed=st.integers(0, 2**32 - 1),
       c=st.floats(0.01, 100.0, allow_nan=False, allow_infinity=False))
def test_time_scaling(eigs, seed, c):
    # x' = cAx: eigenvalues cλ, ωn -> c·ωn, ζ unchanged (ζ = -Re(s)/|s| is scale-free).
    assume(separated(eigs))
    rng = np.random.default_rng(seed)
    L = real_block(eigs)
    V = well_conditioned(rng, L.shape[0])
    A = V @ L @ np.linalg.inv(V)
    base = mode_list(eg.analyse(eg.from_arrays(A)))
    scaled = mode_list(eg.analyse(eg.from_arrays(c * A)))
    assert len(base) == len(scaled) == L.shape[0]
    r, col, dist = match([c * s for s, _ in base], [s for s, _ in scaled])
    for i, j, d in zip(r, col, dist):
        (s0, m0), (s1, m1) = base[i], scaled[j]
        assert d <= 1e-9 * c * max(1.0, abs(s0))
        assert m1.natural_frequency == c * m0.natural_frequency or math.isclose(
            m1.natural_frequency, c * m0.natural_frequency, rel_tol=1e-9)
        assert math.isclose(m1.damping_ratio, m0.damping_ratio, rel_tol=1e-9, abs_tol=1e-11)
        assert (m0.time_constant > 0) == (m1.time_constant > 0)
        assert math.isclose(m1.time_constant, m0.time_constant / c, rel_tol=1e-9)
    # and against the construction itself
    full = expand(eigs)
    r, col, dist = match([s for s, _ in scaled], c * full)
    assert np.all(dist <= 1e-9 * c * np.maximum(1.0, np.abs(full[col])))


magnitude = st.floats(0.1, 10.0)


@st.composite
def two_state(draw):
    kind = draw(st.sampled_from(["saddle", "stable-node", "unstable-node", "stable-focus",
                                 "unstable-focus", "center"]))
    a, b = draw(magnitude), draw(magnitude)
    if kind == "saddle":
        eigs = [complex(-a), complex(b)]
    elif kind.endswith("node"):
        assume(abs(a - b) > 0.05 * max(a, b))  # distinct: a repeated root is degenerate
        sign = -1 if kind.startswith("stable") else 1
        eigs = [complex(sign * a), complex(sign * b)]
    elif kind.endswith("focus"):
        sign = -1 if kind.startswith("stable") else 1
        eigs = [complex(sign * a, b)]
    else:
        eigs = [complex(0.0, b)]
    return kind, eigs


@SETTINGS
@given(case=two_state(), seed=st.integers(0, 2**32 - 1))
def test_classify_two_state_table(case, seed):
    # Common-practice phase-portrait table for 2-state linear systems (REFERENCES list).
    kind, eigs = case
    rng = np.random.default_rng(seed)
    V = well_conditioned(rng, 2)
    A = V @ real_block(eigs) @ np.linalg.inv(V)
    eq = eg.classify(eg.analyse(eg.from_arrays(A)).modes)
    assert eq.type == kind, (eigs, eq)
    full = expand(eigs)
    assert eq.stable == int((full.real < 0).sum())
    assert eq.unstable == int((full.real > 0).sum())
    assert eq.center == int((full.real == 0).sum())
    assert eq.hyperbolic == (kind != "center")
