"""The small-matrix path of the modal analysis gives what the general path gives, bit for bit.

Up to ``SMALL_ORDER`` states, ``analysis.modes`` calls the LAPACK routines (xGEBAL, xGEEV) that
``scipy.linalg.matrix_balance`` and ``scipy.linalg.eig`` call, with the same arguments. The
reference here is scipy itself (the general path: the two public functions), on random
matrices of many scales, integer matrices with repeated eigenvalues, and defective blocks.
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


def _matrices():
    sizes = st.integers(1, 14) | st.integers(15, modes.SMALL_ORDER)

    def build(args):
        n, seed, kind = args
        rng = np.random.default_rng(seed)
        if kind == 0:  # many scales: balancing acts
            return rng.normal(size=(n, n)) * 10.0 ** rng.integers(-4, 5, size=(n, n))
        if kind == 1:  # small integers: repeated eigenvalues, clusters
            return rng.integers(-2, 3, size=(n, n)).astype(float)
        a = np.diag(np.full(n, -rng.uniform(0.1, 2.0))) + np.diag(np.ones(n - 1), 1)
        return a  # one Jordan block: defective
    return st.tuples(sizes, st.integers(0, 2**32 - 1), st.integers(0, 2)).map(build)


@settings(max_examples=150, deadline=None)
@given(_matrices())
def test_small_path_matches_the_general_path(a):
    fast = modes.analyse(from_arrays(a))
    general = _general(a)
    assert len(fast.modes) == len(general.modes)
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


def test_general_path_above_the_small_order_and_for_non_finite_entries():
    assert modes.small_lapack(np.eye(modes.SMALL_ORDER + 1)) is None
    assert modes.small_lapack(np.array([[np.inf]])) is None
    assert modes.small_lapack(np.eye(3, dtype=np.float32)) is None
    with pytest.raises(ValueError):  # scipy's own refusal, as before
        la.matrix_balance(np.array([[np.nan, 1.0], [0.0, 1.0]]))
