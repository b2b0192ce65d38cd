"""The small-matrix path of the modal analysis gives what the general path gives, bit for bit.

Up to ``SMALL_ORDER`` states, ``analysis.modes`` calls the LAPACK routines (xGEBAL, xGEEV) that
``scipy.linalg.matrix_balance`` and ``scipy.linalg.eig`` call, with the same arguments, and
computes the bounds, enclosures and clusters by ``analysis.small_modes`` (fewer numpy calls).
The reference here is the general path: scipy's two public functions, ``bounds.estimate``,
``bounds.enclose`` and the numpy clustering sweep, on random matrices of many scales, integer
matrices with repeated eigenvalues, defective blocks, rotation blocks (complex pairs, repeated
pairs, eigenvalues on the imaginary axis), huge and tiny scales, zero and nilpotent matrices,
continuous and discrete.
"""

import math

import numpy as np
import pytest
import scipy.linalg as la
from hypothesis import given, settings
from hypothesis import strategies as st

from eigengate import from_arrays
from eigengate.analysis import modes


def _general(a):
    with pytest.MonkeyPatch.context() as m:
        m.setattr(modes, "small_lapack", lambda A: None)
        return modes.analyse(from_arrays(a))


def _fields(spectrum) -> list:
    out = [spectrum.balanced, spectrum.norm, spectrum.infinite]
    for m in spectrum.modes:
        out.append((m.index, m.eigenvalue, m.s, m.multiplicity, m.geometric_multiplicity, m.pair,
                    m.natural_frequency, m.damping_ratio, m.time_constant, m.uncertainty,
                    m.condition, m.enclosure, m.participation.tobytes(), m.states))
    return out


def _same(x, y) -> bool:  # equal, NaN equal to NaN, and the same sign of zero
    if isinstance(x, tuple):
        return len(x) == len(y) and all(_same(a, b) for a, b in zip(x, y))
    if isinstance(x, float):
        return (math.isnan(x) and math.isnan(y)) or (x == y and math.copysign(1, x)
                                                      == math.copysign(1, y))
    if isinstance(x, complex):
        return _same(x.real, y.real) and _same(x.imag, y.imag)
    return x == y


def _block(rng, n):
    """Real 2×2 rotation blocks (complex pairs, some of them repeated) and real entries."""
    a = np.zeros((n, n))
    i = 0
    while i < n:
        if i + 1 < n and rng.random() < 0.7:
            re, im = rng.choice([-1.0, -0.5, 0.0, 0.25]), rng.choice([0.5, 1.0, 2.0])
            a[i:i + 2, i:i + 2] = [[re, im], [-im, re]]
            i += 2
        else:
            a[i, i] = rng.choice([-2.0, -1.0, 0.0, 1.0])
            i += 1
    q = np.linalg.qr(rng.normal(size=(n, n)))[0] if rng.random() < 0.5 else np.eye(n)
    return q @ a @ q.T


def _matrices():
    sizes = st.integers(1, 14) | st.integers(15, modes.SMALL_ORDER)

    def build(args):
        n, seed, kind = args
        rng = np.random.default_rng(seed)
        if kind == 0:  # many scales: balancing acts
            return rng.normal(size=(n, n)) * 10.0 ** rng.integers(-4, 5, size=(n, n))
        if kind == 1:  # small integers: repeated eigenvalues, clusters
            return rng.integers(-2, 3, size=(n, n)).astype(float)
        if kind == 2:  # one Jordan block: defective
            return np.diag(np.full(n, -rng.uniform(0.1, 2.0))) + np.diag(np.ones(n - 1), 1)
        if kind == 3:  # complex pairs, repeated pairs, exact zeros and imaginary axis
            return _block(rng, n)
        if kind == 4:  # huge or tiny overall scale
            return rng.normal(size=(n, n)) * 10.0 ** float(rng.choice([-100, -40, 40, 100]))
        if kind == 5:  # the zero matrix, or a nilpotent one
            return np.zeros((n, n)) if rng.random() < 0.5 else np.triu(rng.normal(size=(n, n)), 1)
        return rng.normal(size=(n, n)) - 1.5 * np.eye(n)  # the usual stable model
    return st.tuples(sizes, st.integers(0, 2**32 - 1), st.integers(0, 6)).map(build)


@settings(max_examples=250, deadline=None)
@given(_matrices())
def test_small_path_matches_the_general_path(a):
    assert_same_as_general(a)


def assert_same_as_general(a) -> None:
    """Every field of every mode of ``a``'s spectrum is the general path's, bit for bit."""
    fast = modes.analyse(from_arrays(a))
    general = _general(a)
    assert len(fast.modes) == len(general.modes)
    assert all(_same(x, y) for x, y in zip(_fields(fast), _fields(general)))


@settings(max_examples=60, deadline=None)
@given(_matrices(), st.sampled_from([0.01, 0.1, 1.0]))
def test_small_path_matches_the_general_path_for_discrete_models(a, period):
    # z-plane eigenvalues mapped to s = log(z)/T: the same on both paths
    a = a / max(1.0, float(np.abs(a).max()))
    fast = modes.analyse(from_arrays(a, sample_period=period))
    with pytest.MonkeyPatch.context() as m:
        m.setattr(modes, "small_lapack", lambda A: None)
        general = modes.analyse(from_arrays(a, sample_period=period))
    assert all(_same(x, y) for x, y in zip(_fields(fast), _fields(general)))


@settings(max_examples=60, deadline=None)
@given(_matrices())
def test_small_lapack_calls_match_scipy(a):
    # reference: scipy.linalg.matrix_balance and scipy.linalg.eig(left=True, right=True)
    small = modes.small_lapack(a)
    assert small is not None
    bal = small[0](a, scale=1, permute=0, overwrite_a=0)[0]
    ref_bal, _ = la.matrix_balance(a, permute=False, separate=True)
    assert bal.tobytes() == ref_bal.tobytes()
    for x, y in zip(modes.small_eig(bal, small), la.eig(ref_bal, left=True, right=True)):
        assert x.dtype == y.dtype and x.tobytes() == y.tobytes()
        assert x.strides == y.strides  # the same layout: later sums add in the same order


def test_general_path_above_the_small_order_and_for_non_finite_entries():
    assert modes.small_lapack(np.eye(modes.SMALL_ORDER + 1)) is None
    assert modes.small_lapack(np.array([[np.inf]])) is None
    assert modes.small_lapack(np.eye(3, dtype=np.float32)) is None
    with pytest.raises(ValueError):  # scipy's own refusal, as before
        la.matrix_balance(np.array([[np.nan, 1.0], [0.0, 1.0]]))
